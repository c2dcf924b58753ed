"""Which predictors matter: OOB permutation importance and (normalised) impurity importance.

Permutation importance follows Breiman (2001), "Random forests", Machine Learning 45, section 10: for every
tree and every feature, shuffle the feature's values among the tree's out-of-bag cases and record how much
the tree's error on those cases rises. Impurity importance adds up the weighted impurity decreases of every
split on a feature; it is cheap, but biased towards features with many distinct values (Strobl, Boulesteix,
Zeileis & Hothorn 2007, "Bias in random forest variable importance measures", BMC Bioinformatics 8:25).
"""

from __future__ import annotations

import numbers
from collections.abc import Mapping, Sequence
from dataclasses import dataclass
from typing import Any

import numpy as np
from numpy.typing import NDArray

from ..engine.seeding import root_seed, tree_generator
from ..engine.tree import Tree, leaf_index
from .cases import ROW_BUDGET, analysis_X, analysis_y
from .view import FittedForest

__all__ = ["Importance", "importance"]

KINDS = ("impurity", "permutation")
BAR_WIDTH = 24


@dataclass(frozen=True, eq=False, repr=False)
class Importance:
    """Importance of every feature (or group of features), with the per-tree values behind it.

    Prints as a table sorted from the most to the least important entry.

    Attributes
    ----------
    kind : str
        ``"permutation"`` or ``"impurity"``.
    names : tuple of str
        Name of every entry: a feature name, or a group name.
    columns : tuple of tuple of int
        The feature columns behind every entry (one column each unless grouped).
    scores : ndarray of float64, shape (entries,)
        Mean over trees of ``per_tree``.
    spread : ndarray of float64, shape (entries,)
        Standard deviation over trees of ``per_tree`` (ddof 1).
    z : ndarray of float64, shape (entries,)
        ``scores / (spread / sqrt(trees))`` for the permutation kind (0 when a feature never changes any
        tree's error); NaN for the impurity kind, whose per-tree shares are not a rise in error.
    per_tree : ndarray of float64, shape (trees, entries)
        Permutation: rise in tree ``b``'s error on its out-of-bag cases (all cases when data were passed)
        when the entry's columns are shuffled together; NaN for a tree with fewer than 2 such cases.
        Impurity: tree ``b``'s share of its total weighted impurity decrease made by splits on the entry.
    trees : int
        Number of trees that contributed.
    measure : str
        What ``per_tree`` measures, in words.
    """

    kind: str
    names: tuple[str, ...]
    columns: tuple[tuple[int, ...], ...]
    scores: NDArray[np.float64]
    spread: NDArray[np.float64]
    z: NDArray[np.float64]
    per_tree: NDArray[np.float64]
    trees: int
    measure: str

    @property
    def ranking(self) -> NDArray[np.int64]:
        """Entry indices from the most to the least important (ties keep column order)."""
        return np.argsort(-self.scores, kind="stable")

    def __str__(self) -> str:
        head = [f"{self.kind} importance: {self.measure}",
                f"{self.trees} trees; spread = standard deviation over trees"
                + ("; z = score / (spread / sqrt(trees))" if self.kind == "permutation" else "")]
        width = max(7, *(len(n) for n in self.names))
        rows = [f"  rank  {'feature':<{width}}  {'score':>10}  {'spread':>10}  {'z':>8}"]
        top = max(float(np.nanmax(self.scores)), 0.0) if self.scores.size else 0.0
        for rank, k in enumerate(self.ranking, start=1):
            bar = "#" * int(round(BAR_WIDTH * max(self.scores[k], 0.0) / top)) if top > 0 else ""
            z = "-" if np.isnan(self.z[k]) else f"{self.z[k]:8.2f}"
            rows.append(f"  {rank:>4}  {self.names[k]:<{width}}  {self.scores[k]:>10.4g}  "
                        f"{self.spread[k]:>10.4g}  {z:>8}  {bar}")
        return "\n".join(head + rows)

    __repr__ = __str__


