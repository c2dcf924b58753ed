"""The sampling variance of a forest's prediction: infinitesimal jackknife and jackknife-after-bootstrap.

Wager, Hastie & Efron (2014), "Confidence intervals for random forests: the jackknife and the infinitesimal
jackknife", JMLR 15, estimate how much the forest's prediction ``t_bar(x) = sum_b t_b(x) / B`` would vary
over new training sets, from the in-bag counts ``N_bi`` alone (in the notation of :mod:`.draws`):

- infinitesimal jackknife (their eqs. 5-7): ``V_IJ = sum_i C_i(x)^2`` and, corrected for the Monte Carlo
  noise of a finite number of trees, ``V_IJ-U = V_IJ - (n / B^2) sum_b (t_b(x) - t_bar(x))^2``;
- jackknife-after-bootstrap (eqs. 8-9): ``V_J = ((n - 1) / n) sum_i D_i(x)^2`` and ``V_J-U = V_J - (e - 1)
  (n / B^2) sum_b (t_b(x) - t_bar(x))^2``;
- their average, which the paper recommends (the IJ-U tends to err low and the J-U high).

With ``m`` draws per tree other than ``n``, ``n`` in the IJ correction becomes ``m`` (the sum over cases of
the variance of ``N_bi``) and ``e - 1`` becomes ``e^(m/n) - 1`` (the expected excess of ``B / B_i`` over 1).
For trees grown on subsamples of ``s`` distinct cases (``replace=False``) the infinitesimal jackknife takes
the form of Wager & Athey (2018), "Estimation and inference of heterogeneous treatment effects using random
forests", JASA 113, section 4.1: ``V_IJ = ((n - 1) / n) (n / (n - s))^2 sum_i C_i(x)^2``, corrected by the same
factor times ``s (n - s) / n`` (the sum of the variances of the 0/1 counts) times the Monte Carlo term.
"""

from __future__ import annotations

import math
import warnings
from dataclasses import dataclass
from typing import Any

import numpy as np
from numpy.typing import NDArray

from ..._warnings import FewTreesWarning
from ..view import FittedForest
from .draws import Draws, centred_predictions
from .outputs import SHOWN_ROWS, cell, more_rows, read_only, table

__all__ = ["SamplingVariance", "variance"]

METHODS = ("average", "ij", "jackknife")
NAMES = {"average": "average of the bias-corrected infinitesimal jackknife and jackknife-after-bootstrap",
         "ij": "bias-corrected infinitesimal jackknife", "jackknife": "bias-corrected jackknife-after-bootstrap"}
# Warn when the Monte Carlo noise of the estimate is above this share of it at the median row.
NOISE_SHARE = 1.0


@dataclass(frozen=True, eq=False, repr=False)
class SamplingVariance:
    """How much the forest's prediction at each row would vary over new training sets (see :func:`variance`).

    Regression arrays have shape (rows,); classification arrays (rows, K), one column per class's vote share.

    Attributes
    ----------
    estimate : ndarray of float64
        The variance by :attr:`method` (bias-corrected; it can be slightly negative where the true variance is
        near 0: :attr:`standard_error` reads it as 0 there).
    prediction : ndarray of float64
        The forest's prediction: mean of the trees' values, or the share of trees voting for each class.
    method : str
        ``"average"``, ``"ij"`` or ``"jackknife"``.
    ij, jackknife : ndarray of float64 or None
        ``V_IJ-U`` and ``V_J-U`` (None when not computed: the jackknife has no subsampling form here).
    ij_uncorrected, jackknife_uncorrected : ndarray of float64 or None
        ``V_IJ`` and ``V_J``, before the Monte Carlo correction.
    monte_carlo : ndarray of float64
        ``sum_b (t_b(x) - t_bar(x))^2 / B^2``, the term both corrections scale.
    noise : ndarray of float64
        An approximate Monte Carlo standard deviation of :attr:`estimate` (from the finite number of trees;
        see :func:`variance`).
    trees, cases, draws : int
        ``B``, ``n`` and the cases drawn per tree.
    replace : bool
        Bootstrap (True) or subsampling (False).
    classes : ndarray or None
        Class labels in column order (classification).
    """

    estimate: NDArray[np.float64]
    prediction: NDArray[np.float64]
    method: str
    ij: NDArray[np.float64] | None
    jackknife: NDArray[np.float64] | None
    ij_uncorrected: NDArray[np.float64] | None
    jackknife_uncorrected: NDArray[np.float64] | None
    monte_carlo: NDArray[np.float64]
    noise: NDArray[np.float64]
    trees: int
    cases: int
    draws: int
    replace: bool
    classes: NDArray | None = None

    def __post_init__(self) -> None:
        read_only(self)

    @property
    def standard_error(self) -> NDArray[np.float64]:
        """``sqrt(max(estimate, 0))``."""
        return np.sqrt(np.maximum(self.estimate, 0.0))

    def __len__(self) -> int:
        return int(self.estimate.shape[0])

    def __str__(self) -> str:
        lines = [f"Sampling variance of the forest's prediction at {len(self)} rows ({NAMES[self.method]}; "
                 f"{self.trees} trees, {self.cases} cases)"]
        shown = min(len(self), SHOWN_ROWS)
        se = self.standard_error
        if self.classes is None:
            head = ["row", "prediction", "standard error", "variance", "its Monte Carlo sd"]
            rows = [[str(i), cell(self.prediction[i]), cell(se[i], 3), cell(self.estimate[i], 3),
                     cell(self.noise[i], 2)] for i in range(shown)]
        else:
            head = ["row"] + [f"share {c}" for c in self.classes]
            rows = [[str(i)] + [f"{p:.3f} +- {s:.3f}" for p, s in zip(self.prediction[i], se[i])]
                    for i in range(shown)]
        return "\n".join(lines + table(head, rows) + more_rows(len(self), shown))

    __repr__ = __str__


