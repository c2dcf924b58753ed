"""Checks on the contents of a model file: header fields and the node arrays of every tree.

Everything read from a file is untrusted. Each check raises :class:`ModelFileError` (a ``ValueError``) with
what is wrong; none allocates more than the arrays already read, and the tree checks are whole-array NumPy
(no per-node Python), so a hostile file can neither crash, hang nor exhaust memory.
"""

from __future__ import annotations

import re
from typing import Any

import numpy as np
from numpy.typing import NDArray

__all__ = ["ModelFileError", "check_class_labels", "check_class_numbers", "check_classes", "check_feature_names",
           "check_finite", "check_fingerprint", "check_levels", "check_seed", "check_trees", "field", "int_field"]

# dtypes of the node arrays, as written (little-endian); a file with any other dtype is refused
NODE_DTYPES = {"feature": "<i4", "threshold": "<f8", "left": "<i4", "right": "<i4", "value": "<f8",
               "cases": "<f8", "decrease": "<f8", "depth": "<i4", "missing_left": "|b1",
               "category_left": "<u8"}
# file member -> Tree attribute
TREE_FIELDS = {"feature": "feature", "threshold": "threshold", "left": "left", "right": "right",
               "value": "value", "cases": "cases", "decrease": "impurity_decrease", "depth": "depth",
               "missing_left": "missing_left", "category_left": "category_left"}
LABEL_KINDS = "biufUS"
MAX_SEED_WORDS = 64


class ModelFileError(ValueError):
    """A forest file is damaged, hostile, or not a forestlab forest file of a known format version."""


def field(header: dict, key: str, types: type | tuple[type, ...], where: str = "header") -> Any:
    """``header[key]``, which must exist and be of ``types`` (bools are never ints here)."""
    if not isinstance(header, dict) or key not in header:
        raise ModelFileError(f"the {where} lacks the field {key!r}")
    value = header[key]
    bool_ok = types is bool or (isinstance(types, tuple) and bool in types)
    if not isinstance(value, types) or (isinstance(value, bool) and not bool_ok):
        raise ModelFileError(f"the {where} field {key!r} has the wrong type ({type(value).__name__})")
    return value


def int_field(header: dict, key: str, low: int, where: str = "header") -> int:
    """An int field of at least ``low``."""
    value = field(header, key, int, where)
    if value < low:
        raise ModelFileError(f"the {where} field {key!r} must be at least {low}; got {value}")
    return value


def check_finite(name: str, values: NDArray, low: float | None = None) -> None:
    """All values finite (and ``>= low`` when given)."""
    if not np.all(np.isfinite(values)) or (low is not None and values.size and values.min() < low):
        raise ModelFileError(f"the file's {name} holds non-finite" + ("" if low is None else f" or < {low}")
                             + " values")


def check_classes(classes: NDArray) -> None:
    """Class labels: a typed 1-D array (no objects) of distinct values, finite when floats."""
    if classes.ndim != 1 or classes.size == 0 or classes.dtype.kind not in LABEL_KINDS:
        raise ModelFileError(f"the file's classes must be a non-empty 1-D array of bools, numbers or strings; "
                             f"got {classes.dtype} of shape {classes.shape}")
    if classes.dtype.kind == "f":
        check_finite("classes", classes)
    if np.unique(classes).size != classes.size:
        raise ModelFileError("the file's classes are not distinct")


def _check_links(nodes: dict[str, NDArray], offsets: NDArray[np.int64], features: int) -> None:
    """Leaves have no children; inner nodes split a known feature and point forward, right = left + 1;
    every node except the roots has exactly one parent, so each tree is a tree (connected, no cycles)."""
    total = nodes["feature"].size
    size = np.diff(offsets)
    tree = np.repeat(np.arange(size.size), size)
    local = np.arange(total) - offsets[:-1][tree]
    feature, left, right = nodes["feature"], nodes["left"].astype(np.int64), nodes["right"].astype(np.int64)
    leaf = feature == -1
    if np.any((feature < -1) | (feature >= features)):
        raise ModelFileError(f"a split feature index lies outside -1 .. {features - 1}")
    if np.any(leaf & ((left != -1) | (right != -1))):
        raise ModelFileError("a leaf (feature -1) has child indices other than -1")
    inner = ~leaf
    if np.any(inner & ((left <= local) | (right >= size[tree]) | (right != left + 1))):
        raise ModelFileError("a child index points backward, out of its tree, or right != left + 1")
    rank = np.cumsum(inner) - np.cumsum(inner)[offsets[:-1]][tree] + inner[offsets[:-1]][tree]
    if np.any(inner & (left != 2 * rank - 1)):
        raise ModelFileError("the nodes are not in breadth-first order (the j-th inner node's children must be "
                             "nodes 2j+1 and 2j+2)")
    children = np.concatenate([(offsets[:-1][tree] + left)[inner], (offsets[:-1][tree] + right)[inner]])
    parents = np.bincount(children, minlength=total)
    roots = np.zeros(total, dtype=bool)
    roots[offsets[:-1]] = True
    if np.any(parents != np.where(roots, 0, 1)):
        raise ModelFileError("a node has no parent or more than one: the node arrays do not form trees")