def importance(forest: FittedForest, kind: str = "permutation", *, X: Any = None, y: Any = None,
               groups: Any = None, names: Sequence[str] | None = None, rng: Any = None) -> Importance:
    """Importance of every feature, or of groups of features, as a sorted-printing :class:`Importance`.

    Called as ``forest.importance(...)``. ``kind="permutation"`` (Breiman 2001, "Random forests", section
    10): for every tree and feature, the rise in the tree's error (misclassification rate or mean squared
    error) on its out-of-bag cases when the feature's values are shuffled among those cases; ``scores`` is
    the mean over trees, ``spread`` the standard deviation, ``z = scores / (spread / sqrt(trees))``.

    ``kind="impurity"``: every tree's weighted impurity decrease per feature as a share of the tree's total,
    averaged over trees (the scores sum to 1). Cheap, but biased: it favours features with many distinct
    values (many candidate thresholds) even when they are pure noise (Strobl, Boulesteix, Zeileis & Hothorn
    2007, "Bias in random forest variable importance measures: illustrations, sources and a solution", BMC
    Bioinformatics 8:25). Prefer the permutation kind to compare features of different types.

    Parameters
    ----------
    kind : {"permutation", "impurity"}
        Which importance.
    X, y : array-like, optional
        Held-out cases (permutation kind): every tree is scored on all of them instead of its OOB cases.
    groups : mapping of name to columns, or sequence of column lists, optional
        Shuffle a set of correlated columns together, rows kept aligned, and score the set.
    names : sequence of str, optional
        Labels of the features (default: the forest's ``feature_names``).
    rng : None, int, SeedSequence or Generator
        Seeds the shuffles; tree ``b`` draws from its own child of the seed, so results do not depend on
        the order of work.

    Returns
    -------
    Importance
    """
    if not isinstance(kind, str) or kind not in KINDS:
        raise ValueError(f"`kind` must be one of {list(KINDS)}; got {kind!r}")
    labels = _check_names(names, forest.features, forest.feature_names)
    columns, entry_names = _check_groups(groups, labels)
    if kind == "impurity":
        if X is not None or y is not None:
            raise ValueError("`X` and `y` are only used by kind='permutation'; impurity importance reads the trees")
        per_tree = _impurity_shares(forest.trees, forest.features, columns)
        measure = "share of the weighted impurity decrease, averaged over trees (sums to 1)"
    else:
        if (X is None) != (y is None):
            raise ValueError("pass both `X` and `y` (held-out cases), or neither (the training cases, out-of-bag)")
        data, training = analysis_X(forest, X)
        target = forest.y if training else analysis_y(forest, y, data.shape[0])
        oob = forest.inbag == 0 if training else None
        per_tree = _permutation_rises(forest, data, target, oob, columns, root_seed(rng))
        error = "misclassification rate" if forest.task == "classification" else "mean squared error"
        measure = f"rise in {'OOB ' if training else ''}{error} when the entry's values are shuffled"
    return _summarise(kind, entry_names, columns, per_tree, measure)


def _check_names(names: Any, features: int, known: tuple[str, ...] | None = None) -> tuple[str, ...]:
    if names is None:
        return tuple(known) if known is not None else tuple(f"x{j}" for j in range(features))
    if isinstance(names, str) or not isinstance(names, Sequence | np.ndarray):
        raise TypeError(f"`names` must be a sequence of {features} strings; got {type(names).__name__}")
    labels = tuple(str(v) for v in names)
    if len(labels) != features:
        raise ValueError(f"`names` must name all {features} features; got {len(labels)} names")
    if len(set(labels)) != features:
        raise ValueError("`names` must be distinct")
    return labels


def _check_groups(groups: Any, labels: tuple[str, ...]) -> tuple[tuple[tuple[int, ...], ...], tuple[str, ...]]:
    """Columns and name of every entry: one per feature, or one per group of feature columns."""
    if groups is None:
        return tuple((j,) for j in range(len(labels))), labels
    if isinstance(groups, Mapping):
        items = [(str(k), v) for k, v in groups.items()]
    elif isinstance(groups, Sequence) and not isinstance(groups, str):
        items = [(None, v) for v in groups]
    else:
        raise TypeError(f"`groups` must be a mapping of name to columns or a sequence of column lists; "
                        f"got {type(groups).__name__}")
    if not items:
        raise ValueError("`groups` must hold at least one group")
    columns, entry_names = [], []
    for name, members in items:
        cols = tuple(_column(c, labels) for c in (members if _is_list(members) else [members]))
        if not cols or len(set(cols)) != len(cols):
            raise ValueError(f"every group in `groups` must list distinct columns; got {members!r}")
        columns.append(cols)
        entry_names.append(name if name is not None else "+".join(labels[c] for c in cols))
    return tuple(columns), tuple(entry_names)


def _is_list(value: Any) -> bool:
    return isinstance(value, Sequence | np.ndarray) and not isinstance(value, str)


