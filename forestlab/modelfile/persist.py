"""A fitted Forest to and from a model file: what is stored, and how a forest is rebuilt from it.

See ``docs/file-format.md`` for the layout; :mod:`._modelfile` does the reading and writing and
:mod:`._modelcheck` the checks on untrusted contents.
"""

from __future__ import annotations

import dataclasses
import json
import re
import warnings
from os import PathLike
from typing import Any, Iterable

import numpy as np
from numpy.typing import NDArray

from ..engine.grow import GrowthRules
from .check import (LABEL_KINDS, NODE_DTYPES, ModelFileError, check_classes, check_finite, check_levels,
                          check_trees, field, int_field)
from .container import FORMAT_NAME, FORMAT_VERSION, data_fingerprint, read_model, write_model
from ..analyses.oob import out_of_bag
from .oob import oob_arrays, oob_from_arrays
from ..engine.presort import presort
from ..engine.sampler import AllFeatures, CandidateSampler, RandomSubset, TreeSubspace
from ..engine.splitter import TASKS, CartSplitter, EntropySplitter, GiniSplitter, SquaredErrorSplitter
from ..engine.tree import NODE_STORAGE, Tree
from ..intake.validation import Target, check_splitter_output, resolve_categorical
from .._warnings import IncompleteForestWarning, NeverOutOfBagWarning
from ..intake.weights import growth_weights

__all__ = ["MSG_NO_DATA", "StoredComponent", "growth_blocker", "load", "require_data", "save_forest"]

MSG_NO_DATA = (
    "this forest was loaded from a file without its training data, so it can predict but not grow trees or "
    "compute out-of-bag results; save it with `save(path, include_data=True)` to keep the data"
)

BUILTIN = {"sampler": {c.__name__: c for c in (AllFeatures, RandomSubset, TreeSubspace)},
           "splitter": {c.__name__: c for c in (EntropySplitter, GiniSplitter, SquaredErrorSplitter)}}
BASES = {"sampler": CandidateSampler, "splitter": CartSplitter}
TREE_FIELDS = {"feature": "feature", "threshold": "threshold", "left": "left", "right": "right",
               "value": "value", "cases": "cases", "decrease": "impurity_decrease", "depth": "depth",
               "missing_left": "missing_left", "category_left": "category_left"}
MAX_SEED_WORDS = 64


@dataclasses.dataclass(frozen=True)
class StoredComponent:
    """A custom sampler or splitter named in a model file that the file alone cannot rebuild.

    A forest loaded with one still predicts; to grow trees again, pass an instance of the class to
    :func:`forestlab.load` with ``components=[...]``.

    Attributes
    ----------
    kind : {"sampler", "splitter"}
    name : str
        Class name as saved.
    module : str
        Module the class was defined in.
    attributes : dict
        Its public attributes as saved (values that JSON cannot hold are stored as their ``repr``).
    """

    kind: str
    name: str
    module: str
    attributes: dict


def require_data(forest: Any) -> None:
    """Raise a RuntimeError when ``forest`` holds no training data (loaded from a file without it)."""
    if getattr(forest, "_data", None) is None:
        raise RuntimeError(MSG_NO_DATA)


def growth_blocker(forest: Any) -> str | None:
    """Why ``forest`` cannot grow trees (a message), or None when it can."""
    rules = getattr(forest, "_rules", None)
    for part in (getattr(rules, "sampler", None), getattr(rules, "splitter", None)):
        if isinstance(part, StoredComponent):
            return (f"this forest was loaded with the custom {part.kind} {part.name!r} (module {part.module!r}) "
                    f"unrestored; pass an instance to `forestlab.load(path, components=[...])` to grow trees")
    return None


