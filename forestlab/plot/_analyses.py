"""Pictures of the analyses of a fitted forest: error curve, margins, importance, dependence, proximity map."""

from __future__ import annotations

from typing import Any

import numpy as np
from numpy.typing import ArrayLike

from ..analyses.dependence import Dependence
from ..analyses.importance import Importance
from ..analyses.proximity import ProximityMap
from ._style import ALERT, INK, MUTED, PALETTE, axes, style, vector

__all__ = ["error_curve", "importance", "margins", "partial_dependence", "proximity_map"]


def error_curve(curve: ArrayLike, by_class: ArrayLike | None = None, *, classes: Any = None,
                ax: Any = None) -> Any:
    """OOB error against the number of trees (e.g. ``forest.oob.error_curve``), optionally per class.

    Parameters
    ----------
    curve : array_like, shape (trees,)
        Error using trees 0..b, for every b.
    by_class : array_like, shape (trees, K), optional
        Per-class error curves, drawn thinner in the class colours.
    classes : sequence of K labels, optional
        Legend labels of the ``by_class`` columns (default: column numbers).
    ax : matplotlib Axes, optional

    Returns
    -------
    matplotlib.axes.Axes
    """
    total = vector(curve, "curve")
    ax = axes(ax)
    trees = np.arange(1, total.size + 1)
    if by_class is not None:
        per = np.asarray(by_class, dtype=np.float64)
        if per.ndim != 2 or per.shape[0] != total.size:
            raise ValueError(f"`by_class` must have shape (trees, K) = ({total.size}, K); got {per.shape}")
        names = list(classes) if classes is not None else list(range(per.shape[1]))
        if len(names) != per.shape[1]:
            raise ValueError(f"`classes` must name all {per.shape[1]} columns of `by_class`; got {len(names)}")
        for k in range(per.shape[1]):
            ax.plot(trees, per[:, k], color=PALETTE[k % len(PALETTE)], linewidth=1.1, label=f"class {names[k]}")
    ax.plot(trees, total, color=INK, linewidth=2.0, label="all cases")
    ax.set_xlim(1, max(2, total.size))
    ax.set_ylim(bottom=0)
    if by_class is not None:
        ax.legend(frameon=False, fontsize=9)
    style(ax, "Out-of-bag error as trees are added", "trees", "OOB error")
    return ax


def margins(margins: ArrayLike, doubtful: ArrayLike | None = None, *, threshold: float = 0.0, bins: int = 30,
            ax: Any = None) -> Any:
    """Histogram of OOB margins (e.g. ``forest.oob.margins``) with the doubtful cases marked below it.

    Parameters
    ----------
    margins : array_like, shape (n,)
        Margin of every case, in [-1, 1]; NaN (never out-of-bag) is left out.
    doubtful : array_like of int or DoubtfulCases, optional
        The doubtful cases: their indices, or ``forest.oob.doubtful()`` itself; default: margins below
        ``threshold``.
    threshold : float, default 0
        Drawn as a vertical line.
    bins : int, default 30
    ax : matplotlib Axes, optional

    Returns
    -------
    matplotlib.axes.Axes
    """
    values = vector(margins, "margins")
    if doubtful is None:
        marked = np.flatnonzero(values < threshold)
    else:
        marked = np.asarray(getattr(doubtful, "case", doubtful)).reshape(-1)
        if marked.size and (marked.dtype.kind not in "iu" or marked.min() < -values.size
                            or marked.max() >= values.size):
            raise ValueError(f"`doubtful` must hold int case indices below {values.size}")
    if isinstance(bins, (bool, np.bool_)) or not isinstance(bins, (int, np.integer)) or bins < 1:
        raise ValueError(f"`bins` must be a positive int; got {bins!r}")
    ax = axes(ax)
    shown = values[np.isfinite(values)]
    edges = np.linspace(-1.0, 1.0, bins + 1)
    ax.hist(shown, bins=edges, color=PALETTE[0], edgecolor="white", linewidth=0.6)
    ax.axvline(threshold, color=MUTED, linewidth=1.0, linestyle="--")
    ax.plot(values[marked], np.zeros(marked.size), linestyle="none", marker="|", markersize=14,
            markeredgewidth=1.6, color=ALERT, label=f"doubtful ({marked.size})", clip_on=False)
    ax.set_xlim(-1.02, 1.02)
    ax.legend(frameon=False, fontsize=9, loc="upper left")
    style(ax, "Out-of-bag margins", "margin (true-class share minus best other share)", "cases")
    return ax


def importance(result: Importance, *, top: int | None = None, ax: Any = None) -> Any:
    """Horizontal importance bars, most important on top, with whiskers of plus/minus one spread.

    Parameters
    ----------
    result : Importance
        From :meth:`Forest.importance`.
    top : int, optional
        Show only the ``top`` most important entries.
    ax : matplotlib Axes, optional

    Returns
    -------
    matplotlib.axes.Axes
    """
    if not isinstance(result, Importance):
        raise TypeError(f"`result` must be an Importance from Forest.importance; got {type(result).__name__}")
    order = result.ranking
    if top is not None:
        if isinstance(top, (bool, np.bool_)) or not isinstance(top, (int, np.integer)) or top < 1:
            raise ValueError(f"`top` must be a positive int; got {top!r}")
        order = order[:top]
    order = order[::-1]
    ax = axes(ax, (6.4, max(2.4, 0.32 * order.size + 1.2)))
    spans = np.nan_to_num(result.spread[order])
    ax.barh(np.arange(order.size), result.scores[order], height=0.62, color=PALETTE[0],
            xerr=spans, error_kw={"ecolor": MUTED, "elinewidth": 1.0, "capsize": 0})
    ax.set_yticks(np.arange(order.size), [result.names[k] for k in order])
    ax.axvline(0.0, color=MUTED, linewidth=0.8)
    label = "rise in OOB error when shuffled" if result.kind == "permutation" else "share of impurity decrease"
    style(ax, f"{result.kind.capitalize()} importance", f"{label}  (whisker: ±1 spread over trees)", "",
           grid_axis="x")
    return ax


