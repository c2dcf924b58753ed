"""Conformal prediction sets for classification forests, calibrated on the out-of-bag votes.

Split-free, out-of-bag conformal classification: the out-of-bag vote shares of the training cases serve as
the calibration set (conformal prediction: Vovk, Gammerman & Shafer 2005, "Algorithmic learning in a random
world"), with the adaptive score of Romano, Sesia & Candes (2020), "Classification with valid and adaptive
coverage", NeurIPS 33. With ``pi_k(x)`` the share of trees voting for class ``k``, the score of label ``y`` is
the total share of the classes voted for at least as often as ``y``:

    ``s(x, y) = sum_k pi_k(x) [pi_k(x) > pi_y(x)] + u sum_k pi_k(x) [pi_k(x) = pi_y(x)]``,

with ``u ~ Uniform(0, 1)`` drawn once per case. With ``tau`` the ``ceil(level (n + 1))``-th smallest of the
``n`` calibration scores ``s(x_i, y_i)`` (from the out-of-bag shares), the set of a new case is ``{y : s(x, y)
<= tau}``: the most voted classes until their shares reach ``tau``, the last one in with a probability that
makes coverage exact. Tied classes enter or leave together. By class (Mondrian conformal prediction, Vovk et
al. 2005, chapter 4), each class ``k`` has its own ``tau_k`` from its own cases, so coverage holds within
every class. Without the draw (``u = 1``) a unanimous vote would score as strange as a wrong one, so sets of a
confident forest would all be full; the draw is seeded by ``rng``.

The calibration scores come from about ``B / e`` trees per case and a new case's from all ``B``, so the two
are exchangeable only approximately; coverage is close to the level in practice. Empty sets (a forest more
accurate than the level asks must sometimes name no class) and full sets are legal and counted.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

import numpy as np
from numpy.typing import ArrayLike, NDArray

from ...engine.seeding import root_seed, tree_generator
from ...engine.tree import tree_values
from ..cases import ROW_BUDGET, row_blocks
from ..oob import out_of_bag
from ..results import OutOfBag
from ..view import FittedForest
from .conformal import check_level, rank_bound
from .outputs import SHOWN_ROWS, more_rows, read_only, table

__all__ = ["PredictionSets", "adaptive_scores", "prediction_sets"]


@dataclass(frozen=True, eq=False, repr=False)
class PredictionSets:
    """Conformal prediction sets of class labels at new rows (see :func:`prediction_sets`).

    Attributes
    ----------
    members : ndarray of bool, shape (rows, K)
        ``members[r, k]``: class ``classes[k]`` is in row ``r``'s set.
    classes : ndarray
        Class labels in column order.
    shares : ndarray of float64, shape (rows, K)
        The forest's vote shares at the rows.
    thresholds : ndarray of float64, shape (K,)
        The bar ``tau`` each class's score must not pass (one value repeated when not by class; ``inf``
        when the level asks for more than the calibration cases can give).
    level : float
    by_class : bool
        Coverage within every class (Mondrian) or over all cases.
    calibration : ndarray of int64, shape (K,)
        Out-of-bag calibration cases of each class.
    """

    members: NDArray[np.bool_]
    classes: NDArray
    shares: NDArray[np.float64]
    thresholds: NDArray[np.float64]
    level: float
    by_class: bool
    calibration: NDArray[np.int64]

    def __post_init__(self) -> None:
        read_only(self)

    def __len__(self) -> int:
        return int(self.members.shape[0])

    @property
    def size(self) -> NDArray[np.int64]:
        """Classes in each set."""
        return np.count_nonzero(self.members, axis=1)

    @property
    def empty(self) -> int:
        """Number of empty sets."""
        return int(np.count_nonzero(self.size == 0))

    @property
    def full(self) -> int:
        """Number of sets holding every class."""
        return int(np.count_nonzero(self.size == self.classes.size))

    def labels(self, row: int) -> list:
        """The class labels in the set of ``row``, most voted first."""
        order = np.argsort(-self.shares[row], kind="stable")
        return self.classes[order[self.members[row, order]]].tolist()

    def covers(self, y: ArrayLike) -> NDArray[np.bool_]:
        """Whether each observed label (one per row) is in its row's set (an unknown label is not)."""
        labels = np.asarray(y).reshape(-1)
        if labels.size != len(self):
            raise ValueError(f"`y` must hold one label per row ({len(self)}); got {labels.size}")
        code = np.searchsorted(self.classes, labels) if labels.size else np.zeros(0, dtype=np.intp)
        code = np.minimum(code, self.classes.size - 1)
        known = self.classes[code] == labels
        return known & self.members[np.arange(labels.size), code]

    def __str__(self) -> str:
        how = "by class" if self.by_class else "over all classes"
        lines = [f"{self.level:.0%} prediction sets at {len(self)} rows (out-of-bag conformal, adaptive score, "
                 f"coverage {how}; {int(self.calibration.sum())} calibration cases): {self.empty} empty, "
                 f"{self.full} holding every class, mean size {float(np.mean(self.size)) if len(self) else 0:.2f}"]
        shown = min(len(self), SHOWN_ROWS)
        head = ["row", "set"] + [f"share {c}" for c in self.classes]
        rows = [[str(i), "{" + ", ".join(str(c) for c in self.labels(i)) + "}"]
                + [f"{s:.3f}" for s in self.shares[i]] for i in range(shown)]
        return "\n".join(lines + table(head, rows, left=(1,)) + more_rows(len(self), shown))

    __repr__ = __str__


