"""Drawing data from a scenario's structural equations.

Every variable is computed from its direct causes in topological order (causes first):

* a continuous variable is ``baseline + sum(effect x cause) + noise_sd x Z``;
* a binary variable is 1 with probability ``logistic(a + sum(effect x cause))``, where the intercept ``a`` is
  calibrated once so that the population share of 1s equals the variable's ``proportion``
  (:func:`calibrate_intercepts`, :mod:`workbench.engine.calibration`);
* a count variable is Poisson with mean ``exp(a + sum(effect x cause))``, ``a`` calibrated so that the
  population mean equals its ``rate`` (:mod:`workbench.engine.counts`).

All randomness enters through one standard normal ``Z`` per variable and row. A binary variable uses its
``Z`` through the normal distribution function, ``U = Phi(Z)`` uniform on (0, 1), and is 1 when
``U < logistic(a + ...)``; a count is the Poisson quantile at ``U``. One noise array therefore fixes a whole dataset, which lets the truth be computed
with common random numbers (:func:`evaluate` with an intervention on the exposure) and makes the draws
independent of how replicates are split into chunks: each replicate's noise is one contiguous run of the
random stream.

Examples
--------
>>> from workbench import load_scenario, loads_scenario
>>> sc = loads_scenario('''
... title = "Workshop training and defects"
... [question]
... exposure = "training"
... outcome = "defects"
... [variables.experience]
... [variables.training]
... type = "binary"
... proportion = 0.4
... [variables.defects]
... [[arrows]]
... from = "experience"
... to = "training"
... effect = 0.8
... [[arrows]]
... from = "experience"
... to = "defects"
... effect = -0.5
... [[arrows]]
... from = "training"
... to = "defects"
... effect = -0.3
... [[strategies]]
... name = "unadjusted"
... ''')
>>> df = draw(sc, 1000, seed=1)
>>> list(df.columns), df.attrs["latent"]
(['experience', 'training', 'defects'], [])
>>> bool(abs(df["training"].mean() - 0.4) < 0.05)
True
"""

from __future__ import annotations

import functools
from dataclasses import dataclass, replace
from typing import TYPE_CHECKING

import numpy as np
from scipy import special

from workbench.engine.calibration import CALIBRATION_DRAWS, CALIBRATION_SEED, calibrate
from workbench.engine.counts import poisson_from_normal
from workbench.engine.forms import add_forms, ancestors, with_forms
from workbench.engine.modifiers import add_modification, with_modifiers
from workbench.engine.noise import shape_noise, with_noise
from workbench.engine.streams import generator
from workbench.errors import SimulationError
from workbench.scenario.constraints import check_setting
from workbench.scenario.model import Scenario
from workbench.scenario.parse_modifiers import descendants

if TYPE_CHECKING:  # pandas is imported where a data frame is made (draw)
    import pandas as pd

__all__ = [
    "CALIBRATION_DRAWS",
    "CALIBRATION_SEED",
    "calibrate_intercepts",
    "draw",
    "draw_rows",
    "evaluate",
    "draw_noise",
    "noise_pieces",
    "PIECE",
    "structure",
    "Structure",
    "graph_structure",
]

PIECE = 2**16
"""Rows per piece of a replicate's noise stream (see :func:`draw_noise`)."""


@dataclass(frozen=True, eq=False)
class Structure:
    """The structural equations of a scenario in array form (cached per graph by :func:`structure`).

    Attributes
    ----------
    names : tuple of str
        Variable names in file order; index ``j`` of every array below refers to ``names[j]``.
    order : tuple of int
        Variable indices, every cause before its effects.
    parents : tuple of (ndarray of int, ndarray of float)
        For every variable (file order) the indices of its causes and the arrows' effects.
    binary : ndarray of bool, shape (k,)
    intercept : ndarray of float, shape (k,)
        The baseline of a continuous variable; the calibrated log-odds intercept of a binary one, the
        calibrated log-mean intercept of a count.
    noise_sd : ndarray of float, shape (k,)
        Continuous variables only (0 for binary and count ones).
    counts : frozenset of int
        The indices of the count variables.
    """

    names: tuple[str, ...]
    order: tuple[int, ...]
    parents: tuple[tuple[np.ndarray, np.ndarray], ...]
    binary: np.ndarray
    intercept: np.ndarray
    noise_sd: np.ndarray
    modified: tuple = ()  # modified arrows (workbench.engine.modifiers.ModifiedArrow), in arrow order
    forms: tuple = ()  # square and step arrows (workbench.engine.forms.FormArrow), in arrow order
    noises: tuple = ()  # non-normal or spread disturbances (workbench.engine.noise.NoiseTerm), file order
    counts: frozenset = frozenset()  # indices of the count variables (workbench.engine.counts)

    @property
    def k(self) -> int:
        return len(self.names)

    def index(self, name: str) -> int:
        return self.names.index(name)


