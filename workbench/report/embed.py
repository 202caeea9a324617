"""Bokeh figures as standalone HTML: the script and divs of :func:`bokeh.embed.components`, or a whole page
of :func:`bokeh.embed.file_html`, built in a Document of their own.

Bokeh serialises models that belong to no Document by making one from ``curdoc()``. Inside a running
dashboard ``curdoc()`` may be another session's Document, or (after an exception in a callback, which leaves
Bokeh's ``patch_curdoc`` unrestored) a destroyed one, and then every later export fails. Putting the models
in a fresh Document first makes the output depend on nothing but the models.
"""

from __future__ import annotations

from collections.abc import Mapping

from bokeh.document import Document
from bokeh.embed import components, file_html
from bokeh.resources import INLINE

__all__ = ["standalone_components", "standalone_page"]


def _own_document(models) -> None:
    """Put fresh models in a new Document (models already in one stay there: Bokeh then uses it)."""
    if any(model.document is not None for model in models):
        return
    document = Document()
    for model in models:
        document.add_root(model)


def standalone_components(models):
    """``(script, divs)`` of :func:`bokeh.embed.components` for fresh models (a dict, a sequence or one).

    Examples
    --------
    >>> from bokeh.plotting import figure
    >>> script, divs = standalone_components({"a": figure(), "b": figure()})
    >>> script.lstrip().startswith("<script"), sorted(divs)
    (True, ['a', 'b'])
    """
    if isinstance(models, Mapping):
        _own_document(list(models.values()))
    elif isinstance(models, (list, tuple)):
        _own_document(list(models))
    else:
        _own_document([models])
    return components(models)


def standalone_page(model, title: str) -> str:
    """A whole HTML page holding ``model`` with Bokeh's code inline (it opens with no network).

    Examples
    --------
    >>> from bokeh.plotting import figure
    >>> "<title>demo</title>" in standalone_page(figure(), "demo")
    True
    """
    _own_document([model])
    return file_html(model, INLINE, title=title)
