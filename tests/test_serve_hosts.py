"""The dashboard server answers only requests that name the address it serves (DNS rebinding refused).

Common practice, no source: a server bound to loopback must check the Host header of every request, since a
page on another site can make its own name resolve to 127.0.0.1 and then talk to the server with its own
name in Host and Origin (the "DNS rebinding" attack, guarded against by Host allowlists in web frameworks).
RFC 6455 sec. 4.1-4.2 (from memory) gives the websocket handshake: a GET with ``Upgrade: websocket``,
``Sec-WebSocket-Key`` and version 13, answered by ``101 Switching Protocols`` when accepted.

The server runs as ``workbench serve --no-show`` in a subprocess on a free port; the requests are plain
``http.client`` requests, so the test sets the Host and Origin headers itself, as an attacker's page would.
"""

from __future__ import annotations

import base64
import http.client
import os
import re
import socket
import subprocess
import sys
import time

import pytest

from workbench.app.serve import allowed_hosts, request_allowed


def _free_port() -> int:
    with socket.socket() as sock:
        sock.bind(("127.0.0.1", 0))
        return sock.getsockname()[1]


@pytest.fixture(scope="module")
def server():
    """``workbench serve --no-show`` on a free loopback port; yields the port."""
    port = _free_port()
    command = [
        sys.executable,
        "-c",
        "import sys; from workbench.cli import main; sys.exit(main(sys.argv[1:]))",
        "serve",
        "--no-show",
        "--port",
        str(port),
        "--allow-host",
        "lab-box",
    ]
    process = subprocess.Popen(command, stdout=subprocess.PIPE, stderr=subprocess.STDOUT, text=True)
    deadline = time.monotonic() + 90
    while True:
        if process.poll() is not None:
            raise RuntimeError(f"workbench serve exited early:\n{process.stdout.read()}")
        try:
            with socket.create_connection(("127.0.0.1", port), timeout=1):
                break
        except OSError:
            if time.monotonic() > deadline:
                process.kill()
                raise RuntimeError("workbench serve did not listen within 90 s") from None
            time.sleep(0.2)
    yield port
    process.terminate()
    try:
        process.wait(10)
    except subprocess.TimeoutExpired:
        process.kill()


def _get(port: int, path: str, headers: dict) -> tuple[int, str]:
    """GET ``path`` from the server with exactly these Host/Origin headers; (status, body)."""
    connection = http.client.HTTPConnection("127.0.0.1", port, timeout=60)
    try:
        connection.putrequest("GET", path, skip_host=True, skip_accept_encoding=True)
        for name, value in headers.items():
            connection.putheader(name, value)
        connection.endheaders()
        response = connection.getresponse()
        return response.status, response.read().decode("utf-8", "replace")
    finally:
        connection.close()


def _handshake(port: int, host: str, origin: str, token: str = "") -> int:
    """The status of a websocket handshake on ``/ws`` (101 = accepted), with the session token when given
    (Bokeh passes it as the second subprotocol)."""
    headers = {
        "Host": host,
        "Origin": origin,
        "Upgrade": "websocket",
        "Connection": "Upgrade",
        "Sec-WebSocket-Key": base64.b64encode(os.urandom(16)).decode(),
        "Sec-WebSocket-Version": "13",
    }
    if token:
        headers["Sec-WebSocket-Protocol"] = f"bokeh, {token}"
    with socket.create_connection(("127.0.0.1", port), timeout=60) as sock:
        request = "GET /ws HTTP/1.1\r\n" + "".join(f"{k}: {v}\r\n" for k, v in headers.items()) + "\r\n"
        sock.sendall(request.encode())
        status_line = sock.makefile("rb").readline().decode()
    return int(status_line.split()[1])


def test_the_allowlist_rules_without_a_server():
    """Common practice, no source: the Host must name a served address; an Origin, when sent, too."""
    ok = allowed_hosts("127.0.0.1", 5006, extra=["lab-box"])
    assert request_allowed("localhost:5006", "http://localhost:5006", ok)
    assert request_allowed("lab-box:5006", None, ok)
    assert not request_allowed("evil.example:5006", "http://evil.example:5006", ok)
    assert not request_allowed("127.0.0.1:5006", "http://evil.example:5006", ok)
    assert not request_allowed("127.0.0.1:5007", None, ok)  # another port is another site
    assert not request_allowed("127.0.0.1:5006", "null", ok)  # an opaque origin (a sandboxed frame)


def test_the_page_is_served_to_loopback_and_refused_to_a_rebound_name(server):
    status, body = _get(server, "/", {"Host": f"127.0.0.1:{server}"})
    assert status == 200 and "workbench" in body
    status, _ = _get(server, "/", {"Host": f"lab-box:{server}"})  # named with --allow-host
    assert status == 200
    status, body = _get(server, "/", {"Host": f"evil.example:{server}"})
    assert status == 403, body[:200]
    status, _ = _get(server, "/", {"Host": f"127.0.0.1:{server}", "Origin": f"http://evil.example:{server}"})
    assert status == 403
    status, _ = _get(server, "/static/js/bokeh.min.js", {"Host": f"evil.example:{server}"})
    assert status == 403


def test_the_websocket_handshake_is_refused_to_a_rebound_name(server):
    status, body = _get(server, "/", {"Host": f"localhost:{server}"})
    assert status == 200
    found = re.search(r'"token"\s*:\s*"([^"]+)"', body) or re.search(r"token=([A-Za-z0-9_.\-]+)", body)
    token = found.group(1) if found else ""
    evil = f"evil.example:{server}"
    assert _handshake(server, evil, f"http://{evil}", token) != 101
    assert _handshake(server, f"localhost:{server}", f"http://{evil}", token) != 101
    assert token, "the page carries no session token to open the websocket with"
    assert _handshake(server, f"localhost:{server}", f"http://localhost:{server}", token) == 101