def _bare_structure(variables: tuple, arrows: tuple) -> Structure:
    names = tuple(v.name for v in variables)
    index = {name: i for i, name in enumerate(names)}
    parents = []
    for name in names:
        incoming = [(index[a.source], a.effect) for a in arrows if a.target == name]
        parents.append(
            (
                np.array([i for i, _ in incoming], dtype=np.intp),
                np.array([e for _, e in incoming], dtype=float),
            )
        )
    indegree = {n: 0 for n in names}
    for a in arrows:
        indegree[a.target] += 1
    order: list[int] = []
    ready = [n for n in names if indegree[n] == 0]
    while ready:
        node = ready.pop(0)
        order.append(index[node])
        for a in arrows:
            if a.source == node:
                indegree[a.target] -= 1
                if indegree[a.target] == 0:
                    ready.append(a.target)
    binary = np.array([v.type == "binary" for v in variables])
    continuous = [v.type == "continuous" for v in variables]
    intercept = np.array([v.baseline if c else 0.0 for v, c in zip(variables, continuous, strict=True)])
    noise_sd = np.array([v.noise_sd if c else 0.0 for v, c in zip(variables, continuous, strict=True)])
    counts = frozenset(j for j, v in enumerate(variables) if v.type == "count")
    return Structure(names, tuple(order), tuple(parents), binary, intercept, noise_sd, counts=counts)


@functools.lru_cache(maxsize=64)
def graph_structure(variables: tuple, arrows: tuple) -> Structure:
    """The structural equations of a graph given as a scenario's ``variables`` and ``arrows`` tuples, with
    calibrated binary and count intercepts (cached per graph: scenarios that differ only in their question
    or strategies share one).

    The calibration (:func:`workbench.engine.calibration.calibrate`) draws :data:`CALIBRATION_DRAWS`
    standard normals per variable from :data:`CALIBRATION_SEED`, with bounded memory. A proportion, rate or
    effects for which no finite intercept exists raise a :class:`~workbench.errors.SimulationError` located
    at ``variables.<name>.proportion`` (or ``.rate``).

    Examples
    --------
    >>> from workbench import load_preset
    >>> sc = load_preset("common_cause")
    >>> graph_structure(sc.variables, sc.arrows) is structure(sc)
    True
    """
    bare = _bare_structure(variables, arrows)
    if bare.binary.any() or bare.counts:
        if _terms_above_discrete(variables, arrows):
            return _calibrated_with_terms(bare, variables, arrows)
        bare = replace(bare, intercept=calibrate(bare, variables))
    return _with_terms(bare, variables, arrows)


def _with_terms(st: Structure, variables: tuple, arrows: tuple) -> Structure:
    """``st`` with its modified arrows, non-linear arrows and noise terms (their means from ``st``)."""
    return with_noise(with_forms(with_modifiers(st, variables, arrows), variables, arrows), variables, arrows)


def _terms_above_discrete(variables: tuple, arrows: tuple) -> bool:
    """True when a binary or count variable is, or descends from, the target of a modified or non-linear
    arrow or a variable with non-normal or spread noise: its calibration then needs the full equations."""
    special = {a.target for a in arrows if a.varies_with or a.form != "linear"}
    special |= {v.name for v in variables if v.noise != "normal" or v.spread_with}
    reached = special.union(*(descendants(name, arrows) for name in special))
    return any(v.name in reached for v in variables if v.type != "continuous")


