"""Data validation: predictors, targets and a splitter's output are checked here, before any work.

Messages name the argument in backticks and state the rule, so the text is stable and searchable. The
constructor arguments of a Forest are checked in :mod:`.settings`.
"""

from __future__ import annotations

import numbers
import warnings
from dataclasses import dataclass
from typing import Any

import numpy as np
from numpy.typing import NDArray

from .._warnings import SingleClassWarning
from ..engine.splitter import CartSplitter, call_splitter

__all__ = ["Target", "check_X", "check_splitter_output", "check_y", "int_at_least", "resolve_categorical"]


def int_at_least(value: Any, name: str, low: int) -> int:
    """``value`` as an int of at least ``low``; a TypeError or ValueError naming the argument otherwise."""
    if isinstance(value, (bool, np.bool_)) or not isinstance(value, numbers.Integral):
        raise TypeError(f"`{name}` must be an int; got {type(value).__name__}")
    if value < low:
        raise ValueError(f"`{name}` must be at least {low}; got {value}")
    return int(value)


def resolve_categorical(spec: tuple[int | str, ...] | None, features: int,
                        names: list[str] | None = None, frame: dict | None = None) -> list[int]:
    """Positions of the categorical features, checked against the data's width (and column names).

    ``frame`` names a data frame's category columns, which are categorical whether or not ``spec`` lists them.
    """
    extra = sorted(names.index(c) for c in frame) if frame and names is not None else []
    if not spec:
        return extra
    positions = []
    for entry in spec:
        if isinstance(entry, str):
            if names is None or entry not in names:
                known = "the data has no column names" if names is None else f"columns are {names}"
                raise ValueError(f"`categorical` names column {entry!r}, but {known}")
            positions.append(names.index(entry))
        elif not -features <= entry < features:
            raise ValueError(f"`categorical` position {entry} is out of range for {features} features")
        else:
            positions.append(entry % features)
    if len(set(positions)) != len(positions):
        raise ValueError(f"`categorical` lists a column twice: {list(spec)}")
    return sorted(set(positions) | set(extra))


def check_X(X: Any, name: str = "X", features: int | None = None) -> NDArray[np.float64]:
    """A numeric, non-empty 2-D float64 array (C-contiguous) from array-like ``X``; NaN marks a missing value."""
    try:
        arr = np.asarray(X)
    except (ValueError, TypeError) as exc:
        raise TypeError(f"`{name}` could not be read as an array: {exc}") from None
    if arr.dtype == object or arr.dtype.kind in "USVMmc":
        raise TypeError(f"`{name}` must hold real numbers; got dtype {arr.dtype}")
    if arr.ndim != 2:
        raise ValueError(f"`{name}` must be 2-D (cases x features); got {arr.ndim}-D with shape {arr.shape}")
    if arr.shape[0] == 0 or arr.shape[1] == 0:
        raise ValueError(f"`{name}` is empty: shape {arr.shape}")
    if features is not None and arr.shape[1] != features:
        raise ValueError(f"`{name}` must have {features} features, as in training; got {arr.shape[1]}")
    arr = np.ascontiguousarray(arr, dtype=np.float64)
    bad = np.isinf(arr)
    if bad.any():
        rows, cols = np.nonzero(bad)
        raise ValueError(
            f"`{name}` holds {bad.sum()} infinite value(s), first at row {rows[0]}, column {cols[0]}; "
            "predictors must be finite numbers or NaN for a missing value"
        )
    return arr


@dataclass(frozen=True)
class Target:
    """Validated targets: the task, the encoded values and (classification) the class labels."""

    task: str
    values: NDArray          # int64 class indices or float64 targets
    classes: NDArray | None  # labels in vote-column order, or None for regression


def _check_declared_classes(y: Any) -> None:
    """A categorical target (pandas) that declares a class no case has is refused, naming the classes."""
    categories = getattr(getattr(y, "dtype", None), "categories", None)
    if categories is None or not hasattr(y, "value_counts"):
        return
    counts = y.value_counts(sort=False)
    empty = [c for c in categories if counts.get(c, 0) == 0]
    if empty:
        raise ValueError(f"`y` declares {len(empty)} class(es) with no cases: {empty[:10]}; drop unused "
                         "categories (`.cat.remove_unused_categories()`) or supply cases of them")


def _infer_task(arr: NDArray) -> str:
    return "regression" if arr.dtype.kind == "f" else "classification"


def check_y(y: Any, rows: int, task: str | None) -> Target:
    """Validate targets against ``rows`` cases and encode them for ``task`` (inferred when None)."""
    _check_declared_classes(y)
    try:
        arr = np.asarray(y)
    except (ValueError, TypeError) as exc:
        raise TypeError(f"`y` could not be read as an array: {exc}") from None
    if arr.ndim == 2 and arr.shape[1] == 1:
        arr = arr[:, 0]
    if arr.ndim != 1:
        raise ValueError(f"`y` must be 1-D with one target per case; got shape {arr.shape}")
    if arr.shape[0] != rows:
        raise ValueError(f"`y` has {arr.shape[0]} values but `X` has {rows} rows")
    task = task or _infer_task(arr)
    if task == "regression":
        return Target(task, _regression_values(arr), None)
    return _encode_classes(arr)


