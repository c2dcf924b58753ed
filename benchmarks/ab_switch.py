#!/usr/bin/env python3
"""Paired in-process A/B of one engine switch (a module constant), as DEVELOPERS.md describes: fits of the
same data alternate between the two settings in one process (pin it with ``taskset -c 0``), and the median of
the paired ratios of neighbouring fits is reported; the trees of both settings are compared bit for bit.

    taskset -c 0 python3 benchmarks/ab_switch.py presort.ORDER_TABLE_BYTES 1048576 67108864 --row friedman1

``--row`` picks a fit row of ``benchmarks/run.py`` by a word of its label; ``--trees`` trees a fit (default:
6, 60 at n = 1 000), ``--rounds`` pairs (default 7). Writes JSON to ``benchmarks/out/ab-<stamp>.json``.
"""

from __future__ import annotations

import argparse
import ast
import datetime as dt
import importlib
import json
import os
import statistics
import sys
import time
from pathlib import Path

import numpy as np

REPO = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(REPO))
sys.path.insert(0, str(REPO / "benchmarks"))

import forestlab as fl  # noqa: E402
from run import PLANS, forestlab_target, make_data  # noqa: E402


def _fit(data, y, row, trees):
    _, _, _, _, m, _, min_leaf = row
    t0, c0 = time.perf_counter(), time.process_time()
    forest = fl.Forest(trees=trees, sampler=m, min_leaf=min_leaf, task=data["task"], rng=1).fit(data["X"], y)
    return (time.perf_counter() - t0, time.process_time() - c0), forest


def _same_trees(a, b) -> bool:
    for i in range(a.trees):
        ta, tb = a.tree(i), b.tree(i)
        for name in ("feature", "threshold", "value"):
            if not np.array_equal(getattr(ta, name), getattr(tb, name), equal_nan=True):
                return False
    return True


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__, formatter_class=argparse.RawDescriptionHelpFormatter)
    ap.add_argument("switch", help="module.CONSTANT under forestlab.engine")
    ap.add_argument("a", help="setting A (a Python literal)")
    ap.add_argument("b", help="setting B")
    ap.add_argument("--row", default="friedman1")
    ap.add_argument("--trees", type=int, default=0)
    ap.add_argument("--rounds", type=int, default=7)
    args = ap.parse_args()
    module_name, const = args.switch.rsplit(".", 1)
    module = importlib.import_module(f"forestlab.engine.{module_name}")
    settings = [ast.literal_eval(args.a), ast.literal_eval(args.b)]
    row = next(r for r in PLANS["full"]["fits"] if args.row in r[0])
    trees = args.trees or (60 if row[2] <= 1_000 else 6)
    data = make_data(row[1], row[2], row[3])
    y = forestlab_target(data)
    _fit({"X": data["X"][:500], "task": data["task"]}, y[:500], row, 1)
    times: list[list[float]] = [[], []]
    cpu: list[list[float]] = [[], []]
    forests = [None, None]
    for r in range(args.rounds):
        for k in (0, 1) if r % 2 == 0 else (1, 0):
            setattr(module, const, settings[k])
            (seconds, cpu_seconds), forests[k] = _fit(data, y, row, trees)
            times[k].append(seconds)
            cpu[k].append(cpu_seconds)
    ratios = [b / a for a, b in zip(*times)]
    cpu_ratios = [b / a for a, b in zip(*cpu)]
    result = {"switch": args.switch, "a": args.a, "b": args.b, "row": row[0], "trees": trees,
              "seconds_a": times[0], "seconds_b": times[1], "cpu_a": cpu[0], "cpu_b": cpu[1],
              "median_ratio_b_over_a": statistics.median(ratios), "ratios": ratios,
              "median_cpu_ratio_b_over_a": statistics.median(cpu_ratios), "cpu_ratios": cpu_ratios,
              "same_trees": _same_trees(*forests), "load_average": os.getloadavg()}
    print(f"{row[0]}, {trees} trees: A={args.a} median {statistics.median(times[0]):.3f} s, B={args.b} median "
          f"{statistics.median(times[1]):.3f} s; paired B/A median {result['median_ratio_b_over_a']:.3f} "
          f"(range {min(ratios):.3f}-{max(ratios):.3f}), CPU time {result['median_cpu_ratio_b_over_a']:.3f} "
          f"({min(cpu_ratios):.3f}-{max(cpu_ratios):.3f}); same trees: {result['same_trees']}; load "
          f"{', '.join(f'{x:.2f}' for x in result['load_average'])}")
    out = REPO / "benchmarks" / "out"
    out.mkdir(parents=True, exist_ok=True)
    stamp = dt.datetime.now().strftime("%Y%m%d-%H%M%S")
    (out / f"ab-{stamp}.json").write_text(json.dumps(result, indent=1))


if __name__ == "__main__":
    main()
