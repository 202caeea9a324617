"""Benchmark: first page load of the dashboard against an empty Panel app served the same way.

Both are served by Panel's server on a free loopback port (the dashboard with ``workbench serve --no-show``,
the empty app with ``panel.serve`` of one Markdown pane), and loaded in the system Chromium
(``/usr/bin/chromium``) through Playwright. The time is from ``page.goto`` to the first rendered view: the
graph canvas (``.wb-graph``) for the dashboard, the Markdown pane for the empty app. Each page is loaded
``ROUNDS`` times in a fresh browser context (no cache), alternating, after one warm-up load each; the median
and the spread are printed. For the dashboard the time until the scenario editors under the graph are there
too (``.wb-editor-tabs``, built once the page has loaded) is printed beside it.

Then, in one loaded dashboard, each preset of :data:`UPLOADS` is opened as a file through the upload input,
in turn, ``ROUNDS`` times: the time runs from handing the file to the input to the page's header showing
the file's title (issue 16 asks for at most 1.5 s at the presets' size).

    python benchmarks/page_load.py
"""

from __future__ import annotations

import socket
import statistics
import subprocess
import sys
import time
import urllib.request

from workbench.scenario.presets import list_presets, preset_text

ROUNDS = 9
CHROMIUM = "/usr/bin/chromium"
EMPTY_APP = (
    "import sys, panel as pn; "
    "pn.serve(lambda: pn.pane.Markdown('empty', css_classes=['empty']), port=int(sys.argv[1]), "
    "address='127.0.0.1', show=False, allow_websocket_origin=['127.0.0.1:' + sys.argv[1]])"
)


UPLOADS = ("larger_graph", "binary_outcome", "mediator")
"""Presets opened as files: the largest file, a binary outcome, a small graph."""

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


def _load(browser, url: str, selector: str, then: str | None = None) -> tuple[float, float]:
    """Seconds from ``page.goto`` to ``selector`` shown, and to ``then`` shown (the same without one)."""
    context = browser.new_context(viewport={"width": 1440, "height": 900})
    page = context.new_page()
    start = time.perf_counter()
    page.goto(url)
    page.wait_for_selector(selector, timeout=120_000)
    elapsed = time.perf_counter() - start
    if then is not None:
        page.wait_for_selector(then, timeout=120_000)
    later = time.perf_counter() - start
    context.close()
    return elapsed, later


def _upload_times(browser, url: str) -> dict[str, list[float]]:
    """Seconds from handing each preset's file to the upload input to its title in the header."""
    context = browser.new_context(viewport={"width": 1440, "height": 900})
    page = context.new_page()
    page.goto(url)
    page.wait_for_selector(".wb-editor-tabs", timeout=120_000)
    times: dict[str, list[float]] = {name: [] for name in UPLOADS}
    for _ in range(ROUNDS):
        for name in UPLOADS:
            title = list_presets()[name]
            start = time.perf_counter()
            page.locator(".wb-upload input[type=file]").set_input_files(
                files=[
                    {
                        "name": f"{name}.toml",
                        "mimeType": "application/toml",
                        "buffer": preset_text(name).encode(),
                    }
                ]
            )
            page.locator(".wb-header", has_text=title).wait_for(timeout=120_000)
            times[name].append(time.perf_counter() - start)
    context.close()
    return times


def main() -> None:
    from playwright.sync_api import sync_playwright

    wb_port, empty_port = _free_port(), _free_port()
    serve = [sys.executable, "-c", SERVE, "serve", "--no-show", "--port", str(wb_port)]
    pages = {
        "empty Panel app": (f"http://127.0.0.1:{empty_port}/", ".empty", None),
        "workbench dashboard": (f"http://127.0.0.1:{wb_port}/", ".wb-graph", ".wb-editor-tabs"),
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
            complete: dict[str, list[float]] = {name: [] for name in pages}
            for url, selector, then in pages.values():
                _load(browser, url, selector, then)  # warm-up
            for _ in range(ROUNDS):
                for name, (url, selector, then) in pages.items():
                    first, later = _load(browser, url, selector, then)
                    times[name].append(first)
                    complete[name].append(later)
            uploads = _upload_times(browser, pages["workbench dashboard"][0])
            browser.close()
    finally:
        for process in servers:
            process.terminate()
    base = statistics.median(times["empty Panel app"])
    for name, values in times.items():
        median = statistics.median(values)
        print(
            f"{name:22s} median {median:5.2f} s  ({min(values):.2f}-{max(values):.2f})  "
            f"{median / base:4.1f}x the empty app; complete {statistics.median(complete[name]):5.2f} s"
        )
    for name, values in uploads.items():
        size = len(preset_text(name).encode())
        print(
            f"upload {name:15s} ({size:5,} bytes) median {statistics.median(values):5.2f} s  "
            f"({min(values):.2f}-{max(values):.2f})"
        )


if __name__ == "__main__":
    main()
