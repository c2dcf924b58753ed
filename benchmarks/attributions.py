#!/usr/bin/env python3
"""Speed and memory of `forest.attributions` and `forest.interaction` against the fit of the same forest.

    python3 benchmarks/attributions.py               # 5 runs of every row (several minutes)
    python3 benchmarks/attributions.py --repeats 3 --quick

What is measured (issue 20), every run in a fresh process of its own, the workloads alternating:

* ``attributions``: n = 10 000 training cases, p = 10, 100 fully grown trees (default settings: regression
  Friedman #1 with min_leaf 5; two-class twonorm with min_leaf 1, pure leaves): the wall time of
  ``forest.attributions(X[:1000])`` as a multiple of the wall time of the ``fit`` just before it in the same
  process (``--pairs`` fit / attributions pairs a process, each fit with a seed of its own; the ratio of
  every pair is kept, so a burst of load on the shared machine spoils one pair, not the table), and the
  peak resident memory the call adds (``VmHWM`` reset just before it, less the resident set before it),
  beside the bytes of the result. The same ratio of process CPU times is shown beside it: on a machine shared
  with other jobs it leaves out the time the process waited for a core.
* ``interaction``: ``forest.interaction(cases=500)`` (all 45 pairs of the 10 features and every feature
  against the rest) on the Friedman #1 forest: the wall time, and as a multiple of the fit time.

Prints one table of medians (with the range of the runs) and writes every run as JSON to ``benchmarks/out/``.
"""

from __future__ import annotations

import argparse
import datetime as dt
import json
import os
import platform
import statistics
import subprocess
import sys
import time
from pathlib import Path

REPO = Path(__file__).resolve().parents[1]
OUT = REPO / "benchmarks" / "out"
WORKLOADS = ("friedman1", "twonorm")


def _memory(field: str) -> int:
    with open("/proc/self/status") as status:
        for line in status:
            if line.startswith(field + ":"):
                return int(line.split()[1]) * 1024
    return 0


def _reset_peak() -> None:
    with open("/proc/self/clear_refs", "w") as refs:
        refs.write("5")


