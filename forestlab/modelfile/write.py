"""Writing a model file: a :class:`~.stored.StoredForest` as plain arrays and a JSON header.

See ``docs/file-format.md`` for the layout; :mod:`.container` writes the ``.npz`` file atomically.
"""

from __future__ import annotations

import json
from os import PathLike
from typing import Any

import numpy as np
from numpy.typing import NDArray

from .._version import __version__
from ..analyses.oob import known_out_of_bag
from ..analyses.results import OutOfBag
from ..analyses.view import FittedForest
from .check import LABEL_KINDS, NODE_DTYPES, TREE_FIELDS
from .container import FORMAT_NAME, FORMAT_VERSION, write_model
from .oob import oob_arrays
from .stored import BUILTIN, StoredComponent, StoredForest

__all__ = ["stored_oob", "write_forest"]


def write_forest(path: str | PathLike, stored: StoredForest, include_data: bool = False) -> None:
    """Write ``stored`` to ``path`` (see ``Forest.save``); its OOB results are computed now when missing and
    the training data allow."""
    if not isinstance(include_data, (bool, np.bool_)):
        raise TypeError(f"`include_data` must be a bool; got {type(include_data).__name__}")
    view = stored.view
    if include_data and not view.has_data:
        raise RuntimeError("`include_data=True`, but this forest holds no training data (it was loaded without)")
    arrays = _tree_arrays(view)
    labels = None
    if view.classes is not None:
        arrays["classes"], is_object = _typed_labels(view.classes)
        labels = {"dtype": arrays["classes"].dtype.str, "count": int(view.classes.size), "object": is_object}
    if view.case_weights is not None:
        arrays["case_weights"] = view.case_weights.astype("<f8")
    if include_data:
        arrays["X"] = view.X.astype("<f8")
        arrays["y"] = view.y.astype("<i8" if view.classes is not None else "<f8")
    oob = stored_oob(stored)
    if oob is not None:
        arrays.update(oob_arrays(oob, view.y))
    header = _header(stored, labels, bool(include_data), arrays)
    header["has_oob"] = oob is not None
    write_model(path, header, arrays)


def _tree_arrays(view: FittedForest) -> dict[str, NDArray]:
    """The node arrays of all trees concatenated, their offsets, the in-bag counts and the category levels."""
    trees = view.trees
    arrays = {name: np.concatenate([getattr(t, attr) for t in trees]).astype(NODE_DTYPES[name])
              for name, attr in TREE_FIELDS.items()}
    arrays["offsets"] = np.concatenate([[0], np.cumsum([t.nodes for t in trees])]).astype("<i8")
    arrays["inbag"] = np.ascontiguousarray(view.inbag, dtype=np.uint8)
    arrays.update(_level_arrays(view.levels))
    return arrays


def stored_oob(stored: StoredForest) -> OutOfBag | None:
    """The forest's OOB results (computed now if the training data allow), or None."""
    return known_out_of_bag(stored.view, stored.oob)


def _header(stored: StoredForest, labels: dict | None, include_data: bool, arrays: dict) -> dict:
    view, s, grown = stored.view, stored.settings, stored.provenance
    rules, seed, spec = grown.rules, grown.seed, s.class_priors
    return {
        "format": FORMAT_NAME, "format_version": FORMAT_VERSION, "forestlab_version": __version__,
        "task": view.task, "trees": len(view.trees), "nodes": int(arrays["feature"].size),
        "cases": view.cases, "features": view.features,
        "feature_names": list(view.feature_names), "classes": labels,
        "category_words": int(arrays["category_left"].shape[1]),
        "categorical_features": int(arrays["level_features"].size),
        "category_levels": int(arrays["level_values"].size),
        "settings": {"min_leaf": rules.min_leaf, "depth_limit": rules.depth_limit,
                     "sample_size": rules.sample_size, "replace": rules.replace, "balance": s.balance,
                     "class_priors": None if spec is None else ("equal" if spec == "equal" else "given"),
                     "workers": s.workers,
                     "categorical": None if s.categorical is None else list(s.categorical)},
        "class_priors": None if grown.class_priors is None else list(grown.class_priors.values()),
        "class_factors": None if grown.class_factors is None else list(grown.class_factors.values()),
        "sampler": _describe(rules.sampler, "sampler"), "splitter": _describe(rules.splitter, "splitter"),
        "seed": {"entropy": _seed_words(seed.entropy), "spawn_key": [int(k) for k in seed.spawn_key],
                 "pool_size": int(seed.pool_size)},
        "fingerprint": grown.fingerprint, "has_data": include_data, "has_case_weights": "case_weights" in arrays,
        "frame_categories": _frame_categories(view.frame_labels),
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
    """A sampler or splitter as a JSON record: class name, module, whether built in, public attributes."""
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
