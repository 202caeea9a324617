"""Fitting every fit of a plan on one chunk of replicates, batched.

Each fit of the plan (:mod:`workbench.engine.fitplan`) is computed for all replicates of the chunk at once:

- classical OLS, with or without a data-driven selection rule, from the chunk's cross-products
  (:func:`workbench.engine.ols.fit_crossproducts`, :func:`workbench.engine.ols.fit_selected`);
- a restricted or matched fit from the masked cross-products of the rows it keeps
  (:mod:`workbench.engine.design`, :func:`workbench.engine.ols.masked_crossproducts`); replicates with fewer
  than ``p + 2`` kept units fail with a counted reason;
- the linear probability model (OLS on a binary outcome), and OLS on a continuous outcome with ``se =
  "hc3"``, with HC3 SEs from the rows (:func:`workbench.engine.robust.ols_hc3_batch`);
- Poisson regression (log link) from the rows (:func:`workbench.engine.poisson.fit_poisson_batch`), with
  the HC0 sandwich (modified Poisson) or model-based SEs; both with one set share one fit;
- OLS with exposure x covariate terms from the rows (:func:`workbench.engine.interactions.fit_interactions`):
  the sample-averaged effect with its delta-method SE;
- logistic regression from the rows (:func:`workbench.engine.logistic.fit_logit_batch`), plain or
  standardised (:func:`workbench.engine.standardize.standardized_contrast`); both forms with one set share
  one fit.

A replicate whose exposure estimate or SE is not finite counts as failed; every number of a failed replicate
is NaN.

Examples
--------
>>> from workbench import load_preset
>>> from workbench.engine.chunks import ChunkDraws
>>> from workbench.engine.fitplan import fit_plan
>>> sc = load_preset("common_cause")
>>> plan = fit_plan(sc)
>>> draws = ChunkDraws(sc, plan, "raw", 100, 50, np.random.SeedSequence(2))
>>> chunk = next(iter(draws))
>>> results = fit_chunk(plan, chunk.crossproducts, chunk.data, 100, draws.index, draws.names)
>>> [r.estimate.shape for r in results], results[1].df.tolist()[:2]
([(50,), (50,)], [97.0, 97.0])
"""

from __future__ import annotations

from collections import Counter
from dataclasses import dataclass

import numpy as np

from workbench.engine.design import design_mask
from workbench.engine.factored import FactoredCrossproducts
from workbench.engine.fitplan import Fit, Plan
from workbench.engine.interactions import fit_interactions
from workbench.engine.logistic import design_matrix, fit_logit_batch
from workbench.engine.ols import BatchFit, fit_crossproducts, fit_selected, masked_crossproducts
from workbench.engine.poisson import fit_poisson_batch
from workbench.engine.robust import ols_hc3_batch
from workbench.engine.splines import fit_flexible, with_spline_columns
from workbench.engine.standardize import standardized_contrast

__all__ = ["FitResult", "fit_chunk"]


@dataclass
class FitResult:
    """One fit's results on the replicates of a chunk (arrays over replicates, axis 0).

    Attributes
    ----------
    estimate, se : ndarray of shape (r,)
        The exposure's estimate and SE; NaN where the fit failed.
    also_estimate, also_se : ndarray of shape (r, A)
        The question's ``also`` variables; NaN where not adjusted for or failed.
    vif : ndarray of shape (r,)
        The exposure's variance inflation factor.
    failed : ndarray of bool, shape (r,)
    reasons : Counter
        Failures counted by reason.
    df : ndarray of shape (r,)
        Degrees of freedom of classical OLS intervals in each replicate.
    selected : ndarray of int, shape (r,)
        The bit pattern of the candidates a selection rule kept; -1 otherwise.
    retained : ndarray of shape (r,)
        Units kept by a restriction or matching; NaN otherwise.
    interaction_estimate, interaction_se : ndarray of shape (r,) or None
        ``ols_interaction`` only: the coefficient of the first exposure x covariate term and its classical
        SE (NaN where the fit failed); None for other fits.
    """

    estimate: np.ndarray
    se: np.ndarray
    also_estimate: np.ndarray
    also_se: np.ndarray
    vif: np.ndarray
    failed: np.ndarray
    reasons: Counter
    df: np.ndarray
    selected: np.ndarray
    retained: np.ndarray
    interaction_estimate: np.ndarray | None = None
    interaction_se: np.ndarray | None = None


