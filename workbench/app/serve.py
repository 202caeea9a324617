"""Serve the dashboard: ``workbench serve`` calls :func:`serve`.

The server binds the loopback address unless told otherwise (with a printed warning, since the page lets a
visitor run computations). It answers a request (the page, a script, a websocket handshake) only when its
Host header names an address it serves (the loopback names by default, the ``--address`` given, and any
``--allow-host`` names) and its Origin, when sent, names one too: a page on another site cannot reach the
dashboard by making its own name resolve to the loopback address (DNS rebinding). It limits the size of
websocket messages (:data:`MAX_MESSAGE_BYTES`: an upload up to :data:`BROWSER_UPLOAD_LIMIT` arrives and is
refused with a message; a larger one is stopped in the browser), and serves every script and style itself:
the page makes no request to any other host.
"""

from __future__ import annotations

import argparse
import signal
import socket
import sys

__all__ = [
    "serve",
    "main",
    "LOOPBACK",
    "BROWSER_UPLOAD_LIMIT",
    "MAX_MESSAGE_BYTES",
    "allowed_hosts",
    "request_allowed",
    "guard_hosts",
    "check_address",
    "EXIT_STOPPED",
]

#: The exit code of a dashboard stopped by Ctrl-C (as every command stopped by Ctrl-C: 128 + SIGINT).
EXIT_STOPPED = 130

LOOPBACK = ("127.0.0.1", "localhost", "::1")
#: The largest file the page sends to the server at all; a larger one is refused in the browser, before a
#: byte of it is sent (the server's own check, :data:`workbench.app.state.MAX_UPLOAD_BYTES`, is smaller).
BROWSER_UPLOAD_LIMIT = 2 * 1024 * 1024
#: The largest websocket message the server reads: an upload of :data:`BROWSER_UPLOAD_LIMIT` bytes travels
#: as base64 (4/3 of its size) inside a JSON message, so it fits with room to spare, and reaches the
#: session's own size check with its one-line message instead of closing the connection.
MAX_MESSAGE_BYTES = 4 * 1024 * 1024


def _host_name(address: str) -> str:
    """An address as it appears in a Host header: IPv6 in brackets, lower case."""
    address = address.strip().lower()
    return f"[{address}]" if ":" in address and not address.startswith("[") else address


def allowed_hosts(address: str, port: int, extra=()) -> list[str]:
    """The ``host:port`` values a request's Host header (and Origin, when sent) may name.

    On loopback the three loopback names; on a wildcard address (all interfaces) the machine's own names and
    the loopback ones; otherwise the address given. ``extra`` adds names (``--allow-host``), each with the
    port served unless it names its own.

    Examples
    --------
    >>> allowed_hosts("127.0.0.1", 5006)
    ['127.0.0.1:5006', 'localhost:5006', '[::1]:5006']
    >>> allowed_hosts("10.0.0.7", 8000, extra=["lab-box", "proxy.example:443"])
    ['10.0.0.7:8000', 'lab-box:8000', 'proxy.example:443']
    """
    if address in LOOPBACK:
        names = list(LOOPBACK)
    elif address in ("0.0.0.0", "::", ""):
        names = [socket.gethostname(), socket.getfqdn(), *LOOPBACK]
    else:
        names = [address]
    out = [f"{_host_name(name)}:{port}" for name in names if name]
    out += [_extra_host(name, port) for name in extra]
    return list(dict.fromkeys(out))


def _extra_host(name: str, port: int) -> str:
    """An ``--allow-host`` value as ``host:port``: ``name``, ``name:port``, ``[v6]`` or ``[v6]:port``.

    Examples
    --------
    >>> _extra_host("Lab-Box", 80), _extra_host("lab:8080", 80), _extra_host("::1", 80), _extra_host("[::1]:9", 80)
    ('lab-box:80', 'lab:8080', '[::1]:80', '[::1]:9')
    """
    name = name.strip().lower()
    head, _, tail = name.rpartition(":")
    if tail.isdigit() and head and (head.count(":") == 0 or head.endswith("]")):
        return name
    return f"{_host_name(name)}:{port}"


def _with_port(netloc: str, default_port: int) -> str:
    """``host[:port]`` with the port made explicit (a browser leaves out the scheme's default port)."""
    netloc = netloc.strip().lower()
    if netloc.endswith("]") or ":" not in netloc:
        return f"{netloc}:{default_port}"
    return netloc


