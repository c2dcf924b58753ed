"""How the response depends on one or two predictors: partial dependence and ICE curves.

Partial dependence (Friedman 2001, "Greedy function approximation: a gradient boosting machine", Ann. Statist.
29, section 8.2) averages the forest's prediction over the data with the chosen feature(s) held at each grid
value. Individual conditional expectation (ICE) curves keep the per-case predictions instead of averaging
(Goldstein, Kapelner, Bleich & Pitkin 2015, "Peeking inside the black box", J. Comput. Graph. Statist. 24).
"""

from __future__ import annotations

import numbers
from dataclasses import dataclass
from typing import Any

import numpy as np
from numpy.typing import NDArray

from .cases import ROW_BUDGET, analysis_X, mean_prediction
from .view import FittedForest

__all__ = ["Dependence", "partial_dependence"]


@dataclass(frozen=True, eq=False, repr=False)
class Dependence:
    """Partial dependence of the forest's prediction on one or two features.

    Attributes
    ----------
    features : tuple of int
        The feature column(s), one or two.
    grid : tuple of ndarray
        The grid values of every feature, increasing; shapes (G1,) or (G1,), (G2,). For a categorical
        feature, its category labels (by default all categories seen in training).
    average : ndarray of float64, shape (G1,) or (G1, G2)
        Mean over the cases of the prediction (regression) or of the share of trees voting ``label``
        (classification) with the feature(s) set to the grid values.
    ice : ndarray of float64, shape (n, G1), or None
        Per-case curves (individual conditional expectation); their mean over cases is ``average``. Present
        when asked for, one feature only.
    label : object or None
        The class whose vote share is shown (classification), or None (regression).
    """

    features: tuple[int, ...]
    grid: tuple[NDArray[np.float64], ...]
    average: NDArray[np.float64]
    ice: NDArray[np.float64] | None
    label: Any

    def __repr__(self) -> str:
        shape = "x".join(str(g.size) for g in self.grid)
        extra = f", label={self.label!r}" if self.label is not None else ""
        return (f"Dependence(features={self.features}, grid={shape}{extra}, "
                f"ice={'yes' if self.ice is not None else 'no'})")


def partial_dependence(forest: FittedForest, feature: Any, grid: Any = None, *, X: Any = None,
                       label: Any = None, ice: bool = False, points: int = 25) -> Dependence:
    """Partial dependence on one feature, or on a pair (an interaction surface), as :class:`Dependence`.

    Called as ``forest.partial_dependence(...)``. Friedman (2001), "Greedy function approximation", section
    8.2: the forest's prediction averaged over the cases (the training cases, or ``X``) with ``feature`` set
    to each ``grid`` value.

    Parameters
    ----------
    feature : int, str, or a pair of them
        The column(s), by position or name.
    grid : array-like, or one per feature for a pair, optional
        Values to set the feature to; default the distinct values, or ``points`` evenly spaced quantiles, of
        the feature (all categories of a categorical feature).
    X : array-like, optional
        The cases to average over (default: the training cases).
    label : optional
        Classification: the class whose vote share is shown (default: the second class of a two-class
        forest).
    ice : bool, default False
        Keep every case's curve (Goldstein, Kapelner, Bleich & Pitkin 2015, "Peeking inside the black box").
    points : int, default 25
        Grid size when the grid is made from quantiles.

    Returns
    -------
    Dependence
    """
    data, _ = analysis_X(forest, X)
    features = _check_features(feature, data.shape[1], forest.feature_names)
    if not isinstance(ice, (bool, np.bool_)):
        raise TypeError(f"`ice` must be True or False; got {type(ice).__name__}")
    if ice and len(features) != 1:
        raise ValueError("`ice` curves are drawn for one feature; pass a single `feature`")
    if isinstance(points, (bool, np.bool_)) or not isinstance(points, numbers.Integral) or points < 2:
        raise ValueError(f"`points` must be an int of at least 2; got {points!r}")
    levels = forest.levels
    grids = _check_grid(grid, data, features, int(points), levels)
    coded = tuple(_category_codes(g, levels[f], f) if f in levels else g for f, g in zip(features, grids))
    code = _check_label(forest, label)
    settings = np.stack([g.ravel() for g in np.meshgrid(*coded, indexing="ij")], axis=1)
    per_case = _per_case(forest, data, features, settings, code)
    average = per_case.mean(axis=1).reshape(tuple(g.size for g in grids))
    return Dependence(features=features, grid=grids, average=average, ice=per_case.T.copy() if ice else None,
                      label=None if code is None else np.asarray(forest.classes[code]).item())