# ------------------------------------------------------------------------------------------------ saving
def save_forest(forest: Any, path: str | PathLike, include_data: bool = False) -> None:
    """Write a fitted forest to ``path`` (see :meth:`Forest.save`)."""
    if not isinstance(include_data, (bool, np.bool_)):
        raise TypeError(f"`include_data` must be a bool; got {type(include_data).__name__}")
    data = forest._data
    if include_data and data is None:
        raise RuntimeError("`include_data=True`, but this forest holds no training data (it was loaded without)")
    trees = forest._trees
    arrays = {name: np.concatenate([getattr(t, attr) for t in trees]).astype(NODE_DTYPES[name])
              for name, attr in TREE_FIELDS.items()}
    arrays["offsets"] = np.concatenate([[0], np.cumsum([t.nodes for t in trees])]).astype("<i8")
    arrays["inbag"] = np.ascontiguousarray(forest.inbag, dtype=np.uint8)
    arrays.update(_level_arrays(forest._levels))
    labels = None
    if forest.classes is not None:
        arrays["classes"], is_object = _typed_labels(forest.classes)
        labels = {"dtype": arrays["classes"].dtype.str, "count": int(forest.classes.size), "object": is_object}
    if forest.case_weights is not None:
        arrays["case_weights"] = forest.case_weights.astype("<f8")
    if include_data:
        arrays["X"] = data.X.astype("<f8")
        arrays["y"] = data.target.astype("<i8" if forest.classes is not None else "<f8")
    oob = _oob_to_store(forest)
    if oob is not None:
        arrays.update(oob_arrays(oob, None if forest._target is None else forest._target.values))
    header = _header(forest, labels, bool(include_data), arrays)
    header["has_oob"] = oob is not None
    write_model(path, header, arrays)


def _oob_to_store(forest: Any):
    """The forest's OOB results (computed now if the training data allow), or None."""
    if forest._oob is None and forest._data is None:
        return None
    if forest._oob is None:
        with warnings.catch_warnings():
            warnings.simplefilter("ignore", NeverOutOfBagWarning)
            forest._oob = out_of_bag(forest._trees, forest.inbag, forest._data.X, forest._target,
                                     weights=forest.case_weights)
    return forest._oob


def _header(forest: Any, labels: dict | None, include_data: bool, arrays: dict) -> dict:
    from .. import __version__

    s, rules, seed = forest._settings, forest._rules, forest.seed
    spec = s.class_weights
    fingerprint = forest._fingerprint if forest._data is None else \
        data_fingerprint(forest._data.X, forest._data.target, forest.case_weights)
    class_values = None if forest._class_weights is None else list(forest._class_weights.values())
    return {
        "format": FORMAT_NAME, "format_version": FORMAT_VERSION, "forestlab_version": __version__,
        "task": forest.task, "trees": len(forest._trees), "nodes": int(arrays["feature"].size),
        "cases": int(forest.inbag.shape[1]), "features": int(forest.features),
        "feature_names": list(forest.feature_names), "classes": labels,
        "category_words": int(arrays["category_left"].shape[1]),
        "categorical_features": int(arrays["level_features"].size),
        "category_levels": int(arrays["level_values"].size),
        "settings": {"min_leaf": rules.min_leaf, "depth_limit": rules.depth_limit,
                     "sample_size": rules.sample_size, "replace": rules.replace, "balance": s.balance,
                     "class_weights": None if spec is None else ("balanced" if spec == "balanced" else "given"),
                     "workers": s.workers,
                     "categorical": None if s.categorical is None else list(s.categorical)},
        "class_weight_values": class_values,
        "sampler": _describe(rules.sampler, "sampler"), "splitter": _describe(rules.splitter, "splitter"),
        "seed": {"entropy": _seed_words(seed.entropy), "spawn_key": [int(k) for k in seed.spawn_key],
                 "pool_size": int(seed.pool_size)},
        "fingerprint": fingerprint, "has_data": include_data, "has_case_weights": "case_weights" in arrays,
        "frame_categories": _frame_categories(getattr(forest, "_frame_labels", {})),
    }


def _frame_categories(labels: dict[str, tuple]) -> dict[str, list]:
    """The category labels of data-frame columns seen in fit, as JSON (str, int, float or bool labels)."""
    out = {}
    for name, known in labels.items():
        values = [v.item() if isinstance(v, np.generic) else v for v in known]
        if not all(isinstance(v, (str, int, float, bool)) for v in values):
            raise TypeError(f"the category labels of column {name!r} must be str, int, float or bool to be saved")
        out[name] = values
    return out


