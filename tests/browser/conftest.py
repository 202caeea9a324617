"""Fixtures for the end-to-end tests: a dashboard server on a free port and a headless Chromium page.

The browser is the system's Chromium (``/usr/bin/chromium``); Playwright's own browser downloads are never
used. Without it the tests skip, unless ``WORKBENCH_REQUIRE_BROWSER=1`` (set by CI), which turns the skip
into a failure. Every request the page makes and every console error is recorded; the page fixture fails the
test when a request went to any host other than the server's, or when the console showed an error, or when
the server printed a traceback while the module's page was open (the server's output goes to a file, read at
the end of each module: a pipe nobody reads would stall the server once full).
"""

from __future__ import annotations

import os
import socket
import subprocess
import sys
import time
import urllib.request
from pathlib import Path
from urllib.parse import urlparse

import pytest

CHROMIUM = "/usr/bin/chromium"
CHROMIUM_ARGS = ["--headless", "--no-sandbox", "--disable-gpu", "--disable-background-networking"]
ARTIFACTS = Path(__file__).resolve().parents[2] / "test-artifacts"
VIEWPORT = {"width": 1440, "height": 900}

#: Finds an element by CSS selector through open shadow roots and returns its visible text.
DEEP_TEXT = """
(selector) => {
  function find(root) {
    const hit = root.querySelector(selector);
    if (hit) return hit;
    for (const el of root.querySelectorAll('*')) {
      if (el.shadowRoot) { const found = find(el.shadowRoot); if (found) return found; }
    }
    return null;
  }
  function text(node) {
    let out = '';
    if (node.shadowRoot) out += text(node.shadowRoot);
    for (const child of node.childNodes) {
      if (child.nodeType === 3) out += child.textContent;
      else if (child.nodeType === 1 && child.tagName !== 'STYLE' && child.tagName !== 'SCRIPT') out += text(child);
    }
    return out;
  }
  const el = find(document);
  return el ? text(el) : null;
}
"""


def _require_browser() -> None:
    if Path(CHROMIUM).exists():
        return
    message = f"{CHROMIUM} is missing (install the system chromium package)"
    if os.environ.get("WORKBENCH_REQUIRE_BROWSER") == "1":
        pytest.fail(message + "; WORKBENCH_REQUIRE_BROWSER=1 forbids skipping")
    pytest.skip(message)


def _free_port() -> int:
    with socket.socket() as sock:
        sock.bind(("127.0.0.1", 0))
        return sock.getsockname()[1]


#: Where the server's output goes (set by the ``server`` fixture).
SERVER_LOG: list[Path] = []


def _server_output(start: int = 0) -> str:
    if not SERVER_LOG or not SERVER_LOG[0].exists():
        return ""
    return SERVER_LOG[0].read_text(encoding="utf-8", errors="replace")[start:]


@pytest.fixture(scope="session")
def server(tmp_path_factory):
    """``workbench serve --no-show`` on a free loopback port; yields its base URL."""
    _require_browser()
    port = _free_port()
    command = [
        sys.executable,
        "-c",
        "import sys; from workbench.cli import main; sys.exit(main(sys.argv[1:]))",
        "serve",
        "--no-show",
        "--port",
        str(port),
    ]
    log_path = tmp_path_factory.mktemp("server") / "serve.log"
    SERVER_LOG[:] = [log_path]
    log = open(log_path, "w", encoding="utf-8")  # noqa: SIM115  (open while the server runs)
    process = subprocess.Popen(command, stdout=log, stderr=subprocess.STDOUT, text=True)
    url = f"http://127.0.0.1:{port}/"
    deadline = time.monotonic() + 90
    # First wait until the port accepts connections (cheap), then ask for the page once with a generous
    # timeout: every GET builds a whole session, and on a busy machine that takes seconds; short timeouts
    # that retry would only pile up sessions.
    while True:
        if process.poll() is not None:
            raise RuntimeError(f"workbench serve exited early:\n{_server_output()}")
        try:
            with socket.create_connection(("127.0.0.1", port), timeout=1):
                break
        except OSError:
            pass
        if time.monotonic() > deadline:
            process.kill()
            raise RuntimeError("workbench serve did not listen within 90 s")
        time.sleep(0.2)
    try:
        with urllib.request.urlopen(url, timeout=max(10.0, deadline - time.monotonic())) as response:
            assert response.status == 200, f"workbench serve answered {response.status}"
    except OSError as exc:
        process.kill()
        raise RuntimeError(f"workbench serve did not answer: {exc}") from exc
    yield url
    process.terminate()
    try:
        process.wait(10)
    except subprocess.TimeoutExpired:
        process.kill()
    log.close()