def _wanted(f: Fit) -> list[int]:
    """The regressors whose coefficients a fit reports: the exposure and the question's ``also`` variables."""
    return [0] + [pos for pos in f.also if pos >= 0]


def _masked_fit(f: Fit, S: np.ndarray, kept: np.ndarray, y: int, regs: list[int], names, alpha: float):
    """OLS (or a selection rule) on each replicate's kept units; replicates with fewer than ``p + 2`` such
    units fail with a counted reason."""
    R = S.shape[0]
    need = len(regs) + 2
    ok = kept >= need
    coef = np.full((R, len(regs)), np.nan)
    se = coef.copy()
    vif = np.full(R, np.nan)
    sigma2 = np.full(R, np.nan)
    df = np.full(R, np.nan)
    selected = np.full(R, -1, dtype=np.int64)
    failed = ~ok
    reasons: Counter = Counter()
    if (~ok).any():
        where = "inside the restriction" if not f.match else "after matching"
        reasons[f"too few units {where} (fewer than {need})"] = int((~ok).sum())
    rows = np.flatnonzero(ok)
    if rows.size:
        if f.selection is not None:
            part = fit_selected(S[rows], kept[rows], y, regs[0], regs[1:], f.selection, alpha, names)
            selected[rows] = part.selected
        else:
            part = fit_crossproducts(S[rows], kept[rows], y, regs, names, wanted=_wanted(f))
        coef[rows], se[rows], vif[rows], sigma2[rows] = part.coef, part.se, part.vif, part.residual_variance
        df[rows] = part.df
        failed[rows] = part.failed
        reasons.update(part.reasons)
    return BatchFit(coef, se, df, failed, reasons, vif, sigma2, selected if f.selection is not None else None)


