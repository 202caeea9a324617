"""Reading non-linear arrows (``form``, ``at``) and flexible adjustment (``flexible``), with their rules.

An arrow's ``form`` says how its cause enters the target's equation (:mod:`workbench.engine.forms`):

* ``"linear"`` (the default): ``effect x cause``;
* ``"square"``: ``effect x (cause - E[cause])^2``, ``E[cause]`` the cause's population mean under the scenario
  (no intervention);
* ``"step"``: ``effect x 1[cause > at]``, with the arrow's ``at`` (a number, required for a step and refused
  for the other forms).

The rules, each refused with one located line (``arrows[2].form: ...``):

- the cause of a square or step arrow is continuous (the square of a 0/1 variable centred at its mean is a
  straight line in it again, and a step on a 0/1 variable is the variable itself);
- the target may be of any type: into a binary or count variable the form acts on its log odds or log mean,
  and a binary or count variable at or below the target is calibrated from the full equations
  (:func:`workbench.engine.generate.graph_structure`);
- the target is not set by ``r_squared`` and the arrow has an ``effect``, not a ``standardized_effect``
  (those conversions assume linear arrows; :mod:`workbench.scenario.elicit`); nor does any variable at or
  below the target use ``r_squared``, or any arrow into or out of one ``standardized_effect``;
- the arrow has no ``varies_with``, and no modifier of another arrow is or descends from the target of a
  non-linear arrow (the modifiers' means assume linear equations below them).

A strategy's ``flexible = ["age"]`` lists covariates of its ``adjust`` that enter as a restricted cubic
spline instead of a straight line (:mod:`workbench.engine.splines`): continuous, observed covariates only,
``model = "ols"`` on a continuous outcome with the classical SE, and no ``selection``, ``restrict``,
``match`` or ``interactions`` with it (not supported yet).

Examples
--------
>>> read_form({"form": "step", "at": 2.5}, "arrows[1]")
('step', 2.5)
>>> read_form({"form": "square", "at": 1.0}, "arrows[1]")
Traceback (most recent call last):
...
workbench.errors.ScenarioError: arrows[1].at: 'at' applies to form = "step" only, got form = "square"
"""

from __future__ import annotations

from workbench.errors import ScenarioError
from workbench.scenario.fields import choice, get_field, known_name
from workbench.scenario.limits import check_magnitude
from workbench.scenario.parse_modifiers import descendants

__all__ = ["FORMS", "read_form", "check_forms", "read_flexible"]

FORMS = ("linear", "square", "step")
"""The arrow forms (module notes)."""


def read_form(table: dict, where: str) -> tuple[str, float | None]:
    """An arrow's ``(form, at)``: ``("linear", None)`` without the keys.

    Raises
    ------
    ScenarioError
        An unknown form, ``at`` without a step, a step without ``at``, a non-finite or too large ``at``.
    """
    form = choice(get_field(table, "form", "str", where, "linear"), FORMS, f"{where}.form")
    at = get_field(table, "at", "number", where, None)
    if at is not None and form != "step":
        raise ScenarioError(f'\'at\' applies to form = "step" only, got form = "{form}"', where=f"{where}.at")
    if form == "step":
        if at is None:
            raise ScenarioError('form = "step" needs at = <the threshold>, a number', where=f"{where}.form")
        return form, float(check_magnitude(at, f"{where}.at"))
    return form, None


