"""Drawing data: columns, latent marking, calibration of binary variables, reproducibility, interventions."""

from __future__ import annotations

import numpy as np
import pytest
from scipy import special

import workbench as wb
from workbench.engine.generate import (
    calibrate_intercepts,
    draw,
    draw_rows,
    evaluate,
    structure,
)
from workbench.engine.replicates import run_replicates
from workbench.engine.streams import block_seed


def build(variables, arrows, exposure, outcome, strategies=(("unadjusted", ()),), study=""):
    """A scenario from {name: table text} and (from, to, effect) triples."""
    text = f'title = "t"\n[question]\nexposure = "{exposure}"\noutcome = "{outcome}"\n'
    for name, body in variables.items():
        text += f"[variables.{name}]\n{body}\n"
    for a, b, e in arrows:
        text += f'[[arrows]]\nfrom = "{a}"\nto = "{b}"\neffect = {e!r}\n'
    for name, adjust in strategies:
        items = ", ".join(f'"{v}"' for v in adjust)
        text += f'[[strategies]]\nname = "{name}"\nadjust = [{items}]\n'
    return wb.loads_scenario(text + study)


BAKERY = build(
    {
        "oven_age": "observed = false",
        "night_shift": 'type = "binary"\nproportion = 0.3',
        "burnt_loaves": 'type = "binary"\nproportion = 0.1',
        "flour_cost": "baseline = 10.0\nnoise_sd = 2.0",
    },
    [
        ("oven_age", "night_shift", 1.2),
        ("oven_age", "burnt_loaves", 0.9),
        ("night_shift", "burnt_loaves", 0.7),
        ("burnt_loaves", "flour_cost", 1.5),
    ],
    "night_shift",
    "flour_cost",
)


def test_draw_columns_latent_and_types():
    df = draw(BAKERY, 300, seed=4)
    assert list(df.columns) == ["oven_age", "night_shift", "burnt_loaves", "flour_cost"]
    assert df.attrs["latent"] == ["oven_age"]
    assert set(np.unique(df["night_shift"])) <= {0.0, 1.0}
    assert set(np.unique(df["burnt_loaves"])) <= {0.0, 1.0}
    assert df.shape == (300, 4)


def test_draw_is_reproducible_and_seed_dependent():
    a = draw(BAKERY, 100, seed=11)
    b = draw(BAKERY, 100, seed=11)
    c = draw(BAKERY, 100, seed=12)
    assert a.equals(b)
    assert not a.equals(c)


def test_draw_matches_replicate_zero_of_the_raw_engine():
    sc = build({"a": "", "b": ""}, [("a", "b", 0.5)], "a", "b")
    df = draw(sc, 40, seed=9)
    arrays = run_replicates(sc, 40, 3, seed=9, engine="raw")
    x, y = df["a"].to_numpy(), df["b"].to_numpy()
    slope = np.cov(x, y)[0, 1] / np.var(x, ddof=1)
    assert arrays.estimate[0, 0] == pytest.approx(slope, rel=1e-10)


def test_calibrated_shares_match_the_proportions():
    """The intercepts give each binary variable its population share of 1s (within Monte Carlo error)."""
    intercepts = calibrate_intercepts(BAKERY)
    assert set(intercepts) == {"night_shift", "burnt_loaves"}
    rows = draw_rows(BAKERY, 20000, 5, np.random.default_rng(1)).reshape(-1, 4)
    shares = rows[:, 1:3].mean(axis=0)
    # 100,000 rows: SE of a share <= 0.0016
    assert shares[0] == pytest.approx(0.3, abs=0.006)
    assert shares[1] == pytest.approx(0.1, abs=0.005)


def test_calibration_is_deterministic_and_cached():
    first = calibrate_intercepts(BAKERY)
    again = calibrate_intercepts(BAKERY.replace(title="another title"))
    assert first == again
    assert hash(BAKERY) == hash(BAKERY)  # frozen and hashable: usable as a cache key
    assert structure(BAKERY) is structure(BAKERY)


def test_root_binary_intercept_is_the_logit():
    sc = build(
        {"promo": 'type = "binary"\nproportion = 0.2', "sales": ""},
        [("promo", "sales", 1.0)],
        "promo",
        "sales",
    )
    assert calibrate_intercepts(sc)["promo"] == pytest.approx(np.log(0.2 / 0.8), abs=1e-12)
    z = np.random.default_rng(5).standard_normal((100_000, 2))
    values = evaluate(sc, z)
    np.testing.assert_array_equal(values[:, 0], (special.ndtr(z[:, 0]) < 0.2).astype(float))
    assert values[:, 0].mean() == pytest.approx(0.2, abs=0.005)


def test_evaluate_interventions_recompute_descendants():
    sc = build({"a": "", "m": "", "y": ""}, [("a", "m", 2.0), ("m", "y", 3.0), ("a", "y", 1.0)], "a", "y")
    z = np.random.default_rng(0).standard_normal((5, 3))
    natural = evaluate(sc, z)
    shifted = evaluate(sc, z, intervention=("shift", 1.0))
    assert np.allclose(shifted[:, 2] - natural[:, 2], 7.0)  # 1 + 2 x 3
    fixed = evaluate(sc, z, intervention=("set", 0.0))
    assert np.allclose(fixed[:, 0], 0.0)
    assert np.allclose(fixed[:, 1], z[:, 1])


def test_evaluate_in_place_equals_copy():
    z = np.random.default_rng(3).standard_normal((2, 4, 50))
    copy = evaluate(BAKERY, z.copy(), axis=1)
    evaluate(BAKERY, z, axis=1, out=z)
    assert np.array_equal(copy, z)


def test_block_seed_is_the_spawned_child():
    child = np.random.SeedSequence(42).spawn(4)[3]
    assert np.random.default_rng(block_seed(42, 3)).random() == np.random.default_rng(child).random()


def test_draw_rejects_bad_n():
    with pytest.raises(wb.SimulationError, match="n: must be an integer of at least 1, got 0"):
        draw(BAKERY, 0)