def _check_node_values(nodes: dict[str, NDArray], offsets: NDArray[np.int64], classes: int,
                       categories: NDArray[np.int64]) -> None:
    """Thresholds finite at numeric splits and NaN elsewhere; category sets only at categorical splits;
    values, weights, decreases and depths sound."""
    feature, threshold = nodes["feature"], nodes["threshold"]
    inner = feature >= 0
    on_category = inner & (categories[np.maximum(feature, 0)] > 0)
    numeric = inner & ~on_category
    if not np.all(np.isfinite(threshold[numeric])) or not np.all(np.isnan(threshold[~numeric])):
        raise ModelFileError("thresholds must be finite at numeric splits and NaN at leaves and category splits")
    if np.any(nodes["category_left"][~on_category]):
        raise ModelFileError("a node that does not split a categorical feature has a category set")
    if np.any(nodes["missing_left"][~inner]):
        raise ModelFileError("a leaf sends missing values somewhere (missing_left must be False at leaves)")
    value = nodes["value"]
    check_finite("node values", value)
    if classes and np.any((value < 0) | (value >= classes) | (value != np.floor(value))):
        raise ModelFileError(f"a node's class index lies outside 0 .. {classes - 1}")
    check_finite("node case weights", nodes["cases"], low=0.0)
    check_finite("impurity decreases", nodes["decrease"])
    depth = nodes["depth"].astype(np.int64)
    size = np.diff(offsets)
    tree = np.repeat(np.arange(size.size), size)
    parent_of = np.flatnonzero(inner)
    child = offsets[:-1][tree[parent_of]] + nodes["left"][parent_of]
    if np.any(depth[offsets[:-1]] != 0) or np.any(depth[child] != depth[parent_of] + 1) \
            or np.any(depth[child + 1] != depth[parent_of] + 1):
        raise ModelFileError("node depths are inconsistent with the tree structure")


def check_levels(features: NDArray[np.int64], offsets: NDArray[np.int64], values: NDArray[np.float64],
                 p: int, words: int) -> dict[int, NDArray[np.float64]]:
    """Category values of every categorical feature: distinct features in range, strictly increasing finite
    values per feature, at most ``64 * words`` of them, and ``words`` just enough for the largest."""
    if features.size and (np.any(features < 0) or np.any(features >= p) or np.unique(features).size != features.size):
        raise ModelFileError(f"the categorical features must be distinct positions in 0 .. {p - 1}")
    if offsets[0] != 0 or offsets[-1] != values.size or np.any(np.diff(offsets) < 1):
        raise ModelFileError("the category level offsets must start at 0, rise and end at the value count")
    check_finite("category levels", values)
    size = np.diff(offsets)
    first = np.zeros(values.size, dtype=bool)
    first[offsets[:-1]] = True
    if np.any(~first[1:] & (values[1:] <= values[:-1])):
        raise ModelFileError("the category levels of a feature must be strictly increasing")
    if words != (-(-int(size.max()) // 64) if size.size else 0):
        raise ModelFileError("the category set width does not fit the largest number of categories")
    return {int(j): values[lo:hi] for j, lo, hi in zip(features, offsets[:-1], offsets[1:])}


def check_trees(nodes: dict[str, NDArray], offsets: NDArray[np.int64], features: int, classes: int,
                categories: NDArray[np.int64]) -> None:
    """Validate the concatenated node arrays of all trees against the per-tree ``offsets``.

    ``categories`` (features,) is the number of categories of each categorical feature, 0 for numeric ones.
    """
    total = nodes["feature"].size
    if offsets.ndim != 1 or offsets.size < 2 or offsets[0] != 0 or offsets[-1] != total \
            or np.any(np.diff(offsets) < 1):
        raise ModelFileError("the tree offsets must start at 0, rise by at least 1 and end at the node count")
    _check_links(nodes, offsets, features)
    _check_node_values(nodes, offsets, classes, categories)


# ------------------------------------------------------------------------------------------------ header fields
def check_feature_names(header: dict) -> tuple[str, ...]:
    """One distinct string per feature."""
    names = field(header, "feature_names", list)
    if len(names) != header["features"] or not all(isinstance(c, str) for c in names) \
            or len(set(names)) != len(names):
        raise ModelFileError("the header's feature names must be one distinct string per feature")
    return tuple(names)


def check_class_labels(header: dict, arrays: dict, task: str) -> NDArray | None:
    """The class labels (object array when saved from objects), or None for regression."""
    labels = header["classes"]
    if (labels is None) != (task == "regression"):
        raise ModelFileError("the header's classes do not fit its task")
    if labels is None:
        return None
    classes = arrays["classes"]
    check_classes(classes)
    return classes.astype(object) if field(labels, "object", bool, "classes") else classes


def check_class_numbers(header: dict, key: str, K: int) -> NDArray[np.float64] | None:
    """The header's list ``key`` of one positive finite number per class (priors, class factors), or None."""
    values = field(header, key, (list, type(None)))
    if values is None:
        return None
    vector = np.array(values, dtype=np.float64) if all(isinstance(v, (int, float)) and not isinstance(v, bool)
                                                       for v in values) else np.empty(0)
    if vector.shape != (K,) or not np.all(np.isfinite(vector)) or not np.all(vector > 0):
        raise ModelFileError(f"the header's {key} must be one positive number per class")
    return vector


def check_seed(header: dict) -> np.random.SeedSequence:
    """The root seed: a few non-negative 128-bit integers."""
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


def check_fingerprint(header: dict) -> str:
    """A SHA-256 hex digest."""
    value = field(header, "fingerprint", str)
    if not re.fullmatch(r"[0-9a-f]{64}", value):
        raise ModelFileError("the header's fingerprint is not a SHA-256 hex digest")
    return value
