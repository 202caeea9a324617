"""Background runs of the library's long computations, for the dashboard (plain ``param``, no Panel).

A :class:`BackgroundJob` runs one computation on a scenario in a worker thread, with progress, cancel, and a
cache keyed by the scenario's TOML text (which holds the study settings and the seed), so going back to an
earlier scenario shows its results at once. The cache belongs to one job, and so to one browser session: a
result shown from it is one this session computed, and its message says when. :class:`SimulationJob` runs :func:`workbench.simulate` and
:class:`PlanJob` runs :func:`workbench.plan`, both with the scenario's own study seed passed explicitly: the
dashboard shows exactly the run the file describes (the library's ``seed=None`` would mean fresh entropy).

A worker thread never touches a user interface. With ``deferred`` set it queues its progress and result, and
the interface applies them by calling :meth:`BackgroundJob.poll` on its own thread.

Examples
--------
>>> from workbench import load_preset
>>> job = SimulationJob()
>>> sc = load_preset("common_cause")
>>> sc = sc.replace(study=sc.study.__class__(replicates=200))
>>> job.start(sc, background=False)
>>> job.status, job.result.seed == sc.study.seed
('done', True)
>>> job.start(sc, background=False)
>>> job.message.startswith("simulation: the result of the run at ")
True
"""

from __future__ import annotations

import threading
import time
from collections import OrderedDict
from collections.abc import Callable
from typing import Any

import param

from workbench.analysis.plan import plan
from workbench.analysis.simulate import simulate
from workbench.errors import Cancelled, WorkbenchError
from workbench.scenario.model import Scenario
from workbench.scenario.write import dumps_scenario

__all__ = ["CACHE_SIZE", "BackgroundJob", "SimulationJob", "PlanJob"]

#: Results kept per job (the oldest is dropped first).
CACHE_SIZE = 24
#: Seconds between two progress updates handed to the interface.
_PROGRESS_INTERVAL = 0.15
_WAIT_POLL = 0.1  # seconds between checks for a cancel while a job waits for the job ahead of it


