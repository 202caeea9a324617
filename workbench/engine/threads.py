"""The BLAS thread policy of the engines: one thread inside the batched small-matrix work.

The engines' linear algebra is many small products and factorisations batched over replicates (Wishart
factors, cross-product blocks, Cholesky factors of a few dozen rows, logistic and HC3 fits). OpenBLAS splits
each small call over its threads, and the hand-over costs more than the work: with two threads the batched
products at 40 variables ran 5-7 times slower than with one (docs/performance.md). So every run of the engine
(:func:`workbench.engine.replicates.run_replicates`) holds BLAS to one thread while it fits, through
threadpoolctl, and restores the caller's setting afterwards. Parallel work belongs one level up, across
processes (several runs at once), not inside one small matrix product.

Set ``WORKBENCH_BLAS_THREADS`` to another whole number to override the policy (for measuring it).

Examples
--------
>>> with blas_threads():
...     pass
"""

from __future__ import annotations

import contextlib
import os
from collections.abc import Iterator

__all__ = ["blas_threads", "BLAS_THREADS"]

BLAS_THREADS = 1
"""BLAS threads inside the engines' batched work."""

_controller = None


@contextlib.contextmanager
def blas_threads(limit: int | None = None) -> Iterator[None]:
    """Hold the BLAS libraries to ``limit`` threads (default :data:`BLAS_THREADS`, or the environment's
    ``WORKBENCH_BLAS_THREADS``) for the duration of the block."""
    global _controller
    if limit is None:
        text = os.environ.get("WORKBENCH_BLAS_THREADS", "")
        limit = int(text) if text.strip().isdigit() and int(text) > 0 else BLAS_THREADS
    if _controller is None:
        from threadpoolctl import ThreadpoolController

        _controller = ThreadpoolController()
    with _controller.limit(limits=limit, user_api="blas"):
        yield
