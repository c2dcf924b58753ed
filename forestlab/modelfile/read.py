"""Reading a model file: checked arrays and header back into a :class:`~.stored.StoredForest`.

:mod:`.container` reads the ``.npz`` file member by member without unpickling; :mod:`.check` validates
every field and the trees before anything is built from them. A file whose parts disagree is refused with
:class:`~.check.ModelFileError`.
"""

from __future__ import annotations

import dataclasses
import warnings
from collections.abc import Iterable
from os import PathLike
from typing import Any

import numpy as np
from numpy.typing import NDArray

from .._warnings import IncompleteForestWarning
from ..analyses.view import FittedForest
from ..engine.grow import GrowthRules
from ..engine.splitter import TASKS, CartSplitter
from ..engine.tree import NODE_STORAGE, Tree
from ..intake.fingerprint import data_fingerprint
from ..intake.settings import Provenance, Settings, check_settings
from ..intake.validation import resolve_categorical
from .check import (
    TREE_FIELDS,
    ModelFileError,
    check_class_labels,
    check_class_numbers,
    check_feature_names,
    check_fingerprint,
    check_finite,
    check_levels,
    check_seed,
    check_trees,
    field,
    int_field,
)
from .container import read_model
from .oob import oob_from_arrays
from .stored import BASES, BUILTIN, StoredComponent, StoredForest, is_component

__all__ = ["inconsistent", "read_forest"]


def read_forest(path: str | PathLike, components: Iterable[Any] = ()) -> StoredForest:
    """The forest stored at ``path`` (see :func:`forestlab.load`); custom ``components`` are matched to the
    classes the file names by class name."""
    components = list(components)
    for c in components:
        if not is_component(c):
            raise TypeError(f"`components` must hold sampler or splitter instances; got {type(c).__name__}")
    header, arrays = read_model(path)
    try:
        return _build(header, arrays, components)
    except ModelFileError:
        raise
    except (ValueError, TypeError, OverflowError) as exc:
        raise inconsistent(exc) from None


def inconsistent(exc: BaseException) -> ModelFileError:
    """The error for a file whose checked parts still fail to make a forest."""
    return ModelFileError(f"the forest file's contents are inconsistent: {exc}")


def _build(header: dict, arrays: dict[str, NDArray], components: list) -> StoredForest:
    task = field(header, "task", str)
    if task not in TASKS:
        raise ModelFileError(f"the header's task {task!r} is not one of {sorted(TASKS)}")
    names = check_feature_names(header)
    classes = check_class_labels(header, arrays, task)
    K = 0 if classes is None else classes.size
    levels = check_levels(arrays["level_features"], arrays["level_offsets"], arrays["level_values"], len(names),
                          header["category_words"])
    categories = np.zeros(len(names), dtype=np.int64)
    for j, values in levels.items():
        categories[j] = values.size
    check_trees({k: arrays[k] for k in TREE_FIELDS}, arrays["offsets"], len(names), K, categories)
    weights = _case_weights(arrays)
    sampler = _restore(field(header, "sampler", dict), "sampler", components)
    splitter = _restore(field(header, "splitter", dict), "splitter", components)
    if isinstance(splitter, CartSplitter) and splitter.task != task:
        raise ModelFileError(f"the file's splitter {splitter!r} is for {splitter.task}, but its task is {task}")
    fingerprint = check_fingerprint(header)
    X, y = _training_data(arrays, classes, weights, fingerprint)
    spec, priors, factors = _class_priors(header, classes, y if y is not None else arrays.get("oob_observed"),
                                          weights)
    settings = _settings(header, task, sampler, splitter, spec)
    frame = _frame_labels(header, names)
    if sorted(resolve_categorical(settings.categorical, len(names), list(names), frame=frame)) != sorted(levels):
        raise ModelFileError("the header's categorical setting does not match the stored category levels")
    s = header["settings"]
    provenance = Provenance(
        rules=GrowthRules(sampler=sampler, splitter=splitter, min_leaf=float(s["min_leaf"]),
                          depth_limit=s["depth_limit"], sample_size=s["sample_size"], replace=s["replace"]),
        seed=check_seed(header), fingerprint=fingerprint, class_priors=priors, class_factors=factors)
    trees = _trees(arrays)
    view = FittedForest(task=task, trees=tuple(trees), inbag=arrays["inbag"], classes=classes,
                        feature_names=names, levels=levels, frame_labels={k: tuple(v) for k, v in frame.items()},
                        case_weights=weights, X=X, y=y)
    oob = None
    if header.get("has_oob", False) is True:
        oob = oob_from_arrays(task, {k: v for k, v in arrays.items() if k.startswith("oob_")}, classes,
                              len(trees), weights is not None)
    return StoredForest(view=view, settings=settings, provenance=provenance, oob=oob)


def _case_weights(arrays: dict[str, NDArray]) -> NDArray[np.float64] | None:
    weights = arrays.get("case_weights")
    if weights is not None:
        check_finite("case weights", weights)
        if not (np.all(weights >= 0) and np.any(weights > 0)):
            raise ModelFileError("the file's case weights must be >= 0 and not all zero")
    return weights


def _frame_labels(header: dict, names: tuple[str, ...]) -> dict[str, list]:
    frame = header.get("frame_categories") or {}
    if not isinstance(frame, dict) or any(k not in names or not isinstance(v, list) for k, v in frame.items()):
        raise ModelFileError("the header's frame_categories must map column names to lists of labels")
    return frame


