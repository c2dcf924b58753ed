"""The settings of a Forest: its constructor arguments validated, and what they resolve to at fit.

:class:`Settings` holds the arguments as given (task-dependent defaults unresolved); :func:`resolve_rules`
fixes the defaults for the data (:class:`~forestlab.engine.grow.GrowthRules`); :class:`Provenance` records
how a fitted forest's trees were grown, so more can be grown the same way and a model file can say so.
"""

from __future__ import annotations

import concurrent.futures
import math
import numbers
from dataclasses import dataclass
from typing import Any

import numpy as np
from numpy.typing import NDArray

from ..engine.bootstrap import balanced_sample_size
from ..engine.grow import GrowthRules
from ..engine.sampler import CandidateSampler, RandomSubset, _check_size
from ..engine.splitter import TASKS, CartSplitter, EntropySplitter, GiniSplitter, SquaredErrorSplitter
from .validation import Target, int_at_least
from .weights import check_balance, check_class_priors, class_factors

__all__ = ["Provenance", "Settings", "check_class_options", "check_settings", "priors_and_factors", "resolve_rules",
           "task_for"]

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
    class_priors: dict | str | None = None
    executor: concurrent.futures.Executor | None = None
    progress: Any = None


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
        return int_at_least(value, "sample_size", 1)
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
                   balance: Any = None, class_priors: Any = None, executor: Any = None,
                   progress: Any = None) -> Settings:
    """Validate the Forest constructor arguments."""
    if task is not None and task not in TASKS:
        raise ValueError(f"`task` must be one of {sorted(TASKS)} or None; got {task!r}")
    if not isinstance(replace, (bool, np.bool_)):
        raise TypeError(f"`replace` must be a bool; got {type(replace).__name__}")
    workers = int_at_least(workers, "workers", 1)
    settings = Settings(
        trees=int_at_least(trees, "trees", 1),
        sampler=_check_sampler(sampler),
        splitter=_check_splitter(splitter),
        min_leaf=_check_min_leaf(min_leaf),
        depth_limit=None if depth_limit is None else int_at_least(depth_limit, "depth_limit", 0),
        sample_size=_check_sample_size(sample_size),
        replace=bool(replace),
        task=task,
        workers=workers,
        categorical=_check_categorical(categorical),
        balance=check_balance(balance),
        class_priors=check_class_priors(class_priors),
        executor=_check_executor(executor, workers),
        progress=_check_progress(progress),
    )
    if task == "regression" and (settings.balance is not None or settings.class_priors is not None):
        raise ValueError("`balance` and `class_priors` are for classification, but `task` is 'regression'")
    if settings.splitter is not None and task is not None and settings.splitter.task != task:
        raise ValueError(f"`splitter` {settings.splitter!r} is for {settings.splitter.task}, but `task` is {task!r}")
    return settings


@dataclass(frozen=True, eq=False)
class Provenance:
    """How a fitted forest's trees were grown: the resolved rules, the root seed and the data's fingerprint.

    Attributes
    ----------
    rules : GrowthRules
        The sampler, splitter, ``min_leaf``, depth limit and sample size every tree was grown with (a custom
        component a model file could not rebuild is a ``StoredComponent`` here).
    seed : numpy.random.SeedSequence
        Root seed; tree ``b`` draws from ``SeedSequence(seed.entropy, spawn_key=seed.spawn_key + (b,))``.
    fingerprint : str
        SHA-256 of the training data as the trees saw them (:func:`~.fingerprint.data_fingerprint`).
    class_priors : dict or None
        Label -> prior of every class when class priors were set (None without, or when a version-1 model
        file did not hold what they were).
    class_factors : dict or None
        Label -> the factor every case weight of the class was multiplied by in growth (see
        :func:`~.weights.class_factors`), when class priors (or a version-1 file's class weights) were set.
    """

    rules: GrowthRules
    seed: np.random.SeedSequence
    fingerprint: str
    class_priors: dict | None = None
    class_factors: dict | None = None


def task_for(settings: Settings) -> str | None:
    """The task the settings fix (``task``, else the splitter's), or None when the targets decide."""
    if settings.task is not None:
        return settings.task
    return settings.splitter.task if settings.splitter is not None else None


def check_class_options(settings: Settings, target: Target) -> None:
    """``balance`` and ``class_priors`` only with classification targets."""
    if target.task == "regression" and (settings.balance is not None or settings.class_priors is not None):
        raise ValueError("`balance` and `class_priors` are for classification, but the task is regression")


def priors_and_factors(settings: Settings, target: Target,
                       case_weights: NDArray[np.float64] | None) -> tuple[dict | None, dict | None]:
    """Label -> prior and label -> class factor of every class, or (None, None) without class priors."""
    spec = settings.class_priors
    if spec is None:
        return None, None
    priors, factors = class_factors(spec, target.classes, target.values, case_weights)
    labels = target.classes.tolist()
    return dict(zip(labels, priors.tolist())), dict(zip(labels, factors.tolist()))


def resolve_rules(settings: Settings, target: Target, shape: tuple[int, int]) -> GrowthRules:
    """The growth rules for data of ``shape`` and ``target``: task defaults of splitter, ``min_leaf``,
    candidate count and sample size fixed."""
    s = settings
    n, p = shape
    splitter = s.splitter
    if splitter is None:
        splitter = GiniSplitter() if target.task == "classification" else SquaredErrorSplitter()
    elif splitter.task != target.task:
        raise ValueError(f"`splitter` {splitter!r} is for {splitter.task}, but the task is {target.task}")
    min_leaf = s.min_leaf if s.min_leaf is not None else (1.0 if target.task == "classification" else 5.0)
    size = s.sample_size
    if s.balance is not None:
        size = balanced_sample_size(size, target.values, s.replace)
    size = n if size is None else (max(1, math.floor(size * n)) if isinstance(size, float) else size)
    if not s.replace and size > n:
        raise ValueError(f"`sample_size` = {size} exceeds the {n} cases available without replacement")
    return GrowthRules(sampler=s.sampler.resolve(p, target.task), splitter=splitter, min_leaf=min_leaf,
                       depth_limit=s.depth_limit, sample_size=int(size), replace=s.replace)
