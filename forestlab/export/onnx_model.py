"""A fitted forest as an ONNX model file, for runtimes without Python (the optional extra ``forestlab[onnx]``).

The model has one input ``X`` (float32, shape (N, p), columns in ``feature_names`` order) and computes:

- classification: ``vote_shares`` (float32, (N, K), columns in ``classes`` order), the share of trees voting
  for each class, and ``label`` (N,), the class with the most votes (lowest index on ties);
- regression: ``mean`` (float32, (N,)), the mean of the trees' predictions.

Categorical columns hold the category values the forest was fit on; a ``LabelEncoder`` turns them into the
trees' codes (an unseen value becomes NaN, a missing value, as in forestlab). See ``docs/onnx-export.md``
for the operator set, the float32 threshold rule and the table of how every kind of split is written.
"""

from __future__ import annotations

import json
import warnings
from os import PathLike
from pathlib import Path
from typing import Any

import numpy as np

from .._paths import output_path
from .._version import __version__
from .._warnings import ForestlabWarning
from ..analyses.view import FittedForest
from ..modelfile.stored import StoredForest
from .ensemble import ensemble_lists
from .thresholds import forest_thresholds, to_float32

__all__ = ["IR_VERSION", "OPSETS", "to_onnx"]

IR_VERSION = 10                         # the IR of the onnx release that brought ai.onnx.ml opset 5
OPSETS = {"": 21, "ai.onnx.ml": 5}      # TreeEnsemble (set membership, missing tracks) is ai.onnx.ml 5
AGGREGATE_SUM = 1


def to_onnx(stored: StoredForest, path: str | PathLike, *, strict: bool = False) -> Path:
    """Write the forest as an ONNX model (the ``TreeEnsemble`` operator of ``ai.onnx.ml`` opset 5).

    Called as ``forest.to_onnx(path)``; needs ``pip install 'forestlab[onnx]'``. The model reads one float32
    input ``X`` of shape (N, p), columns in :attr:`Forest.feature_names` order (categorical columns hold the
    category values seen in fit, NaN is missing), and gives ``label`` and ``vote_shares`` (N, K) in
    :attr:`Forest.classes` order, or ``mean`` (N,). Feature names, classes, category values and the data
    fingerprint are in the model's metadata.

    Every threshold is stored as the largest float32 not above forestlab's float64 threshold, so a float32
    comparison routes every float32 input as forestlab does; where that would send a training value (not a
    float32 number, sitting on the threshold) the other way, the threshold moves onto that value's float32
    number, which then goes with the training value. Every training value thus keeps its side; the export
    is refused where float32 cannot separate two of them. An input that is neither a float32 number nor a
    training value and lies within one float32 spacing of a threshold can go the other way. Details and the
    table of how every kind of split is written: ``docs/onnx-export.md``.

    Parameters
    ----------
    path : str or os.PathLike
        The file to write (its folder must exist); ``.onnx`` is the usual suffix.
    strict : bool, default False
        Refuse the export instead of moving a threshold: with ``strict=True`` a forest is exported only when
        one float32 threshold per split routes every training value *and* every float32 number as forestlab
        does. On data recorded to a few decimals that is often impossible (a training value sitting on a
        split's midpoint rounds up across it in float32), and the default keeps the training values' side.

    Returns
    -------
    pathlib.Path
        The file written.

    Raises
    ------
    ValueError
        When the standard's float32 comparison cannot reproduce the forest: two training values of a feature
        on either side of a threshold that are the same float32 number, or a category value that is not a
        float32 number; with ``strict=True`` also when any threshold had to move.
    ImportError
        When the ``onnx`` package is not installed.
    """
    target = output_path(path)
    onnx = _onnx()
    view = stored.view
    _check_category_values(view)
    if not view.has_data:
        warnings.warn("this forest holds no training data, so its thresholds were not checked against the "
                      "training values and none was moved to keep a training value on its side (float32 inputs "
                      "are still routed exactly; see docs/onnx-export.md); save the forest with "
                      "`include_data=True` to export it with them", ForestlabWarning, stacklevel=3)
    if not isinstance(strict, (bool, np.bool_)):
        raise TypeError(f"`strict` must be True or False; got {type(strict).__name__}")
    thresholds, moved = forest_thresholds(view)
    if strict and moved:
        raise ValueError(
            f"`strict=True`: {moved} split threshold(s) cannot send every training value and every float32 number "
            "the way forestlab does (a training value on the split rounds across it in float32); export with "
            "`strict=False` to keep every training value on its side (docs/onnx-export.md), or fit on float32 "
            "numbers (`X.astype(np.float32).astype(np.float64)`)")
    model = _model(onnx, stored, ensemble_lists(view, thresholds), moved)
    onnx.checker.check_model(model)
    target.write_bytes(model.SerializeToString())
    return target