@pytest.fixture(scope="module")
def browser():
    _require_browser()
    from playwright.sync_api import sync_playwright

    with sync_playwright() as playwright:
        chromium = playwright.chromium.launch(executable_path=CHROMIUM, args=CHROMIUM_ARGS)
        yield chromium
        chromium.close()


class PageRecord:
    """What the page did: every requested URL, console errors and uncaught page errors."""

    def __init__(self, page, allowed_host: str):
        self.page = page
        self.allowed_host = allowed_host
        self.requests: list[str] = []
        self.errors: list[str] = []
        page.on("request", lambda request: self.requests.append(request.url))
        page.on("console", lambda message: message.type == "error" and self.errors.append(message.text))
        page.on("pageerror", lambda error: self.errors.append(f"page error: {error}"))

    def foreign_requests(self) -> list[str]:
        out = []
        for url in self.requests:
            parsed = urlparse(url)
            if parsed.scheme in ("data", "blob", "about"):
                continue
            if parsed.netloc != self.allowed_host:
                out.append(url)
        return out

    def text(self, selector: str) -> str:
        """Visible text of the first element matching ``selector`` (searched through shadow roots)."""
        return self.page.evaluate(DEEP_TEXT, selector) or ""

    def wait_for_text(self, selector: str, expected: str, timeout: float = 30.0) -> str:
        deadline = time.monotonic() + timeout
        while True:
            found = self.text(selector)
            if expected in found:
                return found
            if time.monotonic() > deadline:
                raise AssertionError(f"{selector!r} never showed {expected!r}; it shows {found[:300]!r}")
            time.sleep(0.1)

    #: The element each editor tab under the graph shows once its content is there.
    EDITORS = {
        "Arrows": ".wb-arrows .tabulator-row",
        "Variables": ".wb-variables .tabulator-row",
        "Selected": ".wb-inspector",
        "Strategies": ".wb-add-strategy button",
        "Scenario text": ".wb-toml textarea",
    }

    def open_editor(self, name: str) -> None:
        """Show an editor tab under the graph and wait for its content: the editors are sent to the
        browser when first shown (workbench.app.graph_tab), so a test must not read one before."""
        self.page.locator(".wb-editor-tabs .bk-tab", has_text=name).first.click()
        key = next(key for key in self.EDITORS if name.startswith(key))
        self.page.locator(self.EDITORS[key]).first.wait_for(timeout=30_000)

    def screenshot(self, name: str) -> Path:
        ARTIFACTS.mkdir(exist_ok=True)
        path = ARTIFACTS / f"{name}.png"
        self.page.wait_for_timeout(700)  # let Bokeh finish drawing the canvases
        self.page.screenshot(path=str(path))
        return path


@pytest.fixture(scope="module")
def page(server, browser):
    """One page for the module's tests (they run in order, as one user session would)."""
    context = browser.new_context(viewport=VIEWPORT, accept_downloads=True)
    tab = context.new_page()
    record = PageRecord(tab, urlparse(server).netloc)
    start = len(_server_output())
    tab.goto(server)
    tab.wait_for_selector(".wb-graph", timeout=60_000)
    yield record
    foreign = record.foreign_requests()
    errors = list(record.errors)
    context.close()
    assert not foreign, f"requests left the server's host: {foreign}"
    assert not errors, f"console errors: {errors}"
    printed = _server_output(start)
    assert "Traceback" not in printed, f"the server printed a traceback:\n{printed[-3000:]}"
