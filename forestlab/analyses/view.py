"""The one thing analyses read: a small, read-only view of a fitted forest.

A :class:`FittedForest` holds the trees, their in-bag counts, the classes, how predictors were coded, and the
training data when they are kept. ``Forest`` builds one at fit and the model file builds one when it reads a
file; every analysis takes one, so none depends on how the front door stores its state.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any

import numpy as np
from numpy.typing import NDArray

from ..engine.tree import Tree
from ..intake.categories import apply_levels
from ..intake.tables import match_columns
from ..intake.validation import Target, check_X

__all__ = ["MSG_NO_DATA", "FittedForest"]

MSG_NO_DATA = (
    "this forest was loaded from a file without its training data, so it can predict but not grow trees or "
    "compute out-of-bag results; save it with `save(path, include_data=True)` to keep the data"
)


@dataclass(frozen=True, eq=False)
class FittedForest:
    """A fitted forest as analyses see it (read-only arrays, no growth state).

    Attributes
    ----------
    task : str
        ``"classification"`` or ``"regression"``.
    trees : tuple of Tree
        The trees, in seed order.
    inbag : ndarray of uint8, shape (trees, n)
        Bootstrap counts; case ``i`` is out-of-bag for tree ``b`` when ``inbag[b, i] == 0``.
    classes : ndarray or None
        Class labels in vote-column order (None for regression).
    feature_names : tuple of str
        One name per feature.
    levels : dict of int to ndarray
        The category values of every categorical feature (its column holds codes into them).
    frame_labels : dict of str to tuple
        The category labels of data-frame category columns seen in fit.
    case_weights : ndarray of float64, shape (n,), or None
        The case weights given to fit.
    X : ndarray of float64, shape (n, p), or None
        The training predictors as the trees saw them (category codes); None when not kept. This can be
        the caller's own array (a C-ordered float64 ``X`` is not copied): read it, never write it.
    y : ndarray, shape (n,), or None
        The training targets encoded: class indices (int64) or values (float64), read only as ``X``; kept
        also by a model file saved without the data but with its out-of-bag results; None otherwise.
    replace : bool
        Whether each tree's cases were drawn with replacement (the bootstrap) or without (subsampling).
    balance : str or None
        ``"classes"`` when every tree drew the same number of cases from each class, else None.
    case_leaves : ndarray of uint16 or uint32, shape (trees, n), or None
        The leaf (its rank among the tree's leaves, in node order) every training case reaches in every tree,
        as read from a model file saved without the training data; None otherwise (then computed from ``X``
        when an analysis needs it).
    """

    task: str
    trees: tuple[Tree, ...]
    inbag: NDArray[np.uint8]
    classes: NDArray | None
    feature_names: tuple[str, ...]
    levels: dict[int, NDArray[np.float64]] = field(default_factory=dict)
    frame_labels: dict[str, tuple] = field(default_factory=dict)
    case_weights: NDArray[np.float64] | None = None
    X: NDArray[np.float64] | None = None
    y: NDArray | None = None
    replace: bool = True
    balance: str | None = None
    case_leaves: NDArray | None = None

    def __post_init__(self) -> None:
        # the forest's own arrays (X and y may be the caller's)
        for owned in (self.inbag, self.case_weights, self.case_leaves):
            if owned is not None:
                owned.flags.writeable = False

    @property
    def features(self) -> int:
        """Number of features."""
        return len(self.feature_names)

    @property
    def cases(self) -> int:
        """Number of training cases (columns of :attr:`inbag`)."""
        return int(self.inbag.shape[1])

    @property
    def has_data(self) -> bool:
        """Whether the training data are kept."""
        return self.X is not None

    def training_X(self) -> NDArray[np.float64]:
        """The training predictors; a RuntimeError when they were not kept."""
        if self.X is None:
            raise RuntimeError(MSG_NO_DATA)
        return self.X

    @property
    def target(self) -> Target:
        """The training targets as a :class:`~forestlab.intake.validation.Target` (RuntimeError if not kept)."""
        self.training_X()
        return Target(self.task, self.y, self.classes)

    def coded(self, X: Any, name: str = "X") -> NDArray[np.float64]:
        """New cases checked and coded like the training predictors: a frame matched by column name, an
        array by position, categories as training codes (a category not seen in fit becomes NaN)."""
        values = match_columns(X, self.feature_names, name=name, labels=self.frame_labels)
        return apply_levels(check_X(values, name=name, features=self.features), self.levels)
