"""Doubtful labels with error control: conformal p-values against trusted cases, then Benjamini-Hochberg.

This serves ``OutOfBag.doubtful(fdr=..., trusted=...)`` (its docstring states the rule and its conditions).
The score of a case is how strange its recorded label looks to the trees for which it was out-of-bag:
``1 -`` the out-of-bag vote share of its recorded label (classification), the absolute out-of-bag residual
(regression). Every untrusted case is tested against the trusted cases of its recorded class
(:func:`~.conformal.conformal_p_values`); p-values of different classes use disjoint trusted sets, so they are
independent between classes and positively dependent within one, and Benjamini-Hochberg keeps its guarantee.
This module reads the out-of-bag results it is given by their attributes, so the results module can use it.
"""

from __future__ import annotations

import warnings
from typing import Any

import numpy as np
from numpy.typing import NDArray

from ..._warnings import SmallTrustedSetWarning
from .conformal import benjamini_hochberg, check_level, conformal_p_values

__all__ = ["doubt_tests", "label_doubts", "trusted_mask"]


def label_doubts(oob: Any, fdr: Any, trusted: Any, threshold: Any, top: int | None) -> dict:
    """The fields of the ``DoubtfulCases`` that ``oob.doubtful(fdr=fdr, trusted=trusted, top=top)`` selects."""
    if fdr is None or trusted is None:
        raise ValueError("`fdr` and `trusted` go together: a p-value for a recorded label needs trusted cases to "
                         "compare it with (ranked against the other training cases, no case could ever pass "
                         "the Benjamini-Hochberg rule); pass `trusted=` the cases whose labels were checked")
    fdr = check_level(fdr, "fdr")
    if threshold != 0.0:
        raise ValueError("`threshold` does not apply with `fdr`; leave it at its default")
    mask = trusted_mask(trusted, oob.coverage.size)
    if oob.task == "classification":
        groups = np.searchsorted(oob.classes, oob.observed)
        with np.errstate(invalid="ignore"):      # NaN votes of cases never out-of-bag, left untested
            scores = 1.0 - np.take_along_axis(oob.votes, groups[:, None], axis=1)[:, 0]
    else:
        groups, scores = np.zeros(oob.coverage.size, dtype=np.int64), np.abs(oob.residuals)
    chosen, p, starved = doubt_tests(scores, groups, oob.coverage > 0, mask, fdr)
    tested = int(np.count_nonzero(~np.isnan(p)))
    if starved:
        which = "" if oob.classes is None else f" of class {', '.join(str(oob.classes[g]) for g in starved)}"
        warnings.warn(f"no case{which} can be flagged at fdr={fdr:g}: with t trusted cases of its class the "
                      f"smallest p-value is 1/(t+1), above {fdr:g}; trust at least {int(np.ceil(1 / fdr)) - 1} "
                      f"cases per class, and many more to find a few errors among {tested} tested (k cases "
                      f"are flagged together only if k >= {tested} / ({fdr:g} (t + 1)))",
                      SmallTrustedSetWarning, stacklevel=4)
    chosen = chosen[:top] if top is not None else chosen
    used = int(np.count_nonzero(mask & (oob.coverage > 0)))
    return dict(case=chosen, observed=oob.observed[chosen], out_of_bag=oob.predictions[chosen],
                margin=oob.margins[chosen], coverage=oob.coverage[chosen], task=oob.task,
                rule=f"Benjamini-Hochberg at false discovery rate {fdr:g}: {tested} cases tested against {used} "
                     f"trusted", p_value=p[chosen], tested=tested, fdr=fdr)


def trusted_mask(trusted: Any, n: int) -> NDArray[np.bool_]:
    """``trusted`` (case indices or a boolean mask of the ``n`` training cases) as a boolean mask."""
    values = np.asarray(trusted)
    if values.dtype == bool:
        if values.shape != (n,):
            raise ValueError(f"`trusted` as a boolean mask must have one entry per training case ({n}); got shape "
                             f"{values.shape}")
        return values.copy()
    if values.ndim != 1 or (values.size and values.dtype.kind not in "iu"):
        raise TypeError("`trusted` must be a 1-D array of training case indices or a boolean mask")
    if values.size and (values.min() < -n or values.max() >= n):
        raise ValueError(f"`trusted` holds case indices outside 0 .. {n - 1}")
    mask = np.zeros(n, dtype=bool)
    mask[values.astype(np.intp)] = True
    return mask


def doubt_tests(scores: NDArray[np.float64], groups: NDArray[np.int64], usable: NDArray[np.bool_],
                trusted: NDArray[np.bool_], fdr: float) -> tuple[NDArray[np.intp], NDArray[np.float64], list[int]]:
    """Conformal p-values of the usable, untrusted cases against the usable trusted cases of their group
    (larger scores are stranger), and the cases Benjamini-Hochberg flags at ``fdr``.

    Returns the flagged cases (smallest p-value first, then largest score), the p-value of every case (NaN
    where untested) and the groups of tested cases whose trusted cases are too few for any p-value to reach
    ``fdr`` (``1 / (t + 1) > fdr``).
    """
    p = np.full(scores.size, np.nan)
    starved = []
    for g in np.unique(groups[usable & ~trusted]):
        calibration = scores[usable & trusted & (groups == g)]
        tests = np.flatnonzero(usable & ~trusted & (groups == g))
        p[tests] = conformal_p_values(scores[tests], calibration)
        if 1.0 / (calibration.size + 1) > fdr:
            starved.append(int(g))
    tested = np.flatnonzero(~np.isnan(p))
    flagged = tested[benjamini_hochberg(p[tested], fdr)]
    return flagged[np.lexsort((-scores[flagged], p[flagged]))], p, starved
