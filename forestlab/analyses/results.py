"""Result classes of the out-of-bag analyses and of cross-validation: raw arrays kept beside summaries."""

from __future__ import annotations

import numbers
from dataclasses import dataclass
from typing import Any

import numpy as np
from numpy.typing import NDArray

from .uncertainty.doubt import label_doubts
from .uncertainty.outputs import cell, table

__all__ = ["CrossValidatedError", "DoubtfulCases", "OutOfBag"]

# Rows of a DoubtfulCases table shown by print(); the arrays always hold every selected case.
SHOWN_ROWS = 25


def _readonly(obj: object) -> None:
    for value in vars(obj).values():
        if isinstance(value, np.ndarray):
            value.flags.writeable = False


@dataclass(frozen=True, eq=False)
class DoubtfulCases:
    """The cases to look at first, most doubtful first; prints as a small table.

    Attributes
    ----------
    case : ndarray of intp, shape (k,)
        Row index of each case in the training data.
    observed : ndarray, shape (k,)
        The recorded label (classification) or value (regression).
    out_of_bag : ndarray, shape (k,)
        The forest's out-of-bag label or mean prediction for the case.
    margin : ndarray of float64, shape (k,)
        The case's out-of-bag margin (see :attr:`OutOfBag.margins`).
    coverage : ndarray of int64, shape (k,)
        Trees for which the case was out-of-bag.
    task : str
        ``"classification"`` or ``"regression"``.
    rule : str
        How the cases were selected, in words.
    p_value : ndarray of float64, shape (k,), or None
        With ``doubtful(fdr=..., trusted=...)``: each case's conformal p-value against the trusted cases.
    tested : int or None
        With ``fdr``: the number of cases tested (untrusted, out-of-bag at least once).
    fdr : float or None
        With ``fdr``: the false discovery rate the selection controls.
    """

    case: NDArray[np.intp]
    observed: NDArray
    out_of_bag: NDArray
    margin: NDArray[np.float64]
    coverage: NDArray[np.int64]
    task: str
    rule: str
    p_value: NDArray[np.float64] | None = None
    tested: int | None = None
    fdr: float | None = None

    def __post_init__(self) -> None:
        _readonly(self)

    def __len__(self) -> int:
        return int(self.case.size)

    def __str__(self) -> str:
        regression = self.task == "regression"
        head = ["case", "observed", "oob mean" if regression else "oob label",
                "z margin" if regression else "margin", "oob trees"]
        shown = min(len(self), SHOWN_ROWS)
        cells = [[str(int(c)), cell(o), cell(p), f"{m:+.3f}", str(int(t))]
                 for c, o, p, m, t in zip(self.case[:shown], self.observed[:shown], self.out_of_bag[:shown],
                                          self.margin[:shown], self.coverage[:shown])]
        if self.p_value is not None:
            head.append("p-value")
            cells = [row + [f"{p:.4f}"] for row, p in zip(cells, self.p_value[:shown])]
        lines = [f"{len(self)} doubtful case{'s' if len(self) != 1 else ''} ({self.rule}), most doubtful first"]
        lines += table(head, cells, left=(1, 2))
        if len(self) > shown:
            lines.append(f"... and {len(self) - shown} more (all of them are in the arrays)")
        return "\n".join(lines)

    __repr__ = __str__


