"""One table specification, rendered as aligned plain text and as an HTML ``<table>``.

A result object (``CheckReport``, ``SimulationResult``, ``PlanResult``) describes each of its tables once, as
a :class:`TableSpec`: its columns (the record key, the header, how a cell is formatted, the alignment). The
rows are plain records (dicts, or any mapping). The same spec and records then give the text table of the
command line (:meth:`TableSpec.as_text`) and the HTML table of a notebook or page (:meth:`TableSpec.as_html`),
so the two cannot disagree. A whole result is a list of parts (:class:`Heading`, :class:`Paragraph`,
:class:`Table`, :class:`Bullets`) rendered by :func:`render_text` or :func:`render_html`. Every piece of text
that reaches HTML is escaped here, once; formatters return plain text.

Examples
--------
>>> spec = TableSpec((Column("name", "strategy"), Column("bias", "bias", number(3), "right")))
>>> print(spec.as_text([{"name": "unadjusted", "bias": 0.2206}, {"name": "adjust_soil", "bias": -0.0004}]))
strategy       bias
-----------  ------
unadjusted    0.221
adjust_soil  -0.000
>>> spec.as_html([{"name": "<b>", "bias": 0.5}])
'<table class="wb"><thead><tr><th class="text">strategy</th><th>bias</th></tr></thead><tbody><tr><td class="text">&lt;b&gt;</td><td data-field="bias">0.500</td></tr></tbody></table>'
"""

from __future__ import annotations

import math
from collections.abc import Callable, Mapping, Sequence
from dataclasses import dataclass
from typing import Any

from workbench.formatting.markup import attr_html, text_html
from workbench.formatting.numbers import estimate_decimals, fmt, fmt_mcse, is_pandas_missing

__all__ = [
    "Column",
    "TableSpec",
    "Heading",
    "Paragraph",
    "Table",
    "Bullets",
    "render_text",
    "render_html",
    "number",
    "significant",
    "integer",
    "with_mcse_cell",
    "is_missing",
]


def is_missing(value: Any) -> bool:
    """True for None, NaN, infinities and pandas' missing values (a cell shown as ``-``).

    Examples
    --------
    >>> import pandas as pd
    >>> is_missing(None), is_missing(float("nan")), is_missing(pd.NA), is_missing(0.0), is_missing("x")
    (True, True, True, False, False)
    """
    if value is None or is_pandas_missing(value):
        return True
    if isinstance(value, str | bool):
        return False
    try:
        return not math.isfinite(float(value))
    except (TypeError, ValueError):
        return False


def number(digits: int = 3) -> Callable[[Any], str]:
    """A formatter with fixed decimals (``-`` for missing), through :func:`workbench.formatting.numbers.fmt`.

    Examples
    --------
    >>> number(2)(0.12345), number(2)(None)
    ('0.12', '-')
    """

    def format_number(value: Any) -> str:
        return "-" if is_missing(value) else fmt(float(value), digits)

    return format_number


def significant(digits: int = 4) -> Callable[[Any], str]:
    """A formatter with ``digits`` significant digits (``-`` for missing): for truths and estimands, whose
    scale is not known in advance.

    Examples
    --------
    >>> significant()(0.470588), significant(3)(12345.0)
    ('0.4706', '1.23e+04')
    """

    def format_significant(value: Any) -> str:
        return "-" if is_missing(value) else f"{float(value):.{digits}g}"

    return format_significant


def integer(value: Any) -> str:
    """A whole number with thousands separators (``-`` for missing).

    Examples
    --------
    >>> integer(1234), integer(None), integer(float("nan"))
    ('1,234', '-', '-')
    """
    return "-" if is_missing(value) else f"{int(value):,}"


