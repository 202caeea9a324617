"""The exact engine's Bartlett factors formed column by column (issue 12): the same numbers as the definition.

Sources: the Bartlett decomposition W = L A A^T L^T (Bartlett 1933; Anderson 2003, sec. 7.2, from memory),
with A lower triangular, sqrt(chi-square(df - i)) on the diagonal and standard normals below it in the stream
order documented by ``bartlett_draws``; OLS slope, classical SE, residual variance and VIF from statsmodels
(``OLS`` and ``variance_inflation_factor``) on a dataset whose centred cross-products are exactly W.
"""

from __future__ import annotations

import numpy as np
import pytest
import statsmodels.api as sm
from statsmodels.stats.outliers_influence import variance_inflation_factor

from workbench.engine.factored import FactoredCrossproducts
from workbench.engine.wishart import bartlett_draws, bartlett_factors, square_root


def _sigma(k: int, seed: int) -> np.ndarray:
    rng = np.random.default_rng(seed)
    M = rng.standard_normal((k, k))
    return M @ M.T / k + np.eye(k)


def _definition(L, chi, normals):
    """U = (L A)^T per replicate, A built entry by entry (a plain loop: the reference, not the engine)."""
    size, k = chi.shape
    out = np.empty((size, k, k))
    for r in range(size):
        A = np.zeros((k, k))
        t = 0
        for i in range(k):
            for j in range(i):
                A[i, j] = normals[r, t]
                t += 1
            A[i, i] = np.sqrt(chi[r, i])
        out[r] = (L @ A).T
    return out


def _draws(k: int, size: int, seed: int, df: int = 60):
    sigma = _sigma(k, seed)
    chi, normals = bartlett_draws(k, df, size, np.random.default_rng(seed))
    return square_root(sigma), chi, normals


@pytest.mark.parametrize("k", [1, 2, 5, 12])
def test_columns_match_the_bartlett_definition(k):
    """Bartlett (1933): every column formed on demand is the column of (L A)^T."""
    L, chi, normals = _draws(k, 7, seed=k)
    reference = _definition(L, chi, normals)
    factor = bartlett_factors(L, chi, normals)
    assert np.allclose(factor.upper(), reference, rtol=1e-12, atol=1e-12)
    cols = [k - 1, 0] if k > 1 else [0]
    assert np.allclose(factor.columns(cols), reference[:, :, cols], rtol=1e-12, atol=1e-12)
    assert np.allclose(factor.diagonal(), np.diagonal(reference, axis1=1, axis2=2), rtol=1e-12)
    W = np.matmul(reference.transpose(0, 2, 1), reference)
    assert np.allclose(FactoredCrossproducts(factor).full(), W, rtol=1e-12)


def test_lazy_factor_gives_the_same_fits_as_the_whole_factor():
    """The column-by-column factor and the whole factor give the same fits (common practice, no source:
    two routes to one formula must agree to round-off), on leading and other adjustment sets."""
    k = 10
    L, chi, normals = _draws(k, 40, seed=3, df=80)
    lazy = FactoredCrossproducts(bartlett_factors(L, chi, normals))
    dense = FactoredCrossproducts(_definition(L, chi, normals))
    x, y = 8, 9
    for adjust in ([], [0, 1, 2, 3, 4, 5, 6, 7], [0, 1, 2], [1, 4, 6], [7, 2]):
        for wanted in ([0], [0, 1] if adjust else [0]):
            a = lazy.fit(81, y, [x, *adjust], wanted)
            b = dense.fit(81, y, [x, *adjust], wanted)
            for name in ("coef", "se", "vif", "residual_variance"):
                assert np.allclose(getattr(a, name), getattr(b, name), rtol=1e-11, equal_nan=True), name
    assert np.allclose(lazy.block([9, 2, 5]), dense.block([9, 2, 5]), rtol=1e-12)


@pytest.mark.parametrize("tolerance", [1e-10, 1e-5, 1e-3, 0.05, 0.3])
def test_pivot_bound_never_changes_the_decision(tolerance):
    """The Cauchy-Schwarz bound ||L_j A||^2 <= ||L_j||^2 ||A||_F^2 only skips work: the leading-set shortcut is
    taken exactly when every pivot exceeds the tolerance times its variable's sum of squares (the sweep's
    rule, Goodnight 1979), with near-collinear covariates so that the bound is not always enough."""
    k = 6
    sigma = _sigma(k, 5)
    sigma[1, 1] = sigma[0, 1] ** 2 / sigma[0, 0] + 1e-3  # variable 1 nearly a multiple of variable 0
    L = square_root(sigma)
    chi, normals = bartlett_draws(k, 30, 25, np.random.default_rng(9))
    lazy = FactoredCrossproducts(bartlett_factors(L, chi, normals))
    U = _definition(L, chi, normals)
    W = np.matmul(U.transpose(0, 2, 1), U)
    a = 3
    pivots = np.diagonal(U, axis1=1, axis2=2)[:, :a] ** 2
    exact = bool((pivots > tolerance * np.diagonal(W, axis1=1, axis2=2)[:, :a]).all())
    fast = lazy.leading_fit(31, 5, [4, 0, 1, 2], tolerance)
    residual_ok = bool(((U[:, a:, 4] ** 2).sum(axis=1) > tolerance * W[:, 4, 4]).all())  # x's own pivot
    assert (fast is not None) == (exact and residual_ok)