def request_allowed(host: str | None, origin: str | None, allowed) -> bool:
    """Whether a request may be served: its Host header names an allowed ``host:port``, and its Origin
    header, when sent, names one too. A page from another site that resolves its own name to the loopback
    address (DNS rebinding) sends its own name in both, and is refused.

    Common practice, no source: the Host-header allowlist web frameworks use against DNS rebinding.

    Examples
    --------
    >>> ok = allowed_hosts("127.0.0.1", 5006)
    >>> request_allowed("127.0.0.1:5006", None, ok), request_allowed("localhost:5006", "http://localhost:5006", ok)
    (True, True)
    >>> request_allowed("evil.example:5006", "http://evil.example:5006", ok)
    False
    >>> request_allowed("127.0.0.1:5006", "http://evil.example:5006", ok), request_allowed(None, None, ok)
    (False, False)
    """
    allowed = set(allowed)
    if not host or _with_port(host, 80) not in allowed:
        return False
    if origin is None:
        return True
    from urllib.parse import urlsplit

    parts = urlsplit(origin.strip())
    if parts.scheme not in ("http", "https") or not parts.netloc:
        return False
    return _with_port(parts.netloc, 443 if parts.scheme == "https" else 80) in allowed


def guard_hosts(tornado_app, allowed) -> None:
    """Make ``tornado_app`` (the Bokeh server's Tornado application) answer 403 Forbidden to every request,
    page, script or websocket handshake alike, that :func:`request_allowed` refuses, before any handler
    (and so any session) is made for it.

    Examples
    --------
    >>> import tornado.web
    >>> app = tornado.web.Application([])
    >>> guard_hosts(app, allowed_hosts("127.0.0.1", 5006))
    >>> app.find_handler.__name__
    'find_guarded_handler'
    """
    import tornado.web

    allowed = frozenset(allowed)
    find_handler = tornado_app.find_handler

    def find_guarded_handler(request, **kwargs):
        headers = request.headers
        if request_allowed(headers.get("Host"), headers.get("Origin"), allowed):
            return find_handler(request, **kwargs)
        return tornado_app.get_handler_delegate(request, tornado.web.ErrorHandler, {"status_code": 403})

    tornado_app.find_handler = find_guarded_handler


def check_address(address: str, port: int) -> None:
    """Refuse, before anything is printed, an address this machine cannot serve on or a port already taken.

    The address must resolve and be one of this machine's (a test socket is bound to it and closed at once).

    Raises
    ------
    UsageError
        ``--address: 'no.such.host' is not a name or address this machine knows``, ``--address: 10.9.9.9 is
        not an address of this machine``, ``--port: 5006 is already in use on 127.0.0.1 (another dashboard?
        choose another --port)``.

    Examples
    --------
    >>> check_address("not an address", 5006)
    Traceback (most recent call last):
    ...
    workbench.errors.UsageError: --address: 'not an address' is not a name or address this machine knows
    >>> taken = socket.socket(); taken.bind(("127.0.0.1", 0)); taken.listen()
    >>> check_address("127.0.0.1", taken.getsockname()[1])  # doctest: +ELLIPSIS
    Traceback (most recent call last):
    ...
    workbench.errors.UsageError: --port: ... is already in use on 127.0.0.1 (another dashboard? choose another --port)
    >>> taken.close()
    """
    import errno

    from workbench.errors import UsageError

    try:
        found = socket.getaddrinfo(address or None, port, type=socket.SOCK_STREAM, flags=socket.AI_PASSIVE)
    except (socket.gaierror, UnicodeError):
        raise UsageError(
            f"{address!r} is not a name or address this machine knows", where="--address"
        ) from None
    for family, kind, proto, _, where in found:
        probe = socket.socket(family, kind, proto)
        try:
            if family == socket.AF_INET6:
                probe.setsockopt(socket.IPPROTO_IPV6, socket.IPV6_V6ONLY, 1)
            probe.setsockopt(socket.SOL_SOCKET, socket.SO_REUSEADDR, 1)  # as the server binds it
            probe.bind(where)
        except OSError as exc:
            if exc.errno == errno.EADDRINUSE:
                raise UsageError(
                    f"{port} is already in use on {address} (another dashboard? choose another --port)",
                    where="--port",
                ) from None
            if exc.errno == errno.EADDRNOTAVAIL:
                raise UsageError(f"{address} is not an address of this machine", where="--address") from None
            raise UsageError(
                f"cannot serve on {address}:{port}: {exc.strerror or exc}", where="--address"
            ) from None
        finally:
            probe.close()


