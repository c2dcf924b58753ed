"""Reading a report back: its tables (cells with their shown text and exact ``data-value``), its figures' SVG,
and a report of each task on public data (tests/data, see PROVENANCE.md), shared by the report's tests."""

from __future__ import annotations

import base64
import re
from html.parser import HTMLParser

import numpy as np
from refdata import load_table

import forestlab as fl


class Tables(HTMLParser):
    """Every table by id: rows of cells, each cell (text, data-value or None); and every img src by figure id."""

    def __init__(self, document: str) -> None:
        super().__init__()
        self.tables: dict[str, list[list[tuple[str, str | None]]]] = {}
        self.images: dict[str, str] = {}
        self.ids: list[str] = []
        self._table = self._cell = self._figure = None
        self.feed(document)

    def handle_starttag(self, tag, attrs):
        attrs = dict(attrs)
        if "id" in attrs:
            self.ids.append(attrs["id"])
        if tag == "table":
            self._table = self.tables.setdefault(attrs["id"], [])
        elif tag == "tr" and self._table is not None:
            self._table.append([])
        elif tag in ("td", "th") and self._table is not None:
            self._cell = ["", None]
        elif tag == "span" and self._cell is not None and "data-value" in attrs:
            self._cell[1] = attrs["data-value"]
        elif tag == "figure":
            self._figure = attrs["id"]
        elif tag == "img" and self._figure is not None:
            self.images[self._figure] = attrs["src"]

    def handle_endtag(self, tag):
        if tag in ("td", "th") and self._cell is not None:
            self._table[-1].append((self._cell[0].strip(), self._cell[1]))
            self._cell = None
        elif tag == "table":
            self._table = None
        elif tag == "figure":
            self._figure = None

    def handle_data(self, data):
        if self._cell is not None:
            self._cell[0] += data

    def values(self, key: str, column: int) -> list[float]:
        """The exact values of one column of a table (its header row left out)."""
        return [float(row[column][1]) for row in self.tables[key][1:]]

    def texts(self, key: str, column: int) -> list[str]:
        return [row[column][0] for row in self.tables[key][1:]]

    def svg_text(self, figure: str) -> list[str]:
        """The text elements of one figure's SVG."""
        data = self.images[figure]
        assert data.startswith("data:image/svg+xml;base64,")
        svg = base64.b64decode(data.split(",", 1)[1]).decode("utf-8")
        return [re.sub(r"<[^>]+>", "", t).strip() for t in re.findall(r"<text\b.*?</text>", svg, flags=re.S)]


def breast_cancer_forest() -> tuple[fl.Forest, np.ndarray, list[str]]:
    """Two classes, missing values (Bare.nuclei), named columns through a data frame."""
    import pandas as pd

    X, y, names = load_table("breastcancer")
    frame = pd.DataFrame(X, columns=names)
    return fl.Forest(trees=60, rng=1).fit(frame, y), frame, names


def glass_regression_forest() -> tuple[fl.Forest, np.ndarray]:
    """The refractive index of the glass from its oxides."""
    X, _, _ = load_table("glass")
    return fl.Forest(trees=60, rng=2).fit(X[:, 1:], X[:, 0]), X[:, 1:]
