"""The report's pictures: forestlab.plot's drawings rendered to SVG bytes (needs the ``plot`` extra).

Figures are made without pyplot (no window, no global state), text stays text in the SVG (searchable, and
drawn with the reader's own fonts), and the output carries no date, so the same forest gives the same bytes.
"""

from __future__ import annotations

import io
from collections.abc import Callable
from typing import Any

__all__ = ["MSG_PLOT", "check_plotting", "svg"]

MSG_PLOT = "`report` draws its pictures with matplotlib; install it with: pip install 'forestlab[plot]'"


def check_plotting() -> Any:
    """The :mod:`forestlab.plot` module, or an ImportError naming the extra."""
    try:
        import matplotlib  # noqa: F401

        from .. import plot
    except ImportError:
        raise ImportError(MSG_PLOT) from None
    return plot


def svg(draw: Callable[[Any], Any], size: tuple[float, float] = (6.4, 3.6)) -> bytes:
    """The picture ``draw(ax)`` makes on a fresh Axes, as SVG bytes."""
    import matplotlib
    from matplotlib.figure import Figure

    with matplotlib.rc_context({"svg.fonttype": "none", "svg.hashsalt": "forestlab-report",
                                "font.family": "DejaVu Sans"}):
        figure = Figure(figsize=size, layout="constrained")
        draw(figure.add_subplot())
        out = io.BytesIO()
        figure.savefig(out, format="svg", metadata={"Date": None, "Creator": "forestlab"})
    return out.getvalue()
