"""Pictures are drawn off screen (Agg) and every figure a test opens is closed after it."""

from __future__ import annotations

import pytest

try:
    import matplotlib
except ImportError:  # pragma: no cover - the plot tests skip themselves without the extra
    matplotlib = None
else:
    matplotlib.use("Agg")


@pytest.fixture(autouse=True)
def _close_all_figures():
    yield
    if matplotlib is not None:
        import matplotlib.pyplot as plt

        plt.close("all")
