"""The per-forest plan: features ranked once, reused by every tree and every level."""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from numpy.typing import NDArray

from .categories import words_for
from .key_sort import stable_order, value_order

__all__ = ["ORDER_TABLE_BYTES", "TrainingData", "dense_ranks", "presort", "sorted_rows", "table_type"]

#: Largest ``TrainingData.order`` formed. Reading rows back from it saved 5-10% of a fit where it took
#: 40-400 KiB (twonorm, p = 10, n = 1 000 and 10 000) and nothing or a little worse at 2 and 4 MiB (p = 50,
#: n = 10 000; p = 10, n = 100 000) on the Intel test machine (2 MiB of L2 cache a core).
ORDER_TABLE_BYTES = 1 << 20


@dataclass(frozen=True, eq=False)
class TrainingData:
    """Everything the grower reads; built once per fit and shared read-only by all trees.

    Attributes
    ----------
    X : ndarray of float64, shape (n, p)
        The predictors, C-contiguous.
    dense : ndarray of uint16 (n <= 65 536) or int32, shape (p, n)
        ``dense[j, i]`` is the rank of ``X[i, j]`` among the distinct values of feature ``j`` (0 for the
        smallest; equal values share a rank). Every missing value (NaN) has a rank of its own, above every
        number, in row order.
    dense_bits : int
        Bits needed for the largest dense rank (at least 1).
    target : ndarray, shape (n,)
        Class indices (int64) or float64 targets.
    stats : ndarray of float64, shape (n, 1 + s)
        Column 0 is the case weight (1 without weights); columns 1.. the splitter's statistics times the
        case weight, so ``counts x stats`` weighs every case by bootstrap count times case weight.
    classes : int
        Number of classes, 0 for regression.
    missing : bool
        Whether ``X`` holds any missing value (NaN); NaN sorts after every number in ``order``.
    categories : ndarray of int64, shape (p,)
        Number of categories of each categorical feature (whose column holds codes ``0..k-1``), 0 for
        numeric features.
    weights : ndarray of float64, shape (n,), or None
        The case weights multiplied into ``stats`` (case weights times class weights), None when all are 1.
    strata : ndarray of int64, shape (n,), or None
        Class index of every case when each tree's bootstrap sample is drawn class-balanced, else None.
    distinct_targets : bool
        Regression only: whether no two cases share a target value (then a node holding two or more
        cases is never pure).
    tie_free : ndarray of bool, shape (p,)
        Whether no two cases share a dense rank of the feature (no equal values; each missing value has
        a rank of its own); then a row's rank is its position in ``order[j]``.
    order : ndarray of ``dense``'s dtype, shape (p, n), or None
        ``order[j]`` lists the rows by increasing value of feature ``j``, equal values in row order. Formed
        only where a fast search uses it: no missing values, no categorical features, and at most
        ``ORDER_TABLE_BYTES`` (the table is read at random, and pays only while it stays in a core's cache).
    """

    X: NDArray[np.float64]
    dense: NDArray[np.uint16] | NDArray[np.int32]
    dense_bits: int
    target: NDArray
    stats: NDArray[np.float64]
    classes: int
    missing: bool = False
    categories: NDArray[np.int64] | None = None
    weights: NDArray[np.float64] | None = None
    strata: NDArray[np.int64] | None = None
    distinct_targets: bool = False
    tie_free: NDArray[np.bool_] | None = None
    order: NDArray[np.uint16] | NDArray[np.int32] | None = None

    @property
    def category_words(self) -> int:
        """uint64 words of a left-category bit set (0 without categorical features)."""
        return 0 if self.categories is None else words_for(int(self.categories.max()))

    def equal_targets(self, row: NDArray[np.intp], node: NDArray[np.intp], K: int,
                      count: NDArray | None = None) -> NDArray[np.bool_]:
        """Whether all cases of each of ``K`` nodes share one target value (``row``, ``node``: the nodes'
        cases). Regression targets that never repeat settle it from ``count``, the cases per node, if given."""
        if self.distinct_targets:  # every case a target of its own: one value means one case
            return (np.bincount(node, minlength=K) if count is None else count) == 1
        y = np.take(self.target, row, mode="clip")
        reference = np.empty(K, dtype=y.dtype)
        reference[node] = y
        return np.bincount(node, weights=(y != np.take(reference, node, mode="clip")), minlength=K) == 0

    @property
    def rows(self) -> int:
        return self.X.shape[0]

    @property
    def features(self) -> int:
        return self.X.shape[1]


def presort(X: NDArray[np.float64], target: NDArray, statistics: NDArray[np.float64], classes: int,
            categories: NDArray[np.int64] | None = None, weights: NDArray[np.float64] | None = None,
            strata: NDArray[np.int64] | None = None) -> TrainingData:
    """Rank every feature once and pack the per-case statistics with a weight channel.

    With ``weights``, channel 0 becomes the case weight and the statistics are multiplied by it.
    """
    n, p = X.shape
    dense = np.empty((p, n), dtype=table_type(n))  # feature-major: a node's ranks of one feature lie together
    for j in range(p):  # a column at a time: temporaries of a few columns, not of X
        dense[j] = dense_ranks(X[:, j])
    stats = np.empty((n, 1 + statistics.shape[1]))
    stats[:, 0] = 1.0
    stats[:, 1:] = statistics
    if weights is not None:
        stats *= weights[:, None]
    missing = bool(np.isnan(X).any())
    categorical = categories is not None and bool(np.any(categories))
    order = None if missing or categorical or 4 * p * n > ORDER_TABLE_BYTES else sorted_rows(dense)
    return TrainingData(X=X, dense=dense, dense_bits=max(1, int(dense.max(initial=0)).bit_length()),
                        target=target, stats=stats, classes=classes, missing=missing,
                        categories=categories if categorical else None, weights=weights, strata=strata,
                        distinct_targets=not classes and np.unique(target).size == target.size,
                        tie_free=dense.max(axis=1, initial=0) == n - 1, order=order)


def table_type(n: int) -> type:
    """dtype of the (p, n) tables of ranks and rows: ``uint16`` where every rank and row fits (n <= 65 536;
    half the bytes the level's gathers read at random), else ``int32``."""
    return np.uint16 if n <= 1 << 16 else np.int32


def sorted_rows(dense: NDArray) -> NDArray:
    """``order[j]``: the rows by increasing ``dense[j]``, equal ranks in row order (a stable sort of each
    feature's ranks, :func:`.key_sort.stable_order`)."""
    p, n = dense.shape
    order = np.empty((p, n), dtype=dense.dtype)
    for j in range(p):
        bits = int(dense[j].max()).bit_length() if n else 1
        np.copyto(order[j], stable_order(dense[j], bits), casting="unsafe")
    return order


def dense_ranks(column: NDArray[np.float64]) -> NDArray[np.int32]:
    """Rank of every value among the distinct values of ``column`` (ties share one); NaNs rank last, each
    its own rank, in row order."""
    order = value_order(column)  # (equal values share their rank whatever their order)
    ordered = column.take(order)
    step = np.empty(column.size, dtype=np.int32)
    step[:1] = 0
    np.not_equal(ordered[1:], ordered[:-1], out=step[1:], casting="unsafe")
    ranks = np.empty(column.size, dtype=np.int32)
    ranks[order] = np.cumsum(step, dtype=np.int32)
    gaps = np.flatnonzero(np.isnan(column))  # NaN sorts last; number the missing values in row order
    if gaps.size:
        ranks[gaps] = ranks[order[column.size - gaps.size]] + np.arange(gaps.size, dtype=np.int32)
    return ranks
