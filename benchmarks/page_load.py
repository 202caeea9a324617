"""Benchmark: first page load of the dashboard against an empty Panel app served the same way.

Both are served by Panel's server on a free loopback port (the dashboard with ``workbench serve --no-show``,
the empty app with ``panel.serve`` of one Markdown pane), and loaded in the system Chromium
(``/usr/bin/chromium``) through Playwright. The time is from ``page.goto`` to the first rendered view: the
graph canvas (``.wb-graph``) for the dashboard, the Markdown pane for the empty app. Each page is loaded
``ROUNDS`` times in a fresh browser context (no cache), alternating, after one warm-up load each; the median
and the spread are printed.

    python benchmarks/page_load.py
"""

from __future__ import annotations

import socket
import statistics
import subprocess
import sys
import time
import urllib.request

ROUNDS = 5
CHROMIUM = "/usr/bin/chromium"
EMPTY_APP = (
    "import sys, panel as pn; "
    "pn.serve(lambda: pn.pane.Markdown('empty', css_classes=['empty']), port=int(sys.argv[1]), "
    "address='127.0.0.1', show=False, allow_websocket_origin=['127.0.0.1:' + sys.argv[1]])"
)


SERVE = "import sys; from workbench.cli import main; sys.exit(main(sys.argv[1:]))"


def _free_port() -> int:
    with socket.socket() as sock:
        sock.bind(("127.0.0.1", 0))
        return sock.getsockname()[1]


def _start(command: list[str], port: int) -> subprocess.Popen:
    process = subprocess.Popen(command, stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL)
    deadline = time.monotonic() + 60
    while time.monotonic() < deadline:
        try:
            with urllib.request.urlopen(f"http://127.0.0.1:{port}/", timeout=30):
                return process
        except OSError:
            time.sleep(0.3)
    process.kill()
    raise RuntimeError(f"{command} did not answer within 60 s")


def _load(browser, url: str, selector: str) -> float:
    context = browser.new_context(viewport={"width": 1440, "height": 900})
    page = context.new_page()
    start = time.perf_counter()
    page.goto(url)
    page.wait_for_selector(selector, timeout=120_000)
    elapsed = time.perf_counter() - start
    context.close()
    return elapsed


def main() -> None:
    from playwright.sync_api import sync_playwright

    wb_port, empty_port = _free_port(), _free_port()
    serve = [sys.executable, "-c", SERVE, "serve", "--no-show", "--port", str(wb_port)]
    pages = {
        "empty Panel app": (f"http://127.0.0.1:{empty_port}/", ".empty"),
        "workbench dashboard": (f"http://127.0.0.1:{wb_port}/", ".wb-graph"),
    }
    servers = [
        _start([sys.executable, "-c", EMPTY_APP, str(empty_port)], empty_port),
        _start(serve, wb_port),
    ]
    try:
        with sync_playwright() as playwright:
            browser = playwright.chromium.launch(
                executable_path=CHROMIUM, args=["--headless", "--no-sandbox"]
            )
            times: dict[str, list[float]] = {name: [] for name in pages}
            for url, selector in pages.values():
                _load(browser, url, selector)  # warm-up
            for _ in range(ROUNDS):
                for name, (url, selector) in pages.items():
                    times[name].append(_load(browser, url, selector))
            browser.close()
    finally:
        for process in servers:
            process.terminate()
    base = statistics.median(times["empty Panel app"])
    for name, values in times.items():
        median = statistics.median(values)
        print(
            f"{name:22s} median {median:5.2f} s  ({min(values):.2f}-{max(values):.2f})  "
            f"{median / base:4.1f}x the empty app"
        )


if __name__ == "__main__":
    main()
