"""The cases an analysis reads: the training data kept by the fitted forest, or data passed explicitly."""

from __future__ import annotations

from collections.abc import Iterator
from typing import Any

import numpy as np
from numpy.typing import NDArray

from ..engine.tree import leaf_index, tree_values
from ..intake.validation import check_y
from .view import FittedForest

__all__ = ["PREDICTION_BUDGET", "ROW_BUDGET", "analysis_X", "analysis_y", "forest_mean", "forest_votes", "leaves",
           "mean_prediction", "row_blocks", "vote_shares"]

# Largest number of float64 elements a stacked block of predictor copies may hold (about 32 MB).
ROW_BUDGET = 4_000_000

# Largest (trees, rows) table of per-tree predictions ``forest_votes`` / ``forest_mean`` hold at once (32 MB).
PREDICTION_BUDGET = 4_000_000


def analysis_X(forest: FittedForest, X: Any) -> tuple[NDArray[np.float64], bool]:
    """``X`` validated and coded like the training predictors (categories as codes), or the training predictors
    themselves; the flag says which."""
    if X is None:
        return forest.training_X(), True
    return forest.coded(X), False


def analysis_y(forest: FittedForest, y: Any, rows: int) -> NDArray:
    """Targets encoded like the training targets (class indices or floats) for ``rows`` cases."""
    target = check_y(y, rows, forest.task)
    if forest.task == "classification":
        known = np.isin(target.classes, forest.classes)
        if not known.all():
            raise ValueError(f"`y` holds label(s) the forest never saw: {target.classes[~known].tolist()[:5]}")
        return np.searchsorted(forest.classes, target.classes)[target.values]
    return target.values


def leaves(forest: FittedForest, X: NDArray[np.float64]) -> NDArray[np.int64]:
    """Leaf reached by every case in every tree: shape (trees, n)."""
    out = np.empty((len(forest.trees), X.shape[0]), dtype=np.int64)
    for b, tree in enumerate(forest.trees):
        out[b] = leaf_index(tree, X)
    return out


def row_blocks(rows: int, width: int, budget: int = ROW_BUDGET) -> Iterator[slice]:
    """Consecutive slices of ``range(rows)`` with at most ``budget // width`` rows each (at least one)."""
    step = max(1, budget // max(1, width))
    for start in range(0, rows, step):
        yield slice(start, min(rows, start + step))


def mean_prediction(forest: FittedForest, X: NDArray[np.float64], label: int | None) -> NDArray[np.float64]:
    """Mean over trees of each tree's value (regression) or share of trees voting ``label``, for every row.

    Works through ``X`` in row blocks, so a large stacked design never meets all trees at once.
    """
    out = np.zeros(X.shape[0])
    for rows in row_blocks(X.shape[0], X.shape[1]):
        block = X[rows]
        for tree in forest.trees:
            value = tree.value[leaf_index(tree, block)]
            out[rows] += value if label is None else (value == label)
    return out / len(forest.trees)


def vote_shares(per_tree: NDArray[np.int64], classes: int) -> NDArray[np.float64]:
    """Share of rows of ``per_tree`` (trees, n) equal to each class: shape (n, classes)."""
    trees, n = per_tree.shape
    flat = (np.arange(n) * classes)[None, :] + per_tree
    counts = np.bincount(flat.ravel(), minlength=n * classes).reshape(n, classes)
    return counts / trees


def forest_votes(trees, X: NDArray[np.float64], classes: int) -> NDArray[np.float64]:
    """:func:`vote_shares` of every tree's class index for every row of ``X`` (n, classes), a block of rows at a
    time, so that at most ``PREDICTION_BUDGET`` per-tree predictions are held (each row's shares are its own
    counts over the trees, the same whatever the block)."""
    out = np.empty((X.shape[0], classes))
    for rows in row_blocks(X.shape[0], len(trees), PREDICTION_BUDGET):
        out[rows] = vote_shares(tree_values(trees, X[rows], np.int64), classes)
    return out


def forest_mean(trees, X: NDArray[np.float64]) -> NDArray[np.float64]:
    """Mean over the trees of their values for every row of ``X``, a block of rows at a time (as
    :func:`forest_votes`; the mean of a (trees, rows) table sums each column in tree order, whatever its rows)."""
    out = np.empty(X.shape[0])
    for rows in row_blocks(X.shape[0], len(trees), PREDICTION_BUDGET):
        out[rows] = tree_values(trees, X[rows], np.float64).mean(axis=0)
    return out