def _calibrated_with_terms(bare: Structure, variables: tuple, arrows: tuple) -> Structure:
    """:func:`graph_structure` for a graph with modified or non-linear arrows or shaped noise above a binary
    or count variable: each such variable, causes first, is calibrated from its causes' values computed by
    the full equations (:func:`evaluate`) on the calibration draws, the intercepts above it already
    calibrated. The draws are the same numbers as :func:`~workbench.engine.calibration.calibrate`'s (one row
    of :data:`CALIBRATION_DRAWS` normals per variable in file order from :data:`CALIBRATION_SEED`); memory
    holds two (variables, draws) arrays."""
    from workbench.engine.calibration import calibrate_one_from

    intercept = bare.intercept.copy()
    z = np.random.default_rng(CALIBRATION_SEED).standard_normal((bare.k, CALIBRATION_DRAWS))
    values = np.empty_like(z)
    tmp = np.empty(CALIBRATION_DRAWS)
    for j in bare.order:
        if not (bare.binary[j] or j in bare.counts):
            continue
        st = _with_terms(replace(bare, intercept=intercept), variables, arrows)
        above = ancestors(st, j) - {j}
        with np.errstate(all="ignore"):
            evaluate(replace(st, order=tuple(i for i in st.order if i in above)), z, axis=0, out=values)
            linear = np.zeros(CALIBRATION_DRAWS)
            for i, e in zip(*st.parents[j], strict=True):
                linear += e * values[i]
            _add_terms(st, j, linear, values, tmp)
        intercept[j] = calibrate_one_from(variables[j], linear, len(st.parents[j][0]) > 0)
    return _with_terms(replace(bare, intercept=intercept), variables, arrows)


def structure(scenario: Scenario) -> Structure:
    """The scenario's structural equations with calibrated binary intercepts (cached per graph).

    Examples
    --------
    >>> from workbench import load_preset
    >>> st = structure(load_preset("common_cause"))
    >>> st.names, [st.names[j] for j in st.order]
    (('soil_quality', 'fertiliser', 'wheat_yield'), ['soil_quality', 'fertiliser', 'wheat_yield'])
    """
    return graph_structure(scenario.variables, scenario.arrows)


def calibrate_intercepts(scenario: Scenario) -> dict[str, float]:
    """Log-odds intercepts of the binary variables that give each its population ``proportion`` of 1s, and
    log-mean intercepts of the counts that give each its population mean ``rate``.

    For a binary variable ``B`` with linear predictor ``eta = sum(effect x cause)``, the intercept ``a``
    solves ``E[logistic(a + eta)] = proportion``. The expectation is taken over ``2**20`` draws of the causes
    from a fixed internal seed and the equation is solved by Brent's method, so the result is deterministic.
    Binary variables are calibrated in topological order, each using the calibrated intercepts of its
    causes. Without causes the answer is exactly ``logit(proportion)``.

    Parameters
    ----------
    scenario : Scenario

    Returns
    -------
    dict of str to float
        One entry per binary or count variable, in file order.

    References
    ----------
    Brent R.P. (1973). Algorithms for Minimization without Derivatives. Prentice-Hall, ch. 4.

    Examples
    --------
    >>> from workbench import load_scenario, loads_scenario
    >>> sc = loads_scenario('title = "t"\\n[question]\\nexposure = "upgrade"\\noutcome = "uptime"\\n'
    ...     '[variables.upgrade]\\ntype = "binary"\\nproportion = 0.25\\n[variables.uptime]\\n'
    ...     '[[arrows]]\\nfrom = "upgrade"\\nto = "uptime"\\neffect = 1.0\\n'
    ...     '[[strategies]]\\nname = "unadjusted"\\n')
    >>> round(calibrate_intercepts(sc)["upgrade"], 6)  # logit(0.25)
    -1.098612
    """
    st = structure(scenario)
    return {name: float(st.intercept[j]) for j, name in enumerate(st.names) if st.binary[j] or j in st.counts}