def with_mcse_cell(value: Any, mcse: Any, digits: int = 3) -> str:
    """A Monte Carlo estimate with its Monte Carlo SE in brackets, ``0.221 (0.0031)``: the value rounded
    with :func:`~workbench.formatting.numbers.estimate_decimals` (at most one decimal more than ``digits``),
    the MCSE with :func:`~workbench.formatting.numbers.fmt_mcse` (two significant digits).

    Examples
    --------
    >>> with_mcse_cell(0.22063, 0.0031), with_mcse_cell(0.9, None), with_mcse_cell(None, 0.01)
    ('0.2206 (0.0031)', '0.900', '-')
    """
    if is_missing(value):
        return "-"
    if is_missing(mcse) or float(mcse) <= 0:
        return fmt(float(value), digits)
    return f"{fmt(float(value), estimate_decimals(mcse, digits))} ({fmt_mcse(mcse)})"


def _plain_text(value: Any) -> str:
    if is_missing(value):
        return "-"
    if isinstance(value, bool):
        return "yes" if value else "no"
    if isinstance(value, list | tuple):
        return ", ".join(str(v) for v in value)
    return str(value)


@dataclass(frozen=True)
class Column:
    """One column of a table.

    Parameters
    ----------
    key : str
        The record key the cell is read from.
    header : str
        The column's title.
    format : callable, optional
        ``format(value) -> str``; by default the value as text (``-`` for missing, lists joined by commas).
    align : {"left", "right"}, default "left"
        Numbers are right-aligned.
    mcse : str, optional
        The record key of the value's Monte Carlo SE: the cell then reads ``value (MCSE)``
        (:func:`with_mcse_cell`; ``format`` is not used).
    digits : int or callable, optional
        Fixed decimals for a number without ``format`` (3 beside an MCSE when not given); a callable
        ``digits(record) -> int`` chooses them per row (from the row's empirical SE, for instance).

    Examples
    --------
    >>> Column("bias", "bias", mcse="bias_mcse").cell({"bias": 0.01234, "bias_mcse": 0.0021})
    '0.0123 (0.0021)'
    >>> Column("mean", "mean", digits=lambda r: r["d"]).cell({"mean": 0.5, "d": 2})
    '0.50'
    """

    key: str
    header: str
    format: Callable[[Any], str] | None = None
    align: str = "left"
    mcse: str | None = None
    digits: int | Callable[[Mapping[str, Any]], int] | None = None

    def cell(self, record: Mapping[str, Any]) -> str:
        """The plain text of this column's cell in ``record``."""
        value = record.get(self.key)
        digits = self.digits(record) if callable(self.digits) else self.digits
        if self.mcse is not None:
            return with_mcse_cell(value, record.get(self.mcse), 3 if digits is None else digits)
        if self.format is not None:
            return self.format(value)
        if digits is not None:
            return number(digits)(value)
        return _plain_text(value)


@dataclass(frozen=True)
class TableSpec:
    """The columns of a table; rendered from records as text (:meth:`as_text`) or HTML (:meth:`as_html`).

    Examples
    --------
    >>> spec = TableSpec((Column("n", "n", integer, "right"),))
    >>> spec.cells([{"n": 1200}])
    [['1,200']]
    """

    columns: tuple[Column, ...]

    def cells(self, records: Sequence[Mapping[str, Any]]) -> list[list[str]]:
        """The plain text of every cell, row by row."""
        return [[c.cell(r) for c in self.columns] for r in records]

    def as_text(self, records: Sequence[Mapping[str, Any]], indent: str = "") -> str:
        """Aligned plain text: the headers, a rule of dashes, one line per record."""
        rows = self.cells(records)
        headers = [c.header for c in self.columns]
        widths = [max(len(x) for x in col) for col in zip(headers, *rows, strict=True)]

        def line(values):
            parts = [
                v.rjust(w) if c.align == "right" else v.ljust(w)
                for v, w, c in zip(values, widths, self.columns, strict=True)
            ]
            return (indent + "  ".join(parts)).rstrip()

        rule = indent + "  ".join("-" * w for w in widths)
        return "\n".join([line(headers), rule, *(line(r) for r in rows)])

    def as_html(self, records: Sequence[Mapping[str, Any]], *, caption: str = "") -> str:
        """An HTML ``<table class="wb">`` (every header and cell escaped); numbers carry ``data-field``."""
        head = "".join(
            (
                f"<th>{text_html(c.header)}</th>"
                if c.align == "right"
                else f'<th class="text">{text_html(c.header)}</th>'
            )
            for c in self.columns
        )
        body = []
        for row in self.cells(records):
            tds = "".join(
                f'<td data-field="{attr_html(c.key)}">{text_html(v)}</td>'
                if c.align == "right"
                else f'<td class="text">{text_html(v)}</td>'
                for c, v in zip(self.columns, row, strict=True)
            )
            body.append(f"<tr>{tds}</tr>")
        title = f"<caption>{text_html(caption)}</caption>" if caption else ""
        return (
            f'<table class="wb">{title}<thead><tr>{head}</tr></thead><tbody>{"".join(body)}</tbody></table>'
        )


