"""Out-of-bag results in a forest file: written with every forest whose OOB results can be computed, so a
forest loaded without its training data still has them.

Members (all little-endian; ``n`` cases, ``B`` trees, ``K`` classes):

- both tasks: ``oob_coverage`` (n,) i8, ``oob_margins`` (n,) f8, ``oob_error_curve`` (B,) f8,
  ``oob_scalars`` (4,) f8: error, then strength, correlation and error bound (classification) or explained
  variance, NaN, NaN (regression);
- classification: ``oob_observed`` (n,) i8 class codes, ``oob_class_index`` (n,) i8 (-1: never out-of-bag),
  ``oob_votes`` (n, K) f8, ``oob_confusion`` (K, K) f8, ``oob_by_class`` (K,) f8;
- regression: ``oob_observed`` (n,) f8, ``oob_predictions`` (n,) f8, ``oob_residuals`` (n,) f8,
  ``oob_spread`` (n,) f8.
"""

from __future__ import annotations

import numpy as np
from numpy.typing import NDArray

from ..analyses.results import OutOfBag
from .check import ModelFileError

__all__ = ["oob_arrays", "oob_shapes", "oob_from_arrays"]


def oob_shapes(task: str, cases: int, trees: int, classes: int) -> dict[str, tuple[str, tuple[int, ...]]]:
    """Dtype and shape of every OOB member of a file."""
    shapes = {"oob_coverage": ("<i8", (cases,)), "oob_margins": ("<f8", (cases,)),
              "oob_error_curve": ("<f8", (trees,)), "oob_scalars": ("<f8", (4,))}
    if task == "classification":
        shapes.update(oob_observed=("<i8", (cases,)), oob_class_index=("<i8", (cases,)),
                      oob_votes=("<f8", (cases, classes)), oob_confusion=("<f8", (classes, classes)),
                      oob_by_class=("<f8", (classes,)))
    else:
        shapes.update(oob_observed=("<f8", (cases,)), oob_predictions=("<f8", (cases,)),
                      oob_residuals=("<f8", (cases,)), oob_spread=("<f8", (cases,)))
    return shapes


def oob_arrays(oob: OutOfBag, observed_codes: NDArray | None) -> dict[str, NDArray]:
    """The members that store ``oob`` (``observed_codes``: the class codes of the cases, classification)."""
    out = {"oob_coverage": oob.coverage.astype("<i8"), "oob_margins": oob.margins.astype("<f8"),
           "oob_error_curve": oob.error_curve.astype("<f8")}
    if oob.task == "classification":
        out["oob_scalars"] = np.array([oob.error, oob.strength, oob.correlation, oob.error_bound], dtype="<f8")
        if observed_codes is None:          # a forest loaded from a file: classes are sorted, labels known
            observed_codes = np.searchsorted(oob.classes, oob.observed)
        out.update(oob_observed=np.asarray(observed_codes, dtype="<i8"),
                   oob_class_index=oob.class_index.astype("<i8"), oob_votes=oob.votes.astype("<f8"),
                   oob_confusion=oob.confusion.astype("<f8"), oob_by_class=oob.by_class.astype("<f8"))
    else:
        out["oob_scalars"] = np.array([oob.error, oob.explained_variance, np.nan, np.nan], dtype="<f8")
        out.update(oob_observed=oob.observed.astype("<f8"), oob_predictions=oob.predictions.astype("<f8"),
                   oob_residuals=oob.residuals.astype("<f8"), oob_spread=oob.spread.astype("<f8"))
    return out


def oob_from_arrays(task: str, arrays: dict[str, NDArray], classes: NDArray | None, trees: int,
                    weighted: bool) -> OutOfBag:
    """Rebuild the OOB results from checked members; refuse values out of range with ModelFileError."""
    coverage = arrays["oob_coverage"]
    if np.any(coverage < 0) or np.any(coverage > trees):
        raise ModelFileError(f"the file's out-of-bag coverage must lie in [0, {trees}]")
    scalars = arrays["oob_scalars"]
    common = dict(coverage=coverage, error=float(scalars[0]), error_curve=arrays["oob_error_curve"],
                  margins=arrays["oob_margins"])
    if task == "regression":
        return OutOfBag(task=task, observed=arrays["oob_observed"], predictions=arrays["oob_predictions"],
                        class_index=None, votes=None, residuals=arrays["oob_residuals"],
                        spread=arrays["oob_spread"], explained_variance=float(scalars[1]), **common)
    K = classes.size
    observed, index = arrays["oob_observed"], arrays["oob_class_index"]
    if np.any((observed < 0) | (observed >= K)) or np.any((index < -1) | (index >= K)):
        raise ModelFileError(f"the file's out-of-bag class codes must lie in [0, {K}) (or -1 for none)")
    if np.any((index < 0) != (coverage == 0)):
        raise ModelFileError("the file's out-of-bag labels and coverage disagree")
    labels = classes[np.maximum(index, 0)]
    if np.any(index < 0):
        labels = labels.astype(object)
        labels[index < 0] = None
    return OutOfBag(task=task, observed=classes[observed], predictions=labels, class_index=index,
                    votes=arrays["oob_votes"], classes=classes,
                    confusion=arrays["oob_confusion"] if weighted else arrays["oob_confusion"].astype(np.int64),
                    by_class=arrays["oob_by_class"], strength=float(scalars[1]), correlation=float(scalars[2]),
                    error_bound=float(scalars[3]), **common)
