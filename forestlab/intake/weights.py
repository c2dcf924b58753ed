"""Case weights and class weights: validated here, multiplied into the per-case statistics at presort.

A case of weight ``w`` drawn ``c`` times into a bootstrap sample weighs ``c * w`` in every sum the grower
takes (split scores, ``min_leaf``, node ``cases``, leaf values); the in-bag counts themselves stay the
unweighted draw counts.
"""

from __future__ import annotations

import numbers
from typing import Any

import numpy as np
from numpy.typing import NDArray

__all__ = ["BALANCE_CHOICES", "check_balance", "check_class_weights", "check_weights", "class_weight_vector",
           "growth_weights"]

BALANCE_CHOICES = ("classes",)


def check_weights(weights: Any, rows: int) -> NDArray[np.float64] | None:
    """Case weights as a read-only float64 array of length ``rows`` (None stays None).

    Rules: 1-D, numeric (not bool), one per case, finite and non-negative, not all zero. A case of weight 0
    takes no part in growing any tree (as if its row were dropped) but still gets out-of-bag predictions.
    """
    if weights is None:
        return None
    try:
        arr = np.asarray(weights)
    except (TypeError, ValueError) as exc:
        raise TypeError(f"`weights` could not be read as an array: {exc}") from None
    if arr.dtype.kind not in "iuf":
        raise TypeError(f"`weights` must hold real numbers (ints or floats); got dtype {arr.dtype}")
    if arr.ndim != 1 or arr.shape[0] != rows:
        raise ValueError(f"`weights` must be 1-D with one weight per case ({rows}); got shape {arr.shape}")
    out = np.array(arr, dtype=np.float64)
    bad = np.flatnonzero(~np.isfinite(out) | (out < 0))
    if bad.size:
        raise ValueError(f"`weights` must be finite and >= 0; {bad.size} are not, first at row {bad[0]} "
                         f"({out[bad[0]]})")
    if not np.any(out > 0):
        raise ValueError("`weights` are all zero; at least one case must carry weight")
    out.flags.writeable = False
    return out


def check_balance(balance: Any) -> str | None:
    """``balance`` is None or ``"classes"``."""
    if balance is None:
        return None
    if not isinstance(balance, str) or balance not in BALANCE_CHOICES:
        raise ValueError(f"`balance` must be None or one of {sorted(BALANCE_CHOICES)}; got {balance!r}")
    return balance


def check_class_weights(spec: Any) -> dict | str | None:
    """``class_weights`` is None, ``"balanced"`` or a dict label -> positive finite weight (copied)."""
    if spec is None:
        return None
    if isinstance(spec, str):
        if spec != "balanced":
            raise ValueError(f"`class_weights` must be None, 'balanced' or a dict label -> weight; got {spec!r}")
        return spec
    if not isinstance(spec, dict):
        raise TypeError(f"`class_weights` must be None, 'balanced' or a dict label -> weight; "
                        f"got {type(spec).__name__}")
    for label, w in spec.items():
        if isinstance(w, (bool, np.bool_)) or not isinstance(w, numbers.Real) or not np.isfinite(w) or w <= 0:
            raise ValueError(f"`class_weights` must map labels to positive finite numbers; "
                             f"got {w!r} for {label!r}")
    return {label: float(w) for label, w in spec.items()}


def class_weight_vector(spec: dict | str, classes: NDArray, codes: NDArray[np.int64]) -> NDArray[np.float64]:
    """Weight of each class in vote-column order.

    ``"balanced"`` gives class ``k`` the weight ``n / (K * n_k)`` (``n_k`` unweighted case counts), so every
    class carries the same total weight (common practice). A dict gives each listed class its weight and the
    others 1; a label that is not a class of ``y`` is an error.
    """
    K = classes.size
    if spec == "balanced":
        n_k = np.bincount(codes, minlength=K)
        return codes.size / (K * n_k)
    labels = classes.tolist()
    unknown = [key for key in spec if key not in set(labels)]
    if unknown:
        names = ", ".join(sorted(map(repr, unknown)))
        raise ValueError(f"`class_weights` names {names}, which are not classes of `y` ({labels})")
    return np.array([spec.get(label, 1.0) for label in labels], dtype=np.float64)


def growth_weights(case_weights: NDArray[np.float64] | None, class_vector: NDArray[np.float64] | None,
                   codes: NDArray[np.int64]) -> NDArray[np.float64] | None:
    """Per-case weights the trees are grown with: case weights times class weights (None when neither)."""
    if case_weights is None and class_vector is None:
        return None
    w = np.ones(codes.size) if case_weights is None else case_weights.copy()
    if class_vector is not None:
        w *= class_vector[codes]
    return w
