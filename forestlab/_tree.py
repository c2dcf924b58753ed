"""One fitted tree as flat node arrays, and level-by-level prediction through it."""

from __future__ import annotations

from dataclasses import dataclass, fields

import numpy as np
from numpy.typing import NDArray

__all__ = ["Tree", "TreeArrays", "leaf_index"]


@dataclass(frozen=True, eq=False)
class Tree:
    """One tree of a fitted forest as flat, read-only node arrays (breadth-first order, root = node 0).

    Node ``k`` is a leaf when ``feature[k] == -1``; otherwise a case goes to ``left[k]`` when its value of
    feature ``feature[k]`` is ``<= threshold[k]`` and to ``right[k]`` (always ``left[k] + 1``) otherwise.
    Children always come after their parent.

    Attributes
    ----------
    feature : ndarray of int32, shape (nodes,)
        Split feature, -1 at leaves.
    threshold : ndarray of float64, shape (nodes,)
        Split threshold (midpoint between neighbouring distinct values), NaN at leaves.
    left, right : ndarray of int32, shape (nodes,)
        Child indices, -1 at leaves.
    value : ndarray of float64, shape (nodes,)
        The node's prediction: class index of the heaviest class (lowest index on ties) or the weighted mean
        of the target. Defined at every node, not only at leaves.
    cases : ndarray of float64, shape (nodes,)
        Bootstrap-weighted number of training cases in the node.
    impurity_decrease : ndarray of float64, shape (nodes,)
        ``W_t i(t) - W_l i(l) - W_r i(r)`` of the node's split (0 at leaves), in weighted cases times impurity.
    depth : ndarray of int32, shape (nodes,)
        Depth of the node; the root has depth 0.
    missing_left : ndarray of bool, shape (nodes,)
        Where a case whose split feature is missing (NaN) goes: left when True. Learned with the threshold
        when the node's training cases had missing values there, else the heavier child. False at leaves.
    """

    feature: NDArray[np.int32]
    threshold: NDArray[np.float64]
    left: NDArray[np.int32]
    right: NDArray[np.int32]
    value: NDArray[np.float64]
    cases: NDArray[np.float64]
    impurity_decrease: NDArray[np.float64]
    depth: NDArray[np.int32]
    missing_left: NDArray[np.bool_]

    def __post_init__(self) -> None:
        for f in fields(self):
            getattr(self, f.name).flags.writeable = False

    @property
    def nodes(self) -> int:
        """Number of nodes."""
        return int(self.feature.size)

    @property
    def leaves(self) -> int:
        """Number of leaves."""
        return int(np.count_nonzero(self.feature < 0))

    @classmethod
    def from_columns(cls, parts: dict[str, list[NDArray]], b: int) -> Tree:
        """Build tree ``b`` from the grower's per-tree columns."""
        left = parts["left"][b].astype(np.int32)
        return cls(
            feature=parts["feature"][b].astype(np.int32),
            threshold=parts["threshold"][b].astype(np.float64),
            left=left,
            right=np.where(left >= 0, left + 1, -1).astype(np.int32),
            value=parts["value"][b].astype(np.float64),
            cases=parts["cases"][b].astype(np.float64),
            impurity_decrease=parts["decrease"][b].astype(np.float64),
            depth=parts["depth"][b].astype(np.int32),
            missing_left=parts["missing_left"][b].astype(np.bool_),
        )

    def __repr__(self) -> str:
        return f"Tree(nodes={self.nodes}, leaves={self.leaves}, depth={int(self.depth.max())})"


TreeArrays = Tree


def leaf_index(tree: Tree, X: NDArray[np.float64]) -> NDArray[np.int64]:
    """Leaf reached by every row of ``X``, pushing all rows down the tree one level at a time."""
    n, p = X.shape
    flat = X.ravel()
    gaps = bool(np.isnan(flat).any())
    node = np.zeros(n, dtype=np.int64)
    active = np.arange(n)
    while active.size:
        here = node[active]
        feature = tree.feature[here]
        inner = np.flatnonzero(feature >= 0)
        if inner.size == 0:
            break
        active, here, feature = active[inner], here[inner], feature[inner]
        value = flat[active * p + feature]
        go_right = value > tree.threshold[here]
        if gaps:
            gap = np.flatnonzero(np.isnan(value))
            go_right[gap] = ~tree.missing_left[here[gap]]
        node[active] = tree.left[here] + go_right
    return node
