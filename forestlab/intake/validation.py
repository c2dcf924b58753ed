"""Input validation: every public entry point checks its arguments here, before any work.

Messages name the argument in backticks and state the rule, so the text is stable and searchable.
"""

from __future__ import annotations

import concurrent.futures
import numbers
import warnings
from dataclasses import dataclass
from typing import Any

import numpy as np
from numpy.typing import NDArray

from ..engine.sampler import CandidateSampler, RandomSubset, _check_size
from ..engine.splitter import TASKS, CartSplitter, EntropySplitter, GiniSplitter, SquaredErrorSplitter
from .._warnings import SingleClassWarning
from .weights import check_balance, check_class_weights

__all__ = ["Settings", "check_settings", "check_X", "check_y", "Target", "check_splitter_output",
           "resolve_categorical"]

SPLITTER_NAMES = {"entropy": EntropySplitter, "gini": GiniSplitter, "squared_error": SquaredErrorSplitter}


@dataclass(frozen=True)
class Settings:
    """The validated constructor arguments of a Forest (task-dependent defaults still unresolved)."""

    trees: int
    sampler: CandidateSampler
    splitter: CartSplitter | None
    min_leaf: float | None
    depth_limit: int | None
    sample_size: int | float | None
    replace: bool
    task: str | None
    workers: int
    categorical: tuple[int | str, ...] | None = None
    balance: str | None = None
    class_weights: dict | str | None = None
    executor: concurrent.futures.Executor | None = None
    progress: Any = None


def _int_at_least(value: Any, name: str, low: int) -> int:
    if isinstance(value, (bool, np.bool_)) or not isinstance(value, numbers.Integral):
        raise TypeError(f"`{name}` must be an int; got {type(value).__name__}")
    if value < low:
        raise ValueError(f"`{name}` must be at least {low}; got {value}")
    return int(value)


def _check_sampler(sampler: Any) -> CandidateSampler:
    if sampler is None:
        return RandomSubset(None)
    if isinstance(sampler, CandidateSampler):
        return sampler
    if isinstance(sampler, type) and issubclass(sampler, CandidateSampler):
        raise TypeError(f"`sampler` must be a sampler instance such as {sampler.__name__}(); got the class")
    if isinstance(sampler, (str, numbers.Real)) and not isinstance(sampler, (bool, np.bool_)):
        return RandomSubset(_check_size(sampler, "sampler"))
    raise TypeError(
        "`sampler` must be a CandidateSampler (AllFeatures(), RandomSubset(m), TreeSubspace(m)), "
        f"a candidate count, a fraction, 'sqrt' or 'log2'; got {type(sampler).__name__}"
    )


def _check_splitter(splitter: Any) -> CartSplitter | None:
    if splitter is None or isinstance(splitter, CartSplitter):
        if splitter is not None and getattr(splitter, "task", None) not in TASKS:
            raise TypeError(
                f"{type(splitter).__name__} must set the class attribute `task` to one of {sorted(TASKS)}"
            )
        return splitter
    if isinstance(splitter, str):
        if splitter not in SPLITTER_NAMES:
            raise ValueError(f"`splitter` must be one of {sorted(SPLITTER_NAMES)} or a CartSplitter; got {splitter!r}")
        return SPLITTER_NAMES[splitter]()
    if isinstance(splitter, type) and issubclass(splitter, CartSplitter):
        raise TypeError(f"`splitter` must be a splitter instance such as {splitter.__name__}(); got the class")
    raise TypeError(f"`splitter` must be a CartSplitter or one of {sorted(SPLITTER_NAMES)}; "
                    f"got {type(splitter).__name__}")


def _check_sample_size(value: Any) -> int | float | None:
    if value is None:
        return None
    if isinstance(value, (bool, np.bool_)):
        raise TypeError("`sample_size` must be an int, a fraction in (0, 1] or None; got a bool")
    if isinstance(value, numbers.Integral):
        return _int_at_least(value, "sample_size", 1)
    if isinstance(value, numbers.Real):
        if not 0.0 < float(value) <= 1.0:
            raise ValueError(f"`sample_size` must lie in (0, 1] when a fraction; got {value}")
        return float(value)
    raise TypeError(f"`sample_size` must be an int, a fraction in (0, 1] or None; got {type(value).__name__}")


def _check_min_leaf(value: Any) -> float | None:
    if value is None:
        return None
    if isinstance(value, (bool, np.bool_)) or not isinstance(value, numbers.Real):
        raise TypeError(f"`min_leaf` must be a positive number; got {type(value).__name__}")
    if not np.isfinite(value) or value <= 0:
        raise ValueError(f"`min_leaf` must be a positive finite number; got {value}")
    return float(value)


