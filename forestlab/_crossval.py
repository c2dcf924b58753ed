"""``cross_validated_error``: k-fold cross-validation of a Forest's settings (the folds are an analysis,
:mod:`forestlab.analyses.crossval`; growing each fold's forest is the front door's job)."""

from __future__ import annotations

import numbers
from collections.abc import Mapping
from typing import Any

import numpy as np
from numpy.typing import ArrayLike

from ._forest import Forest
from .analyses.crossval import cross_validate
from .analyses.results import CrossValidatedError
from .engine.seeding import root_seed
from .intake.settings import task_for
from .intake.validation import check_X, check_y

__all__ = ["cross_validated_error"]


def _template(forest_or_settings: Any) -> Forest:
    if isinstance(forest_or_settings, Forest):
        return forest_or_settings
    if isinstance(forest_or_settings, Mapping):
        if "rng" in forest_or_settings:
            raise ValueError("`forest_or_settings` must not hold `rng`; pass `rng` to cross_validated_error")
        try:
            return Forest(**forest_or_settings)
        except TypeError as exc:
            raise TypeError(f"`forest_or_settings` is not a valid set of Forest arguments: {exc}") from None
    raise TypeError("`forest_or_settings` must be a Forest (fitted or not) or a mapping of Forest arguments; "
                    f"got {type(forest_or_settings).__name__}")


def cross_validated_error(forest_or_settings: Forest | Mapping[str, Any], X: ArrayLike, y: ArrayLike,
                          folds: int = 10, *, rng: Any = None) -> CrossValidatedError:
    """k-fold cross-validated error of a forest's settings, to check the out-of-bag error against.

    Each fold is held out once while a forest with the same settings is grown on the other folds; its
    misclassification rate (or mean squared error) on the held-out fold is the fold error. Classification
    folds are stratified by class.

    Parameters
    ----------
    forest_or_settings : Forest or mapping
        A Forest, fitted or not (only its settings are used; it is not changed), or the keyword arguments
        of :class:`Forest` (without ``rng``).
    X : array-like, shape (n, p)
    y : array-like, shape (n,)
    folds : int, default 10
        Number of folds, from 2 to n.
    rng : None, int, numpy.random.SeedSequence or numpy.random.Generator
        Source of the fold split and of every fold's forest (child 0 of one root SeedSequence draws the
        folds, child ``j + 1`` seeds the forest of fold ``j``); a given forest's own ``rng`` is not used.

    Returns
    -------
    CrossValidatedError

    Examples
    --------
    >>> import forestlab as fl
    >>> from forestlab.synthetic import twonorm
    >>> X, y = twonorm(200, rng=3)
    >>> cv = fl.cross_validated_error(fl.Forest(trees=25), X, y, folds=5, rng=1)
    >>> cv.fold_errors.shape, bool(0 <= cv.mean <= 1)
    ((5,), True)
    """
    template = _template(forest_or_settings)
    X = check_X(X)
    target = check_y(y, X.shape[0], task_for(template._settings))
    n = X.shape[0]
    if isinstance(folds, (bool, np.bool_)) or not isinstance(folds, numbers.Integral):
        raise TypeError(f"`folds` must be an int; got {type(folds).__name__}")
    if not 2 <= folds <= n:
        raise ValueError(f"`folds` must lie between 2 and the number of cases ({n}); got {folds}")
    return cross_validate(lambda seed, X_in, y_in: template._clone_settings(rng=seed).fit(X_in, y_in), X, target,
                          int(folds), root_seed(rng))
