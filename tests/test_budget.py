"""The time and memory estimate of a run or a plan (workbench.analysis.budget) against measured runs."""

from __future__ import annotations

import subprocess
import sys
import time

import pytest

import workbench as wb
from workbench.analysis.budget import MAX_BYTES, Cost, check_budget, estimate_cost
from workbench.errors import UsageError


def _best_time(function, repeats: int = 3) -> float:
    """The shortest of ``repeats`` timings, each the smaller of wall-clock and process CPU time: on a machine
    shared with other work the wall clock also counts the waits for a CPU, the CPU time does not (and on a
    quiet machine with threaded BLAS the CPU time may exceed the wall clock)."""
    times = []
    for _ in range(repeats):
        wall, cpu = time.perf_counter(), time.process_time()
        function()
        times.append(min(time.perf_counter() - wall, time.process_time() - cpu))
    return min(times)


@pytest.mark.parametrize(
    ("preset", "engine", "n", "replicates"),
    [
        ("common_cause", "auto", 200, 60_000),
        ("larger_graph", "auto", 100, 10_000),
        ("selection_by_significance", "auto", 100, 20_000),
        ("binary_outcome", "auto", 1_000, 600),
        ("restriction", "auto", 2_000, 400),
        ("m_bias", "raw", 2_000, 600),
    ],
)
def test_estimate_is_within_a_factor_of_three_of_a_measured_run(preset, engine, n, replicates):
    """The estimate of a run is within a factor of about three of its measured wall-clock time (the brief's
    requirement; common practice, no source: the best of three timings, after a warm-up, with a little slack,
    3.5; the time measured is the smaller of wall-clock and CPU time, for a machine shared with other work)."""
    scenario = wb.load_preset(preset)
    wb.simulate(scenario, n=n, replicates=50, seed=1, engine=engine)  # warm-up: caches, imports
    measured = _best_time(lambda: wb.simulate(scenario, n=n, replicates=replicates, seed=1, engine=engine))
    cost = estimate_cost(scenario, n=n, replicates=replicates, engine=engine)
    assert 1 / 3.5 <= cost.seconds / measured <= 3.5, (cost.seconds, measured)


def test_plan_estimate_is_within_a_small_factor_of_a_measured_plan():
    """A plan's estimate (grid sizes plus a rough figure for the bisection) is within a factor of five of
    the measured plan (common practice, no source: the brief asks for a rough estimate of plans)."""
    scenario = wb.load_preset("binary_exposure")
    sizes, replicates = [100, 200, 400, 800], 500
    wb.plan(scenario, sample_sizes=sizes[:2], replicates=50, seed=1)
    measured = _best_time(
        lambda: wb.plan(scenario, sample_sizes=sizes, replicates=replicates, seed=1), repeats=2
    )
    cost = estimate_cost(scenario, verb="plan", sizes=sizes, replicates=replicates)
    assert cost.verb == "plan"
    assert 1 / 5 <= cost.seconds / measured <= 5, (cost.seconds, measured)


def test_exact_engine_cost_is_flat_in_n_and_raw_cost_grows_with_n():
    """The exact engine draws each replicate's cross-products from the Wishart distribution (Bartlett 1933),
    whose cost does not depend on n; the raw engine draws n rows per replicate, so its cost grows in
    proportion to n x replicates (facts of the two algorithms, stated in workbench.engine.replicates)."""
    scenario = wb.load_preset("common_cause")
    small = estimate_cost(scenario, n=100, replicates=10_000)
    large = estimate_cost(scenario, n=100_000, replicates=10_000)
    assert small.engine == large.engine == "exact"
    assert small.seconds == pytest.approx(large.seconds)
    raw = [
        estimate_cost(scenario, n=n, replicates=r, engine="raw").seconds
        for n, r in ((10**4, 10**3), (10**5, 10**3), (10**5, 10**4))
    ]
    assert raw[1] / raw[0] == pytest.approx(10, rel=0.05)
    assert raw[2] / raw[1] == pytest.approx(10, rel=0.05)


def test_peak_memory_estimate_is_near_a_measured_process():
    """The peak memory estimate of a raw run is at least two thirds of a fresh process's measured peak
    resident memory and at most three times it (common practice, no source: ru_maxrss of the child)."""
    code = (
        "import resource, workbench as wb\n"
        "wb.simulate(wb.load_preset('binary_outcome'), n=20000, replicates=1000, seed=1)\n"
        "print(resource.getrusage(resource.RUSAGE_SELF).ru_maxrss)\n"
    )
    done = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True)
    measured = int(done.stdout.split()[-1]) * 1024  # Linux reports KiB
    cost = estimate_cost(wb.load_preset("binary_outcome"), n=20_000, replicates=1_000)
    assert measured / 1.5 <= cost.peak_bytes <= 3 * measured, (cost.peak_bytes, measured)


def test_a_huge_raw_replicate_is_over_the_memory_budget():
    """A raw-engine replicate whose rows are needed (a logistic fit) is held whole: 10^8 rows of a few
    variables at 8 bytes a value is several GiB (arithmetic)."""
    cost = estimate_cost(wb.load_preset("binary_outcome"), n=10**8, replicates=2)
    assert cost.peak_bytes > MAX_BYTES
    with pytest.raises(UsageError, match="over the budget"):
        check_budget(cost, max_seconds=10**9)


def test_estimate_runs_no_simulation(monkeypatch):
    """estimate_cost reads the plan only: the replicate loop is never entered (common practice, no source)."""
    import workbench.engine.replicates as replicates

    def refuse(*args, **kwargs):
        raise AssertionError("estimate_cost simulated")

    monkeypatch.setattr(replicates, "run_replicates", refuse)
    for preset in ("common_cause", "binary_outcome", "restriction"):
        estimate_cost(wb.load_preset(preset), n=500, replicates=1_000)
        estimate_cost(wb.load_preset(preset), verb="plan", sizes=[100, 400], replicates=100)


def test_budget_message_is_one_line_with_the_estimate_and_the_option():
    """Over the budget: one line naming the verb, giving the estimate and the option that accepts it (the
    project's rule for errors, DEVELOPERS.md)."""
    cost = estimate_cost(wb.load_preset("binary_outcome"), n=10**6, replicates=10**5)
    assert cost.seconds > 3600  # 10^11 rows through a logistic fit: hours on any machine (arithmetic)
    with pytest.raises(UsageError) as caught:
        check_budget(cost)
    message = str(caught.value)
    assert "\n" not in message and message.startswith("run: estimated about ")
    assert cost.text in message and "pass --allow-long to run it anyway" in message
    check_budget(Cost(seconds=599.0, peak_bytes=MAX_BYTES, engine="raw", text="about 10 min and 2 GiB"))