def one_run(workload: str, n: int, rows: int, cases: int, pairs: int) -> dict:
    """``pairs`` times: fit, then explain ``rows`` rows, timed; then the interaction on ``cases`` cases
    (Friedman #1 only) after the last fit."""
    sys.path.insert(0, str(REPO))
    import numpy as np

    import forestlab as fl
    from forestlab.synthetic import friedman1, twonorm

    X, y = friedman1(n, rng=0) if workload == "friedman1" else twonorm(n, dims=10, rng=0)
    fl.Forest(trees=1, rng=0).fit(X[:500], y[:500]).attributions(X[:10])      # load the code paths
    fits, explains, peaks, cpu_fits, cpu_explains = [], [], [], [], []
    for pair in range(pairs):
        result = None                               # the previous pair's result is freed before the next
        start, cpu = time.perf_counter(), time.process_time()
        forest = fl.Forest(trees=100, rng=1 + pair).fit(X, y)
        fits.append(time.perf_counter() - start)
        cpu_fits.append(time.process_time() - cpu)
        before = _memory("VmRSS")
        _reset_peak()
        start, cpu = time.perf_counter(), time.process_time()
        result = forest.attributions(X[:rows])
        explains.append(time.perf_counter() - start)
        cpu_explains.append(time.process_time() - cpu)
        peaks.append(_memory("VmHWM") - before)
    trees = forest._view.trees
    record = {"workload": workload, "fit_s": fits, "attributions_s": explains,
              "ratio": [e / f for e, f in zip(explains, fits)], "peak_added_bytes": peaks,
              "cpu_ratio": [e / f for e, f in zip(cpu_explains, cpu_fits)],
              "result_bytes": int(result.values.nbytes + result.baseline.nbytes),
              "nodes_mean": float(np.mean([t.nodes for t in trees])),
              "depth_mean": float(np.mean([int(t.depth.max()) for t in trees])),
              "max_error_additivity": float(np.max(np.abs(result.predictions - (
                  forest.predict(X[:rows]) if workload == "friedman1" else forest.votes(X[:rows])))))}
    if workload == "friedman1" and cases:
        start = time.perf_counter()
        forest.interaction(cases=cases, rng=2)
        record["interaction_s"] = [time.perf_counter() - start]
        record["interaction_ratio"] = [record["interaction_s"][0] / fits[-1]]
    return record


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    parser.add_argument("--repeats", type=int, default=3, help="fresh processes per workload")
    parser.add_argument("--pairs", type=int, default=3, help="fit / attributions pairs per process")
    parser.add_argument("--quick", action="store_true", help="n = 2 000, 200 rows, 100 cases")
    parser.add_argument("--one", nargs=5, metavar=("WORKLOAD", "N", "ROWS", "CASES", "PAIRS"),
                        help=argparse.SUPPRESS)
    args = parser.parse_args()
    if args.one:
        print(json.dumps(one_run(args.one[0], *(int(a) for a in args.one[1:]))))
        return
    n, rows, cases = (2_000, 200, 100) if args.quick else (10_000, 1_000, 500)
    runs = []
    for repeat in range(args.repeats):
        for workload in WORKLOADS:
            command = [sys.executable, __file__, "--one", workload, str(n), str(rows), str(cases), str(args.pairs)]
            done = subprocess.run(command, capture_output=True, text=True, check=True, cwd=REPO)
            runs.append(json.loads(done.stdout))
            print(f"  run {repeat + 1} {workload}: ratios {[round(r, 2) for r in runs[-1]['ratio']]}",
                  file=sys.stderr)
    table = []
    for workload in WORKLOADS:
        mine = [r for r in runs if r["workload"] == workload]
        row = {"workload": workload}
        for key in ("fit_s", "attributions_s", "ratio", "cpu_ratio", "peak_added_bytes", "interaction_s",
                    "interaction_ratio"):
            values = [v for r in mine if key in r for v in r[key]]
            if values:
                row[key] = (statistics.median(values), min(values), max(values))
        row["nodes_mean"], row["depth_mean"] = mine[0]["nodes_mean"], mine[0]["depth_mean"]
        row["result_bytes"] = mine[0]["result_bytes"]
        table.append(row)
    print(f"\nattributions of {rows} rows, 100 trees, n = {n}, p = 10; medians of {args.repeats} processes x "
          f"{args.pairs} pairs (range)")
    print(f"{'forest':<34} {'fit s':>7} {'attr s':>8} {'x fit (wall)':>16} {'x fit (cpu)':>16} {'peak added MB':>14}")
    for row in table:
        name = f"{row['workload']} ({row['nodes_mean']:.0f} nodes, depth {row['depth_mean']:.0f})"
        ratio, cpu = row["ratio"], row["cpu_ratio"]
        print(f"{name:<34} {row['fit_s'][0]:>7.2f} {row['attributions_s'][0]:>8.2f} "
              f"{ratio[0]:>6.2f} ({ratio[1]:.1f}-{ratio[2]:.1f}) {cpu[0]:>6.2f} ({cpu[1]:.1f}-{cpu[2]:.1f}) "
              f"{row['peak_added_bytes'][0] / 1e6:>14.0f}")
        if "interaction_s" in row:
            h = row["interaction_s"]
            print(f"{'  interaction, 10 features':<34} {'':>7} {h[0]:>8.2f} {row['interaction_ratio'][0]:>6.2f} "
                  f"({h[1]:.1f}-{h[2]:.1f} s), {cases} cases")
    OUT.mkdir(exist_ok=True)
    stamp = dt.datetime.now().strftime("%Y%m%d-%H%M%S")
    path = OUT / f"attributions-{stamp}.json"
    path.write_text(json.dumps({"date": stamp, "machine": platform.processor() or platform.machine(),
                                "load_before": os.getloadavg(), "n": n, "rows": rows, "cases": cases,
                                "runs": runs, "table": table}, indent=1))
    print(f"wrote {path.relative_to(REPO)}; load average now {os.getloadavg()[0]:.1f}")


if __name__ == "__main__":
    main()