_TANH_PHI = (np.float32(np.sqrt(2.0 / np.pi)), np.float32(np.sqrt(2.0 / np.pi) * 0.044715))
_TANH_PHI_MARGIN = 1e-3  # the approximation's error is below 3.6e-4 on the 2 Phi - 1 scale (grid check)


def _bernoulli_from_normal(z, linear, out, work) -> None:
    """``out = ndtr(z) < expit(linear)``, the 0/1 draws of a binary variable from its noise, exactly.

    Both sides are compared on the ``2 u - 1`` scale: ``2 expit(s) - 1 = tanh(s / 2)``, and ``2 Phi(z) - 1``
    is approximated by ``tanh(sqrt(2 / pi) (z + 0.044715 z^3))`` (error below 3.6e-4 everywhere), both in
    single precision (rounding below 1e-6). A row is decided by the approximation when the two sides differ
    by more than 1e-3; the others (about one in a thousand) are decided by ``ndtr(z) < expit(s)`` itself in
    double precision, so every draw is the one the exact comparison gives, at a fraction of the cost of
    ``ndtr`` and ``expit`` on every row. ``work`` (float64, contiguous, shape of ``z``) is work space;
    ``out`` may be ``z`` itself.
    """
    shape, size = z.shape, z.size
    space = work.reshape(-1).view(np.float32)
    half, approx = space[:size].reshape(shape), space[size:].reshape(shape)
    np.multiply(linear, 0.5, out=half, casting="same_kind")
    np.tanh(half, out=half)  # 2 expit(s) - 1
    np.multiply(z, z, out=approx, casting="same_kind")
    approx *= _TANH_PHI[1]
    approx += _TANH_PHI[0]
    np.multiply(approx, z, out=approx, casting="same_kind")
    np.tanh(approx, out=approx)  # about 2 Phi(z) - 1
    approx -= half
    close = np.flatnonzero(np.abs(approx, out=half) <= _TANH_PHI_MARGIN)
    where = np.unravel_index(close, shape)
    exact = special.ndtr(z[where]) < special.expit(linear[where])  # before ``out``, which may be ``z``
    np.less(approx, 0.0, out=out, casting="unsafe")
    out[where] = exact


def _add_terms(st: Structure, j: int, linear, v, tmp) -> None:
    """Add the modified and non-linear arrows' terms into the binary or count variable ``j`` to its linear
    predictor ``linear`` (on its log-odds or log-mean scale); nothing when no such arrow points at ``j``."""
    if not any(t.target == j for t in (*st.modified, *st.forms)):
        return
    held = v[j].copy()
    np.copyto(v[j], linear)
    if st.modified:
        add_modification(st, j, v, tmp)
    if st.forms:
        add_forms(st, j, v, tmp)
    np.copyto(linear, v[j])
    np.copyto(v[j], held)


def _count_values(st: Structure, j: int, z, v, scratch, tmp, mean_only: bool) -> None:
    """``v[j]``: count ``j`` from its noise ``z`` given the values of its causes in ``v`` (its mean given
    them when ``mean_only``, for the truth)."""
    idx, eff = st.parents[j]
    np.copyto(scratch, st.intercept[j])
    for i, e in zip(idx, eff, strict=True):
        np.multiply(v[i], e, out=tmp)
        scratch += tmp
    _add_terms(st, j, scratch, v, tmp)
    with np.errstate(over="ignore"):
        np.exp(scratch, out=scratch)
    if mean_only:
        np.copyto(v[j], scratch)
    else:
        poisson_from_normal(z, scratch, out=v[j])


