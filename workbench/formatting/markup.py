"""User text made safe for HTML and Markdown: the one place that escapes what a person typed.

A scenario's title, summary, labels, units, notes, variable and strategy names, the messages that quote them
and the names of uploaded files are user text. Every piece of it that reaches a page goes through one of
these functions: :func:`text_html` for an element's content, :func:`attr_html` for an attribute's value,
:func:`text_markdown` for a Markdown pane (Markdown passes raw HTML through, so its text is escaped for
HTML first and its own markup characters are then neutralised).

Examples
--------
>>> text_html("<img src=x onerror=alert(1)>")
'&lt;img src=x onerror=alert(1)&gt;'
>>> attr_html('a" onmouseover="x')
'a&quot; onmouseover=&quot;x'
>>> text_markdown("**not bold** <b>")
'\\\\*\\\\*not bold\\\\*\\\\* &lt;b&gt;'
"""

from __future__ import annotations

import html
import re
from typing import Any

__all__ = ["text_html", "attr_html", "text_markdown"]

#: Characters with a meaning in Markdown (CommonMark's ASCII punctuation that starts or ends markup);
#: ``&`` and ``;`` are left alone, as they are the entities :func:`html.escape` writes.
_MARKDOWN_SPECIAL = re.compile(r"([\\`*_\[\]()!|~#+\-.{}=^$:])")


def _text(value: Any) -> str:
    return "" if value is None else str(value)


def text_html(value: Any) -> str:
    """``value`` as text inside an HTML element: ``&``, ``<``, ``>`` and both quotes escaped.

    None gives ''. Common practice, no source: the five characters of the HTML specification's
    "escaping a string" (plus the apostrophe, for pages that quote attributes with it).

    Examples
    --------
    >>> text_html("fish & chips <3"), text_html(None), text_html(0.5)
    ('fish &amp; chips &lt;3', '', '0.5')
    """
    return html.escape(_text(value), quote=True)


def attr_html(value: Any) -> str:
    """``value`` as the value of a quoted HTML attribute: as :func:`text_html`, and line breaks and tabs
    written as character references so an attribute never spans lines.

    Examples
    --------
    >>> attr_html("it's\\nmine")
    'it&#x27;s&#10;mine'
    """
    escaped = html.escape(_text(value), quote=True)
    return escaped.replace("\n", "&#10;").replace("\r", "&#13;").replace("\t", "&#9;")


def text_markdown(value: Any) -> str:
    """``value`` as literal text in a Markdown pane: HTML escaped (Markdown renders raw HTML), then every
    Markdown markup character backslash-escaped, so no emphasis, link, image, heading or code span forms.

    Examples
    --------
    >>> text_markdown("[x](javascript:alert(1))")
    '\\\\[x\\\\]\\\\(javascript\\\\:alert\\\\(1\\\\)\\\\)'
    >>> text_markdown("a < b & c")
    'a &lt; b &amp; c'
    """
    return _MARKDOWN_SPECIAL.sub(r"\\\1", html.escape(_text(value), quote=False))
