"""Split thresholds for a float32 comparison that routes cases as forestlab's float64 rule does.

forestlab sends a case left when ``x <= t``, ``x`` and ``t`` in float64. A runtime of the exported model
compares ``x32 <= t32`` in float32, ``x32`` being the input rounded to the nearest float32, ``fl(x)``.

The rule. Each threshold is stored as ``t32``, the largest float32 not above ``t`` (``t`` rounded down, with
:func:`numpy.nextafter`): then every float32 number ``v`` goes the same way, ``v <= t`` exactly when
``v <= t32``, since no float32 lies in ``(t32, t]``. Rounding keeps order, so every training value goes the
same way as in forestlab exactly when ``fl(a) <= t32 < fl(b)``, with ``a`` the largest training value of the
feature not above ``t`` and ``b`` the smallest above it. That fails in one case that is common with data
recorded to a few decimals: a training value sits on the threshold itself (the midpoint of two values of a
node can be a third value of the data) and rounds up to the next float32, ``fl(a) > t``; the same holds in
mirror image for ``b``. The training value and the float32 number ``fl(a)`` are then one and the same number
to the runtime, and forestlab sends them different ways. The threshold is then moved onto ``fl(a)`` (or
just below ``fl(b)``): every training value keeps its side, and so does every float32 number except
``fl(a)`` itself, which goes with the training value it stands for. Where ``fl(a) == fl(b)`` no float32
threshold separates two training values and the export is refused (data that are float32 numbers to begin
with never are).

The one residual caveat: a new input that is not a float32 number (and is not a training value) and lies
within one float32 spacing of a threshold may be rounded across it by the conversion to float32, and then go
the other way.
"""

from __future__ import annotations

import numpy as np
from numpy.typing import NDArray

from ..analyses.view import FittedForest

__all__ = ["float32_thresholds", "forest_thresholds", "to_float32"]


def to_float32(values: NDArray[np.float64]) -> NDArray[np.float32]:
    """``values`` rounded to the nearest float32 (beyond the float32 range: +-inf, as a runtime's cast; tiny
    values to float32's subnormal numbers or zero)."""
    with np.errstate(over="ignore", under="ignore"):
        return np.asarray(values, dtype=np.float64).astype(np.float32)


def float32_thresholds(threshold: NDArray[np.float64]) -> NDArray[np.float32]:
    """The largest float32 not above each float64 threshold (the threshold rounded towards -inf)."""
    rounded = to_float32(threshold)
    above = rounded.astype(np.float64) > threshold
    with np.errstate(under="ignore"):  # stepping among float32's subnormal numbers
        rounded[above] = np.nextafter(rounded[above], np.float32(-np.inf))
    return rounded


def forest_thresholds(forest: FittedForest) -> tuple[list[NDArray[np.float32]], int]:
    """The float32 threshold of every node of every tree (NaN at leaves and categorical splits), and how many
    were moved from the rounded-down one onto the float32 number of a training value (module docstring).

    Without training data (a forest loaded without them) every threshold is rounded down. Raises ValueError
    where two training values on either side of a threshold have no float32 number between them.
    """
    trees = forest.trees
    threshold = np.concatenate([t.threshold for t in trees])
    stored = np.full(threshold.size, np.nan, np.float32)
    numeric = ~np.isnan(threshold)
    stored[numeric] = float32_thresholds(threshold[numeric])
    moved = 0
    if forest.has_data:
        feature = np.concatenate([t.feature for t in trees])
        for j in np.unique(feature[numeric]):
            at = np.flatnonzero(numeric & (feature == j))
            column = forest.X[:, j]
            chosen, shifted = _keep_training_values(forest, j, np.unique(column[~np.isnan(column)]), threshold[at],
                                                    stored[at])
            stored[at] = chosen
            moved += shifted
    offsets = np.cumsum([t.nodes for t in trees])[:-1]
    return np.split(stored, offsets), moved


def _keep_training_values(forest: FittedForest, j: int, values: NDArray[np.float64], t: NDArray[np.float64],
                          t32: NDArray[np.float32]) -> tuple[NDArray[np.float32], int]:
    """Thresholds ``t32`` of feature ``j`` moved where a training value's float32 number would cross them."""
    above = np.searchsorted(values, t, side="right")
    low = np.where(above > 0, to_float32(values[np.maximum(above - 1, 0)]), -np.inf).astype(np.float32)
    high = np.where(above < values.size, to_float32(values[np.minimum(above, values.size - 1)]), np.inf)
    high = high.astype(np.float32)
    chosen = np.maximum(t32, low)
    with np.errstate(under="ignore"):  # stepping among float32's subnormal numbers
        chosen = np.where(high <= chosen, np.nextafter(high, np.float32(-np.inf)), chosen)
    wrong = np.flatnonzero(~((low <= chosen) & (chosen < high)))
    if wrong.size:
        k = above[wrong[0]]
        raise ValueError(
            f"feature {forest.feature_names[j]!r} cannot be exported exactly in float32: its training values "
            f"{float(values[k - 1])!r} and {float(values[k])!r} lie on either side of a split at "
            f"{float(t[wrong[0]])!r} ({wrong.size} split(s) like it on this feature) but are the same number in "
            "float32, so no float32 threshold separates them. Fit on float32 numbers "
            "(`X.astype(np.float32).astype(np.float64)`) to export the forest")
    return chosen, int(np.count_nonzero(chosen != t32))
