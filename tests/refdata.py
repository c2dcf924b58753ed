"""Load the reference data in ``tests/data`` (public data sets and published figures).

Only the standard library and NumPy are used, so the tests run on a fresh clone with
the test extras alone. See ``tests/data/PROVENANCE.md`` for where the files come from.
"""

from __future__ import annotations

import csv
from pathlib import Path

import numpy as np

DATA_DIR = Path(__file__).resolve().parent / "data"
TABLES = ("breastcancer", "glass", "ionosphere", "pimaindiansdiabetes", "sonar")
PUBLISHED_FILE = "published_values.csv"


def _read_csv(filename: str) -> tuple[list[str], list[list[str]]]:
    """Return the header and the body rows of a CSV file in ``tests/data``."""
    with open(DATA_DIR / filename, newline="", encoding="utf-8") as handle:
        header, *rows = csv.reader(handle)
    ragged = [i for i, row in enumerate(rows) if len(row) != len(header)]
    if ragged:
        raise ValueError(
            f"{filename}: body row {ragged[0] + 1} has a different number of cells"
            f" from the header ({len(header)})."
        )
    return header, rows


def load_table(name: str) -> tuple[np.ndarray, np.ndarray, list[str]]:
    """Load one public data set as inputs, labels and input column names.

    Parameters
    ----------
    name : str
        One of `TABLES`, the file name without ``.csv``.

    Returns
    -------
    X : ndarray of float64, shape (n, p)
        The inputs; an empty cell (a missing value) becomes NaN.
    y : ndarray of str, shape (n,)
        The class labels, as written in the last column (named ``class``).
    columns : list of str, length p
        The names of the input columns, in the order of X's columns.
    """
    if name not in TABLES:
        raise ValueError(f"`name` must be one of {', '.join(TABLES)}; got {name!r}.")
    header, rows = _read_csv(f"{name}.csv")
    if header[-1] != "class":
        raise ValueError(f"{name}.csv: last column is {header[-1]!r}, not 'class'.")
    cells = np.array([row[:-1] for row in rows], dtype=str).reshape(len(rows), -1)
    X = np.full(cells.shape, np.nan)
    filled = cells != ""
    X[filled] = cells[filled].astype(np.float64)
    y = np.array([row[-1] for row in rows], dtype=str)
    return X, y, header[:-1]


def published_record(
    dataset: str, method_substring: str, *, source: str | None = None
) -> dict[str, str]:
    """Return the one row of ``published_values.csv`` for a data set and method.

    Parameters
    ----------
    dataset : str
        Exact value of the ``dataset`` column, e.g. ``"sonar"``.
    method_substring : str
        Case-sensitive substring of the ``method`` column, e.g. ``"One tree"``.
    source : str, optional
        Case-sensitive substring of the ``source`` column, to tell apart the same
        method in two papers.

    Returns
    -------
    dict of str to str
        The row, keyed by the file's header (source, location, dataset, quantity,
        method, value, unit, status, note).

    Raises
    ------
    LookupError
        When no row or more than one row matches; the message lists the candidates.
    """
    header, rows = _read_csv(PUBLISHED_FILE)
    records = [dict(zip(header, row)) for row in rows]
    of_dataset = [r for r in records if r["dataset"] == dataset]
    matches = [
        r
        for r in of_dataset
        if method_substring in r["method"] and (source is None or source in r["source"])
    ]
    if len(matches) != 1:
        candidates = sorted({f"{r['source']} / {r['method']}" for r in of_dataset})
        raise LookupError(
            f"{len(matches)} rows of {PUBLISHED_FILE} match dataset={dataset!r},"
            f" method containing {method_substring!r}, source containing {source!r};"
            f" rows for this data set: {candidates}"
        )
    return matches[0]


def published(
    dataset: str, method_substring: str, *, source: str | None = None
) -> float:
    """Return a published figure as a float, in the unit of the file's ``unit`` column.

    The ``note`` column may carry a further scale (e.g. ``x1e3``); it is not applied.
    Arguments are those of `published_record`.
    """
    record = published_record(dataset, method_substring, source=source)
    try:
        return float(record["value"])
    except ValueError:
        raise ValueError(
            f"The published value for {dataset!r} / {record['method']!r} is text,"
            f" not a number: {record['value']!r}."
        ) from None