def _data_with_crossproducts(W: np.ndarray, n: int, rng) -> np.ndarray:
    """Rows whose centred cross-product matrix is exactly ``W``: X = mean + Q chol(W)^T with Q orthonormal
    columns orthogonal to the ones vector (common practice, no source)."""
    k = W.shape[0]
    Z = rng.standard_normal((n, k))
    Z -= Z.mean(axis=0)
    Q, _ = np.linalg.qr(Z)
    return 3.0 + Q @ np.linalg.cholesky(W).T


def test_exposure_fit_matches_statsmodels_on_data_with_those_crossproducts():
    """statsmodels OLS (slope, classical SE, residual variance) and variance_inflation_factor on rows
    whose centred cross-products are the drawn W, for a leading set and a scattered one."""
    k, n = 7, 45
    L, chi, normals = _draws(k, 3, seed=11, df=n - 1)
    lazy = FactoredCrossproducts(bartlett_factors(L, chi, normals))
    W = lazy.full()
    rng = np.random.default_rng(2)
    x, y = 5, 6
    for adjust in ([0, 1, 2, 3, 4], [1, 3], []):
        fit = lazy.fit(n, y, [x, *adjust], [0])
        for r in range(3):
            rows = _data_with_crossproducts(W[r], n, rng)
            exog = sm.add_constant(rows[:, [x, *adjust]], has_constant="add")
            ref = sm.OLS(rows[:, y], exog).fit()
            assert fit.coef[r, 0] == pytest.approx(ref.params[1], rel=1e-9)
            assert fit.se[r, 0] == pytest.approx(ref.bse[1], rel=1e-9)
            assert fit.residual_variance[r] == pytest.approx(ref.scale, rel=1e-9)
            vif = variance_inflation_factor(exog, 1) if adjust else 1.0
            assert fit.vif[r] == pytest.approx(vif, rel=1e-9)


def test_semi_definite_scale_takes_the_whole_factor():
    """A singular Sigma has no Cholesky factor; the eigen square root is not triangular, so the factor is
    formed whole and W is still L A A^T L^T (Bartlett 1933)."""
    sigma = np.array([[1.0, 1.0, 0.0], [1.0, 1.0, 0.0], [0.0, 0.0, 2.0]])
    L = square_root(sigma)
    chi, normals = bartlett_draws(3, 20, 4, np.random.default_rng(1))
    factor = bartlett_factors(L, chi, normals)
    assert not factor.triangular
    U = _definition(L, chi, normals)
    W = FactoredCrossproducts(factor).full()
    assert np.allclose(W, np.matmul(U.transpose(0, 2, 1), U), rtol=1e-12, atol=1e-12)


def _chain_scenario() -> str:
    """Ten covariates (every other one a cause of the exposure), exposure x, outcome y; three strategies:
    none, a scattered set and every covariate (a leading set in the engine's order)."""
    covariates = [f"c{i}" for i in range(10)]
    lines = ['title = "Conveyor sensors"', "[question]", 'exposure = "x"', 'outcome = "y"']
    lines += [f"[variables.{name}]" for name in [*covariates, "x", "y"]]
    arrows = [(c, "y", 0.1 * (i % 4 - 1.5)) for i, c in enumerate(covariates)]
    arrows += [(c, "x", 0.3) for c in covariates[::2]] + [("c3", "c4", 0.5), ("x", "y", 0.5)]
    for a, b, e in arrows:
        lines += ["[[arrows]]", f'from = "{a}"', f'to = "{b}"', f"effect = {e}"]
    for name, adjust in (("none", []), ("some", ["c0", "c4", "c7"]), ("all", covariates)):
        lines += [
            "[[strategies]]",
            f'name = "{name}"',
            "adjust = [" + ", ".join(f'"{c}"' for c in adjust) + "]",
        ]
    return "\n".join(lines) + "\n"


def test_same_numbers_whatever_the_chunk_size_with_scattered_sets():
    """Chunks are only a matter of memory (the engine's reproducibility rule; common practice, no source):
    the columns formed per chunk give bit-identical results at any chunk size."""
    import workbench as wb
    from workbench.engine.replicates import run_replicates

    sc = wb.loads_scenario(_chain_scenario())
    runs = [run_replicates(sc, 90, 750, seed=8, engine="exact", chunk_size=c) for c in (250, 500, 10_000)]
    for other in runs[1:]:
        for name in ("estimate", "se", "p_value", "vif"):
            np.testing.assert_array_equal(getattr(runs[0], name), getattr(other, name))


def test_groups_of_replicates_give_the_same_fit(monkeypatch):
    """A scattered set fitted a group of replicates at a time equals the fit of the whole factor at once
    (common practice, no source), with a common and a per-replicate number of rows."""
    import workbench.engine.factored as factored

    k = 9
    L, chi, normals = _draws(k, 70, seed=6, df=50)
    dense = FactoredCrossproducts(_definition(L, chi, normals))
    monkeypatch.setattr(factored, "GROUP_BYTES", 1)  # the smallest group, 16 replicates
    lazy = FactoredCrossproducts(bartlett_factors(L, chi, normals))
    rows = np.arange(70) % 5 + 45
    for n in (51, rows):
        a = lazy.fit(n, 8, [6, 1, 4, 2], [0, 2])
        b = dense.fit(n, 8, [6, 1, 4, 2], [0, 2])
        for name in ("coef", "se", "vif", "residual_variance"):
            assert np.allclose(getattr(a, name), getattr(b, name), rtol=1e-11, equal_nan=True), name
        assert np.array_equal(np.broadcast_to(a.df, (70,)), np.broadcast_to(b.df, (70,)))