def variance(forest: FittedForest, X: Any, method: str | None = None) -> SamplingVariance:
    """The sampling variance of the forest's prediction at every row of ``X``, from the in-bag counts.

    Regression: of the mean prediction; classification: of every class's vote share. Nothing is refit: the
    estimates read the trees' predictions at ``X`` and the in-bag counts (formulas in
    :mod:`forestlab.analyses.uncertainty.variance`), as quadratic forms of the centred predictions in two
    (trees x trees) Gram matrices of the in-bag counts (:mod:`forestlab.analyses.uncertainty.draws`). The
    estimate is of the variance over training sets of the forest *with infinitely many trees*; the Monte
    Carlo correction removes the part of the uncorrected estimate that comes from having only ``B`` trees.

    Parameters
    ----------
    X : array or data frame, shape (rows, p)
        The cases to predict, coded like the training predictors.
    method : {"average", "ij", "jackknife"} or None
        ``"ij"``: the bias-corrected infinitesimal jackknife ``V_IJ-U``; ``"jackknife"``: the bias-corrected
        jackknife-after-bootstrap ``V_J-U``; ``"average"``: their mean. None is ``"average"`` for a bootstrap
        forest and ``"ij"`` (the form of Wager & Athey 2018) for a forest grown on subsamples
        (``replace=False``), for which the jackknife is not offered.

    Returns
    -------
    SamplingVariance
        The estimate, both estimates before and after the correction, the Monte Carlo term and the counts.

    Raises
    ------
    ValueError
        For an unknown ``method``, a jackknife of a subsampled forest, a case never out-of-bag (the jackknife
        needs every case out-of-bag somewhere), a forest of class-balanced samples or trees that each hold
        every case.

    Warns
    -----
    FewTreesWarning
        When the estimate's Monte Carlo noise is larger than the estimate at the median row. The noise is
        approximated as ``sqrt(2 c^2 / n + 4 V c / n)``, with ``c`` the estimate's Monte Carlo correction and
        ``V`` the estimate (treating the per-case noise as independent and normal). Wager, Hastie & Efron
        (2014) find the corrected estimates need ``B`` of the order of ``n`` trees.

    Examples
    --------
    >>> import numpy as np, forestlab as fl
    >>> rng = np.random.default_rng(0)
    >>> X = rng.uniform(size=(200, 3)); y = 4 * X[:, 0] + rng.normal(size=200)
    >>> forest = fl.Forest(trees=400, rng=1).fit(X, y)
    >>> result = forest.variance(X[:3])
    >>> result.method, result.estimate.shape, bool(np.all(result.standard_error < 1))
    ('average', (3,), True)
    """
    coded = forest.coded(X)
    design = Draws.of(forest, "variance")
    method = _check_method(method, design)
    if method != "ij":
        design.require_oob("variance")
    if not design.replace and design.draws >= design.cases:
        raise ValueError("`variance`: every tree of this forest holds every case (subsamples of all n cases), "
                         "so its in-bag counts carry no information about sampling variability")
    K = 1 if forest.classes is None else forest.classes.size
    columns = [K - 1] if K == 2 else list(range(K))     # two shares: one is 1 - the other, same variance
    shape = (coded.shape[0], K)
    mean, monte_carlo = np.zeros(shape), np.zeros(shape)
    scale, ij_factor, j_factor = _factors(design)
    # sum_i C_i^2 and sum_i D_i^2 of the centred predictions d (see .draws)
    ij_sums = None if method == "jackknife" else design.squares(forest.inbag, "covariance")
    j_sums = None if method == "ij" else design.squares(forest.inbag, "oob")
    ij_raw = None if ij_sums is None else np.zeros(shape)
    j_raw = None if j_sums is None else np.zeros(shape)
    for block in centred_predictions(forest, coded, columns):
        at = (block.rows, block.column if K > 1 else 0)
        mean[at], monte_carlo[at] = block.mean, block.monte_carlo
        if ij_raw is not None:
            ij_raw[at] = scale * ij_sums(block.deviation)
        if j_raw is not None:
            j_raw[at] = (design.cases - 1) / design.cases * j_sums(block.deviation)
    if K == 2:
        mean[:, 0] = 1.0 - mean[:, 1]
        for arr in (monte_carlo, ij_raw, j_raw):
            if arr is not None:
                arr[:, 0] = arr[:, 1]
    ij = None if ij_raw is None else ij_raw - ij_factor * monte_carlo
    jack = None if j_raw is None else j_raw - j_factor * monte_carlo
    if method == "average":
        estimate, factor = (ij + jack) / 2, (ij_factor + j_factor) / 2
    else:
        estimate, factor = (ij, ij_factor) if method == "ij" else (jack, j_factor)
    noise = _noise(estimate, monte_carlo, factor, design.cases)
    _warn_if_noisy(estimate, noise, design)
    squeeze = (lambda a: a[:, 0]) if K == 1 else (lambda a: a)
    return SamplingVariance(
        estimate=squeeze(estimate), prediction=squeeze(mean), method=method,
        ij=None if ij is None else squeeze(ij), jackknife=None if jack is None else squeeze(jack),
        ij_uncorrected=None if ij_raw is None else squeeze(ij_raw),
        jackknife_uncorrected=None if j_raw is None else squeeze(j_raw), monte_carlo=squeeze(monte_carlo),
        noise=squeeze(noise), trees=design.trees, cases=design.cases, draws=design.draws,
        replace=design.replace, classes=forest.classes)


