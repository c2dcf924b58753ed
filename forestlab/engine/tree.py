"""One fitted tree as flat node arrays, and level-by-level prediction through it."""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np
from numpy.typing import NDArray

from .categories import in_left_set

__all__ = ["NODE_STORAGE", "Tree", "goes_right", "has_missing", "leaf_index", "stacked_leaf_values", "tree_values"]


def _read_only(arr: NDArray) -> NDArray:
    arr.flags.writeable = False
    return arr


# dtype of every stored node array (the order of Tree's fields)
NODE_STORAGE = {"feature": np.int32, "threshold": np.float64, "value": np.float64, "cases": np.float32,
                "impurity_decrease": np.float32, "missing_left": np.bool_, "category_left": np.uint64}


@dataclass(frozen=True, eq=False)
class Tree:
    """One tree of a fitted forest as flat, read-only node arrays (breadth-first order, root = node 0).

    Node ``k`` is a leaf when ``feature[k] == -1``; otherwise a case goes to ``left[k]`` when its value of
    feature ``feature[k]`` is ``<= threshold[k]`` and to ``right[k]`` (always ``left[k] + 1``) otherwise.
    Children always come after their parent: the children of the ``j``-th inner node (counting inner nodes
    in node order from 0) are nodes ``2j + 1`` and ``2j + 2``, so ``left``, ``right`` and ``depth`` follow from
    ``feature`` and are computed when read rather than stored.

    Attributes
    ----------
    feature : ndarray of int32, shape (nodes,)
        Split feature, -1 at leaves.
    threshold : ndarray of float64, shape (nodes,)
        Split threshold (midpoint between neighbouring distinct values), NaN at leaves.
    left, right : ndarray of int32, shape (nodes,)
        Child indices, -1 at leaves (computed from ``feature``).
    value : ndarray of float64, shape (nodes,)
        The node's prediction: class index of the heaviest class (lowest index on ties) or the weighted mean
        of the target. Defined at every node, not only at leaves.
    cases : ndarray of float32, shape (nodes,)
        Bootstrap-weighted number of training cases in the node (exact for counts below 2**24).
    impurity_decrease : ndarray of float32, shape (nodes,)
        ``W_t i(t) - W_l i(l) - W_r i(r)`` of the node's split (0 at leaves), in weighted cases times impurity,
        to single precision.
    depth : ndarray of int32, shape (nodes,)
        Depth of the node; the root has depth 0 (computed from ``feature``).
    missing_left : ndarray of bool, shape (nodes,)
        Where a case whose split feature is missing (NaN) goes: left when True. Learned with the threshold
        when the node's training cases had missing values there, else the heavier child. False at leaves.
    category_left : ndarray of uint64, shape (nodes, words)
        At a split on a categorical feature (``threshold`` is NaN there): bit ``c`` set when category code
        ``c`` goes left. A category the node never saw goes where missing values go. ``words`` is 0 when
        the forest has no categorical feature.
    """

    feature: NDArray[np.int32]
    threshold: NDArray[np.float64]
    value: NDArray[np.float64]
    cases: NDArray[np.float32]
    impurity_decrease: NDArray[np.float32]
    missing_left: NDArray[np.bool_]
    category_left: NDArray[np.uint64]

    def __post_init__(self) -> None:
        for name in NODE_STORAGE:  # the fields, in order (``dataclasses.fields`` costs more than the rest)
            getattr(self, name).flags.writeable = False

    def __setstate__(self, state: dict) -> None:
        """Unpickled trees (e.g. from worker processes) are read-only again."""
        self.__dict__.update(state)
        self.__post_init__()

    @property
    def nodes(self) -> int:
        """Number of nodes."""
        return int(self.feature.size)

    @property
    def leaves(self) -> int:
        """Number of leaves."""
        return int(np.count_nonzero(self.feature < 0))

    @property
    def left(self) -> NDArray[np.int32]:
        """Left child of every node (-1 at leaves): ``2j + 1`` for the ``j``-th inner node."""
        inner = self.feature >= 0
        return _read_only(np.where(inner, 2 * np.cumsum(inner, dtype=np.int64) - 1, -1).astype(np.int32))

    @property
    def right(self) -> NDArray[np.int32]:
        """Right child of every node (-1 at leaves): always ``left + 1``."""
        left = self.left
        return _read_only(np.where(left >= 0, left + 1, -1).astype(np.int32))

    @property
    def depth(self) -> NDArray[np.int32]:
        """Depth of every node (root 0), one pass per level."""
        depth = np.zeros(self.nodes, dtype=np.int32)
        left = self.left
        frontier = np.flatnonzero(left[:1] >= 0)
        level = 0
        while frontier.size:
            level += 1
            children = np.concatenate([left[frontier], left[frontier] + 1])
            depth[children] = level
            frontier = children[left[children] >= 0]
        return _read_only(depth)

    def __repr__(self) -> str:
        return f"Tree(nodes={self.nodes}, leaves={self.leaves}, depth={int(self.depth.max())})"



