"""Take the dashboard screenshots under docs/screenshots/: every preset's tabs at 1440 x 900 in Chromium.

Run from the repository root with the package installed and Debian's chromium present::

    python docs/screenshots/make_screenshots.py            # every preset
    python docs/screenshots/make_screenshots.py mediator   # some presets

It serves the dashboard on a free loopback port (``workbench serve --no-show``), opens it in headless Chromium
with Playwright, and for each preset picks it in the selector, saves the Graph tab, presses Run, waits for the performance
table and the smallest-n table, and saves one PNG per further tab (Estimates, Sample size, Explain,
Sensitivity). The
images are reduced to a 256-colour palette (Pillow) to keep the repository small. docs/dashboard.md links
them.
"""

from __future__ import annotations

import socket
import subprocess
import sys
import time
import urllib.request
from pathlib import Path

from PIL import Image

from workbench.scenario.presets import list_presets

CHROMIUM = "/usr/bin/chromium"
HERE = Path(__file__).resolve().parent
TABS = ("Graph", "Estimates", "Sample size", "Explain", "Sensitivity")
VIEWPORT = {"width": 1440, "height": 900}


def _free_port() -> int:
    with socket.socket() as sock:
        sock.bind(("127.0.0.1", 0))
        return sock.getsockname()[1]


def _serve() -> tuple[subprocess.Popen, str]:
    port = _free_port()
    process = subprocess.Popen(
        [sys.executable, "-m", "workbench.cli", "serve", "--no-show", "--port", str(port)],
        stdout=subprocess.DEVNULL,
        stderr=subprocess.DEVNULL,
    )
    url = f"http://127.0.0.1:{port}/"
    deadline = time.monotonic() + 90
    while True:
        try:
            with urllib.request.urlopen(url, timeout=30) as response:
                if response.status == 200:
                    return process, url
        except OSError:
            if time.monotonic() > deadline:
                process.kill()
                raise SystemExit("make_screenshots: the dashboard did not start within 90 s") from None
            time.sleep(0.5)


def _save(page, path: Path) -> None:
    page.wait_for_timeout(900)  # let Bokeh finish drawing its canvases
    page.screenshot(path=str(path))
    with Image.open(path) as image:
        image.convert("RGB").quantize(colors=256).save(path, optimize=True)


def _preset(page, name: str, title: str) -> None:
    page.locator(".wb-preset select").select_option(label=f"{title} ({name})")
    page.locator(".wb-header", has_text=title).first.wait_for(timeout=60_000)
    _save(page, HERE / f"{name}_graph.png")
    page.locator(".wb-run button").first.click()
    for tab in TABS[1:]:  # each tab's content is sent when it is first shown
        page.locator(".wb-tabs .bk-tab", has_text=tab).first.click()
        if tab == "Estimates":
            page.wait_for_selector(".wb-performance table", timeout=300_000)
        if tab == "Sample size":
            page.wait_for_selector(".wb-smallest-n table", timeout=300_000)
        _save(page, HERE / f"{name}_{tab.lower().replace(' ', '_')}.png")
    page.locator(".wb-tabs .bk-tab", has_text="Graph").first.click()


def main(names: list[str]) -> None:
    from playwright.sync_api import sync_playwright

    presets = list_presets()
    names = names or list(presets)
    process, url = _serve()
    try:
        with sync_playwright() as playwright:
            browser = playwright.chromium.launch(
                executable_path=CHROMIUM, args=["--headless", "--no-sandbox"]
            )
            page = browser.new_context(viewport=VIEWPORT).new_page()
            page.goto(url)
            page.wait_for_selector(".wb-graph", timeout=90_000)
            for name in names:
                started = time.monotonic()
                _preset(page, name, presets[name])
                print(f"{name}: {time.monotonic() - started:.0f} s", flush=True)
            browser.close()
    finally:
        process.terminate()


if __name__ == "__main__":
    main(sys.argv[1:])
