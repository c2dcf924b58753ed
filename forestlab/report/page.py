"""The pieces of a report page: escaped text, numbers that keep their exact value, tables, figures, sections.

Every number shown carries its full value in a ``data-value`` attribute (``repr`` of the float, or the int),
so a reader's tool, and the tests, can check the page against the Python objects; the text shows it rounded.
"""

from __future__ import annotations

import base64
import html
import numbers
from collections.abc import Iterable, Sequence
from dataclasses import dataclass

import numpy as np

from .style import STYLE

__all__ = ["Section", "figure", "key_figures", "number", "page", "table", "text"]


def text(value: object) -> str:
    """``value`` as escaped HTML text."""
    return html.escape(str(value), quote=True)


def number(value: object, digits: int = 4) -> str:
    """A number as HTML: rounded to ``digits`` significant digits, its exact value in ``data-value``; any
    other value as escaped text."""
    if isinstance(value, (bool, np.bool_)) or not isinstance(value, numbers.Real):
        return text(value)
    if isinstance(value, numbers.Integral):
        return f'<span class="n" data-value="{int(value)}">{int(value)}</span>'
    value = float(value)
    shown = "–" if np.isnan(value) else f"{value:.{digits}g}".replace("inf", "∞")
    return f'<span class="n" data-value="{value!r}">{shown}</span>'


def table(key: str, head: Sequence[str], rows: Iterable[Sequence[object]], caption: str = "",
          row_heads: bool = True, facts: bool = False) -> str:
    """A table with ``id`` ``key``: a header row, then one row per entry (numbers via :func:`number`, the
    first cell a row header when ``row_heads``); ``facts`` marks a two-column list of facts (all left-aligned)."""
    cells = []
    for row in rows:
        first, *rest = [number(v) for v in row]
        lead = f'<th scope="row">{first}</th>' if row_heads else f"<td>{first}</td>"
        cells.append("<tr>" + lead + "".join(f"<td>{c}</td>" for c in rest) + "</tr>")
    cap = f"<caption>{text(caption)}</caption>" if caption else ""
    header = "".join(f'<th scope="col">{text(h)}</th>' for h in head)
    kind = ' class="facts"' if facts else ""
    return (f'<table id="{key}"{kind}>{cap}<thead><tr>{header}</tr></thead>'
            f'<tbody>{"".join(cells)}</tbody></table>')


def key_figures(key: str, items: Sequence[tuple[str, object, str]]) -> str:
    """A row of headline figures: (label, value, note) each."""
    tiles = "".join(f'<div class="tile"><dt>{text(label)}</dt><dd>{number(value)}</dd>'
                    f'{f"<dd class=note>{text(note)}</dd>" if note else ""}</div>' for label, value, note in items)
    return f'<dl class="tiles" id="{key}">{tiles}</dl>'


def figure(key: str, svg: bytes, alt: str, caption: str) -> str:
    """An SVG picture embedded as a data URI, with its caption."""
    data = base64.b64encode(svg).decode("ascii")
    return (f'<figure id="{key}"><img src="data:image/svg+xml;base64,{data}" alt="{text(alt)}">'
            f"<figcaption>{text(caption)}</figcaption></figure>")


@dataclass(frozen=True)
class Section:
    """One section of the page: its ``id``, heading and HTML body."""

    key: str
    heading: str
    body: str


def page(title: str, subtitle: str, sections: Sequence[Section]) -> str:
    """The whole HTML5 document: style sheet inline, a contents list, the sections; no script, no link."""
    contents = "".join(f'<li><a href="#{s.key}">{text(s.heading)}</a></li>' for s in sections)
    body = "".join(f'<section id="{s.key}"><h2>{text(s.heading)}</h2>{s.body}</section>' for s in sections)
    return ("<!DOCTYPE html>\n"
            f'<html lang="en"><head><meta charset="utf-8"><title>{text(title)}</title>'
            '<meta name="viewport" content="width=device-width, initial-scale=1">'
            f"<style>{STYLE}</style></head><body>"
            f'<header><p class="kicker">forestlab report</p><h1>{text(title)}</h1><p>{text(subtitle)}</p></header>'
            f'<nav aria-label="Contents"><div><h2>Contents</h2><ol>{contents}</ol></div></nav>'
            f"<main>{body}</main></body></html>\n")