@dataclass(frozen=True, eq=False)
class OutOfBag:
    """What the out-of-bag cases say about a fitted forest (see :attr:`Forest.oob`).

    Case ``i`` is out-of-bag (OOB) for tree ``b`` when ``forest.inbag[b, i] == 0``; every per-case quantity
    uses only those trees. A case that was never OOB has coverage 0, NaN values and no label, and is left
    out of every error.

    Attributes
    ----------
    task : str
        ``"classification"`` or ``"regression"``.
    observed : ndarray, shape (n,)
        The training labels or values.
    predictions : ndarray, shape (n,)
        OOB majority vote (ties to the lowest class index) or OOB mean. For classification this has the
        dtype of the class labels when every case was OOB at least once, and is an object array with None
        at the cases never OOB otherwise; regression gives NaN there.
    class_index : ndarray of int64, shape (n,) or None
        Classification: index of the OOB label into :attr:`classes`, -1 when never OOB.
    votes : ndarray of float64, shape (n, K) or None
        Classification: share of the case's OOB trees voting for each class (rows sum to 1; NaN rows for
        cases never OOB).
    coverage : ndarray of int64, shape (n,)
        Number of trees for which the case was OOB.
    error : float
        Misclassification rate or mean squared error over the cases with coverage > 0.
    error_curve : ndarray of float64, shape (trees,)
        ``error_curve[b]`` is the OOB error of the forest of trees ``0..b`` (over the cases OOB for at least
        one of them); NaN while no case has been OOB. ``error_curve[-1]`` equals :attr:`error` (exactly for
        classification, to rounding for regression).
    margins : ndarray of float64, shape (n,)
        Classification: Breiman's (2001) margin on OOB votes, the share for the true class minus the largest
        share for any other class, in [-1, 1]; negative when the OOB vote is wrong. Regression: the
        *standardised OOB residual* ``(y_i - mean_b t_b(x_i)) / sd_b t_b(x_i)`` over the trees ``b`` for
        which case ``i`` is OOB (sd with divisor ``coverage``), the residual in units of the trees'
        disagreement about the case; ``+-inf`` when all its trees agree on a value other than ``y_i``
        and 0 when they agree on ``y_i``. NaN when never OOB.
    classes : ndarray or None
        Class labels in the order of the vote columns.
    confusion : ndarray of int64, shape (K, K) or None
        Classification: ``confusion[i, j]`` counts cases of observed class ``i`` with OOB label ``j``.
    by_class : ndarray of float64, shape (K,) or None
        Classification: OOB error rate among the cases of each observed class (NaN for a class with no
        case OOB).
    residuals : ndarray of float64, shape (n,) or None
        Regression: ``y - predictions`` (NaN when never OOB).
    spread : ndarray of float64, shape (n,) or None
        Regression: the sd of the OOB trees' predictions for each case (the scale of :attr:`margins`).
    explained_variance : float or None
        Regression: ``1 - error / var(y)``, the variance over the cases with coverage > 0.
    strength : float or None
        Classification: Breiman's (2001, section 2.2) strength ``s = E mr(X, Y)``, estimated by the mean
        OOB margin (his appendix II).
    correlation : float or None
        Classification: Breiman's mean correlation ``rho-bar = var(mr) / (E_theta sd(theta))^2`` of the
        raw margin functions, estimated from OOB votes as in his appendix II (see ``forestlab._oob``).
    error_bound : float or None
        Classification: Breiman's bound ``rho-bar (1 - s^2) / s^2`` on the generalisation error; inf when
        ``s <= 0`` (the bound says nothing then).
    """

    task: str
    observed: NDArray
    predictions: NDArray
    class_index: NDArray[np.int64] | None
    votes: NDArray[np.float64] | None
    coverage: NDArray[np.int64]
    error: float
    error_curve: NDArray[np.float64]
    margins: NDArray[np.float64]
    classes: NDArray | None = None
    confusion: NDArray[np.int64] | None = None
    by_class: NDArray[np.float64] | None = None
    residuals: NDArray[np.float64] | None = None
    spread: NDArray[np.float64] | None = None
    explained_variance: float | None = None
    strength: float | None = None
    correlation: float | None = None
    error_bound: float | None = None

    def __post_init__(self) -> None:
        _readonly(self)

    def __repr__(self) -> str:
        n, trees = self.coverage.size, self.error_curve.size
        what = "misclassification rate" if self.task == "classification" else "mean squared error"
        return f"OutOfBag({self.task}, {n} cases, {trees} trees, {what} {self.error:.4g})"

    def doubtful(self, threshold: float = 0.0, top: int | None = None, *, fdr: float | None = None,
                 trusted: Any = None) -> DoubtfulCases:
        """The cases to look at first: possible label errors, outliers and borderline cases.

        Parameters
        ----------
        threshold : float, default 0.0
            Classification: cases with margin below ``threshold`` (the default lists the cases whose OOB
            vote is wrong), lowest margin first. Regression: cases whose standardised OOB residual
            exceeds ``threshold`` in absolute value, largest first (the default lists every case, ranked;
            pass ``threshold=2`` or ``top``). Ties keep row order. Cases never OOB are left out. Not used
            with ``fdr``.
        top : int or None
            Keep at most this many cases.
        fdr : float in (0, 1), optional
            Select instead the cases whose recorded label (value) is doubtful at this false discovery rate:
            every case not in ``trusted`` gets a conformal p-value against the ``trusted`` cases of its
            recorded class, from the OOB vote share of its recorded label (regression: against all trusted
            cases, from the absolute OOB residual), ``p = (1 + #{trusted with a score at least as strange})
            / (t + 1)``; the Benjamini & Hochberg (1995) rule at level ``fdr`` over the ``m`` tested cases
            selects them (smallest p-value first). Such p-values are valid and positively dependent (Bates,
            Candes, Lei, Romano & Sesia 2023, "Testing for outliers with conformal p-values", Annals of
            Statistics 51), so the expected share of correct labels among the selected is at most ``fdr``,
            provided the trusted cases were picked without looking at the forest's votes (for instance a
            random sample sent back to be checked) and hold right labels.
        trusted : array of int or bool, optional
            With ``fdr``: the training cases whose labels are known to be right, as indices or a mask.
            Ranking cases against the other training cases cannot serve instead: among ``n`` the case of
            the ``k``-th strangest score gets ``p`` about ``k / n``, which never passes ``k q / n``.

        Returns
        -------
        DoubtfulCases

        Warns
        -----
        SmallTrustedSetWarning
            When some class's tested cases cannot be selected at all: with ``t`` trusted cases of the class
            the smallest p-value is ``1 / (t + 1)``, and Benjamini-Hochberg selects a p-value only if it is
            at most ``k q / m`` for the ``k`` cases selected together, so at most ``q`` (when all ``m`` are
            selected). It warns when ``1 / (t + 1) > q``; even above that, ``k`` cases are selected together
            only if ``k >= m / (q (t + 1))``, so small trusted sets find errors only when there are many.
        """
        if isinstance(threshold, (bool, np.bool_)) or not isinstance(threshold, numbers.Real) \
                or not np.isfinite(threshold):
            raise TypeError(f"`threshold` must be a finite real number; got {threshold!r}")
        if top is not None and (isinstance(top, (bool, np.bool_)) or not isinstance(top, numbers.Integral)
                                or top < 0):
            raise ValueError(f"`top` must be None or a non-negative int; got {top!r}")
        if fdr is not None or trusted is not None:
            return DoubtfulCases(**label_doubts(self, fdr, trusted, threshold, top))
        covered = self.coverage > 0
        if self.task == "classification":
            chosen = np.flatnonzero(covered & (np.where(covered, self.margins, 0.0) < threshold))
            chosen = chosen[np.argsort(self.margins[chosen], kind="stable")]
            rule = f"margin below {threshold:g}"
        else:
            size = np.abs(np.where(covered, self.margins, 0.0))
            chosen = np.flatnonzero(covered & (size > threshold))
            chosen = chosen[np.argsort(-size[chosen], kind="stable")]
            rule = f"|z margin| above {threshold:g}"
        if top is not None:
            chosen = chosen[:top]
        return DoubtfulCases(case=chosen, observed=self.observed[chosen], out_of_bag=self.predictions[chosen],
                             margin=self.margins[chosen], coverage=self.coverage[chosen], task=self.task,
                             rule=rule)

    def settles_at(self, tolerance: float = 0.05) -> int:
        """Smallest number of trees after which the error curve stays close to the final OOB error.

        Returns the smallest ``b`` such that ``|error_curve[c - 1] - error| <= tolerance * error`` for every
        ``c >= b`` (a relative band around the final error; NaN points count as outside it). A value near
        the number of trees means the curve has not levelled off yet: grow more trees.

        Parameters
        ----------
        tolerance : float, default 0.05
            Half-width of the band, as a fraction of the final error.
        """
        if isinstance(tolerance, (bool, np.bool_)) or not isinstance(tolerance, numbers.Real) \
                or not tolerance >= 0:
            raise ValueError(f"`tolerance` must be a non-negative number; got {tolerance!r}")
        curve = self.error_curve
        with np.errstate(invalid="ignore"):
            outside = ~(np.abs(curve - self.error) <= tolerance * abs(self.error))
        last = np.flatnonzero(outside)
        return int(last[-1]) + 2 if last.size else 1