def evaluate(
    scenario_or_structure,
    noise: np.ndarray,
    *,
    intervention: tuple[str, float] | None = None,
    exposure: str | None = None,
    axis: int = -1,
    out: np.ndarray | None = None,
    probability: str | None = None,
) -> np.ndarray:
    """Evaluate the structural equations from given standard normal noise.

    Parameters
    ----------
    scenario_or_structure : Scenario or Structure
    noise : ndarray
        Standard normal draws, one per variable along ``axis`` (in file order), any other shape.
    intervention : ("set", value) or ("shift", delta), optional
        Applied to ``exposure``: ``set`` replaces its value by ``value`` (do(X = value)); ``shift`` adds
        ``delta`` to the value its own equation gives. Its descendants are recomputed from the new value.
    exposure : str, optional
        The intervened variable; default the scenario's exposure.
    axis : int
        The axis of ``noise`` that runs over variables.
    out : ndarray, optional
        Where to write the values (same shape as ``noise``); may be ``noise`` itself (in place).
    probability : str, optional
        A binary variable to return as its probability of being 1 given its causes instead of a 0/1 draw,
        or a count to return as its mean given its causes (used for the truth: the same mean, a smaller
        Monte Carlo error).

    Returns
    -------
    ndarray
        The variables' values, shape of ``noise``; binary variables as 0.0/1.0.

    Examples
    --------
    >>> from workbench import load_preset
    >>> sc = load_preset("common_cause")
    >>> z = np.zeros((1, 3))
    >>> evaluate(sc, z)  # soil 0, fertiliser baseline 2, yield 5 + 0.25 x 2
    array([[0. , 2. , 5.5]])
    >>> evaluate(sc, z, intervention=("shift", 1.0))
    array([[0.  , 3.  , 5.75]])
    """
    if isinstance(scenario_or_structure, Structure):
        st = scenario_or_structure
        target = None if exposure is None else st.index(exposure)
    else:
        st = structure(scenario_or_structure)
        target = st.index(exposure or scenario_or_structure.question.exposure)
    if intervention is not None and target is None:
        raise ValueError("evaluate: an intervention on a Structure needs exposure=")
    if out is None:
        out = np.empty_like(noise, dtype=float)
    in_place = out is noise
    z = np.moveaxis(noise, axis, 0)
    v = np.moveaxis(out, axis, 0)
    prob_index = None if probability is None else st.index(probability)
    scratch = np.empty(v.shape[1:])
    tmp = np.empty(v.shape[1:]) if st.binary.any() or st.counts else None
    for j in st.order:
        idx, eff = st.parents[j]
        if intervention is not None and j == target and intervention[0] == "set":
            v[j] = intervention[1]
            continue
        if j in st.counts:
            _count_values(st, j, z[j], v, scratch, tmp, j == prob_index)
        elif st.binary[j] and not len(idx) and j != prob_index:
            # no causes: Phi(Z) < p is Z < Phi^-1(p), one comparison per row
            np.less(z[j], special.ndtri(special.expit(st.intercept[j])), out=v[j], casting="unsafe")
        elif st.binary[j]:
            if len(idx):
                np.multiply(v[idx[0]], eff[0], out=scratch)
                scratch += st.intercept[j]
            else:
                np.copyto(scratch, st.intercept[j])
            for i, e in zip(idx[1:], eff[1:], strict=True):
                np.multiply(v[i], e, out=tmp)
                scratch += tmp
            _add_terms(st, j, scratch, v, tmp)
            if j == prob_index:
                v[j] = special.expit(scratch, out=scratch)
            else:
                _bernoulli_from_normal(z[j], scratch, v[j], tmp)
        else:
            if not shape_noise(st, j, z[j], v, scratch) and (st.noise_sd[j] != 1.0 or not in_place):
                np.multiply(z[j], st.noise_sd[j], out=v[j])
            if st.intercept[j] != 0.0:
                v[j] += st.intercept[j]
            for i, e in zip(idx, eff, strict=True):
                np.multiply(v[i], e, out=scratch)
                v[j] += scratch
            if st.modified:
                add_modification(st, j, v, scratch)
            if st.forms:
                add_forms(st, j, v, scratch)
        if intervention is not None and j == target:
            if intervention[0] != "shift":
                raise ValueError(f"evaluate: unknown intervention {intervention[0]!r}")
            v[j] += intervention[1]
    return out