def _restore(record: dict, kind: str, components: list) -> Any:
    """The sampler or splitter a record names: a built-in rebuilt, a custom one from ``components``, or a
    :class:`StoredComponent` (with an :class:`IncompleteForestWarning`)."""
    name = field(record, "name", str, kind)
    module = field(record, "module", str, kind)
    attributes = field(record, "attributes", dict, kind)
    if field(record, "builtin", bool, kind):
        if name not in BUILTIN[kind]:
            raise ModelFileError(f"the file names an unknown built-in {kind} {name!r}")
        try:
            return BUILTIN[kind][name](**attributes)
        except (TypeError, ValueError) as exc:
            raise ModelFileError(f"the file's {kind} {name} has invalid attributes: {exc}") from None
    for component in components:
        if isinstance(component, BASES[kind]) and type(component).__name__ == name:
            return component
    warnings.warn(f"the file names the custom {kind} {name!r} (module {module!r}); the loaded forest predicts, "
                  f"but to grow trees pass an instance to `forestlab.load(path, components=[...])`",
                  IncompleteForestWarning, stacklevel=5)
    return StoredComponent(kind, name, module, attributes)


def _class_priors(header: dict, classes: NDArray | None, codes: NDArray[np.int64] | None,
                  weights: NDArray[np.float64] | None) -> tuple[Any, dict | None, dict | None]:
    """The ``class_priors`` setting, label -> prior and label -> class factor (None each when not set).

    Version 1 stored the factors alone, as "class weights" (``"balanced"`` for equal priors): given weights
    become the priors they amount to, ``factor_k * W_k`` normalised, from the class totals of the stored
    targets or out-of-bag labels; a file with neither keeps the factors and no priors.
    """
    K = 0 if classes is None else classes.size
    s = field(header, "settings", dict)
    labels = [] if classes is None else classes.tolist()
    if header["format_version"] == 1:
        spec = field(s, "class_weights", (str, type(None)), "settings")
        factors = check_class_numbers(header, "class_weight_values", K)
        if (spec is None) != (factors is None) or spec not in (None, "balanced", "given"):
            raise ModelFileError("the header's class weight settings are inconsistent")
        if spec is None:
            return None, None, None
        if spec == "balanced":
            return "equal", dict(zip(labels, [1.0 / K] * K)), dict(zip(labels, factors.tolist()))
        if codes is None:
            return None, None, dict(zip(labels, factors.tolist()))
        amounts = factors * np.bincount(codes, weights=weights, minlength=K)
        priors = dict(zip(labels, (amounts / amounts.sum()).tolist()))
        return priors, priors, dict(zip(labels, factors.tolist()))
    spec = field(s, "class_priors", (str, type(None)), "settings")
    priors = check_class_numbers(header, "class_priors", K)
    factors = check_class_numbers(header, "class_factors", K)
    if spec not in (None, "equal", "given") or (spec is None) != (priors is None) \
            or (priors is not None and (factors is None or not np.isclose(priors.sum(), 1.0, rtol=1e-9))) \
            or (spec == "equal" and not np.allclose(priors, 1.0 / K, rtol=1e-12)):
        raise ModelFileError("the header's class priors are inconsistent")
    as_dict = None if priors is None else dict(zip(labels, priors.tolist()))
    return ("equal" if spec == "equal" else as_dict), as_dict, \
        None if factors is None else dict(zip(labels, factors.tolist()))


def _settings(header: dict, task: str, sampler: Any, splitter: Any, priors: Any) -> Settings:
    """The saved settings (resolved values), checked as the constructor checks its arguments."""
    s = field(header, "settings", dict)
    settings = check_settings(header["trees"], sampler if is_component(sampler) else None,
                              splitter if is_component(splitter) else None,
                              field(s, "min_leaf", (int, float), "settings"),
                              field(s, "depth_limit", (int, type(None)), "settings"),
                              int_field(s, "sample_size", 1, "settings"), field(s, "replace", bool, "settings"),
                              task, int_field(s, "workers", 1, "settings"),
                              field(s, "categorical", (list, type(None)), "settings"),
                              field(s, "balance", (str, type(None)), "settings"), priors)
    return dataclasses.replace(settings, sampler=sampler, splitter=splitter)


def _trees(arrays: dict[str, NDArray]) -> list[Tree]:
    """Trees from the checked node arrays; their breadth-first layout gives left, right and depth, which must
    agree with the file's."""
    cuts = arrays["offsets"][1:-1]
    parts = {attr: np.split(arrays[name], cuts) for name, attr in TREE_FIELDS.items()}
    single = np.finfo(np.float32).max
    if any(np.any(np.abs(arrays[name]) > single) for name in ("cases", "decrease")):
        raise ModelFileError("the file's node weights or impurity decreases exceed single precision")
    trees = []
    for b in range(cuts.size + 1):
        tree = Tree(**{attr: parts[attr][b].astype(dtype) for attr, dtype in NODE_STORAGE.items()})
        if not np.array_equal(tree.depth, parts["depth"][b]):
            raise ModelFileError(f"tree {b}: the stored node depths disagree with the tree's structure")
        trees.append(tree)
    return trees


def _training_data(arrays: dict, classes: NDArray | None, weights: NDArray | None,
                   fingerprint: str) -> tuple[NDArray | None, NDArray | None]:
    """The stored predictors and encoded targets, checked against their fingerprint (None, None without)."""
    if "X" not in arrays:
        return None, None
    X, y = arrays["X"], arrays["y"]
    if np.any(np.isinf(X)):
        raise ModelFileError("the file's predictors X hold infinite values")
    if classes is not None:
        if y.size and (y.min() < 0 or y.max() >= classes.size):
            raise ModelFileError("the file's class codes y lie outside the classes")
    else:
        check_finite("targets y", y)
    if data_fingerprint(X, y, weights) != fingerprint:
        raise ModelFileError("the file's training data do not match their fingerprint")
    return np.ascontiguousarray(X), y
