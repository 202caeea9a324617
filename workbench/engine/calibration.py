"""Calibrating the intercepts of binary and count variables: a binary variable's log-odds intercept gives
it its population ``proportion`` of 1s, a count's log-scale intercept its population mean ``rate``.

The expectations are taken over :data:`CALIBRATION_DRAWS` standard normals per variable, drawn variable
after variable in file order from :data:`CALIBRATION_SEED`, so the intercepts are deterministic. Variables
are calibrated causes first, each from the calibrated values of its causes. Memory stays bounded by the
variables still waiting: a noise row is kept only until its variable is computed, and each computed value is
added at once into the effect sums of its children (one sum per child still waiting).

A binary intercept solves ``mean(logistic(a + linear)) = proportion`` by safeguarded Newton steps with
Brent's method as the fallback (Brent R.P. 1973, Algorithms for Minimization without Derivatives, ch. 4); a
count's is closed form (:func:`workbench.engine.counts.count_intercept`).
"""

from __future__ import annotations

import heapq

import numpy as np
from scipy import special

from workbench.engine.counts import MAX_MEAN, count_intercept, poisson_from_normal
from workbench.errors import SimulationError

__all__ = ["CALIBRATION_DRAWS", "CALIBRATION_SEED", "calibrate", "calibrate_one_from"]

CALIBRATION_DRAWS = 2**20
CALIBRATION_SEED = 20_261_201


def _share_gap(a: float, linear: np.ndarray, proportion: float, scratch: np.ndarray) -> float:
    np.add(linear, a, out=scratch)
    special.expit(scratch, out=scratch)
    return float(scratch.mean()) - proportion


def _calibration_error(name: str, p: float, why: str) -> SimulationError:
    return SimulationError(
        f"cannot calibrate the intercept of '{name}' to proportion {p!r}: {why}",
        where=f"variables.{name}.proportion",
    )


def _newton_root(linear: np.ndarray, p: float, lo: float, hi: float, scratch: np.ndarray) -> float | None:
    """The root of ``mean(logistic(a + linear)) = p`` in ``(lo, hi)`` by safeguarded Newton steps (a
    bisection whenever a step leaves the bracket), or None when it does not settle (the caller then falls
    back to Brent's method). One pass over the draws per step gives the share and its derivative
    ``mean(s (1 - s))``; from the logistic-normal start (Monahan & Stefanski 1992:
    ``E[logistic(a + L)] ~ logistic((a + mu) / sqrt(1 + pi sigma^2 / 8))``) it takes about four.

    Each pass computes ``s = 1 / (1 + exp(-(a + linear)))`` with numpy's vectorised ``exp`` (about three
    times faster than ``scipy.special.expit``, the same formula to within an ulp or two, accurate in
    relative terms for small ``s``): the steps only locate the root, which is settled to 1e-14 either way
    (common practice, no source)."""
    n = linear.size
    mu, sd = float(linear.mean()), float(linear.std())
    a = float(special.logit(p)) * np.sqrt(1.0 + np.pi * sd * sd / 8.0) - mu
    if not lo < a < hi:
        a = 0.5 * (lo + hi)
    negative = np.negative(linear)
    for _ in range(60):
        np.subtract(negative, a, out=scratch)
        np.exp(scratch, out=scratch)
        scratch += 1.0
        np.reciprocal(scratch, out=scratch)
        share = float(scratch.mean())
        # einsum, not dot: a BLAS dot of this length wakes the BLAS threads, which then spin on the CPU the
        # noise is drawn on (_calibration_rows)
        slope = share - float(np.einsum("i,i->", scratch, scratch)) / n
        gap = share - p
        if gap == 0.0:
            return a
        if gap < 0.0:
            lo = a
        else:
            hi = a
        step = -gap / slope if slope > 0.0 else np.inf
        if abs(step) <= 1e-14 * max(1.0, abs(a)):
            return a + step
        a = a + step if lo < a + step < hi else 0.5 * (lo + hi)
        if hi - lo <= 1e-14 * max(1.0, abs(a)):
            break  # the bracket closed without a settled step: no root in double precision, perhaps
    return None