def _level_arrays(levels: dict[int, NDArray]) -> dict[str, NDArray]:
    """The category values of every categorical feature, concatenated in feature order, with offsets."""
    features = sorted(levels)
    sizes = [levels[j].size for j in features]
    values = [levels[j] for j in features]
    return {"level_features": np.array(features, dtype="<i8"),
            "level_offsets": np.concatenate([[0], np.cumsum(sizes, dtype=np.int64)]).astype("<i8"),
            "level_values": np.concatenate(values).astype("<f8") if values else np.empty(0, dtype="<f8")}


def _typed_labels(classes: NDArray) -> tuple[NDArray, bool]:
    """Class labels as a little-endian typed array (never objects), and whether they were objects."""
    typed, is_object = classes, classes.dtype == object
    if is_object:
        typed = np.array(classes.tolist())
        plain = [v.item() if isinstance(v, np.generic) else v for v in classes.tolist()]
        if typed.dtype == object or typed.shape != classes.shape or typed.tolist() != plain \
                or [type(v) for v in typed.tolist()] != [type(v) for v in plain]:
            raise TypeError("class labels of mixed or unusual types cannot be saved; use labels that are all "
                            "strings, all ints, all floats or all bools")
    if typed.dtype.kind not in LABEL_KINDS:
        raise TypeError(f"class labels of dtype {typed.dtype} cannot be saved; use strings, numbers or bools")
    return typed.astype(typed.dtype.newbyteorder("<")), bool(is_object)


def _seed_words(entropy: Any) -> int | list[int]:
    return int(entropy) if isinstance(entropy, (int, np.integer)) else [int(e) for e in entropy]


def _describe(component: Any, kind: str) -> dict:
    cls = type(component)
    if isinstance(component, StoredComponent):
        return {"name": component.name, "module": component.module, "builtin": False,
                "attributes": component.attributes}
    attributes = {}
    for key, value in vars(component).items():
        if not key.startswith("_"):
            try:
                json.dumps(value, allow_nan=False)
                attributes[key] = value
            except (TypeError, ValueError):
                attributes[key] = repr(value)
    builtin = BUILTIN[kind].get(cls.__name__) is cls
    return {"name": cls.__name__, "module": cls.__module__, "builtin": builtin, "attributes": attributes}


# ------------------------------------------------------------------------------------------------ loading
def load(path: str | PathLike, *, components: Iterable[Any] = ()) -> Any:
    """Read a forest written by :meth:`Forest.save`; refuse anything else with :class:`ModelFileError`.

    Parameters
    ----------
    path : str or os.PathLike
        The file.
    components : iterable of CandidateSampler or CartSplitter instances
        Instances of custom sampler or splitter classes the file names (matched by class name). Built-in
        ones are rebuilt from the file. A custom one not given is kept as a :class:`StoredComponent` and an
        :class:`IncompleteForestWarning` says so: the forest predicts, but cannot grow trees.

    Returns
    -------
    Forest
        Predicts bit-identically to the saved forest and keeps its in-bag counts. Without stored training data
        (``save(path, include_data=True)``) it can predict but not grow trees or compute out-of-bag results.
    """
    components = list(components)
    for c in components:
        if not isinstance(c, (CandidateSampler, CartSplitter)):
            raise TypeError(f"`components` must hold sampler or splitter instances; got {type(c).__name__}")
    header, arrays = read_model(path)
    try:
        return _build(header, arrays, components)
    except ModelFileError:
        raise
    except (ValueError, TypeError, OverflowError) as exc:
        raise ModelFileError(f"the forest file's contents are inconsistent: {exc}") from None