def goes_right(X: NDArray[np.float64], row, node, feature, threshold, missing_left, category_left,
               missing: bool = True) -> NDArray[np.bool_]:
    """Whether each (row, node) pair goes to the node's right child: value above the threshold, the missing
    side for NaN, the complement of the left-category set at a categorical split (threshold NaN).
    ``missing=False`` promises that ``X`` holds no NaN."""
    value = X.ravel()[row * X.shape[1] + feature[node]]
    right = value > threshold[node]
    if category_left.shape[1] == 0 and not missing:
        return right
    gap = np.isnan(value)
    if category_left.shape[1]:
        coded = np.flatnonzero(np.isnan(threshold[node]) & ~gap)
        if coded.size:
            right[coded] = ~in_left_set(category_left[node[coded]], value[coded])
    gap = np.flatnonzero(gap)
    if gap.size:
        right[gap] = ~missing_left[node[gap]]
    return right


def leaf_index(tree: Tree, X: NDArray[np.float64], missing: bool | None = None) -> NDArray[np.int64]:
    """Leaf reached by every row of ``X`` (categorical columns coded as in training), pushing all rows down
    the tree one level at a time. ``missing`` says whether ``X`` holds NaN (found out when None)."""
    if missing is None:
        missing = has_missing(X)
    if missing or tree.category_left.shape[1]:
        return _leaf_index_general(tree, X, missing)
    node = np.empty(X.shape[0], dtype=np.int64)
    for rows, leaves in _numeric_leaf_blocks(tree, X):
        node[rows] = leaves
    return node


_BLOCK_ROWS = 16384  # rows pushed down together: every temporary of a block stays in the cache


def _numeric_leaf_blocks(tree: Tree, X: NDArray[np.float64]):
    """``(rows, leaves)`` for every block of ``_BLOCK_ROWS`` rows of ``X`` (no NaN, no categorical splits):
    the slice of the block and the leaf each of its rows reaches."""
    step = _numeric_steps(tree)
    for lo in range(0, X.shape[0], _BLOCK_ROWS):
        yield slice(lo, lo + _BLOCK_ROWS), _descend(step, X[lo:lo + _BLOCK_ROWS])


def _numeric_steps(tree: Tree):
    """The node arrays of a tree without categorical splits, with leaves made self-loops (feature 0,
    threshold +inf, left = itself) so a step never moves a row out of a leaf."""
    leaf = tree.feature < 0
    return (np.where(leaf, 0, tree.feature).astype(np.intp), np.where(leaf, np.inf, tree.threshold),
            np.where(leaf, np.arange(tree.nodes), tree.left).astype(np.intp), leaf)


def _descend(step, X: NDArray[np.float64]) -> NDArray[np.intp]:
    """Leaf of every row of a block of ``X`` (no NaN), compacting the rows still on their way every level."""
    n, p = X.shape
    return _descend_from(step, X.ravel(), np.arange(n) * p, np.zeros(n, dtype=np.intp))