def _calibrate_one(name: str, p: float, linear: np.ndarray, has_causes: bool, scratch: np.ndarray) -> float:
    """The intercept ``a`` with ``mean(logistic(a + linear)) = p`` (safeguarded Newton steps, Brent's
    method as the fallback), or a located error."""
    with np.errstate(all="ignore"):
        base = float(special.logit(p))
        if not np.isfinite(base):
            raise _calibration_error(name, p, "its log odds are not a finite number")
        if not has_causes:
            return base
        top, bottom = float(linear.max()), float(linear.min())
        if not (np.isfinite(top) and np.isfinite(bottom)):
            raise _calibration_error(
                name, p, "the effects of its causes overflow (their sum is not a finite number)"
            )
        if top == bottom:
            return base - float(linear[0])
        lo, hi = base - top - 1.0, base - bottom + 1.0
        a = _newton_root(linear, p, lo, hi, scratch)
        if a is None or not np.isfinite(a):
            from scipy import optimize  # the fallback only: its import costs more than most calibrations

            try:
                a = optimize.brentq(_share_gap, lo, hi, args=(linear, p, scratch), xtol=1e-12)
            except (ValueError, RuntimeError) as exc:
                raise _calibration_error(
                    name, p, "no intercept gives that share of 1s in double precision"
                ) from exc
    if not np.isfinite(a):
        raise _calibration_error(name, p, "no intercept gives that share of 1s in double precision")
    return float(a)


def _file_first_order(bare) -> tuple[int, ...]:
    """A topological order that takes the lowest file index whenever it can: noise rows are drawn in file
    order, so few rows wait for their variable (each variable depends only on its causes, so the order does
    not change any number)."""
    waiting = [len(bare.parents[j][0]) for j in range(bare.k)]
    children: list[list[int]] = [[] for _ in range(bare.k)]
    for j in range(bare.k):
        for i in bare.parents[j][0]:
            children[int(i)].append(j)
    ready = [j for j in range(bare.k) if waiting[j] == 0]
    heapq.heapify(ready)
    order = []
    while ready:
        j = heapq.heappop(ready)
        order.append(j)
        for c in children[j]:
            waiting[c] -= 1
            if waiting[c] == 0:
                heapq.heappush(ready, c)
    return tuple(order)


def _calibration_rows(rng: np.random.Generator, binary: np.ndarray, n: int, ahead: int = 2):
    """The calibration's noise rows in file order, ``(j, row)``: ``n`` standard normals per variable, a
    binary variable's already turned into ``U = Phi(Z)`` (the same numbers as drawing then converting in
    line). A background thread draws and converts at most ``ahead`` rows ahead, so the stream and Phi run
    on one CPU while the calibration works on another (both release the GIL); memory grows by ``ahead``
    rows at most."""
    import queue
    import threading

    rows: queue.Queue = queue.Queue(maxsize=ahead)
    stop = threading.Event()

    def produce() -> None:
        try:
            for j in range(len(binary)):
                z = rng.standard_normal(n)
                if binary[j]:
                    special.ndtr(z, out=z)
                while not stop.is_set():
                    try:
                        rows.put((j, z), timeout=0.05)
                        break
                    except queue.Full:
                        continue
        except BaseException as exc:  # handed to the consumer, raised there
            rows.put((None, exc))

    worker = threading.Thread(target=produce, name="workbench-calibration-rows", daemon=True)
    worker.start()
    try:
        for _ in range(len(binary)):
            j, z = rows.get()
            if j is None:
                raise z
            yield j, z
    finally:
        stop.set()
        while worker.is_alive():
            try:
                rows.get(timeout=0.05)
            except queue.Empty:
                pass