def draw_noise(rng: np.random.Generator, replicates: int, k: int, n: int, out: np.ndarray | None = None):
    """Standard normal noise of shape (replicates, k, n), in the order the engine's streams define.

    Each replicate's noise is one contiguous run of ``rng``'s stream, taken in pieces of at most
    :data:`PIECE` rows, each piece variable by variable (a ``k x rows`` block). With ``n <= PIECE`` that is
    simply the replicate's ``k x n`` block. So drawing replicates one at a time or all at once, or one
    replicate's rows piece by piece (:func:`noise_pieces`), gives the same numbers.

    Examples
    --------
    >>> together = draw_noise(np.random.default_rng(1), 2, 3, 4)
    >>> rng = np.random.default_rng(1)
    >>> one_by_one = np.concatenate([draw_noise(rng, 1, 3, 4), draw_noise(rng, 1, 3, 4)])
    >>> together.shape, bool(np.array_equal(together, one_by_one))
    ((2, 3, 4), True)
    """
    if out is None:
        out = np.empty((replicates, k, n))
    if n <= PIECE:
        rng.standard_normal(out=out)
        return out
    for i in range(out.shape[0]):
        for start, piece in noise_pieces(rng, k, n, PIECE):
            out[i, :, start : start + piece.shape[1]] = piece
    return out


def noise_pieces(rng: np.random.Generator, k: int, n: int, rows: int):
    """One replicate's noise in row groups of ``rows`` (a multiple of :data:`PIECE`, or ``n``): yields
    ``(first_row, array of shape (k, group_rows))`` in stream order (see :func:`draw_noise`).

    Examples
    --------
    >>> [(start, piece.shape) for start, piece in noise_pieces(np.random.default_rng(0), 2, 5, 5)]
    [(0, (2, 5))]
    """
    if n <= PIECE:
        yield 0, rng.standard_normal((k, n))
        return
    rows = max(PIECE, (rows // PIECE) * PIECE)
    for start in range(0, n, rows):
        stop = min(n, start + rows)
        group = np.empty((k, stop - start))
        for a in range(start, stop, PIECE):
            b = min(stop, a + PIECE)
            group[:, a - start : b - start] = rng.standard_normal((k, b - a))
        yield start, group


def draw_rows(scenario: Scenario, n: int, replicates: int, rng: np.random.Generator) -> np.ndarray:
    """Draw ``replicates`` datasets of ``n`` rows each, batched.

    Parameters
    ----------
    scenario : Scenario
    n, replicates : int
    rng : numpy.random.Generator

    Returns
    -------
    ndarray of shape (replicates, n, k)
        Every variable in file order (latent ones included); binary ones as 0.0/1.0. It is a transposed view
        of a (replicates, k, n) array, the layout the raw engine works in.

    Examples
    --------
    >>> from workbench import load_preset
    >>> rows = draw_rows(load_preset("common_cause"), 50, 4, np.random.default_rng(0))
    >>> rows.shape
    (4, 50, 3)
    """
    st = structure(scenario)
    z = draw_noise(rng, replicates, st.k, n)
    evaluate(st, z, axis=1, out=z)
    return z.transpose(0, 2, 1)


def draw(scenario: Scenario, n: int, seed=None) -> pd.DataFrame:
    """One simulated dataset of ``n`` rows.

    Parameters
    ----------
    scenario : Scenario
    n : int
    seed : None, int, numpy.random.SeedSequence or numpy.random.Generator
        A Generator is drawn from as it is; otherwise the stream of replicate block 0
        (:func:`workbench.engine.streams.generator`), so an integer gives the same data as replicate 0 of a
        simulation with that seed on the raw engine.

    Returns
    -------
    pandas.DataFrame
        One column per variable in file order, latent ones included and listed in ``df.attrs["latent"]``;
        binary variables as 0.0/1.0.

    Raises
    ------
    SimulationError
        ``n`` not a positive integer, or an invalid ``seed``.

    Examples
    --------
    >>> from workbench import load_preset
    >>> df = draw(load_preset("common_cause"), 5, seed=3)
    >>> df.shape
    (5, 3)
    """
    import pandas as pd  # only here: `check` and the engine draw without it

    n = check_setting("n", n, where="n", error=SimulationError)
    rows = draw_rows(scenario, n, 1, generator(seed))[0]
    df = pd.DataFrame(np.array(rows), columns=scenario.names)
    df.attrs["latent"] = list(scenario.latent_names)
    return df
