"""Quantile regression forest: the conditional distribution of the target from leaf co-membership weights.

Meinshausen (2006), "Quantile regression forests", JMLR 7: a new case ``x`` gives training case ``i`` the
weight ``w_i(x) = (1/B) sum_b c_bi [i in leaf_b(x)] / sum_j c_bj [j in leaf_b(x)]``, and the conditional
distribution function ``F(y | x) = sum_i w_i(x) [y_i <= y]`` has the quantiles ``Q_p(x) = inf {y : F(y | x) >=
p}``. Two choices of the counts ``c_bi``:

- ``"original"`` (the default): every training case once (times its case weight), in-bag or not, dropped
  down every tree: the paper's form, which records all the observations in a leaf, not just their average.
  The out-of-bag cases in a leaf are ones the tree did not fit, so its spread is not shrunk by the splits
  (on our heteroscedastic coverage checks it covered slightly more than the other form, closer to the level);
- ``"bootstrap"``: ``c_bi`` is the in-bag count times the case weight, the weights that made the leaf's
  value, so ``sum_i w_i(x) y_i`` is exactly the forest's prediction; a tree's out-of-bag cases take no part.

The weights of a block of new rows are one sparse matrix product: the rows' leaves (rows x all leaves of all
trees, one entry per row and tree) times every leaf's members and their shares (all leaves x cases, the cases
in the order of the sorted targets), so every quantile is a cumulative sum and a count; there is no loop over
rows or cases.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass
from typing import Any

import numpy as np
import scipy.sparse
from numpy.typing import ArrayLike, NDArray

from ..cases import ROW_BUDGET, row_blocks
from ..view import FittedForest
from .leaves import new_leaves, training_leaves
from .outputs import SHOWN_ROWS, cell, more_rows, read_only, table

__all__ = ["ConditionalQuantiles", "LEAF_COUNTS", "quantile_values", "quantiles"]

LEAF_COUNTS = ("original", "bootstrap")
# Cumulative weights within this relative distance of p count as reaching it (sums of weights round).
ROUNDING = 1e-12


@dataclass(frozen=True, eq=False, repr=False)
class ConditionalQuantiles:
    """Quantiles of the target at new rows from a quantile regression forest (see :func:`quantiles`).

    Attributes
    ----------
    probabilities : ndarray of float64, shape (k,)
        The probabilities ``p`` asked for.
    values : ndarray of float64, shape (rows, k)
        ``Q_p(x)`` of every row (a training target value).
    prediction : ndarray of float64, shape (rows,)
        The forest's prediction (mean of the trees).
    leaf_counts : str
        ``"bootstrap"`` or ``"original"``: how training cases count in a leaf.
    trees, cases : int
    """

    probabilities: NDArray[np.float64]
    values: NDArray[np.float64]
    prediction: NDArray[np.float64]
    leaf_counts: str
    trees: int
    cases: int

    def __post_init__(self) -> None:
        read_only(self)

    def __len__(self) -> int:
        return int(self.values.shape[0])

    def __str__(self) -> str:
        shown = min(len(self), SHOWN_ROWS)
        head = ["row"] + [f"p = {p:g}" for p in self.probabilities]
        rows = [[str(i)] + [cell(v) for v in self.values[i]] for i in range(shown)]
        lines = [f"Conditional quantiles at {len(self)} rows (quantile regression forest, {self.leaf_counts} "
                 f"leaf counts; {self.trees} trees, {self.cases} cases)"]
        return "\n".join(lines + table(head, rows) + more_rows(len(self), shown))

    __repr__ = __str__


def quantiles(forest: FittedForest, X: Any, probabilities: ArrayLike = (0.1, 0.5, 0.9), *,
              leaf_counts: str = "original") -> ConditionalQuantiles:
    """Quantiles of the target at every row of ``X`` from a quantile regression forest (Meinshausen 2006).

    Parameters
    ----------
    X : array or data frame, shape (rows, p)
    probabilities : sequence of float in [0, 1]
        The ``p`` of every quantile ``Q_p(x) = inf {y : F(y | x) >= p}`` (0 gives the smallest training
        target with weight, 1 the largest).
    leaf_counts : {"original", "bootstrap"}
        How a training case counts in a tree's leaf: once, in-bag or not (the paper's original
        observations), or its in-bag count (the weights that made the leaf's value, so the weighted mean is
        the forest's prediction); times its case weight. See :mod:`forestlab.analyses.uncertainty.quantile`.

    Returns
    -------
    ConditionalQuantiles

    Examples
    --------
    >>> import numpy as np, forestlab as fl
    >>> rng = np.random.default_rng(0)
    >>> X = rng.uniform(size=(300, 2)); y = X[:, 0] + rng.normal(scale=0.1 + X[:, 1], size=300)
    >>> forest = fl.Forest(trees=100, rng=1).fit(X, y)
    >>> q = forest.quantiles([[0.5, 0.0], [0.5, 1.0]], [0.05, 0.95]).values
    >>> bool(q[1, 1] - q[1, 0] > q[0, 1] - q[0, 0])      # wider where the noise is larger
    True
    """
    p = _check_probabilities(probabilities)
    values, prediction = quantile_values(forest, forest.coded(X), p, leaf_counts)
    return ConditionalQuantiles(probabilities=p, values=values, prediction=prediction, leaf_counts=leaf_counts,
                                trees=len(forest.trees), cases=forest.cases)


def quantile_values(forest: FittedForest, X: NDArray[np.float64], p: NDArray[np.float64],
                    leaf_counts: str) -> tuple[NDArray[np.float64], NDArray[np.float64]]:
    """``Q_p(x)`` for every row of the coded ``X`` and every ``p`` (shape (rows, k)), and the forest's
    prediction at every row."""
    if forest.task != "regression":
        raise TypeError("quantile regression forests are for regression forests; this forest does "
                        "classification (use `prediction_sets`)")
    if not isinstance(leaf_counts, str) or leaf_counts not in LEAF_COUNTS:
        raise ValueError(f"`leaf_counts` must be one of {LEAF_COUNTS}; got {leaf_counts!r}")
    if forest.y is None:
        raise RuntimeError("quantiles need the training targets, which this forest does not keep")
    y = forest.y
    ordered, index = _leaf_index(forest, y, leaf_counts)
    first, member, share = index
    offset = _leaf_offsets(forest.trees)
    found = new_leaves(forest, X)
    prediction = np.zeros(X.shape[0])
    for tree, leaf in zip(forest.trees, found):
        prediction += tree.value[tree.feature < 0][leaf]
    prediction /= len(forest.trees)
    found += offset[:-1, None]
    trees, n = len(forest.trees), y.size
    members = scipy.sparse.csr_matrix((share, member, first), shape=(int(offset[-1]), n))
    out = np.empty((X.shape[0], p.size))
    for rows in row_blocks(X.shape[0], n, ROW_BUDGET // 2):
        r = found[:, rows].shape[1]
        leaves = scipy.sparse.csr_matrix((np.ones(r * trees), found[:, rows].T.ravel(),
                                          np.arange(0, r * trees + 1, trees)), shape=(r, members.shape[0]))
        cumulative = (leaves @ members).toarray()
        np.cumsum(cumulative, axis=1, out=cumulative)
        total = cumulative[:, -1]
        for j, pj in enumerate(p):     # p = 0: the first case with weight (a bar above 0)
            bar = np.maximum(pj * (1.0 - ROUNDING) * total, np.finfo(np.float64).smallest_subnormal)
            out[rows, j] = ordered[np.minimum(np.count_nonzero(cumulative < bar[:, None], axis=1), n - 1)]
    return out, prediction


def _check_probabilities(probabilities: ArrayLike) -> NDArray[np.float64]:
    try:
        p = np.array(probabilities, dtype=np.float64).reshape(-1)
    except (TypeError, ValueError):
        raise TypeError("`probabilities` must be numbers in [0, 1]") from None
    if p.size == 0 or not np.all((p >= 0) & (p <= 1)):
        raise ValueError(f"`probabilities` must be one or more numbers in [0, 1]; got {p.tolist()}")
    return p


def _leaf_offsets(trees: Sequence) -> NDArray[np.int64]:
    """First global leaf number of every tree, and the total at the end: shape (trees + 1,)."""
    return np.concatenate([[0], np.cumsum([tree.leaves for tree in trees])]).astype(np.int64)


def _leaf_index(forest: FittedForest, y: NDArray[np.float64], leaf_counts: str):
    """The sorted targets, and the members of every leaf of every tree (global leaf numbers) as a compressed
    index: ``first`` (leaves + 1,), ``member`` (the member's rank in the sorted targets) and ``share`` (its
    count over the leaf's total count)."""
    try:
        ranks = training_leaves(forest)
    except RuntimeError:
        raise RuntimeError("quantiles need the leaf of every training case: this forest was loaded from a file "
                           "without the training data that does not record them (a format version 1 file); "
                           "save it again from a forest that keeps its data") from None
    order = np.argsort(y, kind="stable")
    y_rank = np.empty(y.size, dtype=np.int32)
    y_rank[order] = np.arange(y.size)
    weights = np.ones(y.size) if forest.case_weights is None else forest.case_weights
    used = weights > 0
    used = used & (forest.inbag > 0) if leaf_counts == "bootstrap" else np.broadcast_to(used, ranks.shape)
    member, share = np.empty(np.count_nonzero(used), dtype=np.int32), np.empty(np.count_nonzero(used))
    offset = _leaf_offsets(forest.trees)
    sizes = np.empty(offset[-1], dtype=np.int64)
    at = 0
    for b, tree in enumerate(forest.trees):
        count = weights * forest.inbag[b] if leaf_counts == "bootstrap" else weights
        kept = np.flatnonzero(used[b])
        leaf = ranks[b, kept].astype(np.intp)
        by_leaf = np.argsort(leaf, kind="stable")
        total = np.bincount(leaf, weights=count[kept], minlength=tree.leaves)
        member[at:at + kept.size] = y_rank[kept[by_leaf]]
        share[at:at + kept.size] = count[kept[by_leaf]] / total[leaf[by_leaf]]
        sizes[offset[b]:offset[b + 1]] = np.bincount(leaf, minlength=tree.leaves)
        at += kept.size
    first = np.concatenate([[0], np.cumsum(sizes)])
    return y[order], (first.astype(np.int32) if at < 2**31 else first, member, share)