@dataclass(frozen=True, eq=False)
class CrossValidatedError:
    """k-fold cross-validated error of one set of forest settings.

    Attributes
    ----------
    fold_errors : ndarray of float64, shape (folds,)
        Misclassification rate or mean squared error on each held-out fold.
    mean : float
        Unweighted mean of :attr:`fold_errors` (fold sizes differ by at most one case).
    standard_error : float
        ``std(fold_errors, ddof=1) / sqrt(folds)``: the usual naive figure, which treats folds as
        independent; it tends to understate the uncertainty (Bengio & Grandvalet 2004, "No unbiased
        estimator of the variance of K-fold cross-validation").
    fold : ndarray of int64, shape (n,)
        The fold each case was held out in.
    predictions : ndarray, shape (n,)
        Each case's prediction by the forest grown without its fold.
    stratified : bool
        True when folds were stratified by class (classification).
    """

    fold_errors: NDArray[np.float64]
    mean: float
    standard_error: float
    fold: NDArray[np.int64]
    predictions: NDArray
    stratified: bool

    def __post_init__(self) -> None:
        _readonly(self)

    def __repr__(self) -> str:
        return (f"CrossValidatedError({self.fold_errors.size} folds{', stratified' if self.stratified else ''}: "
                f"mean {self.mean:.4g}, standard error {self.standard_error:.2g})")
