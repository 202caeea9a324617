"""One simulated dataset, for the dashboard's one-dataset view (plain ``param``, no Panel).

:class:`SampleState` draws one dataset of the scenario's size ``n`` with :func:`workbench.draw`. Dataset
``k`` (0 first; "draw another" moves to 1, 2, ...) is drawn from a seed made of the study seed and ``k``
(:func:`dataset_seed`), so the same scenario always shows the same datasets in the same order.

Examples
--------
>>> from workbench import load_preset
>>> sample = SampleState()
>>> sample.update(load_preset("common_cause"))
>>> sample.data.shape == (load_preset("common_cause").study.n, 3)
True
"""

from __future__ import annotations

import param
from numpy.random import SeedSequence

from workbench.engine.generate import draw
from workbench.errors import WorkbenchError
from workbench.scenario.model import Scenario

__all__ = ["SampleState", "dataset_seed"]


def dataset_seed(study_seed: int, draw_number: int) -> int:
    """The seed of dataset ``draw_number`` of a scenario whose study seed is ``study_seed``.

    Examples
    --------
    >>> dataset_seed(1, 0) == dataset_seed(1, 0) != dataset_seed(1, 1)
    True
    """
    return int(SeedSequence([study_seed, draw_number]).generate_state(1)[0])


class SampleState(param.Parameterized):
    """One simulated dataset, drawn with the scenario's n and seed, for the one-dataset view.

    Examples
    --------
    >>> from workbench import load_preset
    >>> sample = SampleState()
    >>> sample.update(load_preset("common_cause"))
    >>> sample.covariate
    'soil_quality'
    """

    covariate = param.Selector(
        default=None, objects=[], allow_None=True, doc="Variable that colours the points."
    )
    data = param.DataFrame(default=None, allow_None=True, doc="The dataset, or None before the first draw.")
    draw_number = param.Integer(default=0, bounds=(0, None), doc="Which dataset (see :func:`dataset_seed`).")
    message = param.String(default="")

    def __init__(self, **params):
        super().__init__(**params)
        self._scenario: Scenario | None = None

    def update(self, scenario: Scenario) -> None:
        """Redraw for a new scenario, keeping the chosen covariate when it still exists."""
        self._scenario = scenario
        q = scenario.question
        choices = [n for n in scenario.names if n not in (q.exposure, q.outcome)]
        current = self.covariate if self.covariate in choices else (choices[0] if choices else None)
        self.param.covariate.objects = choices
        with param.parameterized.batch_call_watchers(self):
            self.covariate = current
            self._draw()

    @param.depends("draw_number", watch=True)
    def _draw(self) -> None:
        if self._scenario is None:
            return
        study = self._scenario.study
        try:
            self.data = draw(self._scenario, study.n, seed=dataset_seed(study.seed, self.draw_number))
            self.message = ""
        except WorkbenchError as exc:
            self.data = None
            self.message = str(exc)
