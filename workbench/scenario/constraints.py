"""The study settings' constraints, declared once.

Every place that accepts a study setting (the scenario file's ``[study]`` table, the arguments of
:func:`workbench.simulate` and :func:`workbench.plan`, the command-line options, the dashboard's inputs) checks
it with :func:`check_setting` against the one table :data:`STUDY_SETTINGS`, and reads its bounds from there.
Only the error class and the place differ: ``study.replicates`` in a file, ``--replicates`` on the command
line, ``replicates`` in Python. One message format for every violation::

    study.replicates: must be an integer from 1 to 1,000,000, got 0

Examples
--------
>>> check_setting("alpha", 0.05, where="study.alpha")
0.05
>>> check_setting("alpha", 0.7, where="--alpha")
Traceback (most recent call last):
...
workbench.errors.ScenarioError: --alpha: must be a number in (0, 0.5], got 0.7
>>> STUDY_SETTINGS["replicates"].high
1000000
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from numbers import Integral, Real

from workbench.errors import ScenarioError, WorkbenchError, shown
from workbench.scenario.limits import MAX_SEED, MAX_STUDY_SIZE

__all__ = [
    "Setting",
    "STUDY_SETTINGS",
    "check_setting",
    "MAX_VARIABLES",
    "MAX_ARROWS",
    "MAX_REPLICATES",
    "MAX_SELECTION_CANDIDATES",
]

MAX_VARIABLES = 40
"""Variables in one scenario."""
MAX_ARROWS = 200
"""Arrows in one scenario."""
MAX_REPLICATES = 1_000_000
"""Simulated studies in one run (and per size in a plan)."""
MAX_SELECTION_CANDIDATES = 10
"""Candidate covariates of a data-driven selection rule (the rule fits up to 2^k subsets)."""


@dataclass(frozen=True)
class Setting:
    """One study setting: its kind and bounds.

    Parameters
    ----------
    name : str
        The key in ``[study]``.
    kind : {"int", "number"}
        ``int``: a whole number (``True``/``False`` are refused); ``number``: any finite real number.
    low, high : float or None
        Bounds; None for none.
    low_open, high_open : bool
        Whether the bound itself is excluded.
    meaning : str
        What the setting is, for help texts and tooltips.
    ceiling : float or None
        For a setting with no upper bound in :attr:`rule`: the largest value the workbench computes with
        (:data:`~workbench.scenario.limits.MAX_STUDY_SIZE` units, :data:`~workbench.scenario.limits.MAX_SEED`);
        a value above it gets its own message, ``must be at most ...``.
    """

    name: str
    kind: str
    low: float | None
    high: float | None
    low_open: bool = False
    high_open: bool = False
    meaning: str = ""
    ceiling: float | None = None

    @property
    def rule(self) -> str:
        """The constraint in words, e.g. ``an integer from 1 to 1,000,000`` or ``a number in (0, 0.5]``.

        Examples
        --------
        >>> STUDY_SETTINGS["n"].rule, STUDY_SETTINGS["target_power"].rule
        ('an integer of at least 1', 'a number in (0, 1)')
        """
        noun = "an integer" if self.kind == "int" else "a number"

        def show(x):
            return f"{x:,}" if self.kind == "int" else f"{x:g}"

        if self.low is not None and self.high is not None:
            if self.kind == "int" and not (self.low_open or self.high_open):
                return f"{noun} from {show(self.low)} to {show(self.high)}"
            left, right = "(" if self.low_open else "[", ")" if self.high_open else "]"
            return f"{noun} in {left}{show(self.low)}, {show(self.high)}{right}"
        if self.low is not None:
            return f"{noun} {'greater than' if self.low_open else 'of at least'} {show(self.low)}"
        if self.high is not None:
            return f"{noun} {'below' if self.high_open else 'of at most'} {show(self.high)}"
        return noun

    def accepts(self, value: object) -> bool:
        """True when ``value`` satisfies the kind, the bounds and the ceiling."""
        if isinstance(value, bool) or not isinstance(value, Real):
            return False
        if self.kind == "int" and not isinstance(value, Integral):
            return False
        try:
            if not math.isfinite(float(value)) and not isinstance(value, Integral):
                return False
        except OverflowError:  # an integer beyond the largest double
            if self.kind != "int":
                return False
        if self.low is not None and (value <= self.low if self.low_open else value < self.low):
            return False
        if self.ceiling is not None and value > self.ceiling:
            return False
        return not (self.high is not None and (value >= self.high if self.high_open else value > self.high))

    def problem(self, value: object) -> str:
        """What is wrong with a value :meth:`accepts` refuses, e.g. ``must be an integer of at least 1, got 0``.

        Examples
        --------
        >>> STUDY_SETTINGS["n"].problem(10**23)
        'must be at most 100,000,000 (the largest study simulated), got 100000000000000000000000'
        """
        ok_kind = isinstance(value, Real) and not isinstance(value, bool)
        if ok_kind and self.ceiling is not None and self.accepts(min(value, self.ceiling)):
            what = "the largest seed" if self.name == "seed" else "the largest study simulated"
            return f"must be at most {int(self.ceiling):,} ({what}), got {shown(value, 60)}"
        return f"must be {self.rule}, got {shown(value, 60)}"


STUDY_SETTINGS: dict[str, Setting] = {
    s.name: s
    for s in (
        Setting("n", "int", 1, None, meaning="units per simulated study", ceiling=MAX_STUDY_SIZE),
        Setting("replicates", "int", 1, MAX_REPLICATES, meaning="number of simulated studies"),
        Setting("seed", "int", 0, None, meaning="root of the random streams", ceiling=MAX_SEED),
        Setting("alpha", "number", 0, 0.5, low_open=True, meaning="1 - confidence level, and the test level"),
        Setting("sample_size", "int", 1, None, meaning="one sample size of the plan", ceiling=MAX_STUDY_SIZE),
        Setting("target_power", "number", 0, 1, low_open=True, high_open=True, meaning="power to reach"),
        Setting(
            "target_halfwidth",
            "number",
            0,
            None,
            low_open=True,
            meaning="largest acceptable mean CI half-width",
        ),
    )
}
"""Every study setting, by its ``[study]`` key (``sample_size`` is one entry of ``sample_sizes``)."""


def check_setting(
    name: str, value: object, *, where: str | None = None, error: type[WorkbenchError] = ScenarioError
):
    """Check one study setting against :data:`STUDY_SETTINGS` and return it as ``int`` or ``float``.

    Parameters
    ----------
    name : str
        A key of :data:`STUDY_SETTINGS`.
    value : object
        The value given.
    where : str, optional
        The place named in the message (default: ``name``).
    error : WorkbenchError subclass, default ScenarioError
        The class raised: :class:`~workbench.errors.ScenarioError` for a file,
        :class:`~workbench.errors.UsageError` for an option, :class:`~workbench.errors.SimulationError` for
        an argument of a library function.

    Returns
    -------
    int or float

    Raises
    ------
    error
        ``<where>: must be <rule>, got <value>``.

    Examples
    --------
    >>> check_setting("replicates", 2000)
    2000
    >>> from workbench.errors import UsageError
    >>> check_setting("replicates", 10**8, where="--replicates", error=UsageError)
    Traceback (most recent call last):
    ...
    workbench.errors.UsageError: --replicates: must be an integer from 1 to 1,000,000, got 100000000
    """
    setting = STUDY_SETTINGS[name]
    if not setting.accepts(value):
        raise error(setting.problem(value), where=where or name)
    return int(value) if setting.kind == "int" else float(value)
