"""Scenario files: every broken-file case of issue 2 section 3 gives one line naming the place; round trips."""

from __future__ import annotations

import string
import warnings

import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from workbench import load_scenario, loads_scenario, scenario_from_dict
from workbench.errors import ScenarioError
from workbench.scenario.constraints import MAX_ARROWS, MAX_VARIABLES, check_setting
from workbench.scenario.write import dumps_scenario

BASE = """title = "Drip irrigation and harvest"
[question]
exposure = "irrigation"
outcome = "harvest"
[variables.rainfall]
label = "Season rainfall (z-score)"
[variables.irrigation]
[variables.harvest]
[[arrows]]
from = "rainfall"
to = "irrigation"
effect = -0.8
[[arrows]]
from = "rainfall"
to = "harvest"
effect = 0.5
[[arrows]]
from = "irrigation"
to = "harvest"
effect = 0.3
"""


def _edit(old: str, new: str) -> str:
    assert old in BASE
    return BASE.replace(old, new, 1)


def _many_variables(k: int) -> str:
    return BASE + "".join(f"[variables.v{i}]\n" for i in range(k))


def _many_arrows(total: int) -> str:
    """BASE (3 arrows) with arrows among 21 more variables, ``total`` arrows in all."""
    names = [f"v{i}" for i in range(21)]
    pairs = [(a, b) for i, a in enumerate(names) for b in names[i + 1 :]][: total - 3]
    arrows = "".join(f'[[arrows]]\nfrom = "{a}"\nto = "{b}"\neffect = 0.1\n' for a, b in pairs)
    return _many_variables(21) + arrows


STRATEGY = '[[strategies]]\nname = "s"\nadjust = [{}]\n'

