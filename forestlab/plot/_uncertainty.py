"""Pictures of how sure the forest is: prediction intervals, and observed against nominal coverage."""

from __future__ import annotations

from collections.abc import Sequence
from typing import Any

import numpy as np
from numpy.typing import ArrayLike

from ..analyses.uncertainty.intervals import PredictionIntervals
from ..analyses.uncertainty.sets import PredictionSets
from ._style import ALERT, INK, MUTED, PALETTE, axes, style, vector

__all__ = ["coverage", "intervals"]


def intervals(result: PredictionIntervals, along: ArrayLike | None = None, *, observed: ArrayLike | None = None,
              name: str | None = None, ax: Any = None) -> Any:
    """Prediction intervals along one feature (a band) or against the prediction (one bar per row).

    Parameters
    ----------
    result : PredictionIntervals
        From :meth:`Forest.intervals`.
    along : array_like, shape (rows,), optional
        The values of one feature at the rows: the intervals are drawn as a band along it, with the
        prediction as a line. Without it, every row's interval is a vertical bar at its prediction.
    observed : array_like, shape (rows,), optional
        The observed values: points, those outside their interval in the alert colour.
    name : str, optional
        Axis label of ``along`` (default "feature").
    ax : matplotlib Axes, optional

    Returns
    -------
    matplotlib.axes.Axes
    """
    if not isinstance(result, PredictionIntervals):
        raise TypeError(f"`result` must be PredictionIntervals from Forest.intervals; got {type(result).__name__}")
    rows = len(result)
    x = result.prediction if along is None else vector(along, "along")
    if x.size != rows:
        raise ValueError(f"`along` must hold one value per row ({rows}); got {x.size}")
    ax = axes(ax)
    order = np.argsort(x, kind="stable")
    lower, upper = result.lower[order], result.upper[order]
    label = f"{result.level:.0%} interval ({result.method})"
    if along is None:
        ax.vlines(x[order], lower, upper, color=PALETTE[0], alpha=0.45, linewidth=1.0, label=label)
        low, high = np.nanmin(x), np.nanmax(x)
        ax.plot([low, high], [low, high], color=MUTED, linewidth=1.0, linestyle="--", label="prediction")
    else:
        ax.fill_between(x[order], lower, upper, color=PALETTE[0], alpha=0.25, linewidth=0, label=label)
        ax.plot(x[order], result.prediction[order], color=INK, linewidth=1.8, label="prediction")
    if observed is not None:
        y = vector(observed, "observed")
        if y.size != rows:
            raise ValueError(f"`observed` must hold one value per row ({rows}); got {y.size}")
        inside = result.covers(y)
        ax.plot(x[inside], y[inside], linestyle="none", marker="o", markersize=2.5, color=INK, alpha=0.6,
                label=f"observed, inside ({inside.mean():.0%})")
        ax.plot(x[~inside], y[~inside], linestyle="none", marker="o", markersize=3.5, color=ALERT,
                label="observed, outside")
    ax.legend(frameon=False, fontsize=9)
    xlabel = "prediction" if along is None else (name or "feature")
    style(ax, f"Prediction intervals along {xlabel}", xlabel, "target")
    return ax


def coverage(results: Sequence[PredictionIntervals | PredictionSets], observed: ArrayLike, *,
             ax: Any = None) -> Any:
    """Observed against nominal coverage over several levels, with a 95% binomial band around the diagonal.

    Parameters
    ----------
    results : sequence of PredictionIntervals or PredictionSets
        The same rows at several levels, e.g. ``[forest.intervals(X, level) for level in (0.5, 0.8, 0.9)]``.
    observed : array_like, shape (rows,)
        The observed targets or labels of the rows (cases not used in fitting).
    ax : matplotlib Axes, optional

    Returns
    -------
    matplotlib.axes.Axes
    """
    results = list(results)
    if not results or not all(isinstance(r, (PredictionIntervals, PredictionSets)) for r in results):
        raise TypeError("`results` must be a non-empty sequence of PredictionIntervals or PredictionSets")
    nominal = np.array([r.level for r in results])
    seen = np.array([r.covers(observed).mean() for r in results])
    rows = len(results[0])
    order = np.argsort(nominal)
    ax = axes(ax, (4.8, 4.4))
    grid = np.linspace(min(0.0, nominal.min()), 1.0, 101)
    half = 1.96 * np.sqrt(grid * (1 - grid) / max(rows, 1))
    ax.fill_between(grid, grid - half, grid + half, color=MUTED, alpha=0.25, linewidth=0,
                    label=f"95% binomial band ({rows} cases)")
    ax.plot(grid, grid, color=MUTED, linewidth=1.0, linestyle="--")
    ax.plot(nominal[order], seen[order], color=PALETTE[0], marker="o", linewidth=1.6, label="observed")
    ax.set_xlim(grid[0], 1.0)
    ax.set_ylim(grid[0], 1.0)
    ax.legend(frameon=False, fontsize=9, loc="upper left")
    style(ax, "Coverage check", "nominal coverage", "observed coverage", grid_axis="both")
    return ax
