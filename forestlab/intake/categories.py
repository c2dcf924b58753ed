"""Category coding: a categorical column's values become codes ``0..k-1`` into its sorted distinct values.

The engine splits on codes (:mod:`forestlab.engine.categories`); new data are coded with the values seen in
fit, and a value not seen there becomes NaN, so it follows a split's missing-value route.
"""

from __future__ import annotations

import numpy as np
from numpy.typing import NDArray

__all__ = ["MAX_CATEGORIES", "apply_levels", "encode_columns"]

MAX_CATEGORIES = 1024


def encode_columns(X: NDArray[np.float64], columns: list[int]) -> tuple[NDArray[np.float64], dict[int, NDArray]]:
    """Replace each categorical column by codes ``0..k-1`` (NaN stays NaN); returns the levels and ``X`` (a copy
    only when there are categorical columns)."""
    if not columns:
        return X, {}
    X = X.copy()
    levels: dict[int, NDArray] = {}
    for j in columns:
        col = X[:, j]
        present = ~np.isnan(col)
        values = np.unique(col[present])
        if values.size > MAX_CATEGORIES:
            raise ValueError(f"categorical column {j} has {values.size} categories; at most {MAX_CATEGORIES} "
                             "are supported (treat it as numeric, or group rare categories)")
        col[present] = np.searchsorted(values, col[present])
        levels[j] = values
    return X, levels


def apply_levels(X: NDArray[np.float64], levels: dict[int, NDArray]) -> NDArray[np.float64]:
    """Training codes for new data; a value not seen in training becomes NaN (it follows missing values)."""
    if not levels:
        return X
    X = X.copy()
    for j, values in levels.items():
        col = X[:, j]
        present = np.flatnonzero(~np.isnan(col))
        pos = np.minimum(np.searchsorted(values, col[present]), values.size - 1)
        known = values[pos] == col[present]
        col[present] = np.where(known, pos, np.nan)
    return X