# id: (text, place the message starts with, words the message contains)
BROKEN = {
    "unknown top-level key": ('titel = "x"\n' + BASE, "titel", "did you mean 'title'"),
    "unknown variable key": (
        _edit("[variables.rainfall]", "[variables.rainfall]\nnoise_s = 1.0"),
        "variables.rainfall.noise_s",
        "did you mean 'noise_sd'",
    ),
    "unknown study key": (BASE + "[study]\nreplicate = 10\n", "study.replicate", "did you mean 'replicates'"),
    "wrong type: effect": (_edit("effect = 0.3", 'effect = "big"'), "arrows[3].effect", "must be a number"),
    "wrong type: observed": (
        _edit("[variables.rainfall]", '[variables.rainfall]\nobserved = "no"'),
        "variables.rainfall.observed",
        "true or false",
    ),
    "wrong type: n": (BASE + "[study]\nn = 2.5\n", "study.n", "must be an integer"),
    "wrong type: title": (_edit('title = "Drip irrigation and harvest"', "title = 3"), "title", "string"),
    "non-finite effect": (_edit("effect = 0.3", "effect = inf"), "arrows[3].effect", "finite"),
    "unknown arrow end": (
        _edit('to = "irrigation"', 'to = "rainfal"'),
        "arrows[1].to",
        "unknown variable 'rainfal' (did you mean 'rainfall'?)",
    ),
    "cycle": (
        BASE + '[[arrows]]\nfrom = "harvest"\nto = "rainfall"\neffect = 0.1\n',
        "arrows",
        "cycle: rainfall -> irrigation -> harvest -> rainfall",
    ),
    "self-arrow": (
        BASE + '[[arrows]]\nfrom = "harvest"\nto = "harvest"\neffect = 0.1\n',
        "arrows[4]",
        "itself",
    ),
    "duplicate arrow": (
        BASE + '[[arrows]]\nfrom = "rainfall"\nto = "harvest"\neffect = 0.1\n',
        "arrows[4]",
        "duplicate arrow rainfall -> harvest (also arrows[2])",
    ),
    "exposure equals outcome": (
        _edit('outcome = "harvest"', 'outcome = "irrigation"'),
        "question.outcome",
        "must differ from the exposure",
    ),
    "missing exposure": (_edit('exposure = "irrigation"\n', ""), "question.exposure", "missing"),
    "missing outcome": (_edit('outcome = "harvest"\n', ""), "question.outcome", "missing"),
    "unknown exposure": (
        _edit('exposure = "irrigation"', 'exposure = "irigation"'),
        "question.exposure",
        "did you mean 'irrigation'",
    ),
    "latent exposure": (
        _edit("[variables.irrigation]", "[variables.irrigation]\nobserved = false"),
        "question.exposure",
        "latent",
    ),
    "adjust names the exposure": (
        BASE + STRATEGY.format('"irrigation"'),
        "strategies[1].adjust[1]",
        "exposure",
    ),
    "adjust names the outcome": (BASE + STRATEGY.format('"harvest"'), "strategies[1].adjust[1]", "outcome"),
    "adjust names a latent variable": (
        _edit("[variables.rainfall]", "[variables.rainfall]\nobserved = false")
        + STRATEGY.format('"rainfall"'),
        "strategies[1].adjust[1]",
        "latent",
    ),
    "adjust names an unknown variable": (
        BASE + STRATEGY.format('"rainfal"'),
        "strategies[1].adjust[1]",
        "unknown variable 'rainfal' (did you mean 'rainfall'?)",
    ),
    "proportion above 1": (
        _edit("[variables.rainfall]", '[variables.rainfall]\ntype = "binary"\nproportion = 1.2'),
        "variables.rainfall.proportion",
        "between 0 and 1",
    ),
    "proportion 0": (
        _edit("[variables.rainfall]", '[variables.rainfall]\ntype = "binary"\nproportion = 0.0'),
        "variables.rainfall.proportion",
        "between 0 and 1",
    ),
    "negative noise_sd": (
        _edit("[variables.rainfall]", "[variables.rainfall]\nnoise_sd = -1.0"),
        "variables.rainfall.noise_sd",
        ">= 0",
    ),
    "direct target with a binary outcome": (
        _edit("[variables.harvest]", '[variables.harvest]\ntype = "binary"\nproportion = 0.3').replace(
            'outcome = "harvest"', 'outcome = "harvest"\ntarget = "direct"'
        ),
        "question.target",
        "continuous outcome",
    ),
    "log odds ratio with a continuous outcome": (
        _edit('outcome = "harvest"', 'outcome = "harvest"\nscale = "log_odds_ratio"'),
        "question.scale",
        "binary outcome",
    ),
    "logit with a continuous outcome": (
        BASE + '[[strategies]]\nname = "s"\nmodel = "logit"\n',
        "strategies[1].model",
        "binary outcome",
    ),
    "too many variables": (_many_variables(MAX_VARIABLES - 2), "variables", f"at most {MAX_VARIABLES}"),
    "too many arrows": (_many_arrows(MAX_ARROWS + 1), "arrows", f"at most {MAX_ARROWS} arrows, got 201"),
    "n too small for the largest strategy": (
        BASE + '[[strategies]]\nname = "small"\n[[strategies]]\nname = "wide"\nadjust = ["rainfall"]\n'
        "[study]\nn = 4\n",
        "study.n",
        "too small for strategy 'wide' (3 coefficients); n must be at least 5",
    ),
    "planned size too small": (
        BASE + "[study]\nsample_sizes = [100, 4]\n",
        "study.sample_sizes",
        "too small",
    ),
    "replicates 0": (
        BASE + "[study]\nreplicates = 0\n",
        "study.replicates",
        "must be an integer from 1 to 1,000,000, got 0",
    ),
    "replicates above a million": (
        BASE + "[study]\nreplicates = 1000001\n",
        "study.replicates",
        "must be an integer from 1 to 1,000,000, got 1000001",
    ),
    "alpha 0": (BASE + "[study]\nalpha = 0.0\n", "study.alpha", "(0, 0.5]"),
    "alpha above 0.5": (BASE + "[study]\nalpha = 0.7\n", "study.alpha", "(0, 0.5]"),
    "n 0": (BASE + "[study]\nn = 0\n", "study.n", "must be an integer of at least 1, got 0"),
    "negative seed": (
        BASE + "[study]\nseed = -1\n",
        "study.seed",
        "must be an integer of at least 0, got -1",
    ),
    "planned size 0": (
        BASE + "[study]\nsample_sizes = [100, 0]\n",
        "study.sample_sizes[2]",
        "must be an integer of at least 1, got 0",
    ),
    "planned size not an integer": (
        BASE + '[study]\nsample_sizes = [100, "many"]\n',
        "study.sample_sizes[2]",
        "must be an integer of at least 1, got 'many'",
    ),
    "target power 1": (
        BASE + "[study]\ntarget_power = 1.0\n",
        "study.target_power",
        "must be a number in (0, 1), got 1.0",
    ),
    "target half-width 0": (
        BASE + "[study]\ntarget_halfwidth = 0.0\n",
        "study.target_halfwidth",
        "must be a number greater than 0, got 0.0",
    ),
    "bad variable name": (
        _edit("[variables.harvest]", '[variables.harvest]\n[variables."2x"]'),
        "variables.2x",
        "a letter",
    ),
    "empty strategy list": ("strategies = []\n" + BASE, "strategies", "remove the key"),
}


