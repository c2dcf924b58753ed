"""Which leaf every case reaches in every tree, as its rank among the tree's leaves.

The quantile regression forest needs, for every tree, which training cases share a leaf; a model file saved
without the training data keeps these leaf numbers (``case_leaves``, two bytes a case and tree for trees of
up to 65 536 leaves), so a loaded forest still gives quantiles and quantile intervals.
"""

from __future__ import annotations

import numpy as np
from numpy.typing import NDArray

from ...engine.tree import Tree, leaf_index
from ..view import FittedForest

__all__ = ["leaf_ranks", "new_leaves", "rank_dtype", "training_leaves"]


def leaf_ranks(tree: Tree) -> NDArray[np.int64]:
    """For every node of ``tree``: its rank among the leaves in node order, -1 at inner nodes."""
    leaf = tree.feature < 0
    return np.where(leaf, np.cumsum(leaf) - 1, -1)


def rank_dtype(trees: tuple[Tree, ...]) -> str:
    """The smallest stored type of leaf ranks: ``"<u2"`` when every tree has at most 65 536 leaves."""
    return "<u2" if max(tree.leaves for tree in trees) <= 1 << 16 else "<u4"


def new_leaves(forest: FittedForest, X: NDArray[np.float64]) -> NDArray[np.int32]:
    """The leaf rank every row of the coded ``X`` reaches in every tree: shape (trees, rows)."""
    out = np.empty((len(forest.trees), X.shape[0]), dtype=np.int32)
    missing = bool(np.isnan(X).any())
    for b, tree in enumerate(forest.trees):
        out[b] = leaf_ranks(tree)[leaf_index(tree, X, missing)]
    return out


def training_leaves(forest: FittedForest) -> NDArray:
    """The leaf rank of every training case in every tree, (trees, n): read from the model file when the
    forest was loaded without its data, else computed from the training predictors (a RuntimeError when
    neither is there)."""
    if forest.case_leaves is not None:
        return forest.case_leaves
    return new_leaves(forest, forest.training_X())
