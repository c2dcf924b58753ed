"""The house style of forestlab's pictures, and what every picture function shares (its Axes, checks)."""

from __future__ import annotations

from typing import Any

import matplotlib
import matplotlib.axes
import numpy as np
from numpy.typing import ArrayLike

__all__ = ["ALERT", "INK", "MUTED", "PALETTE", "axes", "style", "vector"]

#: Colours of the house style: ink for the main quantity, then one colour per class or series.
INK = "#22313f"


MUTED = "#9aa5b1"


ALERT = "#c0392b"


PALETTE = ("#2a7f8e", "#d9892b", "#7b5ea7", "#5c9e48", "#c25576", "#8c6d46", "#3f6fb5", "#a3a3a3")


def axes(ax: Any, size: tuple[float, float] = (6.4, 4.0)) -> Any:
    """``ax``, or a fresh Axes on a new figure."""
    if ax is not None:
        if not isinstance(ax, matplotlib.axes.Axes):
            raise TypeError(f"`ax` must be a matplotlib Axes or None; got {type(ax).__name__}")
        return ax
    import matplotlib.pyplot as plt

    _, ax = plt.subplots(figsize=size, layout="constrained")
    return ax


def style(ax: Any, title: str, xlabel: str, ylabel: str, grid_axis: str | None = "y") -> None:
    """The house look: light grid behind the data, no box, quiet spines, title on the left."""
    ax.set_title(title, loc="left", fontsize=11, color=INK, fontweight="bold")
    ax.set_xlabel(xlabel, color=INK)
    ax.set_ylabel(ylabel, color=INK)
    if grid_axis is not None:
        ax.grid(axis=grid_axis, color="#e3e7eb", linewidth=0.8)
    ax.set_axisbelow(True)
    for side in ("top", "right"):
        ax.spines[side].set_visible(False)
    for side in ("left", "bottom"):
        ax.spines[side].set_color(MUTED)
    ax.tick_params(colors=INK, labelsize=9, length=3)


def vector(values: ArrayLike, name: str) -> np.ndarray:
    try:
        arr = np.asarray(values, dtype=np.float64)
    except (TypeError, ValueError):
        raise TypeError(f"`{name}` must be an array of numbers") from None
    if arr.ndim != 1 or arr.size == 0:
        raise ValueError(f"`{name}` must be a non-empty 1-D array; got shape {arr.shape}")
    return arr