def _build(header: dict, arrays: dict[str, NDArray], components: list) -> Any:
    from .._forest import Forest

    task = field(header, "task", str)
    if task not in TASKS:
        raise ModelFileError(f"the header's task {task!r} is not one of {sorted(TASKS)}")
    names = _feature_names(header)
    classes = _classes(header, arrays, task)
    K = 0 if classes is None else classes.size
    levels = check_levels(arrays["level_features"], arrays["level_offsets"], arrays["level_values"], len(names),
                          header["category_words"])
    categories = np.zeros(len(names), dtype=np.int64)
    for j, values in levels.items():
        categories[j] = values.size
    check_trees({k: arrays[k] for k in TREE_FIELDS}, arrays["offsets"], len(names), K, categories)
    weights = arrays.get("case_weights")
    if weights is not None:
        check_finite("case weights", weights)
        if not (np.all(weights >= 0) and np.any(weights > 0)):
            raise ModelFileError("the file's case weights must be >= 0 and not all zero")
    sampler = _restore(field(header, "sampler", dict), "sampler", components)
    splitter = _restore(field(header, "splitter", dict), "splitter", components)
    if isinstance(splitter, CartSplitter) and splitter.task != task:
        raise ModelFileError(f"the file's splitter {splitter!r} is for {splitter.task}, but its task is {task}")
    class_vector = _class_vector(header, K)
    forest = _new_forest(Forest, header, task, sampler, splitter, classes, class_vector)
    spec = forest._settings.categorical
    frame = header.get("frame_categories") or {}
    if not isinstance(frame, dict) or any(k not in names or not isinstance(v, list) for k, v in frame.items()):
        raise ModelFileError("the header's frame_categories must map column names to lists of labels")
    forest._frame_labels = {k: tuple(v) for k, v in frame.items()}
    if sorted(resolve_categorical(spec, len(names), list(names), frame=frame)) != sorted(levels):
        raise ModelFileError("the header's categorical setting does not match the stored category levels")
    forest._levels, forest._categories = levels, (categories if levels else None)
    forest._trees = _trees(arrays)
    forest.inbag = arrays["inbag"]
    forest.inbag.flags.writeable = False
    forest.feature_names, forest.features = names, len(names)
    forest.case_weights = weights
    if weights is not None:
        weights.flags.writeable = False
    forest._fingerprint = _fingerprint(header)
    forest._target, forest._data = _training_data(header, arrays, forest, class_vector)
    if header.get("has_oob", False) is True:
        forest._oob = oob_from_arrays(task, {k: v for k, v in arrays.items() if k.startswith("oob_")}, classes,
                                      len(forest._trees), weights is not None)
    return forest


def _feature_names(header: dict) -> tuple[str, ...]:
    names = field(header, "feature_names", list)
    if len(names) != header["features"] or not all(isinstance(c, str) for c in names) \
            or len(set(names)) != len(names):
        raise ModelFileError("the header's feature names must be one distinct string per feature")
    return tuple(names)


def _classes(header: dict, arrays: dict, task: str) -> NDArray | None:
    labels = header["classes"]
    if (labels is None) != (task == "regression"):
        raise ModelFileError("the header's classes do not fit its task")
    if labels is None:
        return None
    classes = arrays["classes"]
    check_classes(classes)
    return classes.astype(object) if field(labels, "object", bool, "classes") else classes


def _class_vector(header: dict, K: int) -> NDArray[np.float64] | None:
    values = field(header, "class_weight_values", (list, type(None)))
    if values is None:
        return None
    vector = np.array(values, dtype=np.float64) if all(isinstance(v, (int, float)) and not isinstance(v, bool)
                                                       for v in values) else np.empty(0)
    if vector.shape != (K,) or not np.all(np.isfinite(vector)) or not np.all(vector > 0):
        raise ModelFileError("the header's class weights must be one positive number per class")
    return vector


def _restore(record: dict, kind: str, components: list) -> Any:
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
                  IncompleteForestWarning, stacklevel=3)
    return StoredComponent(kind, name, module, attributes)


