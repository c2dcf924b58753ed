"""The report's findings about the predictors: importance (table and picture) and the dependence pictures."""

from __future__ import annotations

from typing import Any

import numpy as np

from ..analyses.dependence import partial_dependence
from ..analyses.importance import Importance, importance
from ..analyses.view import FittedForest
from .page import Section, figure, table, text
from .pictures import svg

__all__ = ["dependence_section", "importance_of", "importance_section"]


def importance_of(view: FittedForest, rng: Any) -> Importance:
    """Permutation importance on the out-of-bag cases; impurity importance when the data were not kept."""
    return importance(view, rng=rng) if view.has_data else importance(view, "impurity")


def importance_section(result: Importance, plot: Any, top: int = 15) -> Section:
    """The importance table, all entries, most important first, and the bars of the ``top`` ones."""
    rows = [(rank, result.names[k], float(result.scores[k]), float(result.spread[k]), float(result.z[k]))
            for rank, k in enumerate(result.ranking, start=1)]
    note = ("Rise in the out-of-bag error when a predictor's values are shuffled among the cases each tree did "
            "not see (Breiman 2001); spread over trees, z = score / (spread / sqrt(trees))."
            if result.kind == "permutation" else
            "Share of the trees' impurity decrease made by splits on each predictor (the training data were not "
            "kept, so no permutation importance); it favours predictors with many distinct values.")
    shown = min(top, len(result.names))
    picture = figure("importance-bars", svg(lambda ax: plot.importance(result, top=shown, ax=ax),
                                            (6.4, max(2.4, 0.32 * shown + 1.2))),
                     f"Bar chart of the {result.kind} importance of the {shown} most important predictors",
                     f"{result.kind.capitalize()} importance of the {shown} leading predictors, with whiskers of "
                     "plus or minus one spread over trees.")
    body = (f'<p class="lead">{text(note)}</p>' + picture
            + table("importance-table", ["rank", "predictor", "score", "spread", "z"], rows,
                    caption=f"{result.kind} importance: {result.measure}"))
    return Section("importance", "Which predictors matter", body)


def dependence_section(view: FittedForest, result: Importance, plot: Any, features: int, label: Any) -> Section:
    """Partial dependence (with individual curves) on the ``features`` leading predictors."""
    heading = "How the prediction moves with the leading predictors"
    if not view.has_data:
        return Section("dependence", heading, '<p class="lead">Not available: the forest was loaded without its '
                                              "training data, over which partial dependence averages.</p>")
    if view.task == "classification" and label is None and view.classes.size > 2:
        label = view.classes[int(np.argmax(np.bincount(view.y, minlength=view.classes.size)))]
    leading = [result.columns[k][0] for k in result.ranking[:features] if len(result.columns[k]) == 1]
    pictures = []
    for j in leading:
        name = view.feature_names[j]
        curve = partial_dependence(view, j, ice=True, label=label)
        pictures.append(figure(f"dependence-{j}", svg(lambda ax, c=curve, n=name: plot.partial_dependence(
            c, name=n, curves=30, ax=ax), (5.2, 3.6)),
            f"Partial dependence of the prediction on {name}, with individual curves",
            f"Partial dependence on {name}: the thick line is the average over the training cases, the thin "
            "ones single cases."))
    what = "the prediction" if view.task == "regression" else f"the share of votes for {curve.label!r}"
    lead = (f'<p class="lead">How {text(what)} changes as one predictor is set to each value in turn, all else '
            "as recorded (partial dependence, Friedman 2001; thin lines: single cases). A picture of the model, "
            "not of cause and effect.</p>")
    return Section("dependence", heading, lead + f'<div class="pictures">{"".join(pictures)}</div>')