class _ChunkFitter:
    """The shared work of one chunk: masked cross-products per design, logistic fits per regressor set."""

    def __init__(self, plan: Plan, S, data, n: int, index: list[int], names, alpha: float):
        self.plan, self.source, self.data, self.n = plan, S, data, n
        self.index, self.names, self.alpha = index, names, alpha
        self.y = index[plan.outcome]
        self.masked = {}  # (restrict, match) -> (masked cross-products, rows kept)
        self.logits = {}  # (regressors, flexible) -> (design, LogitFit, tied knots)
        self.poissons = {}  # (regressors, flexible) -> (PoissonFit, tied knots)
        # the factor's columns the leading-set fits use, in one product
        if isinstance(S, FactoredCrossproducts):
            S.prepare([(self.y, [index[i] for i in f.regressors], _wanted(f)) for f in plan.fits if f.fixed])

    @property
    def S(self) -> np.ndarray:
        """The whole cross-product matrices (formed from the factors once, if the chunk holds factors)."""
        return self.source.full() if isinstance(self.source, FactoredCrossproducts) else self.source

    def ols(self, f: Fit):
        """The fit from cross-products: (BatchFit, units kept or None)."""
        regs = [self.index[i] for i in f.regressors]
        if f.masked:
            key = (f.restrict, f.match)
            if key not in self.masked:
                mask = design_mask(self.data, self.plan.exposure, f.restrict, f.match)
                self.masked[key] = masked_crossproducts(self.data, mask)
            fit_S, kept = self.masked[key]
            return _masked_fit(f, fit_S, kept, self.y, regs, self.names, self.alpha), kept
        if f.selection is not None:
            return fit_selected(
                self.S, self.n, self.y, regs[0], regs[1:], f.selection, self.alpha, self.names
            ), None
        if isinstance(self.source, FactoredCrossproducts):
            fit = self.source.fit(self.n, self.y, regs, _wanted(f))
            if fit is not None:
                return fit, None
        return fit_crossproducts(self.S, self.n, self.y, regs, self.names, wanted=_wanted(f)), None

    def rows(self) -> np.ndarray:
        """The chunk's data as (r, n, k) rows."""
        return self.data.transpose(0, 2, 1)

    def lpm(self, f: Fit, batch: BatchFit, reasons: Counter):
        """The linear probability model with HC3 SEs: (coef, se, failed)."""
        rows = self.rows()
        X = design_matrix(rows, self.plan.exposure, list(f.regressors[1:]))
        coef, se, hc3_failed = ols_hc3_batch(X, rows[:, :, self.plan.outcome])
        extra = hc3_failed & ~batch.failed
        if extra.any():
            reasons["HC3 SE undefined: a row with leverage 1"] += int(extra.sum())
        return coef[:, 1:], se[:, 1:], batch.failed | hc3_failed

    def poisson(self, f: Fit):
        """Poisson regression, sandwich (``poisson_robust``) or model-based SEs: (coef, se, failed, reasons)."""
        key = (f.regressors, f.flexible)
        if key not in self.poissons:  # both SE kinds with one set share a fit
            X, tied = self._design(f)
            self.poissons[key] = (fit_poisson_batch(X, self.rows()[:, :, self.plan.outcome]), tied)
        fit, tied = self.poissons[key]
        failed, reasons = _with_tied(fit.failed, fit.failure, tied)
        se = fit.se("classical" if f.kind == "poisson" else "robust")
        p = len(f.regressors) + 1  # the spline columns' coefficients come after the set's
        return fit.coef[:, 1:p], se[:, 1:p], failed, reasons

    def _design(self, f: Fit):
        """The design matrix of a logistic or Poisson fit: ``[1, exposure, *adjust]`` and, with
        ``flexible``, the spline columns (:func:`workbench.engine.splines.with_spline_columns`); and the
        replicates with tied knots (None without ``flexible``)."""
        X = design_matrix(self.rows(), self.plan.exposure, list(f.regressors[1:]))
        if not f.flexible:
            return X, None
        return with_spline_columns(X, self.data, f.regressors[1:], f.flexible)

    def logit(self, f: Fit):
        """Logistic regression, plain or standardised: (coef, se, failed, reasons)."""
        key = (f.regressors, f.flexible)
        if key not in self.logits:  # plain and standardised logit with one set share a fit
            X, tied = self._design(f)
            self.logits[key] = (X, fit_logit_batch(X, self.rows()[:, :, self.plan.outcome]), tied)
        X, fit, tied = self.logits[key]
        failed, reasons = _with_tied(fit.failed, fit.failure, tied)
        p = len(f.regressors) + 1  # the spline columns' coefficients come after the set's
        coef = fit.coef[:, 1:p]
        se = fit.se[:, 1:p]
        if f.kind == "logit_std":
            exposure_kind = "binary" if self.plan.binary_exposure else "continuous"
            est, est_se = standardized_contrast(fit, X, 1, exposure_kind=exposure_kind, scale=f.scale)
            coef = coef.copy()
            se = se.copy()
            coef[:, 0] = est
            se[:, 0] = est_se
        return coef, se, failed, reasons

    def interaction(self, f: Fit) -> FitResult:
        """OLS with exposure x covariate terms: the sample-averaged effect, delta-method SE (normal
        intervals, ``df = inf``), the adjustment set's coefficients for the ``also`` figures."""
        fit = fit_interactions(
            self.data, self.plan.exposure, f.regressors[1:], f.interactions, self.plan.outcome, self.names
        )
        coef = np.column_stack([fit.averaged, fit.adjusted])
        se = np.column_stack([fit.averaged_se, fit.adjusted_se])
        R = coef.shape[0]
        batch = BatchFit(coef, se, fit.df, fit.failed, Counter(fit.reasons), fit.vif)
        none = np.full(R, np.nan)
        result = _result(f, coef, se, fit.failed, Counter(fit.reasons), batch, none, np.full(R, -1), none)
        result.interaction_estimate = np.where(result.failed, np.nan, fit.coef[:, 1])
        result.interaction_se = np.where(result.failed, np.nan, fit.coef_se[:, 1])
        return result

    def flexible(self, f: Fit) -> FitResult:
        """OLS with restricted cubic spline columns for the flexible covariates (classical SEs, t
        intervals with the model's residual degrees of freedom)."""
        x, y = self.plan.exposure, self.plan.outcome
        batch = fit_flexible(self.data, x, f.regressors[1:], f.flexible, y, self.names)
        R = batch.coef.shape[0]
        df = np.broadcast_to(np.asarray(batch.df, dtype=float), (R,)).copy()
        none = np.full(R, np.nan)
        return _result(
            f, batch.coef, batch.se, batch.failed, Counter(batch.reasons), batch, df, np.full(R, -1), none
        )

    def fit(self, f: Fit) -> FitResult:
        """One fit of the plan on the chunk."""
        if f.kind == "ols_interaction":
            return self.interaction(f)
        if f.kind == "ols_flexible":
            return self.flexible(f)
        batch, kept = self.ols(f)
        R = self.source.shape[0]
        reasons = Counter(batch.reasons)
        if f.kind == "ols":
            coef, se, failed = batch.coef, batch.se, batch.failed
        elif f.kind in ("lpm", "ols_hc3"):
            coef, se, failed = self.lpm(f, batch, reasons)
        elif f.kind in ("poisson", "poisson_robust"):
            coef, se, failed, reasons = self.poisson(f)
        else:
            coef, se, failed, reasons = self.logit(f)
        return _result(
            f,
            coef,
            se,
            failed,
            reasons,
            batch,
            df=np.broadcast_to(np.asarray(batch.df, dtype=float), (R,)).copy(),
            selected=batch.selected if batch.selected is not None else np.full(R, -1, dtype=np.int64),
            retained=kept.astype(float) if kept is not None else np.full(R, np.nan),
        )