def _check_categorical(value: Any) -> tuple[int | str, ...] | None:
    if value is None:
        return None
    if isinstance(value, (str, numbers.Integral)):
        value = [value]
    try:
        entries = tuple(value)
    except TypeError:
        raise TypeError(f"`categorical` must be a sequence of column positions or names; got "
                        f"{type(value).__name__}") from None
    for entry in entries:
        if isinstance(entry, (bool, np.bool_)) or not isinstance(entry, (numbers.Integral, str)):
            raise TypeError(f"`categorical` entries must be int positions or str names; got {entry!r}")
    if len(set(entries)) != len(entries):
        raise ValueError(f"`categorical` lists a column twice: {list(entries)}")
    return tuple(e if isinstance(e, str) else int(e) for e in entries)


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


MSG_WORKERS_AND_EXECUTOR = (
    "`workers` and `executor` are exclusive: give `workers` to grow trees in that many local processes, or "
    "`executor` to grow them on an executor of your own (a cluster's included), not both; got workers={} "
    "and executor={!r}"
)


def _check_executor(executor: Any, workers: int) -> concurrent.futures.Executor | None:
    if executor is None:
        return None
    if isinstance(executor, type) and issubclass(executor, concurrent.futures.Executor):
        raise TypeError(f"`executor` must be an executor instance such as {executor.__name__}(); got the class")
    if not isinstance(executor, concurrent.futures.Executor):
        raise TypeError("`executor` must be a concurrent.futures.Executor (a ProcessPoolExecutor, a "
                        f"ThreadPoolExecutor, a dask client's get_executor(), ...) or None; got "
                        f"{type(executor).__name__}")
    if workers != 1:
        raise ValueError(MSG_WORKERS_AND_EXECUTOR.format(workers, executor))
    return executor


def _check_progress(progress: Any) -> Any:
    if progress is None or isinstance(progress, bool) or callable(progress):
        return progress
    raise TypeError("`progress` must be None, True (a progress line on stderr) or a callable "
                    f"progress(done, total); got {type(progress).__name__}")


def check_settings(trees: Any, sampler: Any, splitter: Any, min_leaf: Any, depth_limit: Any,
                   sample_size: Any, replace: Any, task: Any, workers: Any, categorical: Any = None,
                   balance: Any = None, class_weights: Any = None, executor: Any = None,
                   progress: Any = None) -> Settings:
    """Validate the Forest constructor arguments."""
    if task is not None and task not in TASKS:
        raise ValueError(f"`task` must be one of {sorted(TASKS)} or None; got {task!r}")
    if not isinstance(replace, (bool, np.bool_)):
        raise TypeError(f"`replace` must be a bool; got {type(replace).__name__}")
    workers = _int_at_least(workers, "workers", 1)
    settings = Settings(
        trees=_int_at_least(trees, "trees", 1),
        sampler=_check_sampler(sampler),
        splitter=_check_splitter(splitter),
        min_leaf=_check_min_leaf(min_leaf),
        depth_limit=None if depth_limit is None else _int_at_least(depth_limit, "depth_limit", 0),
        sample_size=_check_sample_size(sample_size),
        replace=bool(replace),
        task=task,
        workers=workers,
        categorical=_check_categorical(categorical),
        balance=check_balance(balance),
        class_weights=check_class_weights(class_weights),
        executor=_check_executor(executor, workers),
        progress=_check_progress(progress),
    )
    if task == "regression" and (settings.balance is not None or settings.class_weights is not None):
        raise ValueError("`balance` and `class_weights` are for classification, but `task` is 'regression'")
    if settings.splitter is not None and task is not None and settings.splitter.task != task:
        raise ValueError(f"`splitter` {settings.splitter!r} is for {settings.splitter.task}, but `task` is {task!r}")
    return settings


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
        classes, codes = np.unique(arr, return_inverse=True)
    except TypeError:
        raise TypeError("`y` labels must be mutually comparable (e.g. all strings or all numbers)") from None
    if classes.size == 1:
        warnings.warn(f"`y` holds a single class ({classes[0].item()!r}); every tree will predict it",
                      SingleClassWarning, stacklevel=5)
    return Target("classification", codes.reshape(-1).astype(np.int64), classes)


def check_splitter_output(splitter: CartSplitter, target: Target) -> NDArray[np.float64]:
    """Call ``splitter.statistics`` and probe ``splitter.impurity``; raise naming the class if either is wrong."""
    name = type(splitter).__name__
    classes = 0 if target.classes is None else int(target.classes.size)
    n = target.values.size
    stats = np.asarray(splitter.statistics(target.values, classes))
    if stats.ndim != 2 or stats.shape[0] != n:
        raise ValueError(f"{name}.statistics must return an array of shape (n, s) = ({n}, s); got {stats.shape}")
    stats = stats.astype(np.float64)
    if not np.all(np.isfinite(stats)):
        raise ValueError(f"{name}.statistics returned NaN or infinite values")
    S = np.concatenate([np.ones((n, 1)), stats], axis=1)
    probes = [S, S.sum(axis=0), np.stack([S[: max(1, n // 2)].sum(0), S[max(1, n // 2) - 1:].sum(0)]).reshape(2, 1, -1)]
    for probe in probes:
        imp = np.asarray(splitter.impurity(probe))
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
