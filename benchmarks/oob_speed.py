"""Time `forest.oob` against the fit it analyses: twonorm, n = 10 000, p = 50 (run from the repo root).

    PYTHONPATH=. python3 benchmarks/oob_speed.py [trees]
"""

from __future__ import annotations

import sys
import time

import forestlab as fl
from forestlab.synthetic import twonorm


def main(trees: int = 500) -> None:
    X, y = twonorm(10_000, dims=50, rng=1)
    start = time.perf_counter()
    forest = fl.Forest(trees=trees, rng=1).fit(X, y)
    fit = time.perf_counter() - start
    start = time.perf_counter()
    oob = forest.oob
    analysis = time.perf_counter() - start
    print(f"trees={trees} fit {fit:.1f} s, oob {analysis:.2f} s, ratio {analysis / fit:.3f}, "
          f"OOB error {oob.error:.4f}")


if __name__ == "__main__":
    main(int(sys.argv[1]) if len(sys.argv) > 1 else 500)
