"""Reading effect modification: an arrow's ``varies_with`` table, and the graph rules it must follow.

An arrow ``source -> target`` with ``varies_with = { skill = 0.3 }`` has the effect ``effect + 0.3 x (skill -
E[skill])`` instead of a constant ``effect``: every unit's effect differs with its modifier's value, and the
population average of the effect is the arrow's ``effect`` (``E[skill]`` is the population mean under the
scenario; :mod:`workbench.engine.modifiers` computes it and generates the data).

The rules, each refused with one located line (``arrows[3].varies_with.skill: ...``):

- a modifier is a variable of the graph (observed or latent), not the arrow's own source or target, and its
  number is finite and at most 10^6 in size;
- a modifier is a direct cause of the arrow's target (an arrow ``modifier -> target``, with ``effect = 0``
  when it has no effect of its own): the target's equation then depends on it, and the graph must say so,
  or its paths and adjustment verdicts would miss that dependence. A modifier that descends from the target
  is refused first, by name (it would make a cycle);
- the target's equation becomes ``... + (effect + c (m - E[m])) x source`` (on the log odds or log mean of
  a binary or count target, whose intercept is then calibrated from the full equations); it is not set by
  ``r_squared`` and the arrow has an ``effect``, not a ``standardized_effect`` (those conversions assume
  linear arrows; :mod:`workbench.scenario.elicit`).

Examples
--------
>>> read_varies_with({"varies_with": {"skill": 0.3}}, "arrows[1]", ["skill", "training", "output"],
...                  "training", "output")
(('skill', 0.3),)
>>> read_varies_with({"varies_with": {"output": 0.3}}, "arrows[1]", ["skill", "training", "output"],
...                  "training", "output")
Traceback (most recent call last):
...
workbench.errors.ScenarioError: arrows[1].varies_with.output: 'output' is the arrow's target; a modifier is another variable
"""

from __future__ import annotations

from workbench.errors import ScenarioError
from workbench.scenario.fields import get_field, known_name, place_of
from workbench.scenario.limits import check_magnitude

__all__ = ["read_varies_with", "check_modifiers", "descendants"]


def read_varies_with(
    table: dict, where: str, names, source: str, target: str
) -> tuple[tuple[str, float], ...]:
    """An arrow's ``varies_with``: ``(modifier, coefficient)`` pairs in file order, ``()`` without the key.

    Parameters
    ----------
    table : dict
        The arrow's table.
    where : str
        Its place (``arrows[2]``).
    names : sequence of str
        The variables of the graph.
    source, target : str
        The arrow's ends (already checked).

    Raises
    ------
    ScenarioError
        Not a table, an unknown name, the arrow's own source or target, a non-finite or too large number.
    """
    spec = get_field(table, "varies_with", "table", where, None)
    if spec is None:
        return ()
    out = []
    for name, value in spec.items():
        place = place_of(f"{where}.varies_with", name)
        known_name(name, list(names), place)
        if name in (source, target):
            role = "source" if name == source else "target"
            raise ScenarioError(
                f"'{name}' is the arrow's {role}; a modifier is another variable", where=place
            )
        number = get_field({name: value}, name, "number", f"{where}.varies_with")
        out.append((name, float(check_magnitude(number, place))))
    return tuple(out)


def descendants(start: str, arrows) -> set[str]:
    """Every variable an arrow path leads to from ``start`` (``start`` excluded unless on a cycle)."""
    children: dict[str, list[str]] = {}
    for a in arrows:
        children.setdefault(a.source, []).append(a.target)
    seen, todo = set(), [start]
    while todo:
        for nxt in children.get(todo.pop(), ()):
            if nxt not in seen:
                seen.add(nxt)
                todo.append(nxt)
    return seen


def check_modifiers(data: dict, variables, arrows) -> None:
    """The graph rules of every modified arrow (module notes), after the arrows are known to form no cycle.

    Parameters
    ----------
    data : dict
        The TOML document (to locate ``r_squared`` and ``standardized_effect`` as the file gave them).
    variables, arrows : sequences of Variable and Arrow
    """
    by_name = {v.name: v for v in variables}
    arrow_tables = data.get("arrows", [])
    for i, a in enumerate(arrows, start=1):
        if not a.varies_with:
            continue
        where = f"arrows[{i}]"
        table = arrow_tables[i - 1] if i - 1 < len(arrow_tables) else {}
        if "standardized_effect" in table:
            raise ScenarioError(
                "varies_with needs 'effect', not 'standardized_effect' (the conversion assumes a linear arrow)",
                where=f"{where}.varies_with",
            )
        if by_name[a.target].r_squared is not None:
            raise ScenarioError(
                f"varies_with cannot be combined with r_squared on '{a.target}' (the conversion assumes linear "
                "arrows); give its noise_sd",
                where=f"{where}.varies_with",
            )
        below = descendants(a.target, arrows)
        causes = {b.source for b in arrows if b.target == a.target}
        for name, _ in a.varies_with:
            place = place_of(f"{where}.varies_with", name)
            if name in below:
                raise ScenarioError(
                    f"'{name}' descends from the target '{a.target}'; as a modifier it would make a cycle",
                    where=place,
                )
            if name not in causes:
                raise ScenarioError(
                    f"'{name}' must also be a direct cause of '{a.target}': add an arrow {name} -> {a.target} "
                    "(effect = 0 if it has no effect of its own), so the graph shows the dependence",
                    where=place,
                )
