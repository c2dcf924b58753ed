"""Case weights and class priors: validated here, multiplied into the per-case statistics at presort.

A case of weight ``w`` drawn ``c`` times into a bootstrap sample weighs ``c * w`` in every sum the grower
takes (split scores, ``min_leaf``, node ``cases``, leaf values); the in-bag counts themselves stay the
unweighted draw counts. Class priors act the same way, through one factor per class (see
:func:`class_factors`).
"""

from __future__ import annotations

import numbers
from typing import Any

import numpy as np
from numpy.typing import NDArray

__all__ = ["BALANCE_CHOICES", "PRIOR_CHOICES", "check_balance", "check_class_priors", "check_weights",
           "class_factors", "growth_weights"]

BALANCE_CHOICES = ("classes",)
PRIOR_CHOICES = ("equal",)
MSG_PRIORS = "`class_priors` must be None, 'equal' or a dict label -> prior"


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


def check_class_priors(spec: Any) -> dict | str | None:
    """``class_priors`` is None, ``"equal"`` or a dict label -> positive finite prior (copied, not yet normalised)."""
    if spec is None:
        return None
    if isinstance(spec, str):
        if spec not in PRIOR_CHOICES:
            raise ValueError(f"{MSG_PRIORS}; got {spec!r}")
        return spec
    if not isinstance(spec, dict):
        raise TypeError(f"{MSG_PRIORS}; got {type(spec).__name__}")
    for label, prior in spec.items():
        if isinstance(prior, (bool, np.bool_)) or not isinstance(prior, numbers.Real) or not np.isfinite(prior) \
                or prior <= 0:
            raise ValueError(f"`class_priors` must map labels to positive finite numbers; got {prior!r} for {label!r}")
    return {label: float(prior) for label, prior in spec.items()}


def class_factors(spec: dict | str, classes: NDArray, codes: NDArray[np.int64],
                  case_weights: NDArray[np.float64] | None) -> tuple[NDArray[np.float64], NDArray[np.float64]]:
    """The prior of every class and the factor that gives it, both in vote-column order.

    Priors ``pi_k`` make class ``k`` carry the share ``pi_k`` of the weight at every root: each case of class
    ``k`` is weighted by ``pi_k * W / W_k``, with ``W_k`` the total case weight of class ``k`` (its number of
    cases without case weights) and ``W`` that of all, so that the node probabilities are ``p(k|t)``
    proportional to ``pi_k N_k(t) / N_k`` (Breiman, Friedman, Olshen & Stone 1984, *Classification and
    Regression Trees*, chapter 4, "Priors and variable misclassification costs"; section number from
    memory). ``"equal"`` gives every class ``1 / K``; a dict gives every class a prior (normalised to sum to
    1); ``class_priors=None`` keeps the priors of the data themselves (``W_k / W``, no reweighting).
    Misclassification costs that depend on the true class only amount to priors in proportion to
    ``cost_k * W_k`` (the same chapter).
    """
    K = classes.size
    totals = np.bincount(codes, weights=case_weights, minlength=K)
    labels = classes.tolist()
    if spec == "equal":
        priors = np.full(K, 1.0 / K)
    else:
        unknown = [key for key in spec if key not in set(labels)]
        missing = [label for label in labels if label not in spec]
        if unknown or missing:
            what = [f"names {', '.join(sorted(map(repr, unknown)))}, which are not classes of `y`"] if unknown else []
            what += [f"gives no prior for {', '.join(map(repr, missing))}"] if missing else []
            raise ValueError(f"`class_priors` {' and '.join(what)} (the classes: {labels})")
        priors = np.array([spec[label] for label in labels], dtype=np.float64)
        priors = priors / priors.sum()
    empty = [labels[k] for k in np.flatnonzero(totals == 0)]
    if empty:
        raise ValueError(f"`class_priors` needs weight in every class, but the cases of {empty[0]!r} weigh 0")
    W = totals.sum()
    factors = W / (K * totals) if spec == "equal" else W * priors / totals
    return priors, factors


def growth_weights(case_weights: NDArray[np.float64] | None, factors: NDArray[np.float64] | None,
                   codes: NDArray[np.int64]) -> NDArray[np.float64] | None:
    """Per-case weights the trees are grown with: case weights times class factors (None when neither)."""
    if case_weights is None and factors is None:
        return None
    w = np.ones(codes.size) if case_weights is None else case_weights.copy()
    if factors is not None:
        w *= factors[codes]
    return w