def _check_features(feature: Any, p: int, names: tuple[str, ...] | None = None) -> tuple[int, ...]:
    items = list(feature) if isinstance(feature, (tuple, list, np.ndarray)) else [feature]
    if not 1 <= len(items) <= 2:
        raise ValueError(f"`feature` must be one column or a pair of columns; got {len(items)}")
    for k, f in enumerate(items):
        if isinstance(f, str):
            if names is None or f not in names:
                raise ValueError(f"`feature` names an unknown column {f!r}; known: {list(names or ())[:10]}")
            items[k] = f = names.index(f)
        if isinstance(f, (bool, np.bool_)) or not isinstance(f, numbers.Integral):
            raise TypeError(f"`feature` must be a column name or int index (or a pair); got {type(f).__name__}")
        if not 0 <= f < p:
            raise ValueError(f"`feature` = {f} is out of range for {p} features")
    if len(items) == 2 and items[0] == items[1]:
        raise ValueError("`feature` pair must name two different columns")
    return tuple(int(f) for f in items)


def _check_grid(grid: Any, X: NDArray, features: tuple[int, ...], points: int,
                levels: dict[int, NDArray]) -> tuple[NDArray, ...]:
    """Grid values per feature, increasing; a categorical feature's default grid is all its categories."""
    parts = [None] * len(features) if grid is None else [grid] if len(features) == 1 else list(grid)
    if len(parts) != len(features):
        raise ValueError(f"`grid` must hold one array per feature ({len(features)}); got {len(parts)}")
    out = []
    for f, part in zip(features, parts):
        if part is None:
            out.append(levels[f].astype(np.float64) if f in levels else _default_grid(X[:, f], points))
            continue
        try:
            g = np.atleast_1d(np.asarray(part, dtype=np.float64))
        except (TypeError, ValueError):
            raise TypeError(f"`grid` values must be numbers; got {type(part).__name__}") from None
        if g.ndim != 1 or g.size == 0 or not np.all(np.isfinite(g)):
            raise ValueError("`grid` values must be a non-empty 1-D array of finite numbers per feature")
        out.append(np.unique(g))
    return tuple(out)


def _category_codes(values: NDArray, categories: NDArray, feature: int) -> NDArray[np.float64]:
    """Training codes of categorical grid values; every value must be a category seen in training."""
    pos = np.minimum(np.searchsorted(categories, values), categories.size - 1)
    unseen = categories[pos] != values
    if unseen.any():
        raise ValueError(f"`grid` value(s) {values[unseen].tolist()[:5]} are not categories of feature {feature} "
                         f"seen in training; known: {categories.tolist()[:10]}")
    return pos.astype(np.float64)


def _default_grid(x: NDArray, points: int) -> NDArray[np.float64]:
    """The distinct values when there are at most ``points``; else ``points`` evenly spaced quantiles.

    Missing values (NaN) are left out.
    """
    x = x[~np.isnan(x)]
    if x.size == 0:
        raise ValueError("the feature is missing (NaN) in every case; pass `grid` explicitly")
    distinct = np.unique(x)
    if distinct.size <= points:
        return distinct
    return np.unique(np.quantile(x, np.linspace(0.0, 1.0, points)))


def _check_label(forest: FittedForest, label: Any) -> int | None:
    if forest.task == "regression":
        if label is not None:
            raise ValueError("`label` is for classification forests; this forest does regression")
        return None
    classes = forest.classes
    if label is None:
        if classes.size != 2:
            raise ValueError(f"`label` must name the class whose vote share to show; one of {classes.tolist()}")
        return 1
    hits = np.flatnonzero(classes == label)
    if hits.size == 0:
        raise ValueError(f"`label` must be one of {classes.tolist()}; got {label!r}")
    return int(hits[0])


def _per_case(forest: FittedForest, X: NDArray, features: tuple[int, ...], settings: NDArray,
              code: int | None) -> NDArray:
    """Prediction for every (grid setting, case): shape (settings, n), a block of settings at a time."""
    n, p = X.shape
    cols = list(features)
    out = np.empty((settings.shape[0], n))
    step = max(1, ROW_BUDGET // (n * p))
    for start in range(0, settings.shape[0], step):
        chunk = settings[start:start + step]
        stacked = np.tile(X, (chunk.shape[0], 1))
        stacked[:, cols] = np.repeat(chunk, n, axis=0)
        out[start:start + chunk.shape[0]] = mean_prediction(forest, stacked, code).reshape(chunk.shape[0], n)
    return out
