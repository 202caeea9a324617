"""End-to-end: oversized and odd uploads each get their one-line message, and the session stays alive.

Common practice, no source: a file larger than the server's websocket message limit used to close the
connection (and the session) silently; now the browser refuses a file over 2 MiB before sending it, a file
between 256 KiB and 2 MiB arrives and is refused by the session's own check, and a valid file opened after
either loads.
"""

from __future__ import annotations

import time

import pytest

from workbench.app.state import MAX_UPLOAD_BYTES
from workbench.scenario.presets import list_presets, preset_text

pytestmark = pytest.mark.browser


def _upload(page, name: str, content: bytes) -> None:
    page.page.locator(".wb-upload input[type=file]").set_input_files(
        files=[{"name": name, "mimeType": "application/toml", "buffer": content}]
    )


def test_a_3_mib_file_is_refused_in_the_browser_and_a_valid_one_then_loads(page):
    _upload(page, "huge.toml", b"# padding\n" * (3 * 2**20 // 10))
    error = page.wait_for_text(".wb-error", "upload huge.toml", timeout=30)
    assert "3,145,720 bytes is over the limit" in error
    _upload(page, "mediator.toml", preset_text("mediator").encode())
    page.wait_for_text(".wb-header", list_presets()["mediator"], timeout=60)


def test_a_file_between_the_limits_arrives_and_is_refused_by_the_session(page):
    size = 3 * MAX_UPLOAD_BYTES  # 768 KiB: under the browser's 2 MiB, over the session's 256 KiB
    _upload(page, "big.toml", b"#" * size)
    error = page.wait_for_text(".wb-error", "upload big.toml", timeout=60)
    assert f"{size:,} bytes is over the limit of {MAX_UPLOAD_BYTES:,}" in error
    _upload(page, "common_cause.toml", preset_text("common_cause").encode())
    page.wait_for_text(".wb-header", list_presets()["common_cause"], timeout=60)


def test_empty_binary_and_same_bytes_uploads_each_say_what_happened(page):
    _upload(page, "empty.toml", b"")
    page.wait_for_text(".wb-error", "upload empty.toml: the file is empty", timeout=30)
    _upload(page, "blob.toml", bytes(range(256)))
    page.wait_for_text(".wb-error", "upload blob.toml: a binary file", timeout=30)
    _upload(page, "again.toml", preset_text("common_cause").encode())
    page.wait_for_text(".wb-note", "upload again.toml: the same scenario as the one in effect", timeout=30)


def test_a_negative_n_is_named_beside_the_field_and_run_is_refused(page):
    field = page.page.locator(".wb-n input").first
    field.fill("-5")
    field.press("Enter")
    page.wait_for_text(".wb-error-study", "study.n: must be an integer of at least 1, got -5", timeout=30)
    page.page.locator(".wb-run button").click()
    page.wait_for_text(".wb-status", "Not run: study.n", timeout=30)
    field.fill("300")
    field.press("Enter")
    deadline = time.monotonic() + 30
    while "Not applied" in page.text(".wb-error-study"):
        assert time.monotonic() < deadline, "the corrected value's error stayed"
        time.sleep(0.2)
