"""The graph edits of the dashboard's state: adding, removing, moving and changing variables and arrows.

:class:`GraphEdits` is a mixin of :class:`workbench.app.state.ScenarioState`: each method builds one change
of a copy of the scenario's TOML tables (:mod:`workbench.app.edits`, :mod:`workbench.scenario.edit`) and
hands it to the state's ``_edit``, which validates it with the file's parser and commits it (undoable) or
records the parser's one-line message.

Examples
--------
>>> from workbench.app.state import ScenarioState
>>> state = ScenarioState(preset="common_cause")
>>> state.set_variable("soil_quality", "type", "count"), state.scenario.variable("soil_quality").rate
(True, 1.0)
>>> state.undo(), state.scenario.variable("soil_quality").type
(True, 'continuous')
"""

from __future__ import annotations

from typing import Any

from workbench.app.edits import arrow_change, position_change, variable_change
from workbench.errors import ScenarioError
from workbench.scenario import edit

__all__ = ["GraphEdits"]


class GraphEdits:
    """The variable and arrow edits of :class:`workbench.app.state.ScenarioState` (a mixin: it needs the
    state's ``_edit(section, change)``)."""

    def _edit(self, section: str, change) -> bool:  # pragma: no cover - ScenarioState's own
        raise NotImplementedError

    # --- variables -------------------------------------------------------------------------------------
    def add_variable(self, name: str, type: str = "continuous", position=None, section="variables") -> bool:
        """Add a variable (continuous with noise SD 1, binary with proportion 0.5 or a count with rate 1),
        drawn at ``position``."""
        name = (name or "").strip()

        def change(data):
            if not name:
                raise ScenarioError("type a name for the new variable", where="variables")
            if name in data["variables"]:
                raise ScenarioError(f"there is already a variable '{name}'", where=f"variables.{name}")
            fields = {"binary": {"proportion": 0.5}, "count": {"rate": 1.0}}.get(type, {})
            data["variables"][name] = {"type": type, **fields}
            if position is not None:
                position_change(name, *position)(data)

        return self._edit(section, change)

    def remove_variable(self, name: str, section: str = "variables") -> bool:
        """Remove a variable and its arrows (not the exposure or the outcome); strategies stop using it."""
        return self._edit(section, lambda data: edit.remove_variable(data, name))

    def move_variable(self, name: str, x: float, y: float, section: str = "canvas") -> bool:
        """Draw variable ``name`` at ``(x, y)`` (its ``position``; the others keep their drawn places)."""
        return self._edit(section, position_change(name, x, y))

    def set_variable(self, name: str, field: str, value: Any, section: str = "variables") -> bool:
        """Change one field of a variable: name, type, noise_sd, baseline, proportion, rate, observed,
        label, noise, noise_df or spread_with (text such as ``"distance = 0.5"``, or a table).

        A new name follows the variable everywhere; a latent variable leaves the strategies; a type change
        drops what no longer fits (see :mod:`workbench.scenario.edit`).

        Examples
        --------
        >>> from workbench.app.state import ScenarioState
        >>> state = ScenarioState(preset="common_cause")
        >>> state.set_variable("wheat_yield", "spread_with", "soil_quality: 0.5")
        False
        >>> state.error
        "variables.wheat_yield.spread_with: write each as 'name = 0.5', separated by commas, got 'soil_quality: 0.5'"
        >>> state.set_variable("wheat_yield", "spread_with", "soil_quality = 0.5")
        True
        >>> state.scenario.variable("wheat_yield").spread_with
        (('soil_quality', 0.5),)
        """
        return self._edit(section, variable_change(name, field, value))

    # --- arrows ----------------------------------------------------------------------------------------
    def add_arrow(self, source: str, target: str, effect: float = 0.5, section: str = "arrows") -> bool:
        """Add an arrow ``source -> target``."""
        return self._edit(
            section, lambda data: data["arrows"].append({"from": source, "to": target, "effect": effect})
        )

    @staticmethod
    def _arrow(data: dict, index: int) -> dict:
        """The arrow table at ``index``, or a ScenarioError (arrows are numbered from 1 in messages)."""
        if not 0 <= index < len(data["arrows"]):
            raise ScenarioError(f"no arrow number {index + 1}", where="arrows")
        return data["arrows"][index]

    def remove_arrow(self, index: int, section: str = "arrows") -> bool:
        """Remove the arrow at ``index`` (counted from 0)."""

        def change(data):
            self._arrow(data, index)
            del data["arrows"][index]

        return self._edit(section, change)

    def set_arrow(
        self,
        index: int,
        *,
        source: str | None = None,
        target: str | None = None,
        effect: Any = None,
        standardized: Any = None,
    ) -> bool:
        """Change the arrow at ``index`` (counted from 0): its source, target, raw effect or standardized
        effect (a switch of kind switches every arrow into that target: :func:`edit.set_arrow_size`)."""
        if effect is not None or standardized is not None:
            return self._edit(
                "arrows",
                lambda data: edit.set_arrow_size(data, index, effect=effect, standardized=standardized),
            )
        changes = {k: v for k, v in (("from", source), ("to", target)) if v is not None}
        return self._edit("arrows", lambda data: self._arrow(data, index).update(changes))

    def set_arrow_shape(self, index: int, field: str, value: Any, section: str = "arrows") -> bool:
        """Change the arrow at ``index`` (from 0): its ``form`` (linear, square, step), the step's ``at``, or
        ``varies_with`` (text such as ``"skill = 0.3"``, or a table; blank for none): see
        :func:`workbench.app.edits.arrow_change`.

        Examples
        --------
        >>> from workbench.app.state import ScenarioState
        >>> state = ScenarioState(preset="common_cause")
        >>> state.set_arrow_shape(2, "form", "square"), state.scenario.arrows[2].form
        (True, 'square')
        >>> state.set_arrow_shape(2, "at", 0.5)
        False
        """
        return self._edit(section, arrow_change(index, field, value))
