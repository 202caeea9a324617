"""A text progress bar for long work on the command line (written to stderr)."""

from __future__ import annotations

import sys
import time

__all__ = ["ProgressBar"]


class ProgressBar:
    """A callable ``progress(done, total)`` that draws a bar on a stream once the work has taken longer than
    ``delay`` seconds, so that quick runs print nothing.

    Examples
    --------
    >>> import io
    >>> stream = io.StringIO()
    >>> bar = ProgressBar("run", stream=stream, delay=0.0)
    >>> bar(5, 10); bar(10, 10); bar.close()
    >>> "100%" in stream.getvalue()
    True
    """

    def __init__(self, label: str, *, stream=None, delay: float = 1.0, width: int = 30):
        self.label = label
        self.stream = stream if stream is not None else sys.stderr
        self.delay = delay
        self.width = width
        self.start = time.monotonic()
        self.shown = False

    def __call__(self, done: int, total: int) -> None:
        elapsed = time.monotonic() - self.start
        if elapsed < self.delay and done < total:
            return
        if elapsed < self.delay and not self.shown:
            return
        self.shown = True
        share = done / total if total else 1.0
        filled = int(round(self.width * share))
        bar = "#" * filled + "-" * (self.width - filled)
        self.stream.write(f"\r{self.label} [{bar}] {share:4.0%} {done}/{total} {elapsed:5.1f}s")
        self.stream.flush()

    def close(self) -> None:
        if self.shown:
            self.stream.write("\n")
            self.stream.flush()
            self.shown = False
