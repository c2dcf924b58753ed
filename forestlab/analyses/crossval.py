"""k-fold cross-validation of a forest's settings: the slow check on the out-of-bag error."""

from __future__ import annotations

from collections.abc import Callable
from typing import Any

import numpy as np
from numpy.typing import NDArray

from ..engine.seeding import tree_seed
from ..intake.validation import Target
from .results import CrossValidatedError

__all__ = ["cross_validate", "fold_assignment"]


def fold_assignment(rng: np.random.Generator, n: int, folds: int,
                    codes: NDArray[np.int64] | None) -> NDArray[np.int64]:
    """Fold of every case: a random permutation dealt round-robin to the folds.

    With class ``codes`` the permutation is stably sorted by class first (stratified folds): every class is
    spread over the folds as evenly as possible (per-fold class counts differ by at most one), and fold sizes
    differ by at most one.
    """
    order = rng.permutation(n)
    if codes is not None:
        order = order[np.argsort(codes[order], kind="stable")]
    fold = np.empty(n, dtype=np.int64)
    fold[order] = np.arange(n) % folds
    return fold


def cross_validate(grow: Callable[[np.random.SeedSequence, NDArray, NDArray], Any], X: NDArray[np.float64],
                   target: Target, folds: int, root: np.random.SeedSequence) -> CrossValidatedError:
    """k-fold cross-validated error: ``grow(seed, X_train, y_train)`` must return a fitted forest (anything
    with ``predict``); ``root``'s child 0 draws the folds (stratified by class for classification) and child
    ``j + 1`` seeds the forest of fold ``j``. See :func:`forestlab.cross_validated_error`."""
    n = X.shape[0]
    classification = target.task == "classification"
    labels = target.classes[target.values] if classification else target.values
    fold = fold_assignment(np.random.default_rng(tree_seed(root, 0)), n, folds,
                           target.values if classification else None)
    predictions = np.empty(n, dtype=labels.dtype)
    errors = np.empty(folds)
    for j in range(folds):
        held = fold == j
        forest = grow(tree_seed(root, j + 1), X[~held], labels[~held])
        predictions[held] = forest.predict(X[held])
        miss = predictions[held] != labels[held] if classification else (predictions[held] - labels[held]) ** 2
        errors[j] = float(np.mean(miss))
    return CrossValidatedError(fold_errors=errors, mean=float(np.mean(errors)),
                               standard_error=float(np.std(errors, ddof=1) / np.sqrt(folds)), fold=fold,
                               predictions=predictions, stratified=classification)