def _seed(header: dict) -> np.random.SeedSequence:
    record = field(header, "seed", dict)
    entropy = field(record, "entropy", (int, list), "seed")
    spawn_key = field(record, "spawn_key", list, "seed")
    pool_size = int_field(record, "pool_size", 4, "seed")
    words = entropy if isinstance(entropy, list) else [entropy]
    if pool_size > MAX_SEED_WORDS or len(words) > MAX_SEED_WORDS or len(spawn_key) > MAX_SEED_WORDS \
            or not all(isinstance(w, int) and not isinstance(w, bool) and 0 <= w < 2**128
                       for w in words + spawn_key):
        raise ModelFileError("the header's seed must hold a few non-negative 128-bit integers")
    return np.random.SeedSequence(entropy, spawn_key=tuple(spawn_key), pool_size=pool_size)


def _new_forest(Forest: type, header: dict, task: str, sampler: Any, splitter: Any, classes: NDArray | None,
                class_vector: NDArray | None) -> Any:
    """A Forest built through its constructor from the saved settings (resolved values)."""
    s = field(header, "settings", dict)
    spec = field(s, "class_weights", (str, type(None)), "settings")
    if (spec is None) != (class_vector is None) or spec not in (None, "balanced", "given"):
        raise ModelFileError("the header's class weight settings are inconsistent")
    given = dict(zip(classes.tolist(), class_vector.tolist())) if spec == "given" else spec
    seed = _seed(header)
    forest = Forest(header["trees"],
                    sampler=sampler if isinstance(sampler, CandidateSampler) else None,
                    splitter=splitter if isinstance(splitter, CartSplitter) else None,
                    min_leaf=field(s, "min_leaf", (int, float), "settings"),
                    depth_limit=field(s, "depth_limit", (int, type(None)), "settings"),
                    sample_size=int_field(s, "sample_size", 1, "settings"),
                    replace=field(s, "replace", bool, "settings"), rng=seed, task=task,
                    workers=int_field(s, "workers", 1, "settings"),
                    balance=field(s, "balance", (str, type(None)), "settings"), class_weights=given,
                    categorical=field(s, "categorical", (list, type(None)), "settings"))
    forest._settings = dataclasses.replace(forest._settings, sampler=sampler, splitter=splitter)
    forest._rules = GrowthRules(sampler=sampler, splitter=splitter, min_leaf=float(s["min_leaf"]),
                                depth_limit=s["depth_limit"], sample_size=s["sample_size"], replace=s["replace"])
    forest.task, forest.classes, forest.seed = task, classes, seed
    forest._class_weights = None if class_vector is None else dict(zip(classes.tolist(), class_vector.tolist()))
    return forest


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


def _fingerprint(header: dict) -> str:
    value = field(header, "fingerprint", str)
    if not re.fullmatch(r"[0-9a-f]{64}", value):
        raise ModelFileError("the header's fingerprint is not a SHA-256 hex digest")
    return value


def _training_data(header: dict, arrays: dict, forest: Any, class_vector: NDArray | None):
    """The Target and (when the file holds the data and the splitter is known) the presorted TrainingData."""
    if "X" not in arrays:
        return Target(forest.task, None, forest.classes), None
    X, y = arrays["X"], arrays["y"]
    if np.any(np.isinf(X)):
        raise ModelFileError("the file's predictors X hold infinite values")
    if forest.classes is not None:
        if y.size and (y.min() < 0 or y.max() >= forest.classes.size):
            raise ModelFileError("the file's class codes y lie outside the classes")
    else:
        check_finite("targets y", y)
    if data_fingerprint(X, y, forest.case_weights) != forest._fingerprint:
        raise ModelFileError("the file's training data do not match their fingerprint")
    target = Target(forest.task, y, forest.classes)
    if growth_blocker(forest) is not None or not isinstance(forest._rules.splitter, CartSplitter):
        return target, None
    stats = check_splitter_output(forest._rules.splitter, target)
    classes = 0 if forest.classes is None else forest.classes.size
    weights = growth_weights(forest.case_weights, class_vector, y if classes else np.zeros(0, np.int64))
    return target, presort(np.ascontiguousarray(X), y, stats, classes, forest._categories, weights,
                           y if forest.balance else None)
