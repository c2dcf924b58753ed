"""What ``print(forest)`` shows once the forest is fitted: the data, the trees, the out-of-bag error.

A few lines, each led by what it is about::

    Forest for classification, fitted on 300 cases x 5 features; 2 classes: 'fail', 'pass'
      trees        50, grown by Gini impurity, leaves of at least 1 (weighted) case
      candidates   2 of the 5 features at every node (random subset)
      out-of-bag   misclassification rate 0.0267; every case was out-of-bag for some tree

The out-of-bag error is the forest's cached :class:`~forestlab.analyses.results.OutOfBag` (computed once,
by the first print or ``forest.oob``, and only when the training data are there); the count of cases never
out-of-bag is read from the in-bag counts.
"""

from __future__ import annotations

import numpy as np

from .analyses.results import OutOfBag
from .analyses.view import FittedForest
from .engine.grow import GrowthRules
from .engine.sampler import AllFeatures, RandomSubset, TreeSubspace
from .engine.splitter import EntropySplitter, GiniSplitter, SquaredErrorSplitter

__all__ = ["SHOWN_CLASSES", "fitted_summary"]

#: Class labels named in the first line; more are counted.
SHOWN_CLASSES = 6

_CRITERIA = {GiniSplitter: "Gini impurity", EntropySplitter: "entropy", SquaredErrorSplitter: "squared error"}


def fitted_summary(view: FittedForest, rules: GrowthRules, oob: OutOfBag | None) -> str:
    """The text of ``print(forest)`` for a fitted forest (see the module docstring)."""
    head = f"Forest for {view.task}, fitted on {view.cases} cases x {view.features} features"
    if view.classes is not None:
        labels = ", ".join(repr(_plain(c)) for c in view.classes[:SHOWN_CLASSES])
        more = f" and {view.classes.size - SHOWN_CLASSES} more" if view.classes.size > SHOWN_CLASSES else ""
        head += f"; {view.classes.size} classes: {labels}{more}"
    criterion = _CRITERIA.get(type(rules.splitter), repr(rules.splitter))
    depth = "" if rules.depth_limit is None else f", depth at most {rules.depth_limit}"
    lines = [head,
             f"  trees        {len(view.trees)}, grown by {criterion}, leaves of at least {rules.min_leaf:g} "
             f"(weighted) case{'' if rules.min_leaf == 1 else 's'}{depth}",
             f"  candidates   {_candidates(rules.sampler, view.features)}",
             f"  out-of-bag   {_oob_line(view, oob)}"]
    return "\n".join(lines)


def _candidates(sampler: object, p: int) -> str:
    if type(sampler) is AllFeatures:
        return f"all {p} features at every node (bagging)"
    if type(sampler) is RandomSubset and isinstance(sampler.m, int):
        return f"{sampler.m} of the {p} features at every node (random subset)"
    if type(sampler) is TreeSubspace and isinstance(sampler.m, int):
        return f"{sampler.m} of the {p} features, one subset per tree (random subspace)"
    return f"as {sampler!r} draws them"


def _oob_line(view: FittedForest, oob: OutOfBag | None) -> str:
    never = int(np.count_nonzero(np.all(view.inbag > 0, axis=0)))
    cover = "every case was out-of-bag for some tree" if not never else \
        f"{never} of {view.cases} cases were never out-of-bag (left out)"
    if oob is None:
        return f"error not known (loaded without the training data or out-of-bag results); {cover}"
    if view.task == "classification":
        return f"misclassification rate {oob.error:.4g}; {cover}"
    return f"mean squared error {oob.error:.4g}, explained variance {oob.explained_variance:.3f}; {cover}"


def _plain(label: object) -> object:
    return label.item() if isinstance(label, np.generic) else label