@pytest.mark.parametrize("case", sorted(BROKEN))
def test_broken_file_gives_one_line_naming_the_place(case):
    """Issue 2 section 3: each broken file raises ScenarioError with one line, 'place: problem'."""
    text, place, words = BROKEN[case]
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        with pytest.raises(ScenarioError) as info:
            loads_scenario(text)
    message = str(info.value)
    assert "\n" not in message
    assert message.startswith(place), message
    assert info.value.where.startswith(place)
    assert words in message, message


@pytest.mark.parametrize(
    "key, value",
    [
        ("n", 0),
        ("replicates", 0),
        ("seed", -3),
        ("alpha", 0.9),
        ("target_power", 0.0),
        ("target_halfwidth", -1.0),
    ],
)
def test_study_settings_share_the_one_rule_and_message(key, value):
    """A bad ``[study]`` setting gives exactly the message of ``check_setting`` for ``study.<key>``, the one
    rule the library, the command line and the dashboard use too (common practice, no source)."""
    with pytest.raises(ScenarioError) as expected:
        check_setting(key, value, where=f"study.{key}")
    with pytest.raises(ScenarioError) as info:
        loads_scenario(BASE + f"[study]\n{key} = {value!r}\n")
    assert str(info.value) == str(expected.value)


def test_alpha_one_half_is_allowed():
    """The upper end of (0, 0.5] is included."""
    assert loads_scenario(BASE + "[study]\nalpha = 0.5\n").study.alpha == 0.5


def test_toml_syntax_error_names_file_line_and_column(tmp_path):
    """A TOML syntax error names the file, the line and the column, in one line."""
    path = tmp_path / "drip.toml"
    path.write_text(_edit("effect = 0.3", "effect = = 0.3"), encoding="utf-8")
    with pytest.raises(ScenarioError) as info:
        load_scenario(path)
    message = str(info.value)
    assert "\n" not in message
    line = BASE.splitlines().index("effect = 0.3") + 1
    assert message.startswith(f"{path}: line {line}, column 10: TOML syntax error"), message


def test_errors_in_a_file_name_the_file(tmp_path):
    """Validation errors of a file are prefixed with its path; a missing file says so."""
    path = tmp_path / "drip.toml"
    path.write_text(_edit('to = "irrigation"', 'to = "rainfal"'), encoding="utf-8")
    with pytest.raises(ScenarioError, match=r"drip\.toml: arrows\[1\]\.to: unknown variable 'rainfal'"):
        load_scenario(str(path))
    with pytest.raises(ScenarioError, match="no such file"):
        load_scenario(tmp_path / "absent.toml")


def test_limits_themselves_are_allowed():
    """Exactly 40 variables and exactly 200 arrows load."""
    sc = loads_scenario(_many_variables(MAX_VARIABLES - 3) + '[[strategies]]\nname = "u"\n')
    assert len(sc.variables) == MAX_VARIABLES
    sc = loads_scenario(_many_arrows(MAX_ARROWS) + '[[strategies]]\nname = "u"\n')
    assert len(sc.arrows) == MAX_ARROWS


