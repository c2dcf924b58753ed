"""Prediction intervals for regression forests: quantile regression forest or jackknife+-after-bootstrap.

Jackknife+-after-bootstrap (Kim, Xu & Barber 2020, "Predictive inference is free with the
jackknife+-after-bootstrap", NeurIPS 33): with ``mu_(-i)(x)`` the mean prediction of the trees for which
training case ``i`` is out-of-bag and ``R_i = |y_i - mu_(-i)(x_i)|`` its out-of-bag residual, the interval at
level ``1 - alpha`` is ``[q-{mu_(-i)(x) - R_i}, q+{mu_(-i)(x) + R_i}]``, where ``q+`` is the
``ceil((1 - alpha)(n + 1))``-th smallest of the ``n`` values and ``q-`` the ``floor(alpha (n + 1))``-th
smallest (``+-inf`` beyond the ``n`` values). Their Theorem 1 guarantees coverage of at least ``1 - 2 alpha``
for any data and any regression method, provided the number of trees is itself random: ``B ~ Binomial(B',
(1 - 1/(n + 1))^m)`` for bootstrap samples of ``m`` draws (``Binomial(B', 1 - m/(n + 1))`` for subsamples of
``m``), for some fixed ``B'``. A forest of a fixed number of trees meets this only approximately; in
practice coverage is close to ``1 - alpha``. ``mu_(-i)(x)`` for every case and row is one blocked matrix
product (:mod:`.draws`).
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

import numpy as np
from numpy.typing import ArrayLike, NDArray

from ..oob import out_of_bag
from ..results import OutOfBag
from ..view import FittedForest
from .conformal import check_level, upper_rank
from .draws import Draws, oob_deviations
from .outputs import SHOWN_ROWS, cell, more_rows, read_only, table
from .quantile import quantile_values

__all__ = ["PredictionIntervals", "intervals"]

METHODS = ("jackknife+", "quantile")


@dataclass(frozen=True, eq=False, repr=False)
class PredictionIntervals:
    """Prediction intervals at new rows (see :func:`intervals`).

    Attributes
    ----------
    lower, upper : ndarray of float64, shape (rows,)
        The interval's ends (``-inf`` / ``+inf`` when the level asks for more than the training cases can
        give: jackknife+ with fewer than about ``1 / (1 - level)`` cases).
    prediction : ndarray of float64, shape (rows,)
        The forest's prediction (mean of the trees).
    level : float
        Nominal coverage.
    method : str
        ``"jackknife+"`` or ``"quantile"``.
    leaf_counts : str or None
        For ``"quantile"``: ``"original"`` or ``"bootstrap"`` (see :func:`~.quantile.quantiles`).
    trees, cases : int
    """

    lower: NDArray[np.float64]
    upper: NDArray[np.float64]
    prediction: NDArray[np.float64]
    level: float
    method: str
    leaf_counts: str | None
    trees: int
    cases: int

    def __post_init__(self) -> None:
        read_only(self)

    def __len__(self) -> int:
        return int(self.lower.size)

    @property
    def width(self) -> NDArray[np.float64]:
        """``upper - lower``."""
        return self.upper - self.lower

    def covers(self, y: ArrayLike) -> NDArray[np.bool_]:
        """Whether each observed ``y`` (one per row) lies in its interval (ends included)."""
        values = np.asarray(y, dtype=np.float64).reshape(-1)
        if values.size != len(self):
            raise ValueError(f"`y` must hold one value per row ({len(self)}); got {values.size}")
        return (self.lower <= values) & (values <= self.upper)

    def __str__(self) -> str:
        how = "jackknife+-after-bootstrap" if self.method == "jackknife+" else \
            f"quantile regression forest, {self.leaf_counts} leaf counts"
        lines = [f"{self.level:.0%} prediction intervals at {len(self)} rows ({how}; {self.trees} trees, "
                 f"{self.cases} cases)"]
        shown = min(len(self), SHOWN_ROWS)
        rows = [[str(i), cell(self.prediction[i]), cell(self.lower[i]), cell(self.upper[i]), cell(self.width[i])]
                for i in range(shown)]
        return "\n".join(lines + table(["row", "prediction", "lower", "upper", "width"], rows)
                         + more_rows(len(self), shown))

    __repr__ = __str__


def intervals(forest: FittedForest, X: Any, level: float = 0.9, method: str = "jackknife+", *,
              leaf_counts: str = "original", oob: OutOfBag | None = None) -> PredictionIntervals:
    """Prediction intervals for the target at every row of ``X`` (regression forests).

    Parameters
    ----------
    X : array or data frame, shape (rows, p)
    level : float in (0, 1), default 0.9
        Nominal coverage ``1 - alpha``.
    method : {"jackknife+", "quantile"}
        ``"jackknife+"``: jackknife+-after-bootstrap (Kim, Xu & Barber 2020) from the out-of-bag
        predictions and residuals, with the ``(n + 1)`` rank rule; guaranteed coverage ``1 - 2 alpha`` under
        the condition on the number of trees in :mod:`forestlab.analyses.uncertainty.intervals`, about
        ``1 - alpha`` in practice, averaged over new cases (its width hardly varies with ``x``).
        ``"quantile"``: the ``alpha / 2`` and ``1 - alpha / 2`` quantiles of a quantile regression forest
        (Meinshausen 2006), whose width follows the noise at ``x``; their coverage holds asymptotically, at
        every ``x``, with no finite-sample guarantee.
    leaf_counts : {"original", "bootstrap"}
        For ``"quantile"``: see :func:`~forestlab.analyses.uncertainty.quantile.quantiles`.
    oob : OutOfBag, optional
        The forest's out-of-bag results (``Forest`` passes its own; computed from the data when None).

    Returns
    -------
    PredictionIntervals

    Raises
    ------
    TypeError
        For a classification forest (use ``prediction_sets``).
    ValueError
        For a level outside (0, 1), an unknown method, and for ``"jackknife+"`` a case never out-of-bag or a
        forest of class-balanced samples.

    Examples
    --------
    >>> import numpy as np, forestlab as fl
    >>> rng = np.random.default_rng(0)
    >>> X = rng.uniform(size=(300, 2)); y = 3 * X[:, 0] + rng.normal(scale=0.3, size=300)
    >>> forest = fl.Forest(trees=200, rng=1).fit(X, y)
    >>> band = forest.intervals(X[:4], level=0.8)
    >>> band.method, bool(np.all(band.lower < band.prediction)), bool(np.all(band.prediction < band.upper))
    ('jackknife+', True, True)
    """
    if forest.task != "regression":
        raise TypeError("`intervals` is for regression forests; this forest does classification (use "
                        "`prediction_sets`)")
    level = check_level(level)
    if not isinstance(method, str) or method not in METHODS:
        raise ValueError(f"`method` must be one of {METHODS}; got {method!r}")
    coded = forest.coded(X)
    if method == "quantile":
        p = np.array([(1.0 - level) / 2, (1.0 + level) / 2])
        ends, prediction = quantile_values(forest, coded, p, leaf_counts)
        lower, upper, counts = ends[:, 0], ends[:, 1], leaf_counts
    else:
        lower, upper, prediction = _jackknife_plus(forest, coded, level, oob)
        counts = None
    return PredictionIntervals(lower=lower, upper=upper, prediction=prediction, level=level, method=method,
                               leaf_counts=counts, trees=len(forest.trees), cases=forest.cases)


def _jackknife_plus(forest: FittedForest, X: NDArray[np.float64], level: float, oob: OutOfBag | None):
    design = Draws.of(forest, "intervals")
    design.require_oob("intervals")
    oob = out_of_bag(forest) if oob is None else oob
    residual = np.abs(oob.residuals)
    rows, k = X.shape[0], upper_rank(level, design.cases)
    lower, upper, prediction = np.full(rows, -np.inf), np.full(rows, np.inf), np.empty(rows)
    for block, mean, deviation in oob_deviations(forest, X, design):
        prediction[block] = mean
        if k > design.cases:
            continue
        mu = deviation.astype(np.float64)
        mu += mean[:, None]                             # mu_(-i)(x), (r, n)
        ends = mu + residual
        ends.partition(k - 1, axis=1)                   # the k-th smallest of mu_(-i)(x) + R_i
        upper[block] = ends[:, k - 1]
        np.subtract(residual, mu, out=ends)             # -(mu_(-i)(x) - R_i): its k-th smallest is -q-
        ends.partition(k - 1, axis=1)
        lower[block] = -ends[:, k - 1]
    return lower, upper, prediction
