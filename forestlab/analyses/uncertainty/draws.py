"""How the trees drew their cases, and the trees' centred predictions that the variance and jackknife+ read.

For new rows ``x``, with ``t_b(x)`` tree ``b``'s prediction (its value, or 1 when it votes for class ``k`` and 0
otherwise), ``N_bi`` the in-bag count of case ``i`` in tree ``b``, ``O_bi = [N_bi = 0]`` and ``B_i = sum_b
O_bi`` the number of trees for which case ``i`` is out-of-bag, the estimates read two (cases x rows) matrices,
each the product of a fixed (trees x cases) weight matrix ``W`` with the centred predictions ``d_b(x) =
t_b(x) - t_bar(x)``:

- ``C_i(x) = Cov_b(N_bi, t_b(x)) = sum_b W_bi d_b(x)`` with ``W_bi = (N_bi - N_bar_i) / B``;
- ``D_i(x) = t_bar_(-i)(x) - t_bar(x) = sum_b W_bi d_b(x)`` with ``W_bi = O_bi / B_i``, where ``t_bar_(-i)``
  is the mean over the trees for which case ``i`` is out-of-bag.

The jackknife+ needs ``D`` itself: one single-precision matrix product per block of rows (about seven
significant digits, far finer than the spread of the residuals it is added to). The variance needs only sums
of squares over the cases, ``sum_i C_i(x)^2 = d(x)' (W W') d(x)``: a quadratic form in the (trees x trees)
Gram matrix ``W W'``, formed once in double precision over blocks of cases, so the cost per row is ``B^2``
rather than ``n B`` (for forests of more trees than cases, the sums themselves). There is no loop over cases
or rows.
"""

from __future__ import annotations

from collections.abc import Callable, Iterator
from dataclasses import dataclass

import numpy as np
from numpy.typing import NDArray

from ...engine.tree import tree_values
from ..cases import ROW_BUDGET, row_blocks
from ..view import FittedForest

__all__ = ["Centred", "Draws", "centred_predictions", "oob_deviations"]

# float64 per-tree predictions per block of rows (trees x rows; about 32 MB)
PREDICTION_BUDGET = 4_000_000


@dataclass(frozen=True)
class Draws:
    """The resampling design of a fitted forest, as the variance and interval formulas need it.

    Attributes
    ----------
    trees, cases : int
        ``B`` and ``n``.
    draws : int
        Cases drawn per tree (``m``; ``n`` for the usual bootstrap).
    replace : bool
        With replacement (bootstrap) or without (subsampling).
    oob_trees : ndarray of int64, shape (n,)
        ``B_i``, the trees for which each case is out-of-bag.
    """

    trees: int
    cases: int
    draws: int
    replace: bool
    oob_trees: NDArray[np.int64]

    @classmethod
    def of(cls, forest: FittedForest, what: str) -> Draws:
        """The design of ``forest``; a ValueError naming ``what`` when it is not plain (class-balanced)."""
        if forest.balance is not None:
            raise ValueError(f"`{what}` assumes every tree drew its cases from all of them alike; this forest drew "
                             f"class-balanced samples (balance={forest.balance!r}), whose strata the formulas "
                             f"do not model")
        inbag = forest.inbag
        per_tree = inbag.sum(axis=1, dtype=np.int64)
        return cls(trees=inbag.shape[0], cases=inbag.shape[1], draws=int(per_tree.max()),
                   replace=bool(forest.replace), oob_trees=np.count_nonzero(inbag == 0, axis=0))

    def require_oob(self, what: str) -> None:
        """A ValueError unless every case is out-of-bag for at least one tree."""
        never = np.flatnonzero(self.oob_trees == 0)
        if never.size:
            raise ValueError(f"`{what}` needs every training case out-of-bag for at least one tree, but "
                             f"{never.size} of {self.cases} cases (first: {never[:5].tolist()}) were in every "
                             f"tree's sample; grow more trees with `add_trees`")

    def weights(self, inbag: NDArray[np.uint8], part: str, cases: slice = slice(None),
                dtype: type = np.float64) -> NDArray:
        """``W`` of ``part`` (``"covariance"``: ``(N - N_bar) / B``; ``"oob"``: ``O / B_i``) for some cases:
        shape (trees, cases), written in place in ``dtype``."""
        counts = inbag[:, cases]
        out = np.empty(counts.shape, dtype=dtype)
        if part == "covariance":
            np.subtract(counts, counts.mean(axis=0), out=out, casting="same_kind")
            out /= self.trees
        else:
            np.equal(counts, 0, out=out, casting="unsafe")
            known = self.oob_trees[cases]
            scale = np.zeros(known.size, dtype=dtype)       # cases never out-of-bag: refused or unused
            np.divide(1.0, known, out=scale, where=known > 0, casting="same_kind")
            out *= scale
        return out

    def squares(self, inbag: NDArray[np.uint8], part: str) -> Callable[[NDArray[np.float64]], NDArray[np.float64]]:
        """A function of centred predictions ``d`` (trees, r) giving ``sum_i (W' d)_i^2`` (r,) for ``part``.

        With no more trees than cases it is the quadratic form ``d' (W W') d`` in the (trees x trees) Gram
        matrix, summed over blocks of cases once (``B^2`` operations a row); with more trees than cases the
        ``n`` sums themselves (``n B`` a row, and ``W`` is the smaller matrix).
        """
        if self.trees > self.cases:
            W = self.weights(inbag, part)

            def sums(d: NDArray[np.float64]) -> NDArray[np.float64]:
                per_case = W.T @ d
                return np.einsum("ir,ir->r", per_case, per_case)
            return sums
        gram = np.zeros((self.trees, self.trees))
        for cases in row_blocks(self.cases, self.trees, ROW_BUDGET):
            w = self.weights(inbag, part, cases)
            gram += w @ w.T
        return lambda d: np.einsum("br,br->r", gram @ d, d)


