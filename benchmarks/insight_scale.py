"""Time and peak memory of the proximity analyses at n = 10 000 (figures go in benchmarks/RESULTS.md).

Run from the repository root: ``PYTHONPATH=. python3 benchmarks/insight_scale.py``. One process, one core.
"""

from __future__ import annotations

import resource
import time

import forestlab as fl
from forestlab.synthetic import twonorm


def peak_mb() -> float:
    """Peak resident memory of this process so far, in MB (Linux reports KB)."""
    return resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024


def main() -> None:
    X, y = twonorm(10_000, dims=5, rng=1)
    forest = fl.Forest(trees=100, rng=2).fit(X, y)
    print(f"n = {X.shape[0]}, trees = {forest.trees}; peak after fit {peak_mb():.0f} MB")
    for name, call in [("outlyingness()", forest.outlyingness),
                       ("proximity(oob=False)", lambda: forest.proximity(False)),
                       ("proximity_map(oob=False)", lambda: forest.proximity_map(oob=False))]:
        start = time.perf_counter()
        call()
        print(f"{name:26s} {time.perf_counter() - start:6.1f} s   peak so far {peak_mb():6.0f} MB")


if __name__ == "__main__":
    main()