def _regression_values(arr: NDArray) -> NDArray[np.float64]:
    if arr.dtype == object or arr.dtype.kind in "USVMmc":
        raise TypeError(f"`y` must be numeric for regression; got dtype {arr.dtype}")
    values = np.asarray(arr, dtype=np.float64)
    bad = np.flatnonzero(~np.isfinite(values))
    if bad.size:
        raise ValueError(f"`y` holds {bad.size} NaN or infinite value(s), first at row {bad[0]}")
    return values


def _encode_classes(arr: NDArray) -> Target:
    if arr.dtype.kind == "f" and not np.all(np.isfinite(arr)):
        bad = np.flatnonzero(~np.isfinite(arr))
        raise ValueError(f"`y` holds {bad.size} NaN or infinite label(s), first at row {bad[0]}")
    if arr.dtype == object:
        missing = [i for i, v in enumerate(arr.tolist()) if v is None or (isinstance(v, float) and v != v)]
        if missing:
            raise ValueError(f"`y` holds {len(missing)} missing label(s), first at row {missing[0]}")
    try:
        classes, codes = _counted_classes(arr) or np.unique(arr, return_inverse=True)
    except TypeError:
        raise TypeError("`y` labels must be mutually comparable (e.g. all strings or all numbers)") from None
    if arr.dtype.kind == "f" and classes.size > arr.size / 2:
        raise ValueError(f"`y` holds {classes.size} distinct float values among {arr.size} cases, which as classes "
                         "would have a case or two each; for a numeric target give `task=\"regression\"` (with a "
                         "regression splitter), or pass labels as ints or strings")
    if classes.size == 1:
        warnings.warn(f"`y` holds a single class ({classes[0].item()!r}); every tree will predict it",
                      SingleClassWarning, stacklevel=5)
    return Target("classification", codes.reshape(-1).astype(np.int64), classes)


def _counted_classes(arr: NDArray) -> tuple[NDArray, NDArray[np.intp]] | None:
    """``np.unique(arr, return_inverse=True)`` by counting, for integer labels (or integral floats) spanning
    at most ``_COUNTED_SPAN`` values; None otherwise. A pass or two over the labels instead of a sort
    (``np.unique`` sorts them: 16 against about 1 ms for 100 000 labels, AMD EPYC family 25 model 17)."""
    if arr.dtype.kind not in "iuf" or arr.size == 0:
        return None
    lo, hi = arr.min(), arr.max()
    if not float(hi) - float(lo) <= _COUNTED_SPAN:
        return None
    if arr.dtype.kind == "f":  # (integral floats a span of 2**16 apart differ exactly)
        offset = arr - lo
        whole = offset.astype(np.intp)
        if not np.array_equal(whole, offset):
            return None
        offset = whole
    else:  # the difference in the unsigned type of the same width: no overflow (int8 -128 to 127 is 255)
        unsigned = np.dtype(f"u{arr.dtype.itemsize}")
        offset = np.subtract(arr.view(unsigned), np.asarray(lo).view(unsigned)).astype(np.intp)
    present = np.bincount(offset) > 0
    classes = (np.flatnonzero(present) + lo).astype(arr.dtype)
    return classes, (np.cumsum(present) - 1).take(offset)


#: Widest range of integer labels :func:`_counted_classes` counts (a table of this many cells)
_COUNTED_SPAN = 1 << 16


def check_splitter_output(splitter: CartSplitter, target: Target) -> NDArray[np.float64]:
    """Call ``splitter.statistics`` and probe ``splitter.impurity``; raise naming the class if either is wrong."""
    name = type(splitter).__name__
    classes = 0 if target.classes is None else int(target.classes.size)
    n = target.values.size
    stats = np.asarray(call_splitter(splitter, "statistics", target.values, classes))
    if stats.ndim != 2 or stats.shape[0] != n:
        raise ValueError(f"{name}.statistics must return an array of shape (n, s) = ({n}, s); got {stats.shape}")
    stats = stats.astype(np.float64)
    if not np.all(np.isfinite(stats)):
        raise ValueError(f"{name}.statistics returned NaN or infinite values")
    S = np.concatenate([np.ones((n, 1)), stats], axis=1)
    probes = [S, S.sum(axis=0), np.stack([S[: max(1, n // 2)].sum(0), S[max(1, n // 2) - 1:].sum(0)]).reshape(2, 1, -1)]
    for probe in probes:
        imp = np.asarray(call_splitter(splitter, "impurity", probe))
        if imp.shape != probe.shape[:-1]:
            raise ValueError(
                f"{name}.impurity must map statistics of shape {probe.shape} to shape {probe.shape[:-1]}; "
                f"got {imp.shape}"
            )
        if not np.all(np.isfinite(imp)):
            raise ValueError(f"{name}.impurity returned NaN or infinite values on the training statistics")
        scale = max(1.0, float(np.max(np.abs(imp))))
        if np.min(imp) < -1e-9 * scale:
            raise ValueError(f"{name}.impurity returned a negative impurity ({np.min(imp):.3g}); impurities "
                             "must be >= 0")
    return stats