def prediction_sets(forest: FittedForest, X: Any, level: float = 0.9, by_class: bool = False, *,
                    rng: Any = None, oob: OutOfBag | None = None) -> PredictionSets:
    """Conformal prediction sets of class labels at every row of ``X``, calibrated on the out-of-bag votes.

    Parameters
    ----------
    X : array or data frame, shape (rows, p)
    level : float in (0, 1), default 0.9
        Nominal coverage: the set holds the true class with about this probability.
    by_class : bool, default False
        Calibrate each class on its own cases (Mondrian), so coverage holds within every class, also the
        rare ones; otherwise over all cases together.
    rng : None, int, SeedSequence or Generator
        Seeds the score's uniform draws ``u``: the calibration cases draw from its child 0, the rows from its
        child 1 (one draw per row, in row order). None draws fresh ones; an int gives the same sets every
        time.
    oob : OutOfBag, optional
        The forest's out-of-bag results (``Forest`` passes its own).

    Returns
    -------
    PredictionSets

    Examples
    --------
    >>> import numpy as np, forestlab as fl
    >>> rng = np.random.default_rng(0)
    >>> X = rng.normal(size=(400, 2)); y = np.where(X[:, 0] + 0.5 * rng.normal(size=400) > 0, "a", "b")
    >>> forest = fl.Forest(trees=200, rng=1).fit(X, y)
    >>> sets = forest.prediction_sets([[3.0, 0.0], [0.0, 0.0]], level=0.9, rng=2)
    >>> sets.labels(0), sorted(sets.labels(1))
    (['a'], ['a', 'b'])
    """
    if forest.task != "classification":
        raise TypeError("`prediction_sets` is for classification forests; this forest does regression (use "
                        "`intervals`)")
    level = check_level(level)
    if not isinstance(by_class, (bool, np.bool_)):
        raise TypeError(f"`by_class` must be a bool; got {type(by_class).__name__}")
    coded = forest.coded(X)
    oob = out_of_bag(forest) if oob is None else oob
    K = forest.classes.size
    seed = root_seed(rng)
    covered = np.flatnonzero(oob.coverage > 0)
    observed = np.searchsorted(forest.classes, oob.observed[covered])
    u_cal = tree_generator(seed, 0).random(covered.size)
    above, tied = adaptive_scores(oob.votes[covered])
    pick = (np.arange(covered.size), observed)
    calibration = above[pick] + u_cal * tied[pick]
    counts = np.bincount(observed, minlength=K)
    if by_class:
        thresholds = np.array([rank_bound(calibration[observed == k], level) for k in range(K)])
    else:
        thresholds = np.full(K, rank_bound(calibration, level))
    shares = _vote_shares(forest, coded)
    u_new = tree_generator(seed, 1).random(coded.shape[0])
    members = np.empty(shares.shape, dtype=bool)
    for rows in row_blocks(coded.shape[0], K * K, ROW_BUDGET):
        above, tied = adaptive_scores(shares[rows])
        members[rows] = above + u_new[rows, None] * tied <= thresholds
    return PredictionSets(members=members, classes=forest.classes, shares=shares, thresholds=thresholds,
                          level=level, by_class=bool(by_class), calibration=counts)


def adaptive_scores(shares: NDArray[np.float64]) -> tuple[NDArray[np.float64], NDArray[np.float64]]:
    """The two parts of the adaptive score of every class at every row of ``shares`` (rows, K): the total
    share of the classes voted for more often, and of those tied with it (itself included)."""
    above = (shares[:, None, :] > shares[:, :, None]).astype(np.float64)    # [r, k, j]: j voted more than k
    tied = (shares[:, None, :] == shares[:, :, None]).astype(np.float64)
    return np.einsum("rkj,rj->rk", above, shares), np.einsum("rkj,rj->rk", tied, shares)


def _vote_shares(forest: FittedForest, X: NDArray[np.float64]) -> NDArray[np.float64]:
    """Share of trees voting for each class at every row: (rows, K)."""
    K = forest.classes.size
    out = np.empty((X.shape[0], K))
    for rows in row_blocks(X.shape[0], len(forest.trees), ROW_BUDGET):
        votes = tree_values(forest.trees, X[rows], np.int64)
        out[rows] = np.stack([np.count_nonzero(votes == k, axis=0) for k in range(K)], axis=1) / len(forest.trees)
    return out