def serve(
    preset: str | None = None,
    port: int = 5006,
    address: str = "127.0.0.1",
    show: bool = True,
    allow_host=(),
):
    """Start the dashboard server and block until it is stopped.

    Parameters
    ----------
    preset : str, optional
        Built-in preset to open (by name; default: the default preset).
    port : int
        Port to listen on.
    address : str
        Address to bind; the loopback address by default. Any other address is served with a warning.
    show : bool
        Open the page in the default web browser.
    allow_host : sequence of str
        Further names the page may be reached by (a proxy's or the machine's name on the network), each
        ``name`` (with ``port``) or ``name:port``; requests naming any other host are refused (403).

    Raises
    ------
    ScenarioError
        When ``preset`` names no built-in preset (checked before the server starts).
    UsageError
        When the address or the port cannot be served (:func:`check_address`, before the URL is printed).
    KeyboardInterrupt
        After Ctrl-C has stopped the server (the command line then exits with :data:`EXIT_STOPPED`).

    Examples
    --------
    >>> serve(preset="common_cause", port=5006, show=False)  # doctest: +SKIP
    workbench dashboard: http://127.0.0.1:5006/  (Ctrl-C to stop)
    """
    import panel as pn

    from workbench.app.app import create_app
    from workbench.scenario.presets import DEFAULT_PRESET, preset_text

    preset = preset or DEFAULT_PRESET
    preset_text(preset)  # fail early, with the list of names, on an unknown preset
    check_address(address, port)  # before the warning and the URL: an address that cannot be served fails
    if address not in LOOPBACK:
        print(
            f"warning: serving on {address}: anyone who can reach this address can use the dashboard and run "
            "computations on this machine. Use the default 127.0.0.1 to keep it private.",
            file=sys.stderr,
        )
    hosts = allowed_hosts(address, port, allow_host)
    server = pn.serve(
        {"/": lambda: create_app(preset)},
        port=port,
        address=address,
        websocket_origin=[h for h in hosts if not h.startswith("[")],  # Bokeh's list takes no IPv6
        show=False,
        start=False,
        title="workbench",
        websocket_max_message_size=MAX_MESSAGE_BYTES,
        verbose=False,
    )
    # Bokeh checks a websocket's Origin only; the page, its scripts and the handshake's Host are checked here
    guard_hosts(server._tornado, hosts)
    print(f"workbench dashboard: http://{_host_name(address)}:{server.port}/  (Ctrl-C to stop)", flush=True)
    if show:
        server.io_loop.add_callback(server.show, "/")
    stopped = []

    def on_ctrl_c(*_):  # in place of Panel's handler, which stops the loop as if nothing had happened
        stopped.append(True)
        server.io_loop.asyncio_loop.call_soon_threadsafe(server.io_loop.stop)

    try:
        signal.signal(signal.SIGINT, on_ctrl_c)
    except ValueError:  # not the main thread: no handler of ours
        pass
    server.start()
    from workbench.engine.threads import blas_threads

    try:
        with blas_threads():  # every session's fits: one BLAS thread each (engine/threads.py)
            server.io_loop.start()
    except RuntimeError:  # the loop was stopped
        pass
    finally:
        server.stop()
    if stopped:  # Ctrl-C: the caller says so and exits with EXIT_STOPPED
        raise KeyboardInterrupt


def main(argv: list[str] | None = None) -> int:
    """``python -m workbench.app.serve [--preset NAME] [--port 5006] [--address 127.0.0.1] [--allow-host NAME]
    [--no-show]``

    Examples
    --------
    >>> main(["--port", "0"])  # doctest: +SKIP
    """
    from workbench.errors import WorkbenchError

    parser = argparse.ArgumentParser(prog="python -m workbench.app.serve", description=__doc__.split("\n")[0])
    parser.add_argument("--preset", default=None)
    parser.add_argument("--port", type=int, default=5006)
    parser.add_argument("--address", default="127.0.0.1")
    parser.add_argument("--allow-host", action="append", default=[], metavar="NAME[:PORT]")
    parser.add_argument("--show", action=argparse.BooleanOptionalAction, default=True)
    args = parser.parse_args(argv)
    try:
        serve(
            preset=args.preset,
            port=args.port,
            address=args.address,
            show=args.show,
            allow_host=args.allow_host,
        )
    except WorkbenchError as exc:
        print(f"error: {exc}", file=sys.stderr)
        return 2
    except KeyboardInterrupt:
        print("dashboard stopped", file=sys.stderr)
        return EXIT_STOPPED
    return 0


if __name__ == "__main__":
    sys.exit(main())
