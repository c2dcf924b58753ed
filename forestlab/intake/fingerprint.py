"""A fingerprint of the training data, so that more trees are only ever grown on the same data."""

from __future__ import annotations

import hashlib

import numpy as np
from numpy.typing import NDArray

from .validation import Target

__all__ = ["data_fingerprint", "check_same_data"]

_BLOCK_BYTES = 1 << 20


def data_fingerprint(X: NDArray[np.float64], target: Target) -> str:
    """sha256 of the shape, the validated ``X`` (NaN and -0.0 made canonical), the task, target codes and labels."""
    h = hashlib.sha256()
    h.update(repr((X.shape, target.task)).encode())
    rows = max(1, _BLOCK_BYTES // max(1, 8 * X.shape[1]))
    for lo in range(0, X.shape[0], rows):  # in row blocks: no copy of the whole of X
        canonical = np.ascontiguousarray(X[lo:lo + rows], dtype=np.float64) + 0.0   # -0.0 and 0.0 split alike
        canonical[np.isnan(canonical)] = np.nan                                    # one bit pattern for NaN
        h.update(canonical.data)
    h.update(np.ascontiguousarray(target.values).tobytes())
    if target.classes is not None:
        h.update(repr(target.classes.tolist()).encode())
    return h.hexdigest()


def check_same_data(expected: str, fit_shape: tuple[int, int], X: NDArray[np.float64], target: Target) -> None:
    """Raise ValueError unless ``X`` and ``target`` have the fingerprint ``expected`` of the fit data."""
    if data_fingerprint(X, target) == expected:
        return
    what = (f"`X` has shape {X.shape}, the fit data {fit_shape}" if X.shape != fit_shape
            else "the values of `X` or `y` differ from the fit data")
    raise ValueError(
        f"`add_trees` grows more trees on the data the forest was fit on, but {what}; "
        "call `fit` to grow a forest on new data"
    )