def _check_method(method: Any, design: Draws) -> str:
    if method is None:
        return "average" if design.replace else "ij"
    if not isinstance(method, str) or method not in METHODS:
        raise ValueError(f"`method` must be one of {METHODS} or None; got {method!r}")
    if not design.replace and method != "ij":
        raise ValueError(f"`method` = {method!r} needs bootstrap draws; this forest was grown on subsamples "
                         f"(replace=False), for which only 'ij' (Wager & Athey 2018) is offered")
    return method


def _factors(design: Draws) -> tuple[float, float, float]:
    """The IJ's scale, and the factors of the Monte Carlo term in the IJ and the jackknife corrections."""
    n, m = design.cases, design.draws
    if design.replace:
        excess = math.e - 1.0 if m == n else math.expm1(m / n)
        return 1.0, float(m), n * excess
    scale = (n - 1) / n * (n / (n - m)) ** 2
    return scale, scale * m * (n - m) / n, float("nan")


def _noise(estimate: NDArray, monte_carlo: NDArray, factor: float, n: int) -> NDArray[np.float64]:
    """Approximate Monte Carlo sd of an estimate whose correction is ``factor * monte_carlo``."""
    correction = factor * monte_carlo
    return np.sqrt(2.0 * correction**2 / n + 4.0 * np.maximum(estimate, 0.0) * correction / n)


def _warn_if_noisy(estimate: NDArray, noise: NDArray, design: Draws) -> None:
    moving = noise > 0
    if not moving.any():
        return
    positive = np.maximum(estimate[moving], 0.0)
    with np.errstate(divide="ignore", invalid="ignore"):
        share = np.where(positive > 0, noise[moving] / positive, np.inf)
    typical = float(np.median(share))
    if typical > NOISE_SHARE:
        warnings.warn(f"the variance estimates carry Monte Carlo noise of about {typical:.0%} of their size at "
                      f"the median row ({design.trees} trees for {design.cases} cases); grow more trees with "
                      f"`add_trees` (Wager, Hastie & Efron 2014: B at least of the order of n)",
                      FewTreesWarning, stacklevel=4)
