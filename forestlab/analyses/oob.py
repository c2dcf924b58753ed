"""Out-of-bag analyses from the stored trees and in-bag counts, in one pass over the trees.

Case ``i`` is out-of-bag (OOB) for tree ``b`` when ``inbag[b, i] == 0`` (Breiman 1996, "Out-of-bag
estimation"). Every tree predicts only its OOB rows, once; the per-case votes (or sums) are then accumulated
tree by tree, and the error of the first ``b + 1`` trees is updated from the cases tree ``b`` touched, so the
whole error curve costs one pass (no per-``b`` re-aggregation).

Strength and correlation follow Breiman (2001), "Random forests", section 2 and appendix II. With
``Q(x, j)`` the OOB vote share of class ``j`` at ``x`` and ``j_hat(x, y) = argmax_{j != y} Q(x, j)`` (lowest
index on ties):

- margin ``mr(x, y) = Q(x, y) - Q(x, j_hat)``; strength ``s = mean mr``; ``var(mr) = mean mr^2 - s^2``;
- per tree ``k``, over its OOB cases: ``p1 = P(h_k(x) = y)``, ``p2 = P(h_k(x) = j_hat(x, y))``, and the sd of
  its raw margin function ``rmg = I(h_k = y) - I(h_k = j_hat)`` is ``sqrt(p1 + p2 - (p1 - p2)^2)``;
- ``rho_bar = var(mr) / (mean_k sd_k)^2`` and the bound ``PE* <= rho_bar (1 - s^2) / s^2``.
"""

from __future__ import annotations

import warnings

import numpy as np
from numpy.typing import NDArray

from .._warnings import NeverOutOfBagWarning
from ..engine.tree import Tree, has_missing, leaf_index, stacked_leaf_values
from ..intake.validation import Target
from .results import OutOfBag
from .view import FittedForest

__all__ = ["known_out_of_bag", "out_of_bag"]