# ---- documents: a result as a list of parts ----------------------------------------------------------------
@dataclass(frozen=True)
class Heading:
    """A result's title (text: underlined with ``=``)."""

    text: str


@dataclass(frozen=True)
class Paragraph:
    """Lines of text (HTML: one ``<p>``, lines separated by ``<br>``)."""

    lines: tuple[str, ...]


@dataclass(frozen=True)
class Table:
    """A table spec bound to its records, with an optional title line."""

    spec: TableSpec
    records: tuple[Mapping[str, Any], ...]
    title: str = ""


@dataclass(frozen=True)
class Bullets:
    """A list of notes (text: one indented line each, behind ``mark``), with an optional title line."""

    items: tuple[str, ...]
    title: str = ""
    mark: str = "-"


Part = Heading | Paragraph | Table | Bullets


def _text_part(part: Part) -> list[str]:
    if isinstance(part, Heading):
        return [part.text, "=" * min(len(part.text), 100)]
    if isinstance(part, Paragraph):
        return list(part.lines)
    title = [part.title] if part.title else []
    if isinstance(part, Table):
        return [*title, part.spec.as_text(part.records, indent="  ")]
    return [*title, *(f"  {part.mark} {item}" for item in part.items)]


def render_text(parts: Sequence[Part]) -> str:
    """The parts as plain text, separated by blank lines (empty parts are left out).

    Examples
    --------
    >>> print(render_text([Heading("Farm"), Paragraph(("truth 0.25",)), Bullets(("a note",), "Notes")]))
    Farm
    ====
    <BLANKLINE>
    truth 0.25
    <BLANKLINE>
    Notes
      - a note
    """
    blocks = ["\n".join(_text_part(p)) for p in parts if _has_content(p)]
    return "\n\n".join(blocks)


def _has_content(part: Part) -> bool:
    if isinstance(part, Paragraph):
        return bool(part.lines)
    if isinstance(part, Bullets):
        return bool(part.items)
    return True


def _html_part(part: Part) -> str:
    if isinstance(part, Heading):
        return f"<h3>{text_html(part.text)}</h3>"
    if isinstance(part, Paragraph):
        return "<p>" + "<br>".join(text_html(line) for line in part.lines) + "</p>"
    if isinstance(part, Table):
        return part.spec.as_html(part.records, caption=part.title)
    title = f"<p>{text_html(part.title)}</p>" if part.title else ""
    return title + "<ul>" + "".join(f"<li>{text_html(item)}</li>" for item in part.items) + "</ul>"


def render_html(parts: Sequence[Part]) -> str:
    """The parts as one HTML fragment (``<div class="wb-result">``), every text escaped.

    Examples
    --------
    >>> render_html([Heading("a < b"), Bullets(("x & y",))])
    '<div class="wb-result"><h3>a &lt; b</h3><ul><li>x &amp; y</li></ul></div>'
    """
    inner = "".join(_html_part(p) for p in parts if _has_content(p))
    return f'<div class="wb-result">{inner}</div>'
