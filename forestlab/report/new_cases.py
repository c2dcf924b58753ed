"""The report's section on new cases (``X_new``): one row per case, columns from the column makers below.

A column maker takes the fitted view, the new cases coded as in training, the out-of-bag results and the
level of the uncertainty columns, and returns ``(header, values)`` pairs, one value per case. The section
shows every maker's columns side by side, so a new kind of column is one more function in
:data:`COLUMN_MAKERS`. A maker that cannot apply to a forest raises ValueError or RuntimeError; its columns
are then left out and its reason is said under the table.
"""

from __future__ import annotations

from collections.abc import Callable
from html import escape

import numpy as np
from numpy.typing import NDArray

from ..analyses.cases import vote_shares
from ..analyses.results import OutOfBag
from ..analyses.uncertainty.intervals import intervals
from ..analyses.uncertainty.sets import prediction_sets
from ..analyses.view import FittedForest
from ..engine.tree import tree_values
from .page import Section, table

__all__ = ["COLUMN_MAKERS", "SETS_SEED", "checked_new_cases", "new_cases_section", "predictions", "uncertainty"]

Columns = list[tuple[str, NDArray]]

#: The seed of the prediction sets' randomised score: the report shows ``forest.prediction_sets(X_new, level,
#: rng=SETS_SEED)``, so the same report twice shows the same sets.
SETS_SEED = 0


def predictions(view: FittedForest, X: NDArray[np.float64], oob: OutOfBag | None, level: float) -> Columns:
    """The forest's prediction for every case: the label and the vote shares, or the mean of the trees."""
    if view.task == "regression":
        return [("prediction (mean of the trees)", tree_values(view.trees, X, np.float64).mean(axis=0))]
    shares = vote_shares(tree_values(view.trees, X, np.int64), view.classes.size)
    columns = [("predicted class", view.classes[np.argmax(shares, axis=1)])]
    return columns + [(f"share for {c}", shares[:, k]) for k, c in enumerate(view.classes.tolist())]


def uncertainty(view: FittedForest, X: NDArray[np.float64], oob: OutOfBag | None, level: float) -> Columns:
    """How sure each prediction is: the jackknife+ interval (regression) or the conformal prediction set
    (classification) at ``level``, as ``forest.intervals`` and ``forest.prediction_sets`` give them."""
    percent = f"{100 * level:g}%"
    if view.task == "regression":
        found = intervals(view, X, level, oob=oob)
        return [(f"{percent} interval, lower end", found.lower), (f"{percent} interval, upper end", found.upper)]
    found = prediction_sets(view, X, level, rng=SETS_SEED, oob=oob)
    labels = np.array([", ".join(str(c) for c in view.classes[row]) or "(none)" for row in found.members],
                      dtype=object)
    return [(f"{percent} prediction set", labels)]


COLUMN_MAKERS: list[Callable[[FittedForest, NDArray[np.float64], OutOfBag | None, float], Columns]] = [
    predictions, uncertainty]


def checked_new_cases(view: FittedForest, X_new: object) -> NDArray[np.float64]:
    """``X_new`` checked and coded like the training predictors (before the report does any work)."""
    return view.coded(X_new, name="X_new")


def new_cases_section(view: FittedForest, coded: NDArray[np.float64], rows: int, oob: OutOfBag | None,
                      level: float) -> Section:
    """Predictions for the coded new cases, with how sure each one is, for their first ``rows`` cases."""
    columns, missing = [], []
    for make in COLUMN_MAKERS:
        try:
            columns += make(view, coded, oob, level)
        except (ValueError, RuntimeError) as reason:
            missing.append(f"{make.__name__}: {reason}")
    shown = min(rows, coded.shape[0])
    body = [(i, *(_cell(values[i]) for _, values in columns)) for i in range(shown)]
    first = f", the first {shown} shown" if shown < coded.shape[0] else ""
    sure = (f"an interval that covers the true value for about {100 * level:g}% of new cases like the "
            "training cases (jackknife+ after bootstrap, Kim, Xu & Barber 2020)" if view.task == "regression" else
            f"a set of the classes that are plausible for it, holding the true class for about {100 * level:g}% "
            "of new cases like the training cases (conformal, calibrated on the out-of-bag votes)")
    lead = (f'<p class="lead">{coded.shape[0]} new case(s){first}. Beside each prediction, {sure}. The '
            "out-of-bag error and these ranges are a guide only for cases like the training cases.</p>")
    summary = ""
    if view.task == "classification":
        labels, counts = np.unique(columns[0][1].astype(str), return_counts=True)
        summary = table("new-cases-summary", ["predicted class", "cases"], zip(labels.tolist(), counts.tolist()))
    gaps = "".join(f'<p class="lead">Not shown ({escape(why)}).</p>' for why in missing)
    return Section("new-cases", "Predictions for the new cases",
                   lead + summary + table("new-cases-table", ["row", *(h for h, _ in columns)], body) + gaps)


def _cell(value: object) -> object:
    return value.item() if isinstance(value, np.generic) else value