def _onnx() -> Any:
    try:
        import onnx
    except ImportError:
        raise ImportError("`to_onnx` needs the onnx package; install it with: pip install 'forestlab[onnx]'") \
            from None
    return onnx


def _check_category_values(view: FittedForest) -> None:
    for j, values in view.levels.items():
        inexact = values[to_float32(values).astype(np.float64) != values]
        if inexact.size:
            raise ValueError(f"categorical feature {view.feature_names[j]!r} has the category value "
                             f"{float(inexact[0])!r}, which is not a float32 number: the exported model reads "
                             "float32 inputs and could not tell it from its float32 neighbours; code the categories "
                             "as whole numbers")


def _model(onnx: Any, stored: StoredForest, lists: dict[str, np.ndarray], moved: int) -> Any:
    view = stored.view
    h, T = onnx.helper, onnx.TensorProto
    classification = view.task == "classification"
    targets = view.classes.size if classification else 1
    nodes, coded = _category_coding(h, view)
    nodes.append(_ensemble_node(h, onnx.numpy_helper, lists, coded, targets))
    constants = [h.make_tensor("tree_count", T.FLOAT, [], [float(len(view.trees))])]
    if classification:
        constants.append(_class_tensor(h, T, view.classes))
        nodes += [h.make_node("Div", ["tree_votes", "tree_count"], ["vote_shares"]),
                  h.make_node("ArgMax", ["tree_votes"], ["winner"], axis=1, keepdims=0, select_last_index=0),
                  h.make_node("Gather", ["classes", "winner"], ["label"], axis=0)]
        outputs = [h.make_tensor_value_info("label", constants[-1].data_type, ["N"]),
                   h.make_tensor_value_info("vote_shares", T.FLOAT, ["N", targets])]
    else:
        constants.append(h.make_tensor("flat", T.INT64, [1], [-1]))
        nodes += [h.make_node("Div", ["tree_votes", "tree_count"], ["mean_column"]),
                  h.make_node("Reshape", ["mean_column", "flat"], ["mean"])]
        outputs = [h.make_tensor_value_info("mean", T.FLOAT, ["N"])]
    graph = h.make_graph(nodes, "forestlab_forest", [h.make_tensor_value_info("X", T.FLOAT, ["N", view.features])],
                         outputs, initializer=constants + _coding_constants(h, T, view))
    model = h.make_model(graph, ir_version=IR_VERSION, producer_name="forestlab", producer_version=__version__,
                         opset_imports=[h.make_opsetid(domain, version) for domain, version in OPSETS.items()],
                         doc_string=f"forestlab {view.task} forest of {len(view.trees)} trees; see the metadata")
    h.set_model_props(model, _metadata(stored, moved))
    return model


def _ensemble_node(h: Any, numpy_helper: Any, lists: dict[str, np.ndarray], coded: str, targets: int) -> Any:
    tensors = {"nodes_modes", "nodes_splits", "leaf_weights", "membership_values"}
    attributes = {name: numpy_helper.from_array(value) if name in tensors else value.tolist()
                  for name, value in lists.items()}
    return h.make_node("TreeEnsemble", [coded], ["tree_votes"], domain="ai.onnx.ml", n_targets=targets,
                       aggregate_function=AGGREGATE_SUM, post_transform=0, **attributes)