class _Entries:
    """Every OOB (tree, case) pair with the tree's prediction, handed out tree by tree in tree order.

    The pairs are made a block of trees at a time (about ``_PAIRS`` pairs pushed down together), so memory
    stays bounded whatever the number of trees and cases: a tree's OOB rows are found again from its in-bag
    counts, and its predictions are kept (as the narrowest type that holds them) only while all of them take
    at most ``_KEEP_BYTES``; beyond that a second pass over the trees predicts them again.
    """

    def __init__(self, trees: list[Tree], inbag: NDArray[np.uint8], X: NDArray[np.float64],
                 classes: int | None = None) -> None:
        self.trees, self.inbag, self.X = trees, inbag, X
        self.numeric = not has_missing(X) and all(tree.category_left.shape[1] == 0 for tree in trees)
        self.kind = np.float64 if classes is None else np.min_scalar_type(max(classes - 1, 0))
        self.sizes = np.array([inbag.shape[1] - np.count_nonzero(counts) for counts in inbag], dtype=np.int64)
        keep = int(self.sizes.sum()) * np.dtype(self.kind).itemsize <= _KEEP_BYTES
        self.kept: list[NDArray] | None = [] if keep else None

    def each(self):
        """``(b, rows, values)`` for every tree ``b`` in order: its OOB rows (increasing) and its predictions
        there (class indices as ``intp``, or values)."""
        kept, self.kept = self.kept, None
        if kept is not None and len(kept) == len(self.trees):  # second and later passes: from memory
            for b, values in enumerate(kept):
                yield b, self.rows(b), values.astype(np.intp) if self.kind != np.float64 else values
            self.kept = kept
            return
        for b0, b1 in self._blocks():
            rows = [self.rows(b) for b in range(b0, b1)]
            values = self._predict(b0, b1, rows)
            for b, r, v in zip(range(b0, b1), rows, np.split(values, np.cumsum([r.size for r in rows])[:-1])):
                if kept is not None:
                    kept.append(v.astype(self.kind))
                yield b, r, v.astype(np.intp) if self.kind != np.float64 else v
        self.kept = kept

    def rows(self, b: int) -> NDArray[np.intp]:
        return np.flatnonzero(self.inbag[b] == 0)

    def _blocks(self):
        per_block = max(1, _PAIRS // max(1, self.X.shape[0])) if self.numeric else 1
        for b0 in range(0, len(self.trees), per_block):
            yield b0, min(b0 + per_block, len(self.trees))

    def _predict(self, b0: int, b1: int, rows: list[NDArray[np.intp]]) -> NDArray[np.float64]:
        if not self.numeric:  # one level-wise pass per tree
            return self.trees[b0].value[leaf_index(self.trees[b0], self.X[rows[0]])]
        tree_of = np.repeat(np.arange(b1 - b0), [r.size for r in rows])
        return stacked_leaf_values(self.trees[b0:b1], tree_of, np.concatenate(rows), self.X)


_PAIRS = 1 << 19  # (tree, row) pairs pushed down one tree block together (a few MB of working arrays)
_KEEP_BYTES = 1 << 26  # predictions kept for the second pass (64 MiB), else predicted again


def out_of_bag(forest: FittedForest, stacklevel: int = 1) -> OutOfBag:
    """Compute every OOB result of a fitted forest (see :class:`OutOfBag`; ``forest.oob`` caches it).

    Case weights, when the forest has them, weigh the error, its curve, the confusion matrix and the
    per-class errors (weighted means / sums over the covered cases); votes and margins are not weighted.
    ``stacklevel`` is the frame the warning points at, counted from the caller of this function. Needs the
    training data (a RuntimeError otherwise).

    Warns
    -----
    NeverOutOfBagWarning
        When some case was in every bootstrap sample.
    """
    X, target, weights = forest.training_X(), forest.target, forest.case_weights
    trees, inbag = list(forest.trees), forest.inbag
    n = X.shape[0]
    entries = _Entries(trees, inbag, X, None if target.task != "classification" else target.classes.size)
    if target.task == "classification":
        result = _classification(entries, target, n, weights)
    else:
        result = _regression(entries, target.values, weights)
    never = int(np.count_nonzero(result.coverage == 0))
    if never:
        warnings.warn(
            f"{never} of {n} cases were in every bootstrap sample (never out-of-bag); they get NaN / no "
            f"label and are left out of the OOB error. Grow more trees with `add_trees` to cover them.",
            NeverOutOfBagWarning, stacklevel=stacklevel + 1)
    return result


def known_out_of_bag(forest: FittedForest, cached: OutOfBag | None) -> OutOfBag | None:
    """``cached`` when given, else the OOB results computed now if the training data are there, else None.

    For callers that report the cases never out-of-bag themselves (``print(forest)``, the model file): no
    :class:`NeverOutOfBagWarning`.
    """
    if cached is not None or not forest.has_data:
        return cached
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", NeverOutOfBagWarning)
        return out_of_bag(forest)


# ------------------------------------------------------------------------------------- classification
def _class_pass(entries: _Entries, y: NDArray[np.int64], n: int, K: int, weights):
    """Vote counts (n, K) and the (weighted) error curve, accumulated tree by tree."""
    trees = len(entries.trees)
    counts = np.zeros((n, K), dtype=np.int64)
    wrong = np.zeros(n, dtype=bool)
    seen = np.zeros(n, dtype=bool)
    n_wrong = n_seen = 0
    curve = np.full(trees, np.nan)
    for b, rows, cls in entries.each():
        counts[rows, cls] += 1
        now_wrong = np.argmax(counts[rows], axis=1) != y[rows]
        if weights is None:
            n_wrong += int(np.count_nonzero(now_wrong)) - int(np.count_nonzero(wrong[rows]))
            n_seen += rows.size - int(np.count_nonzero(seen[rows]))
        else:
            w = weights[rows]
            n_wrong += float(w[now_wrong].sum() - w[wrong[rows]].sum())
            n_seen += float(w[~seen[rows]].sum())
        wrong[rows] = now_wrong
        seen[rows] = True
        if n_seen:
            curve[b] = n_wrong / n_seen
    return counts, curve


def _classification(entries: _Entries, target: Target, n: int, weights) -> OutOfBag:
    y, classes = target.values, target.classes
    K = classes.size
    counts, curve = _class_pass(entries, y, n, K, weights)
    coverage = counts.sum(axis=1)
    covered = coverage > 0
    votes = np.full((n, K), np.nan)
    votes[covered] = counts[covered] / coverage[covered, None]
    index = np.where(covered, np.argmax(counts, axis=1), -1)
    others = np.where(covered[:, None], votes, 0.0)
    others[np.arange(n), y] = -1.0                      # never the runner-up: its own class
    j_hat = np.argmax(others, axis=1) if K > 1 else np.zeros(n, dtype=np.int64)
    runner_up = np.maximum(others[np.arange(n), j_hat], 0.0)
    margins = np.where(covered, np.where(covered, votes[np.arange(n), y], 0.0) - runner_up, np.nan)
    labels = classes[np.maximum(index, 0)]
    if not covered.all():
        labels = labels.astype(object)
        labels[~covered] = None
    yc, ic = y[covered], index[covered]
    wc = None if weights is None else weights[covered]
    confusion = np.bincount(yc * K + ic, weights=wc, minlength=K * K).reshape(K, K)
    per_class = confusion.sum(axis=1)
    by_class = np.full(K, np.nan)
    has = per_class > 0
    by_class[has] = 1.0 - np.diag(confusion)[has] / per_class[has]
    if not yc.size:
        error = float("nan")
    elif wc is None:
        error = float(np.count_nonzero(yc != ic) / yc.size)
    else:
        error = float(wc[yc != ic].sum() / wc.sum())
    s, rho, bound = _strength_correlation(entries, y, j_hat, margins[covered], K)
    return OutOfBag(task="classification", observed=classes[y], predictions=labels, class_index=index,
                    votes=votes, coverage=coverage, error=error, error_curve=curve, margins=margins,
                    classes=classes, confusion=confusion, by_class=by_class, strength=s, correlation=rho,
                    error_bound=bound)


def _strength_correlation(entries: _Entries, y: NDArray[np.int64], j_hat: NDArray[np.int64],
                          mr: NDArray[np.float64], K: int) -> tuple[float, float, float]:
    """Breiman's (2001, appendix II) OOB estimates of s, rho-bar and the bound rho-bar (1 - s^2) / s^2."""
    if K < 2 or mr.size == 0:
        return float("nan"), float("nan"), float("nan")
    s = float(np.mean(mr))
    var_mr = float(np.var(mr))
    trees = len(entries.trees)
    size, p1, p2 = entries.sizes, np.zeros(trees), np.zeros(trees)
    for b, rows, cls in entries.each():  # (counts of whole numbers: exact in any order)
        p1[b] = np.count_nonzero(cls == y[rows])
        p2[b] = np.count_nonzero(cls == j_hat[rows])
    used = size > 0
    p1, p2 = p1[used] / size[used], p2[used] / size[used]
    sd = np.sqrt(np.maximum(p1 + p2 - (p1 - p2) ** 2, 0.0))
    mean_sd = float(np.mean(sd))
    rho = var_mr / mean_sd**2 if mean_sd > 0 else float("nan")
    bound = rho * (1.0 - s**2) / s**2 if s > 0 else float("inf")
    return s, rho, bound


# ------------------------------------------------------------------------------------------ regression
def _regression_pass(entries: _Entries, y: NDArray[np.float64], n: int, weights):
    """OOB sums and counts per case, and the (weighted) error curve, accumulated tree by tree."""
    trees = len(entries.trees)
    sums = np.zeros(n)
    count = np.zeros(n, dtype=np.int64)
    squared = np.zeros(n)
    sse, n_seen = 0.0, 0
    curve = np.full(trees, np.nan)
    for b, rows, value in entries.each():
        fresh = count[rows] == 0
        n_seen += int(np.count_nonzero(fresh)) if weights is None else float(weights[rows][fresh].sum())
        sums[rows] += value
        count[rows] += 1
        now = (y[rows] - sums[rows] / count[rows]) ** 2
        if weights is not None:
            now *= weights[rows]
        sse += float(np.sum(now) - np.sum(squared[rows]))
        squared[rows] = now
        if n_seen:
            curve[b] = max(sse, 0.0) / n_seen
    return sums, count, curve


def _regression(entries: _Entries, y: NDArray[np.float64], weights) -> OutOfBag:
    n = y.size
    sums, coverage, curve = _regression_pass(entries, y, n, weights)
    covered = coverage > 0
    c = np.maximum(coverage, 1)
    predictions = np.where(covered, sums / c, np.nan)
    squares = np.zeros(n)  # each case's squared deviations summed in tree order (a case once per tree)
    for _, rows, value in entries.each():
        squares[rows] += (value - predictions[rows]) ** 2
    spread = np.where(covered, np.sqrt(squares / c), np.nan)
    residuals = y - predictions
    margins = _standardised(residuals, spread, covered)
    w = np.ones(n) if weights is None else weights
    if covered.any():
        error = float(np.average(residuals[covered] ** 2, weights=w[covered]))
        centre = np.average(y[covered], weights=w[covered])
        var_y = float(np.average((y[covered] - centre) ** 2, weights=w[covered]))
    else:
        error, var_y = float("nan"), 0.0
    explained = 1.0 - error / var_y if var_y > 0 else float("nan")
    return OutOfBag(task="regression", observed=y, predictions=predictions, class_index=None, votes=None,
                    coverage=coverage, error=error, error_curve=curve, margins=margins, residuals=residuals,
                    spread=spread, explained_variance=explained)


def _standardised(residuals: NDArray[np.float64], spread: NDArray[np.float64],
                  covered: NDArray[np.bool_]) -> NDArray[np.float64]:
    """residual / spread; +-inf when the spread is 0 and the residual is not, 0 when both are 0."""
    out = np.full(residuals.shape, np.nan)
    out[covered] = np.where(residuals[covered] == 0.0, 0.0, np.copysign(np.inf, residuals[covered]))
    positive = covered & (spread > 0)
    out[positive] = residuals[positive] / spread[positive]
    return out