def _calibrate_in_order(bare, order, children, drawn, targets: dict, intercept: np.ndarray) -> None:
    """The calibration loop of :func:`calibrate`: every variable in ``order`` from the rows ``drawn``
    (:func:`_calibration_rows`), each binary and count intercept written into ``intercept`` (``targets``:
    a binary variable's proportion, a count's rate)."""
    noise: dict[int, np.ndarray] = {}  # rows drawn (file order) whose variable is not computed yet
    partial: dict[int, np.ndarray] = {}  # sum of effect x value over the causes computed so far
    scratch = np.empty(CALIBRATION_DRAWS)
    term = np.empty(CALIBRATION_DRAWS)
    for j in order:
        while j not in noise:
            i, row = next(drawn)
            noise[i] = row
        z = noise.pop(j)
        idx = bare.parents[j][0]
        linear = partial.pop(j) if len(idx) else np.zeros(CALIBRATION_DRAWS)
        if j in bare.counts:
            name = bare.names[j]
            a = count_intercept(name, targets[name], linear if len(idx) else None)
            intercept[j] = a
            with np.errstate(all="ignore"):
                np.add(linear, a, out=scratch)
                np.exp(scratch, out=scratch)  # the count's mean given its causes
            value = poisson_from_normal(z, scratch, out=z)  # z is Z here (only binary rows come as Phi(Z))
            if np.isnan(value).any():
                raise SimulationError(
                    f"cannot calibrate the rate of '{name}': its mean given its causes exceeds {MAX_MEAN:g} "
                    "in some draws (smaller effects on the log scale, or a smaller rate)",
                    where=f"variables.{name}.rate",
                )
        elif not bare.binary[j]:
            np.multiply(z, bare.noise_sd[j], out=z)
            with np.errstate(all="ignore"):
                np.add(linear, bare.intercept[j], out=linear)  # z + (intercept + linear), as drawn
                z += linear
            value = z
        else:
            name = bare.names[j]
            a = _calibrate_one(name, targets[name], linear, len(idx) > 0, scratch)
            intercept[j] = a
            with np.errstate(all="ignore"):
                # 1 / (1 + exp(-t)), the formula of the Newton passes: within an ulp or two of expit, which
                # moves a comparison with Phi(Z) only for a Phi(Z) that close (about 1e-10 of the draws)
                np.subtract(-a, linear, out=scratch)
                np.exp(scratch, out=scratch)
                scratch += 1.0
                value = z < np.reciprocal(scratch, out=scratch)  # z is Phi(Z) here
        # each value goes at once into its children's sums (the order of the terms moves a sum by rounding
        # only); memory holds one sum per child still waiting, not every cause until its last child
        with np.errstate(all="ignore"):
            for c, e in children[j]:
                if c not in partial:
                    partial[c] = e * value
                elif value.dtype == bool:
                    np.add(partial[c], e, out=partial[c], where=value)  # adds e * value, no temporary
                else:
                    partial[c] += np.multiply(value, e, out=term)


def calibrate(bare, variables: tuple) -> np.ndarray:
    """The intercepts of every variable of the bare structure ``bare`` (a
    :class:`~workbench.engine.generate.Structure` before calibration): a continuous variable's baseline as
    it is, a binary or count variable's calibrated (module notes). Errors are located at
    ``variables.<name>.proportion`` or ``variables.<name>.rate``."""
    targets = {v.name: v.proportion for v in variables if v.type == "binary"}
    targets.update({v.name: v.rate for v in variables if v.type == "count"})
    intercept = bare.intercept.copy()
    rng = np.random.default_rng(CALIBRATION_SEED)
    order = _file_first_order(bare)
    children: list[list[tuple[int, float]]] = [[] for _ in range(bare.k)]
    for j in range(bare.k):
        for i, e in zip(*bare.parents[j], strict=True):
            children[int(i)].append((j, float(e)))
    drawn = _calibration_rows(rng, bare.binary, CALIBRATION_DRAWS)  # binary rows come as Phi(Z)
    try:
        _calibrate_in_order(bare, order, children, drawn, targets, intercept)
    finally:
        drawn.close()
    return intercept


def calibrate_one_from(variable, linear: np.ndarray, has_causes: bool) -> float:
    """The intercept of one binary or count ``variable`` from the sum ``linear`` its causes give it over the
    calibration draws (a located error when none exists)."""
    if variable.type == "count":
        intercept = count_intercept(variable.name, variable.rate, linear if has_causes else None)
        with np.errstate(all="ignore"):
            top = float(np.max(linear)) + intercept if has_causes else intercept
        if not np.exp(top) <= MAX_MEAN:
            raise SimulationError(
                f"cannot calibrate the rate of '{variable.name}': its mean given its causes exceeds "
                f"{MAX_MEAN:g} in some draws (smaller effects on the log scale, or a smaller rate)",
                where=f"variables.{variable.name}.rate",
            )
        return intercept
    return _calibrate_one(variable.name, variable.proportion, linear, has_causes, np.empty_like(linear))