@dataclass(frozen=True, eq=False)
class Centred:
    """The trees' predictions for one block of rows and one output column, centred on their mean.

    ``mean`` is ``t_bar(x)`` and ``monte_carlo`` is ``sum_b (t_b(x) - t_bar(x))^2 / B^2``, shape (r,);
    ``deviation`` is ``t_b(x) - t_bar(x)``, shape (trees, r).
    """

    rows: slice
    column: int
    mean: NDArray[np.float64]
    monte_carlo: NDArray[np.float64]
    deviation: NDArray[np.float64]


def centred_predictions(forest: FittedForest, X: NDArray[np.float64],
                        columns: list[int] | None = None) -> Iterator[Centred]:
    """The :class:`Centred` predictions of every block of rows of the coded ``X`` and every output column.

    Regression has one output column (0: the trees' values); classification one per class index in
    ``columns`` (the trees' votes for it, 0 or 1).
    """
    trees = len(forest.trees)
    classification = forest.task == "classification"
    for rows in row_blocks(X.shape[0], trees, PREDICTION_BUDGET):
        values = tree_values(forest.trees, X[rows], np.int64 if classification else np.float64)
        for column in (columns if classification else [0]):
            t = (values == column).astype(np.float64) if classification else values
            mean = t.mean(axis=0)
            deviation = t - mean
            yield Centred(rows=rows, column=column, mean=mean, deviation=deviation,
                          monte_carlo=np.einsum("br,br->r", deviation, deviation) / trees**2)


def oob_deviations(forest: FittedForest, X: NDArray[np.float64],
                   design: Draws) -> Iterator[tuple[slice, NDArray[np.float64], NDArray[np.float32]]]:
    """For blocks of rows of the coded ``X`` (regression): the rows, ``t_bar(x)`` and ``D``, (r, n)."""
    W = design.weights(forest.inbag, "oob", dtype=np.float32)
    for block in centred_predictions(forest, X):
        for inner in row_blocks(block.mean.size, design.cases, ROW_BUDGET // 2):
            rows = slice(block.rows.start + inner.start, block.rows.start + inner.stop)
            yield rows, block.mean[inner], block.deviation[:, inner].T.astype(np.float32) @ W
