"""Why does the forest send a coating batch to rework?

The same (fictional) coatings plant as ``batch_inspection.py``: seven process measurements and the pigment
supplier per batch, and a lab grade, "pass" or "rework". Once the forest flags batches well, the process
engineers ask which measurements drive the grade, how the rework risk moves with oven temperature and
humidity, and which past batches look unlike the others of their grade (grading mistakes, or a process state
worth a closer look).

All data are invented by the seeded generator of ``batch_inspection.py``; run
``python examples/batch_insight.py`` (needs ``pip install 'forestlab[plot,frames]'``). The pictures go to
``examples/out/``.
"""

from __future__ import annotations

from pathlib import Path

import matplotlib

matplotlib.use("Agg")

import matplotlib.pyplot as plt  # noqa: E402
import numpy as np  # noqa: E402
from batch_inspection import make_batches  # noqa: E402

import forestlab as fl  # noqa: E402
import forestlab.plot as flp  # noqa: E402

OUT = Path(__file__).resolve().parent / "out"


def save(ax: plt.Axes, name: str) -> None:
    """Write the Axes' figure as a PNG into examples/out/ and close it."""
    path = OUT / name
    ax.figure.savefig(path, dpi=100)
    plt.close(ax.figure)
    print(f"  wrote {path.relative_to(OUT.parent.parent)}")


def main() -> None:
    OUT.mkdir(exist_ok=True)
    X, grade, _ = make_batches(1500, np.random.default_rng(2026))
    forest = fl.Forest(trees=300, rng=11).fit(X, grade)
    print(f"forest: {forest.trees} trees on {X.shape[0]} batches x {X.shape[1]} measurements\n")

    ranked = forest.importance(rng=5)
    print(ranked, "\n")
    print(forest.importance("impurity"), "\n")
    together = forest.importance(groups={"line (speed + film)": [1, 4], "oven_temp_C": [0]}, rng=5)
    print(together, "\n")

    oven = forest.partial_dependence(0, ice=True, label="rework")
    low = oven.grid[0][np.argmin(oven.average)]
    print(f"rework vote share is lowest ({oven.average.min():.0%}) at an oven temperature of {low:.1f} C "
          f"and rises to {oven.average[0]:.0%} / {oven.average[-1]:.0%} at the ends of the grid")
    surface = forest.partial_dependence((2, 4), label="rework", points=12, X=X.iloc[::6])  # every 6th batch: quicker

    score = forest.outlyingness()
    odd = np.argsort(-score)[:6]
    share = forest.votes(X)[:, 1]
    print("\nbatches least like the others of their grade (outlyingness, standardised within grade):")
    for i in odd:
        print(f"  batch {i:4d}: graded {str(grade[i])!r:9} score {score[i]:6.1f}; "
              f"{share[i]:.0%} of all trees vote rework")
    layout = forest.proximity_map()

    print("\npictures:")
    save(flp.importance(ranked), "importance.png")
    save(flp.partial_dependence(oven, name="oven temperature (C)"), "dependence_oven.png")
    save(flp.partial_dependence(surface, name=("humidity (%)", "film thickness (um)")), "dependence_surface.png")
    save(flp.proximity_map(layout, grade, outliers=odd), "proximity_map.png")
    save(flp.error_curve(forest.oob.error_curve), "error_curve.png")
    save(flp.margins(forest.oob.margins, forest.oob.doubtful()), "margins.png")


if __name__ == "__main__":
    main()
