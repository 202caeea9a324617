"""Reading non-normal and heteroskedastic noise (``noise``, ``noise_df``, ``spread_with``), with their rules.

A continuous variable's disturbance is ``noise_sd x S x E``: ``E`` has mean 0 and SD 1 and its law is
``noise`` (``"normal"``, ``"heavy_tailed"``: a Student t with ``noise_df`` degrees of freedom scaled by
``sqrt((df - 2) / df)``, ``"skewed"``: a standardised lognormal, skewness about 1.75); ``S = exp(sum c x z)``
for ``spread_with = { covariate = c }``, ``z`` the covariate's standardised value
(:mod:`workbench.engine.noise` generates the data and says how ``z`` is standardised).

The rules, each refused with one located line (``variables.delay.spread_with.distance: ...``):

- the keys apply to continuous variables only; ``noise`` is one of the three laws; ``noise_df`` goes with
  ``noise = "heavy_tailed"`` only and lies in (2, 10^6] (a t with 2 or fewer degrees of freedom has no finite
  SD);
- a covariate of ``spread_with`` is a variable of the graph (observed or latent, continuous or binary), not the
  variable itself, with a finite coefficient of at most :data:`MAX_SPREAD` in size (``exp(3 x 3)`` already
  multiplies the SD by 8,000 at three SDs of the covariate);
- a covariate is a direct cause of the variable (an arrow ``covariate -> variable``, ``effect = 0`` when it has
  no effect of its own), so the graph shows the dependence; one that descends from the variable is refused
  first, by name (it would make a cycle);
- ``spread_with`` is not combined with ``r_squared`` on the same variable, nor with a ``standardized_effect``
  into it (the conversions assume a constant noise SD). A binary or count variable below such noise is
  calibrated from the full equations.

Examples
--------
>>> read_noise({"noise": "heavy_tailed"}, "variables.delay", ["distance", "delay"], "delay")
('heavy_tailed', 5.0, ())
>>> read_noise({"spread_with": {"distance": 0.5}}, "variables.delay", ["distance", "delay"], "delay")
('normal', None, (('distance', 0.5),))
>>> read_noise({"noise_df": 4}, "variables.delay", ["distance", "delay"], "delay")
Traceback (most recent call last):
...
workbench.errors.ScenarioError: variables.delay.noise_df: applies to noise = "heavy_tailed" only, not "normal"
"""

from __future__ import annotations

from workbench.errors import ScenarioError, shown
from workbench.scenario.fields import choice, get_field, known_name, place_of
from workbench.scenario.limits import MAX_MAGNITUDE, check_magnitude
from workbench.scenario.parse_modifiers import descendants

__all__ = [
    "NOISE_KEYS",
    "NOISE_LAWS",
    "MAX_SPREAD",
    "DEFAULT_DF",
    "read_noise",
    "refuse_on_binary",
    "check_noise",
]

NOISE_KEYS = ("noise", "noise_df", "spread_with")
NOISE_LAWS = ("normal", "heavy_tailed", "skewed")
MAX_SPREAD = 3.0
DEFAULT_DF = 5.0


def read_noise(table: dict, where: str, names, name: str) -> tuple[str, float | None, tuple]:
    """A continuous variable's ``(noise, noise_df, spread_with)`` as the file gave them (module notes).

    Parameters
    ----------
    table : dict
        The variable's table.
    where : str
        Its place (``variables.delay``).
    names : sequence of str
        The variables of the graph.
    name : str
        The variable's own name.
    """
    law = choice(get_field(table, "noise", "str", where, "normal"), NOISE_LAWS, f"{where}.noise")
    df = None
    if "noise_df" in table:
        place = f"{where}.noise_df"
        if law != "heavy_tailed":
            raise ScenarioError(f'applies to noise = "heavy_tailed" only, not "{law}"', where=place)
        df = float(get_field(table, "noise_df", "number", where))
        if not 2.0 < df <= MAX_MAGNITUDE:
            raise ScenarioError(
                f"must be > 2 and at most {MAX_MAGNITUDE:g} (a t with df <= 2 has no finite SD), got {shown(df)}",
                where=place,
            )
    elif law == "heavy_tailed":
        df = DEFAULT_DF
    spec = get_field(table, "spread_with", "table", where, None)
    spread = []
    for covariate, value in (spec or {}).items():
        place = place_of(f"{where}.spread_with", covariate)
        known_name(covariate, list(names), place)
        if covariate == name:
            raise ScenarioError(
                f"'{name}' is the variable itself; a covariate is another variable", where=place
            )
        number = get_field({covariate: value}, covariate, "number", f"{where}.spread_with")
        spread.append((covariate, float(check_magnitude(number, place, MAX_SPREAD))))
    return law, df, tuple(spread)


def refuse_on_binary(table: dict, where: str, kind: str = "binary") -> None:
    """Refuse the noise keys on a binary (or count) variable, located at the first one given."""
    setting = "'proportion'" if kind == "binary" else "'rate' and its causes (Poisson)"
    for key in NOISE_KEYS:
        if key in table:
            raise ScenarioError(
                f"applies to continuous variables only; a {kind} variable is set by {setting}",
                where=f"{where}.{key}",
            )


def check_noise(variables, arrows) -> None:
    """The graph rules of every variable with non-normal or spread noise (module notes), after the arrows are
    known to form no cycle."""
    for v in variables:
        if v.noise == "normal" and not v.spread_with:
            continue
        where = f"variables.{v.name}"
        below = descendants(v.name, arrows)
        causes = {a.source for a in arrows if a.target == v.name}
        if v.spread_with and v.r_squared is not None:
            raise ScenarioError(
                "spread_with cannot be combined with r_squared (the conversion assumes a constant noise SD); "
                "give noise_sd",
                where=f"{where}.spread_with",
            )
        if v.spread_with and any(a.standardized is not None for a in arrows if a.target == v.name):
            raise ScenarioError(
                "spread_with needs the arrows into it to give 'effect', not 'standardized_effect' (the "
                "conversion assumes a constant noise SD)",
                where=f"{where}.spread_with",
            )
        for covariate, _ in v.spread_with:
            place = place_of(f"{where}.spread_with", covariate)
            if covariate in below:
                raise ScenarioError(
                    f"'{covariate}' descends from '{v.name}'; as its spread covariate it would make a cycle",
                    where=place,
                )
            if covariate not in causes:
                raise ScenarioError(
                    f"'{covariate}' must also be a direct cause of '{v.name}': add an arrow {covariate} -> "
                    f"{v.name} (effect = 0 if it has no effect of its own), so the graph shows the dependence",
                    where=place,
                )
