"""The per-forest plan: features sorted once, reused by every tree and every level."""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from numpy.typing import NDArray

from ._categorical import words_for

__all__ = ["TrainingData", "presort"]


@dataclass(frozen=True, eq=False)
class TrainingData:
    """Everything the grower reads; built once per fit and shared read-only by all trees.

    Attributes
    ----------
    X : ndarray of float64, shape (n, p)
        The predictors, C-contiguous.
    order : ndarray of int32, shape (p, n)
        ``order[j]`` lists the rows by increasing ``X[:, j]`` (stable sort).
    sorted_x : ndarray of float64, shape (p, n)
        ``sorted_x[j, r] == X[order[j, r], j]``.
    rank : ndarray of int32, shape (n, p)
        ``rank[i, j]`` is the position of row ``i`` in ``order[j]``.
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
    """

    X: NDArray[np.float64]
    order: NDArray[np.int32]
    sorted_x: NDArray[np.float64]
    rank: NDArray[np.int32]
    target: NDArray
    stats: NDArray[np.float64]
    classes: int
    missing: bool = False
    categories: NDArray[np.int64] | None = None
    weights: NDArray[np.float64] | None = None
    strata: NDArray[np.int64] | None = None

    @property
    def category_words(self) -> int:
        """uint64 words of a left-category bit set (0 without categorical features)."""
        return 0 if self.categories is None else words_for(int(self.categories.max()))

    @property
    def rows(self) -> int:
        return self.X.shape[0]

    @property
    def features(self) -> int:
        return self.X.shape[1]


def presort(X: NDArray[np.float64], target: NDArray, statistics: NDArray[np.float64], classes: int,
            categories: NDArray[np.int64] | None = None, weights: NDArray[np.float64] | None = None,
            strata: NDArray[np.int64] | None = None) -> TrainingData:
    """Sort every feature once and pack the per-case statistics with a weight channel.

    With ``weights``, channel 0 becomes the case weight and the statistics are multiplied by it.
    """
    n, p = X.shape
    order = np.ascontiguousarray(np.argsort(X, axis=0, kind="stable").T.astype(np.int32))
    sorted_x = np.ascontiguousarray(np.take_along_axis(X, order.T, axis=0).T)
    rank_t = np.empty((p, n), dtype=np.int32)
    np.put_along_axis(rank_t, order, np.arange(n, dtype=np.int32)[None, :], axis=1)
    stats = np.empty((n, 1 + statistics.shape[1]))
    stats[:, 0] = 1.0
    stats[:, 1:] = statistics
    if weights is not None:
        stats *= weights[:, None]
    return TrainingData(X=X, order=order, sorted_x=sorted_x, rank=np.ascontiguousarray(rank_t.T),
                        target=target, stats=stats, classes=classes,
                        missing=bool(np.isnan(sorted_x[:, -1]).any()),
                        categories=None if categories is None or not np.any(categories) else categories,
                        weights=weights, strata=strata)
