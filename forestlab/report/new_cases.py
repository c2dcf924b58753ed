"""The report's section on new cases (``X_new``): one row per case, columns from the column makers below.

A column maker takes the fitted view and the new cases coded as in training and returns ``(header, values)``
pairs, one value per case. The section shows every maker's columns side by side, so a new kind of column
(say, per-case uncertainty) is one more function in :data:`COLUMN_MAKERS`.
"""

from __future__ import annotations

from collections.abc import Callable

import numpy as np
from numpy.typing import NDArray

from ..analyses.cases import vote_shares
from ..analyses.view import FittedForest
from ..engine.tree import tree_values
from .page import Section, table

__all__ = ["COLUMN_MAKERS", "new_cases_section", "predictions"]

Columns = list[tuple[str, NDArray]]


def predictions(view: FittedForest, X: NDArray[np.float64]) -> Columns:
    """The forest's prediction for every case: the label and the vote shares, or the mean of the trees."""
    if view.task == "regression":
        return [("prediction (mean of the trees)", tree_values(view.trees, X, np.float64).mean(axis=0))]
    shares = vote_shares(tree_values(view.trees, X, np.int64), view.classes.size)
    columns = [("predicted class", view.classes[np.argmax(shares, axis=1)])]
    return columns + [(f"share for {c}", shares[:, k]) for k, c in enumerate(view.classes.tolist())]


COLUMN_MAKERS: list[Callable[[FittedForest, NDArray[np.float64]], Columns]] = [predictions]


def new_cases_section(view: FittedForest, X_new: object, rows: int) -> Section:
    """Predictions for ``X_new`` (checked and coded like the training predictors), its first ``rows`` cases."""
    coded = view.coded(X_new, name="X_new")
    columns = [column for make in COLUMN_MAKERS for column in make(view, coded)]
    shown = min(rows, coded.shape[0])
    body = [(i, *(_cell(values[i]) for _, values in columns)) for i in range(shown)]
    first = f", the first {shown} shown" if shown < coded.shape[0] else ""
    lead = (f'<p class="lead">{coded.shape[0]} new case(s){first}. The out-of-bag error is a guide to how '
            "reliable these predictions are only for cases like the training cases.</p>")
    summary = ""
    if view.task == "classification":
        labels, counts = np.unique(columns[0][1].astype(str), return_counts=True)
        summary = table("new-cases-summary", ["predicted class", "cases"], zip(labels.tolist(), counts.tolist()))
    return Section("new-cases", "Predictions for the new cases",
                   lead + summary + table("new-cases-table", ["row", *(h for h, _ in columns)], body))


def _cell(value: object) -> object:
    return value.item() if isinstance(value, np.generic) else value
