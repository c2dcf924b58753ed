"""Conformal building blocks: the (n + 1) rank rule, conformal p-values and the Benjamini-Hochberg rule.

- Rank rule (Vovk, Gammerman & Shafer 2005, "Algorithmic learning in a random world"): with ``n`` scores
  exchangeable with a new one, the new one is at most the ``ceil(level (n + 1))``-th smallest of the ``n``
  with probability at least ``level``; when that rank exceeds ``n`` the bound is ``+inf``.
- Conformal p-value of a test score ``s`` against ``t`` calibration scores (larger = stranger):
  ``p = (1 + #{calibration scores >= s}) / (t + 1)``, valid for an exchangeable test case (Bates, Candes,
  Lei, Romano & Sesia 2023, "Testing for outliers with conformal p-values", Annals of Statistics 51). The
  p-values of many test cases against one calibration set are positively dependent (PRDS, their
  Theorem 2), so the Benjamini-Hochberg rule controls the false discovery rate over them.
- Benjamini & Hochberg (1995), "Controlling the false discovery rate", JRSS B 57: with ``m`` p-values in
  increasing order, reject the ``k`` smallest for the largest ``k`` with ``p_(k) <= k q / m``.
"""

from __future__ import annotations

import math
import numbers
from typing import Any

import numpy as np
from numpy.typing import NDArray

__all__ = ["benjamini_hochberg", "check_level", "conformal_p_values", "rank_bound", "upper_rank"]


def check_level(level: Any, name: str = "level") -> float:
    """A level strictly between 0 and 1, as a float."""
    if isinstance(level, (bool, np.bool_)) or not isinstance(level, numbers.Real):
        raise TypeError(f"`{name}` must be a number strictly between 0 and 1; got {type(level).__name__}")
    if not 0.0 < float(level) < 1.0:
        raise ValueError(f"`{name}` must lie strictly between 0 and 1; got {level!r}")
    return float(level)


def upper_rank(level: float, n: int) -> int:
    """``ceil(level (n + 1))``: the rank (1-based) of the calibration score that bounds a new one."""
    return math.ceil(level * (n + 1) - 1e-9)


def rank_bound(scores: NDArray[np.float64], level: float, axis: int = -1) -> NDArray[np.float64]:
    """The ``ceil(level (n + 1))``-th smallest of ``scores`` along ``axis`` (``+inf`` when past ``n``)."""
    n = scores.shape[axis]
    k = upper_rank(level, n)
    if k > n:
        return np.full(np.delete(scores.shape, axis if axis >= 0 else scores.ndim + axis), np.inf)
    return np.take(np.partition(scores, k - 1, axis=axis), k - 1, axis=axis)


def conformal_p_values(test: NDArray[np.float64], calibration: NDArray[np.float64]) -> NDArray[np.float64]:
    """``(1 + #{calibration >= s}) / (t + 1)`` for every test score ``s`` (larger scores are stranger)."""
    ordered = np.sort(calibration)
    at_least = ordered.size - np.searchsorted(ordered, test, side="left")
    return (1.0 + at_least) / (ordered.size + 1.0)


def benjamini_hochberg(p: NDArray[np.float64], q: float) -> NDArray[np.intp]:
    """Indices of the p-values the Benjamini-Hochberg rule rejects at level ``q``, smallest p-value first
    (ties in index order)."""
    m = p.size
    order = np.argsort(p, kind="stable")
    below = np.flatnonzero(p[order] <= q * np.arange(1, m + 1) / m)
    return order[:below[-1] + 1] if below.size else order[:0]

