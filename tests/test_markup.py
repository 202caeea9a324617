"""User text made safe for HTML and Markdown (:mod:`workbench.formatting.markup`).

Reference: Python's own HTML parser (``html.parser.HTMLParser``) reads what the functions write; a payload
is safe when the parser finds no element and no attribute in it and gives back the original text. Markdown
is checked with the Markdown renderer the dashboard's panes use (markdown-it, as Panel configures it).
"""

from __future__ import annotations

from html.parser import HTMLParser

import pytest

from workbench.formatting.markup import attr_html, text_html, text_markdown

PAYLOADS = [
    "<img src=x onerror=alert(1)>",
    "<script>alert(1)</script>",
    'a" onmouseover="alert(1)',
    "x' autofocus onfocus='alert(1)",
    "fish & chips <3 > 2",
    "[link](javascript:alert(1)) ![i](x) **bold** `code` # head",
]


class _Collect(HTMLParser):
    def __init__(self):
        super().__init__(convert_charrefs=True)
        self.tags, self.attrs, self.text = [], [], ""

    def handle_starttag(self, tag, attrs):
        self.tags.append(tag)
        self.attrs.append(dict(attrs))

    def handle_data(self, data):
        self.text += data


@pytest.mark.parametrize("payload", PAYLOADS)
def test_text_html_makes_no_element_and_reads_back(payload):
    parsed = _Collect()
    parsed.feed(f"<p>{text_html(payload)}</p>")
    assert parsed.tags == ["p"] and parsed.text == payload


@pytest.mark.parametrize("payload", PAYLOADS)
def test_attr_html_stays_inside_its_attribute(payload):
    for quote in ('"', "'"):
        parsed = _Collect()
        parsed.feed(f"<td title={quote}{attr_html(payload)}{quote}>x</td>")
        assert parsed.attrs == [{"title": payload}]


@pytest.mark.parametrize("payload", PAYLOADS)
def test_text_markdown_renders_as_the_literal_text(payload):
    from markdown_it import MarkdownIt

    rendered = MarkdownIt("commonmark", {"html": True}).render(text_markdown(payload))
    parsed = _Collect()
    parsed.feed(rendered)
    assert parsed.tags == ["p"], rendered
    assert parsed.text.strip() == payload.strip()