def _descend_from(step, flat: NDArray[np.float64], base: NDArray[np.intp], here: NDArray[np.intp]):
    """Leaf reached by every (row, start node) pair: row ``i`` reads ``flat[base[i] + feature]``.

    Leaves are self-loops, so a row that has arrived stays put; the rows still moving are compacted every
    ``_COMPACT_EVERY`` levels (a check and compaction each level would cost more than the steps it saves).
    """
    feature, threshold, left, leaf = step
    node = np.empty(here.size, dtype=np.intp)
    active = np.arange(here.size)
    level = 0
    while here.size:
        if level % _COMPACT_EVERY == 0:
            at_leaf = np.take(leaf, here, mode="clip")
            if at_leaf.any():
                done = np.flatnonzero(at_leaf)
                node[np.take(active, done, mode="clip")] = np.take(here, done, mode="clip")
                inner = np.flatnonzero(~at_leaf)
                active, base, here = (np.take(a, inner, mode="clip") for a in (active, base, here))
        at = np.take(feature, here, mode="clip")
        at += base
        right = np.take(flat, at, mode="clip") > np.take(threshold, here, mode="clip")
        here = np.take(left, here, mode="clip")
        here += right
        level += 1
    return node


_COMPACT_EVERY = 2


def tree_values(trees: Sequence[Tree], X: NDArray[np.float64], dtype: type) -> NDArray:
    """Every tree's value (class index or mean) at the leaf every row of ``X`` reaches: shape (trees, n)."""
    out = np.empty((len(trees), X.shape[0]), dtype=dtype)
    missing = has_missing(X)
    for b, tree in enumerate(trees):  # class indices are whole numbers: exact in either type
        if missing or tree.category_left.shape[1]:
            out[b] = np.take(tree.value, leaf_index(tree, X, missing), mode="clip")
            continue
        for rows, leaves in _numeric_leaf_blocks(tree, X):  # straight into the table (no (n,) leaves)
            out[b, rows] = np.take(tree.value, leaves, mode="clip")
    return out


def has_missing(X: NDArray[np.float64]) -> bool:
    """Whether ``X`` holds a NaN, looked for a block of rows at a time (no (n, p) mask)."""
    return any(bool(np.isnan(X[lo:lo + _BLOCK_ROWS]).any()) for lo in range(0, X.shape[0], _BLOCK_ROWS))


def stacked_leaf_values(trees: list[Tree], tree_of: NDArray[np.intp], row: NDArray[np.intp],
                        X: NDArray[np.float64]) -> NDArray[np.float64]:
    """``trees[tree_of[i]]``'s prediction for row ``row[i]`` of ``X``, all pairs pushed down together.

    For trees without categorical splits and ``X`` without missing values: the trees' node arrays are
    stacked into one (node indices offset per tree), so every level is a handful of whole-array calls over
    all pairs instead of one set of calls per tree.
    """
    steps = [_numeric_steps(tree) for tree in trees]
    sizes = np.array([tree.nodes for tree in trees])
    offset = np.cumsum(sizes) - sizes
    stacked = (np.concatenate([st[0] for st in steps]), np.concatenate([st[1] for st in steps]),
               np.concatenate([st[2] + o for st, o in zip(steps, offset)]), np.concatenate([st[3] for st in steps]))
    values = np.concatenate([tree.value for tree in trees])
    leaf = _descend_from(stacked, X.ravel(), row * X.shape[1], offset[tree_of])
    return values[leaf]


def _leaf_index_general(tree: Tree, X: NDArray[np.float64], missing: bool) -> NDArray[np.int64]:
    """:func:`leaf_index` for any tree and data (missing values, categorical splits)."""
    node = np.zeros(X.shape[0], dtype=np.int64)
    active = np.arange(X.shape[0])
    left = tree.left
    while active.size:
        here = node[active]
        inner = np.flatnonzero(tree.feature[here] >= 0)
        if inner.size == 0:
            break
        active, here = active[inner], here[inner]
        node[active] = left[here] + goes_right(X, active, here, tree.feature, tree.threshold,
                                                    tree.missing_left, tree.category_left, missing)
    return node