class BackgroundJob(param.Parameterized):
    """A cancellable computation on a scenario, run in a worker thread, with progress and a result cache.

    Subclasses set ``label`` (used in messages) and implement :meth:`compute`. With ``deferred`` set, the
    worker thread's progress and result are queued and applied by :meth:`poll`, which a user interface calls
    periodically on its own thread; otherwise they are applied at once.
    """

    status = param.Selector(default="idle", objects=["idle", "running", "done", "cancelled", "failed"])
    progress = param.Number(default=0.0, bounds=(0.0, 1.0))
    message = param.String(default="")
    result = param.Parameter(default=None, doc="The result for ``result_key``, or None.")
    result_key = param.String(default="", doc="Cache key of the scenario the result belongs to.")
    deferred = param.Boolean(default=False, doc="Queue updates from worker threads for :meth:`poll`.")

    label = "run"

    def __init__(self, **params):
        super().__init__(**params)
        self._cache: OrderedDict[str, Any] = OrderedDict()
        self._token = 0
        self._cancel = threading.Event()
        self._lock = threading.Lock()
        self._thread: threading.Thread | None = None
        self._pending: dict[str, Any] = {}

    @staticmethod
    def key(scenario: Scenario) -> str:
        """Cache key: the scenario's TOML text, which includes the study settings and seed."""
        return dumps_scenario(scenario)

    def compute(self, scenario: Scenario, progress: Callable[[int, int], None]):  # pragma: no cover
        """The computation (run in the worker thread); ``progress(done, total)`` may raise Cancelled."""
        raise NotImplementedError

    def is_current(self, scenario: Scenario) -> bool:
        """True when the result shown belongs to ``scenario``."""
        return self.result is not None and self.result_key == self.key(scenario)

    def show_cached(self, scenario: Scenario) -> bool:
        """Show the cached result of ``scenario`` if there is one."""
        key = self.key(scenario)
        if key not in self._cache:
            return False
        self._cache.move_to_end(key)
        result, finished = self._cache[key]
        with param.parameterized.batch_call_watchers(self):
            self.result_key = key
            self.result = result
            self.status = "done"
            self.progress = 1.0
            self.message = f"{self.label}: the result of the run at {finished} (this session, same settings)"
        return True

    def clear(self) -> None:
        """Forget the result shown (the cache stays), cancelling any running computation."""
        self.cancel()
        with param.parameterized.batch_call_watchers(self):
            self.result, self.result_key = None, ""
            self.status, self.progress, self.message = "idle", 0.0, ""

    def _stop_worker(self) -> tuple[int, threading.Event]:
        """Make any running worker's updates stale; returns the new token and cancel event."""
        with self._lock:
            self._token += 1
            self._cancel.set()
            self._pending = {}
            self._cancel = threading.Event()
            return self._token, self._cancel

    def cancel(self) -> None:
        """Ask the running computation to stop; its result, if any, is discarded."""
        self._stop_worker()
        if self.status == "running":
            with param.parameterized.batch_call_watchers(self):
                self.status, self.message, self.progress = "cancelled", f"{self.label} cancelled", 0.0

    def _publish(self, token: int, **values: Any) -> None:
        """Hand values to the interface: at once, or (with ``deferred``) at the next :meth:`poll`."""
        with self._lock:
            if token != self._token:
                return
            if self.deferred:
                self._pending.update(values)
                return
        with param.parameterized.batch_call_watchers(self):
            for name, value in values.items():
                setattr(self, name, value)

    def poll(self) -> bool:
        """Apply the values a worker thread handed over since the last call (the interface calls this
        periodically on its own thread). Returns whether anything changed."""
        with self._lock:
            pending, self._pending = self._pending, {}
        if not pending:
            return False
        with param.parameterized.batch_call_watchers(self):
            for name, value in pending.items():
                setattr(self, name, value)
        return True

    def start(
        self, scenario: Scenario, *, background: bool = True, after: BackgroundJob | None = None
    ) -> None:
        """Compute for ``scenario`` (from the cache when possible). A running computation is cancelled.

        With ``after``, another job whose worker may be running, the computation waits for that worker to
        end first (the two would otherwise share the CPUs and both finish late); meanwhile the message says
        what it waits for."""
        if self.show_cached(scenario):
            self._stop_worker()
            return
        token, cancel = self._stop_worker()
        ahead = after._thread if after is not None else None
        if ahead is not None and not ahead.is_alive():  # nothing to wait for
            ahead = None
        with param.parameterized.batch_call_watchers(self):
            self.status = "running"
            self.progress = 0.0
            self.message = (
                f"{self.label}: waits for the {after.label}" if ahead else f"{self.label}: starting"
            )

        def work() -> None:
            if ahead is not None:
                while ahead.is_alive() and not cancel.is_set():
                    ahead.join(_WAIT_POLL)
                if cancel.is_set():
                    return
                self._publish(token, message=f"{self.label}: starting")
            self._work(scenario, token, cancel)

        if background:
            self._thread = threading.Thread(target=work, name=f"workbench-{self.label}", daemon=True)
            self._thread.start()
        else:
            work()

    def _progress_reporter(self, token: int, cancel: threading.Event) -> Callable[[int, int], None]:
        """The ``progress`` callback of one run: raises Cancelled once cancelled, publishes at most every
        :data:`_PROGRESS_INTERVAL` seconds (and at the end)."""
        last = [0.0]

        def progress(done: int, total: int) -> None:
            if cancel.is_set():
                raise Cancelled(f"{self.label} cancelled")
            now = time.monotonic()
            if now - last[0] > _PROGRESS_INTERVAL or done >= total:
                last[0] = now
                share = min(1.0, done / total) if total else 0.0
                self._publish(token, progress=share, message=f"{self.label}: {done:,} of {total:,}")

        return progress

    def _work(self, scenario: Scenario, token: int, cancel: threading.Event) -> None:
        """One run (in the worker thread): compute, cache, publish the result or what went wrong."""
        started = time.monotonic()
        try:
            result = self.compute(scenario, self._progress_reporter(token, cancel))
        except Cancelled:
            self._publish(token, status="cancelled", message=f"{self.label} cancelled", progress=0.0)
            return
        except WorkbenchError as exc:
            self._publish(token, status="failed", message=str(exc), progress=0.0)
            return
        except Exception as exc:  # a bug must not freeze the page; say what happened
            self._publish(token, status="failed", message=f"{type(exc).__name__}: {exc}", progress=0.0)
            return
        if cancel.is_set():
            return
        key = self.key(scenario)
        self._cache[key] = (result, time.strftime("%H:%M:%S"))
        while len(self._cache) > CACHE_SIZE:
            self._cache.popitem(last=False)
        seconds = time.monotonic() - started
        self._publish(
            token,
            result_key=key,
            result=result,
            status="done",
            progress=1.0,
            message=f"{self.label}: done in {seconds:.1f} s",
        )

    def wait(self, timeout: float | None = None) -> None:
        """Wait for the worker thread to finish (for tests and scripts)."""
        if self._thread is not None:
            self._thread.join(timeout)


class SimulationJob(BackgroundJob):
    """Runs :func:`workbench.analysis.simulate.simulate` with the scenario's study settings and seed."""

    label = "simulation"

    def compute(self, scenario, progress):
        """Simulate ``scenario`` with its own study seed."""
        return simulate(scenario, seed=scenario.study.seed, progress=progress)


class PlanJob(BackgroundJob):
    """Runs :func:`workbench.analysis.plan.plan` over the scenario's sample sizes with its study seed."""

    label = "sample-size plan"

    def compute(self, scenario, progress):
        """Plan ``scenario`` with its own study seed."""
        return plan(scenario, seed=scenario.study.seed, progress=progress)
