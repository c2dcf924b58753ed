"""What starting and reusing ``workers=2`` costs: the first parallel fit of a process, then later ones.

Prints one JSON line: the ``forestlab`` imported, the seconds of the first ``workers=2`` fit of the process
(twonorm n = 300, p = 5, 8 trees, after one single-process fit) and the median of ten more. Compare two
versions by alternating fresh processes, e.g.::

    for i in 1 2 3 4; do PYTHONPATH=../old python benchmarks/worker_start.py; python benchmarks/worker_start.py; done
"""

from __future__ import annotations

import json
import statistics
import time

import forestlab as fl
from forestlab.synthetic import twonorm


def _seconds(fit) -> float:
    start = time.perf_counter()
    fit()
    return time.perf_counter() - start


def main() -> None:
    X, y = twonorm(300, dims=5, rng=1)
    fl.Forest(trees=8, rng=1).fit(X, y)
    fit = lambda: fl.Forest(trees=8, workers=2, rng=1).fit(X, y)  # noqa: E731
    first = _seconds(fit)
    again = statistics.median(_seconds(fit) for _ in range(10))
    print(json.dumps({"forestlab": fl.__file__, "first_s": round(first, 4), "later_median_s": round(again, 4)}))


if __name__ == "__main__":
    main()