# --------------------------------------------------------------------------------------------------------
# Round trip
# --------------------------------------------------------------------------------------------------------
NAMES = st.text(string.ascii_lowercase, min_size=1, max_size=6).map(lambda s: "v_" + s)
FINITE = st.floats(min_value=-1e6, max_value=1e6, allow_nan=False, allow_infinity=False)
LABEL = st.none() | st.text(max_size=20).filter(str.isprintable)  # control characters are refused


@st.composite
def scenario_dicts(draw):
    """Random valid scenario documents with up to six variables and an acyclic graph (arrows only from an
    earlier to a later variable)."""
    names = draw(st.lists(NAMES, min_size=2, max_size=6, unique=True))
    k = len(names)
    exposure_index, outcome_index = draw(
        st.tuples(st.integers(0, k - 1), st.integers(0, k - 1)).filter(lambda t: t[0] != t[1])
    )
    exposure, outcome = names[exposure_index], names[outcome_index]
    variables = {}
    for name in names:
        table = {}
        if draw(st.booleans()):
            table["type"] = "binary"
            table["proportion"] = draw(st.floats(min_value=0.01, max_value=0.99))
        else:
            if draw(st.booleans()):
                table["type"] = "continuous"
            if draw(st.booleans()):
                table["noise_sd"] = draw(st.floats(min_value=0.1, max_value=100.0))
            if draw(st.booleans()):
                table["baseline"] = draw(FINITE)
        if name not in (exposure, outcome) and draw(st.booleans()):
            table["observed"] = False
        label = draw(LABEL)
        if label is not None:
            table["label"] = label
        if draw(st.booleans()):
            table["position"] = [draw(FINITE), draw(FINITE)]
        variables[name] = table
    arrows = []
    for i in range(k):
        for j in range(i + 1, k):
            if draw(st.booleans()):
                arrows.append({"from": names[i], "to": names[j], "effect": draw(FINITE)})
    outcome_binary = variables[outcome].get("type") == "binary"
    question = {"exposure": exposure, "outcome": outcome}
    if outcome_binary:
        question["scale"] = draw(st.sampled_from(["difference", "log_odds_ratio"]))
    else:
        question["target"] = draw(st.sampled_from(["total", "direct"]))
    adjustable = [n for n in names if n not in (exposure, outcome) and variables[n].get("observed", True)]
    doc = {
        "title": draw(st.text(string.ascii_letters + " ", min_size=1, max_size=30).filter(str.strip)),
        "question": question,
        "variables": variables,
        "arrows": arrows,
    }
    if draw(st.booleans()):
        doc["summary"] = draw(st.text(max_size=60).filter(lambda s: s.replace("\n", "").isprintable()))
    if draw(st.booleans()):  # else the default strategies are filled in from the graph
        strategies = []
        for index in range(draw(st.integers(1, 3))):
            adjust = draw(st.lists(st.sampled_from(adjustable), unique=True)) if adjustable else []
            table = {"name": f"strategy_{index + 1}", "adjust": adjust}
            if outcome_binary and draw(st.booleans()):
                table["model"] = "logit"
                table["standardize"] = draw(st.booleans())
            strategies.append(table)
        doc["strategies"] = strategies
    if draw(st.booleans()):
        doc["study"] = {
            "n": draw(st.integers(20, 10_000)),
            "replicates": draw(st.integers(1, 1_000_000)),
            "seed": draw(st.integers(0, 2**63 - 1)),
            "alpha": draw(st.floats(min_value=1e-6, max_value=0.5)),
            "sample_sizes": draw(st.lists(st.integers(20, 100_000), min_size=1, max_size=8)),
            "target_power": draw(st.floats(min_value=0.01, max_value=0.99)),
        }
        if draw(st.booleans()):
            doc["study"]["target_halfwidth"] = draw(st.floats(min_value=1e-6, max_value=1e6))
    return doc


@settings(max_examples=60, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(scenario_dicts())
def test_round_trip_of_random_scenarios(doc):
    """Any valid scenario written with dumps_scenario loads back to an equal scenario, and writing it again
    gives the same text (issue 2 section 2; property test, no outside source)."""
    scenario = scenario_from_dict(doc)
    text = dumps_scenario(scenario)
    again = loads_scenario(text)
    assert again == scenario
    assert dumps_scenario(again) == text
