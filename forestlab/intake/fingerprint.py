"""A fingerprint of the training data as the trees saw them, so more trees are only grown on the same data.

The same digest is written in every model file (header field ``fingerprint``) and checked when a file's
stored training data are read back, so its bytes must not change: see ``docs/file-format.md``.
"""

from __future__ import annotations

import hashlib

import numpy as np
from numpy.typing import NDArray

__all__ = ["check_same_data", "data_fingerprint"]


def data_fingerprint(X: NDArray[np.float64], target: NDArray, weights: NDArray[np.float64] | None) -> str:
    """SHA-256 (hex) of the training data: shapes, then the bytes of ``X`` (category columns as codes), the
    encoded targets (class indices or values) and the case weights."""
    digest = hashlib.sha256(b"forestlab-data-1")
    for part in (np.ascontiguousarray(X, dtype="<f8"), np.ascontiguousarray(target),
                 np.ascontiguousarray(np.empty(0) if weights is None else weights, dtype="<f8")):
        digest.update(repr((part.dtype.str, part.shape)).encode())
        digest.update(part.reshape(-1).view(np.uint8))  # the bytes in place: no copy of X
    return digest.hexdigest()


def check_same_data(expected: str, fit_shape: tuple[int, int], X: NDArray[np.float64], target: NDArray,
                    weights: NDArray[np.float64] | None) -> None:
    """Raise ValueError unless ``X``, ``target`` and ``weights`` have the fingerprint ``expected``."""
    if data_fingerprint(X, target, weights) == expected:
        return
    what = (f"`X` has shape {X.shape}, the fit data {fit_shape}" if X.shape != fit_shape
            else "the values of `X` or `y` differ from the fit data")
    raise ValueError(
        f"`add_trees` grows more trees on the data the forest was fit on, but {what}; "
        "call `fit` to grow a forest on new data"
    )