def partial_dependence(result: Dependence, *, name: str | Any = None, ice: bool = True, curves: int = 40,
                       ax: Any = None) -> Any:
    """Partial dependence curve, over thin ICE curves when present; a filled surface for two features.

    Parameters
    ----------
    result : Dependence
        From :meth:`Forest.partial_dependence`.
    name : str or pair of str, optional
        Feature name(s) for the axis labels (default ``x<column>``).
    ice : bool, default True
        Draw the ICE curves when ``result`` has them.
    curves : int, default 40
        At most this many ICE curves, evenly spread over the cases (deterministic).
    ax : matplotlib Axes, optional

    Returns
    -------
    matplotlib.axes.Axes
    """
    if not isinstance(result, Dependence):
        raise TypeError(f"`result` must be a Dependence from Forest.partial_dependence; got {type(result).__name__}")
    names = _names(name, result.features)
    quantity = "prediction" if result.label is None else f"share of votes for {result.label!r}"
    ax = axes(ax)
    if len(result.features) == 2:
        return _surface(result, names, quantity, ax)
    grid = result.grid[0]
    if ice and result.ice is not None:
        rows = np.unique(np.linspace(0, result.ice.shape[0] - 1, min(curves, result.ice.shape[0])).astype(int))
        for row in rows:
            ax.plot(grid, result.ice[row], color=PALETTE[0], alpha=0.22, linewidth=0.7)
    ax.plot(grid, result.average, color=INK, linewidth=2.4, label="partial dependence")
    style(ax, f"Partial dependence on {names[0]}", names[0], quantity)
    return ax


def _names(name: Any, features: tuple[int, ...]) -> list[str]:
    if name is None:
        return [f"x{f}" for f in features]
    names = [name] if isinstance(name, str) else list(name)
    if len(names) != len(features):
        raise ValueError(f"`name` must give {len(features)} name(s); got {len(names)}")
    return [str(v) for v in names]


def _surface(result: Dependence, names: list[str], quantity: str, ax: Any) -> Any:
    g1, g2 = result.grid
    if g1.size < 2 or g2.size < 2:
        raise ValueError("a two-feature surface needs at least 2 grid values per feature")
    filled = ax.contourf(g1, g2, result.average.T, levels=12, cmap="cividis")
    ax.figure.colorbar(filled, ax=ax, label=quantity, shrink=0.9)
    style(ax, f"Partial dependence on {names[0]} and {names[1]}", names[0], names[1], grid_axis=None)
    return ax


def proximity_map(result: ProximityMap | ArrayLike, labels: ArrayLike | None = None, *,
                  outliers: ArrayLike | None = None, ax: Any = None) -> Any:
    """The cases on the first two map coordinates, coloured by class, with outliers ringed and numbered.

    Parameters
    ----------
    result : ProximityMap or array_like of shape (n, >= 2)
        From :meth:`Forest.proximity_map`, or coordinates.
    labels : array_like, shape (n,), optional
        Class of every case (one colour each).
    outliers : array_like of int, optional
        Case indices to ring, e.g. ``np.argsort(-forest.outlyingness())[:5]``.
    ax : matplotlib Axes, optional

    Returns
    -------
    matplotlib.axes.Axes
    """
    coords = result.coordinates if isinstance(result, ProximityMap) else np.asarray(result, dtype=np.float64)
    if coords.ndim != 2 or coords.shape[1] < 2:
        raise ValueError(f"`result` must be a ProximityMap or (n, 2+) coordinates; got shape {coords.shape}")
    n = coords.shape[0]
    groups = np.zeros(n, dtype=int) if labels is None else np.asarray(labels)
    if groups.shape != (n,):
        raise ValueError(f"`labels` must have one entry per case ({n}); got shape {groups.shape}")
    ax = axes(ax, (5.6, 4.8))
    for k, label in enumerate(np.unique(groups)):
        mine = groups == label
        ax.scatter(coords[mine, 0], coords[mine, 1], s=14, color=PALETTE[k % len(PALETTE)], alpha=0.8,
                   linewidths=0, label=None if labels is None else str(label))
    if outliers is not None:
        ring = np.asarray(outliers).reshape(-1)
        if ring.size and (ring.dtype.kind not in "iu" or ring.min() < -n or ring.max() >= n):
            raise ValueError(f"`outliers` must hold int case indices below {n}")
        ax.scatter(coords[ring, 0], coords[ring, 1], s=80, facecolors="none", edgecolors=ALERT, linewidths=1.4,
                   label="outliers")
        for i in ring:
            ax.annotate(str(int(i)), coords[i, :2], xytext=(5, 4), textcoords="offset points", fontsize=8,
                        color=ALERT)
    if labels is not None or outliers is not None:
        ax.legend(frameon=False, fontsize=9, markerscale=1.2)
    style(ax, "Proximity map", "coordinate 1", "coordinate 2", grid_axis="both")
    return ax