def _column(c: Any, labels: tuple[str, ...]) -> int:
    if isinstance(c, str):
        if c not in labels:
            raise ValueError(f"`groups` names an unknown feature {c!r}; known: {list(labels)[:10]}")
        return labels.index(c)
    if isinstance(c, (bool, np.bool_)) or not isinstance(c, numbers.Integral) or not 0 <= c < len(labels):
        raise ValueError(f"`groups` columns must be feature names or ints in [0, {len(labels)}); got {c!r}")
    return int(c)


def _impurity_shares(trees: list[Tree], features: int, columns: tuple[tuple[int, ...], ...]) -> NDArray:
    """Per tree, the share of its total weighted impurity decrease made by splits on each entry's columns."""
    out = np.zeros((len(trees), len(columns)))
    for b, tree in enumerate(trees):
        inner = tree.feature >= 0
        total = np.bincount(tree.feature[inner], weights=tree.impurity_decrease[inner], minlength=features)
        if total.sum() > 0:
            total = total / total.sum()
            out[b] = [total[list(cols)].sum() for cols in columns]
    return out


def _permutation_rises(forest: FittedForest, X: NDArray, y: NDArray, oob: NDArray | None,
                       columns: tuple[tuple[int, ...], ...], root: np.random.SeedSequence) -> NDArray:
    """Rise in every tree's error on its evaluation cases when each entry's columns are shuffled."""
    out = np.full((len(forest.trees), len(columns)), np.nan)
    for b, tree in enumerate(forest.trees):
        rows = np.flatnonzero(oob[b]) if oob is not None else np.arange(X.shape[0])
        if rows.size < 2:
            continue
        generator = tree_generator(root, b)
        perms = [generator.permutation(rows.size) for _ in columns]
        out[b] = _tree_rises(tree, X[rows], y[rows], columns, perms, forest.task == "classification")
    return out


def _tree_rises(tree: Tree, X: NDArray, y: NDArray, columns: tuple[tuple[int, ...], ...],
                perms: list[NDArray], classification: bool) -> NDArray:
    """One tree's error rise for every entry: all shuffled copies stacked and pushed down together."""
    used = set(tree.feature[tree.feature >= 0].tolist())
    base = _error(tree.value[leaf_index(tree, X)], y, classification)
    rises = np.zeros(len(columns))
    todo = [k for k, cols in enumerate(columns) if used.intersection(cols)]
    m = X.shape[0]
    step = max(1, ROW_BUDGET // (m * X.shape[1]))
    for start in range(0, len(todo), step):
        chunk = todo[start:start + step]
        stacked = np.tile(X, (len(chunk), 1))
        for i, k in enumerate(chunk):
            cols = list(columns[k])
            stacked[i * m:(i + 1) * m, cols] = X[perms[k]][:, cols]
        values = tree.value[leaf_index(tree, stacked)].reshape(len(chunk), m)
        rises[chunk] = _error(values, y, classification) - base
    return rises


def _error(values: NDArray, y: NDArray, classification: bool) -> NDArray:
    """Misclassification rate or mean squared error along the last axis."""
    if classification:
        return np.mean(values != y, axis=-1)
    return np.mean((values - y) ** 2, axis=-1)


def _summarise(kind: str, names: tuple[str, ...], columns: tuple[tuple[int, ...], ...], per_tree: NDArray,
               measure: str) -> Importance:
    valid = ~np.isnan(per_tree[:, 0]) if per_tree.size else np.zeros(0, dtype=bool)
    kept = per_tree[valid]
    trees = int(kept.shape[0])
    if trees == 0:
        raise ValueError("no tree has 2 or more out-of-bag cases; grow more trees or pass held-out `X` and `y`")
    scores = kept.mean(axis=0)
    spread = kept.std(axis=0, ddof=1) if trees > 1 else np.full(scores.shape, np.nan)
    if kind == "impurity":
        z = np.full(scores.shape, np.nan)
    else:
        with np.errstate(divide="ignore", invalid="ignore"):
            z = scores / (spread / np.sqrt(trees))
        flat = spread == 0
        z[flat] = np.where(scores[flat] == 0, 0.0, np.copysign(np.inf, scores[flat]))
    for a in (scores, spread, z, per_tree):
        a.flags.writeable = False
    return Importance(kind=kind, names=names, columns=columns, scores=scores, spread=spread, z=z,
                      per_tree=per_tree, trees=trees, measure=measure)