def check_forms(data: dict, variables, arrows) -> None:
    """The graph rules of every non-linear arrow (module notes), after the arrows are known to form no cycle.

    Parameters
    ----------
    data : dict
        The TOML document (to locate ``standardized_effect`` as the file gave it).
    variables, arrows : sequences of Variable and Arrow
    """
    by_name = {v.name: v for v in variables}
    arrow_tables = data.get("arrows", [])
    modifiers = {m for a in arrows for m, _ in a.varies_with}
    for i, a in enumerate(arrows, start=1):
        if a.form == "linear":
            continue
        where = f"arrows[{i}].form"
        table = arrow_tables[i - 1] if i - 1 < len(arrow_tables) else {}
        if by_name[a.source].is_binary:
            raise ScenarioError(
                f"form = \"{a.form}\" needs a continuous cause; '{a.source}' is binary (on a 0/1 cause the "
                "form is the straight line again)",
                where=where,
            )
        if "standardized_effect" in table:
            raise ScenarioError(
                "a non-linear form needs 'effect', not 'standardized_effect' (the conversion assumes a linear "
                "arrow)",
                where=where,
            )
        if by_name[a.target].r_squared is not None:
            raise ScenarioError(
                f"a non-linear form cannot be combined with r_squared on '{a.target}' (the conversion assumes "
                "linear arrows); give its noise_sd",
                where=where,
            )
        if a.varies_with:
            raise ScenarioError("a non-linear form cannot be combined with varies_with yet", where=where)
        below = descendants(a.target, arrows) | {a.target}
        moved = sorted(below & modifiers)
        if moved:
            raise ScenarioError(
                f"the modifier '{moved[0]}' is or descends from '{a.target}', the target of a non-linear "
                "arrow (not supported yet)",
                where=where,
            )
        _check_elicited_below(a.target, below, by_name, arrows, arrow_tables)


def _check_elicited_below(target: str, below: set[str], by_name: dict, arrows, arrow_tables) -> None:
    """Refuse ``r_squared`` on, and ``standardized_effect`` into or out of, the target of a non-linear arrow
    or a variable below it: the conversions use variances from linear equations."""
    for name in sorted(below):
        if by_name[name].r_squared is not None:
            raise ScenarioError(
                f"r_squared cannot be used below '{target}', the target of a non-linear arrow (the conversion "
                "assumes linear arrows); give its noise_sd",
                where=f"variables.{name}.r_squared",
            )
    for j, b in enumerate(arrows, start=1):
        table = arrow_tables[j - 1] if j - 1 < len(arrow_tables) else {}
        if "standardized_effect" in table and (b.source in below or b.target in below):
            raise ScenarioError(
                f"standardized_effect cannot be used at or below '{target}', the target of a non-linear arrow "
                "(the conversion assumes linear arrows); give 'effect'",
                where=f"arrows[{j}].standardized_effect",
            )


def read_flexible(table: dict, where: str, by_name: dict, adjust, model: str, outcome_binary: bool, others):
    """A strategy's ``flexible``: covariates of ``adjust`` (in file order of the list) that enter as a
    restricted cubic spline; ``()`` without the key.

    Parameters
    ----------
    table : dict
        The strategy's table.
    where : str
        Its place (``strategies[2]``).
    by_name : dict of str to Variable
    adjust : sequence of str
    model : str
    outcome_binary : bool
    others : dict of str to bool
        Which other options the strategy uses (``selection``, ``restrict``, ``match``, ``interactions``,
        ``se = "hc3"``), refused with ``flexible``.
    """
    spec = get_field(table, "flexible", "list", where, [])
    if not spec:
        return ()
    place = f"{where}.flexible"
    if model == "ols" and outcome_binary:
        raise ScenarioError(
            'flexible applies to model = "ols" with a continuous outcome, or to model = "logit" or "poisson" '
            "(not yet to the linear probability model)",
            where=place,
        )
    used = [key for key, on in others.items() if on]
    if used:
        raise ScenarioError(f"flexible cannot be combined with {used[0]} yet", where=place)
    out: list[str] = []
    for j, name in enumerate(spec, start=1):
        item = f"{place}[{j}]"
        if not isinstance(name, str):
            raise ScenarioError("must be a variable name (a string)", where=item)
        known_name(name, list(by_name), item)
        if name not in adjust:
            raise ScenarioError(
                f"'{name}' must also be in adjust (flexible changes how it enters)", where=item
            )
        if not by_name[name].is_continuous:
            why = "a 0/1 variable is already adjusted for fully" if by_name[name].is_binary else "not yet"
            raise ScenarioError(
                f"'{name}' is {by_name[name].type}; a spline needs a continuous covariate ({why})",
                where=item,
            )
        if name in out:
            raise ScenarioError(f"'{name}' is listed twice", where=item)
        out.append(name)
    return tuple(out)