def _with_tied(failed: np.ndarray, failure: np.ndarray, tied: np.ndarray | None):
    """A fit's failures with the replicates whose spline knots tie added, and the reasons counted."""
    reasons = Counter(str(r) for r in failure[failed])
    if tied is None:
        return failed, reasons
    extra = int((tied & ~failed).sum())
    if extra:
        reasons["tied spline knots"] += extra
    return failed | tied, reasons


def _result(f: Fit, coef, se, failed, reasons: Counter, batch: BatchFit, df, selected, retained) -> FitResult:
    """A fit's results with non-finite exposure estimates or SEs counted as failures and failed replicates
    blanked (NaN)."""
    est = coef[:, 0]
    est_se = se[:, 0]
    bad = ~failed & ~(np.isfinite(est) & np.isfinite(est_se))
    if bad.any():
        reasons["non-finite estimate or SE"] += int(bad.sum())
        failed = failed | bad
    est = np.where(failed, np.nan, est)
    est_se = np.where(failed, np.nan, est_se)
    also_est = np.full((len(est), len(f.also)), np.nan)
    also_se = np.full((len(est), len(f.also)), np.nan)
    for a, pos in enumerate(f.also):
        if pos >= 0:
            also_est[:, a] = np.where(failed, np.nan, coef[:, pos])
            also_se[:, a] = np.where(failed, np.nan, se[:, pos])
    vif = np.where(failed, np.nan, batch.vif)
    return FitResult(est, est_se, also_est, also_se, vif, failed, reasons, df, selected, retained)


def fit_chunk(
    plan: Plan,
    S: np.ndarray,
    data: np.ndarray | None,
    n: int,
    index: list[int],
    names,
    alpha: float = 0.05,
) -> list[FitResult]:
    """Fit every fit of ``plan`` on one chunk of replicates.

    Parameters
    ----------
    plan : Plan
    S : ndarray or FactoredCrossproducts of shape (r, m, m)
        The chunk's centred cross-products.
    data : ndarray of shape (r, k, n) or None
        The rows, needed when some fit needs them (:attr:`Plan.needs_rows`).
    n : int
        Units per replicate.
    index : list of int
        For each variable (file order) its row of ``S``.
    names : list of str
        The names of the rows of ``S`` (for failure reasons).
    alpha : float
        Level of a selection rule's tests.

    Returns
    -------
    list of FitResult
        In the order of ``plan.fits``.
    """
    fitter = _ChunkFitter(plan, S, data, n, index, names, alpha)
    return [fitter.fit(f) for f in plan.fits]