def _category_coding(h: Any, view: FittedForest) -> tuple[list, str]:
    """Nodes that replace every categorical column by the trees' codes, and the name of the coded input."""
    if not view.levels:
        return [], "X"
    categorical = sorted(view.levels)
    numeric = [j for j in range(view.features) if j not in view.levels]
    nodes, parts = [], []
    if numeric:
        nodes.append(h.make_node("Gather", ["X", "numeric_columns"], ["numeric"], axis=1))
        parts.append("numeric")
    for j in categorical:
        nodes += [h.make_node("Gather", ["X", f"column_{j}"], [f"values_{j}"], axis=1),
                  h.make_node("LabelEncoder", [f"values_{j}"], [f"codes_{j}"], domain="ai.onnx.ml",
                              keys_floats=view.levels[j].astype(np.float32).tolist(),
                              values_floats=np.arange(view.levels[j].size, dtype=np.float32).tolist(),
                              default_float=float("nan"))]
        parts.append(f"codes_{j}")
    nodes += [h.make_node("Concat", parts, ["stacked"], axis=1),
              h.make_node("Gather", ["stacked", "column_order"], ["coded"], axis=1)]
    return nodes, "coded"


def _coding_constants(h: Any, T: Any, view: FittedForest) -> list:
    if not view.levels:
        return []
    numeric = [j for j in range(view.features) if j not in view.levels]
    stacked = numeric + sorted(view.levels)
    out = [h.make_tensor(f"column_{j}", T.INT64, [1], [j]) for j in sorted(view.levels)]
    out.append(h.make_tensor("column_order", T.INT64, [view.features], np.argsort(stacked).tolist()))
    if numeric:
        out.append(h.make_tensor("numeric_columns", T.INT64, [len(numeric)], numeric))
    return out


def _class_tensor(h: Any, T: Any, classes: np.ndarray) -> Any:
    """The class labels as a constant tensor of the matching ONNX type."""
    kind = classes.dtype.kind
    values = classes.tolist()
    if kind in "US" or (kind == "O" and all(isinstance(v, str) for v in values)):
        return h.make_tensor("classes", T.STRING, [len(values)], [str(v).encode("utf-8") for v in values])
    if kind == "b":
        return h.make_tensor("classes", T.BOOL, [len(values)], values)
    if kind in "iu" and all(-2**63 <= v < 2**63 for v in values):
        return h.make_tensor("classes", T.INT64, [len(values)], values)
    if kind == "f":
        return h.make_tensor("classes", T.DOUBLE, [len(values)], values)
    raise TypeError(f"the class labels {values[:5]} (dtype {classes.dtype}) have no ONNX tensor type; use strings, "
                    "whole numbers, floats or bools as labels")


def _metadata(stored: StoredForest, moved: int) -> dict[str, str]:
    view, grown = stored.view, stored.provenance
    meta = {"forestlab_version": __version__, "task": view.task, "trees": str(len(view.trees)),
            "feature_names": json.dumps(list(view.feature_names)), "data_fingerprint": grown.fingerprint,
            "input": "X: float32 (N, features), columns in feature_names order, NaN for a missing value",
            "thresholds": "each split's float64 threshold rounded down to the largest float32 not above it, or "
                          "moved onto the float32 number of a training value it would otherwise cut off "
                          f"({moved} of them; see forestlab's docs/onnx-export.md)",
            "training_values_checked": "yes" if view.has_data else "no"}
    if view.classes is not None:
        meta["classes"] = json.dumps(view.classes.tolist(), default=str)
    if view.levels:
        meta["category_values"] = json.dumps({view.feature_names[j]: v.tolist() for j, v in view.levels.items()})
    if view.frame_labels:
        meta["category_labels"] = json.dumps({k: list(v) for k, v in view.frame_labels.items()}, default=str)
    return meta
