#!/usr/bin/env python3
"""The million-row rows of ``benchmarks/run.py`` (issue 17): fit time against the yardstick, working memory
of the fit, and the time and memory of ``forest.oob`` and ``forest.per_tree``.

    python3 benchmarks/run.py               # these rows among the others (the "million" plan entry)
    python3 benchmarks/million_rows.py      # these rows alone (full sizes; --quick for small ones)

What is measured
----------------
* ``fit``: as run.py's fit rows (fresh processes, yardstick and forestlab alternating, median), for twonorm
  and Friedman #1 (min_leaf 5, as run.py's other Friedman row) at n = 1 000 000, p = 10, m = 3, 10 trees.
* ``memory``: one fit in a fresh process, measured as run.py's memory row: the peak resident set (``VmHWM``,
  reset after the data are made) less the resident set before the fit, less what the fitted forest keeps
  (the presorted data but X, the node arrays, the in-bag counts), in multiples of the bytes of X. Then, in
  the same process, ``forest.oob`` (every attribute read) and ``forest.per_tree(X)``: their seconds and their
  peak above the resident set before each, less their result (the ``OutOfBag`` arrays; the (trees, n) table),
  also in multiples of the bytes of X.

The data are run.py's generators (those of the yardstick's ``drive.py``), seed 0.
"""

from __future__ import annotations

import argparse
import gc
import json
import statistics
import sys
import time
from dataclasses import fields
from pathlib import Path

import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parent))
import run as R  # noqa: E402  (the data generators, the yardstick and the child runner)

import forestlab as fl  # noqa: E402

PLAN = {  # (label, data, n, p, m, trees, min_leaf) per fit row; the memory rows' data, n, p, trees
    "full": {"fits": [("twonorm n=1 000 000 p=10 m=3, 10 trees", "twonorm", 1_000_000, 10, 3, 10, 1),
                      ("friedman1 n=1 000 000 p=10 m=3, 10 trees, min_leaf 5", "friedman1", 1_000_000, 10, 3,
                       10, 5)],
             "memory": [("twonorm", 1_000_000, 10, 10), ("friedman1", 1_000_000, 10, 10)]},
    "quick": {"fits": [("twonorm n=100 000 p=10 m=3, 3 trees", "twonorm", 100_000, 10, 3, 3, 1)],
              "memory": [("twonorm", 100_000, 10, 3)]},
}


def _reset_peak(trim: bool = True) -> int:
    """Give freed heap memory back to the system (glibc; not before the fit, as run.py's memory row), reset
    the peak resident set to the current one, and return the current resident set in bytes."""
    gc.collect()
    if trim:
        _trim_heap()
    with open("/proc/self/clear_refs", "w") as f:
        f.write("5")
    return R._status_kib("VmRSS") * 1024


def _trim_heap() -> None:
    """glibc's ``malloc_trim(0)``; elsewhere nothing (freed memory the allocator keeps then counts as before)."""
    try:
        import ctypes
        ctypes.CDLL("libc.so.6").malloc_trim(0)
    except (OSError, AttributeError):
        pass


def _peak() -> int:
    return R._status_kib("VmHWM") * 1024


def _arrays_bytes(obj) -> int:
    """Bytes of the NumPy arrays among a dataclass's fields."""
    return sum(getattr(obj, f.name).nbytes for f in fields(obj) if isinstance(getattr(obj, f.name), np.ndarray))


def memory_child(name: str, n: int, p: int, trees: int) -> dict:
    """In a fresh process: a fit, then ``forest.oob`` and ``forest.per_tree(X)``, each one's peak memory
    beyond what it keeps, and its seconds."""
    data = R.make_data(name, n, p)
    X, y, task = data["X"], R.forestlab_target(data), data["task"]
    del data
    gc.collect()
    min_leaf = 1 if task == "classification" else 5
    before = _reset_peak(trim=False)
    start = time.perf_counter()
    forest = fl.Forest(trees=trees, sampler=3, min_leaf=min_leaf, task=task, rng=1).fit(X, y)
    fit_s = time.perf_counter() - start
    peak = _peak()
    d = forest._data
    presort = sum(getattr(d, f.name).nbytes for f in fields(d)
                  if isinstance(getattr(d, f.name), np.ndarray) and f.name != "X")
    fitted = R.forest_bytes(forest)[0] + forest.inbag.nbytes
    out = {"data": name, "n": n, "p": p, "trees": trees, "x_bytes": X.nbytes, "fit_s": fit_s,
           "fit_working": peak - before - presort - fitted}
    gc.collect()
    before = _reset_peak()
    start = time.perf_counter()
    R._read_oob(forest)
    out["oob_s"] = time.perf_counter() - start
    out["oob_working"] = _peak() - before - _arrays_bytes(forest.oob)
    gc.collect()
    before = _reset_peak()
    start = time.perf_counter()
    table = forest.per_tree(X)
    out["per_tree_s"] = time.perf_counter() - start
    out["per_tree_working"] = _peak() - before - table.nbytes
    for key in ("fit", "oob", "per_tree"):
        out[f"{key}_x"] = out[f"{key}_working"] / X.nbytes
    return out


def bench(plan: dict, yardstick, repeats: int, log) -> dict:
    """The million-row fit rows (as run.py's ``bench_fit``) and the memory rows (one fresh process each)."""
    results = {"fits": [R.bench_fit(row, yardstick, repeats, log) for row in plan["fits"]], "memory": []}
    if not Path("/proc/self/clear_refs").exists():
        results["memory_skipped"] = "needs /proc/self/clear_refs (Linux)"
        return results
    for name, n, p, trees in plan["memory"]:
        res = _child(f"{name},{n},{p},{trees}")
        results["memory"].append(res)
        log(f"  million memory {name}: fit {res['fit_x']:.2f} x X, oob {res['oob_s']:.2f} s "
            f"{res['oob_x']:.2f} x X, per_tree {res['per_tree_s']:.2f} s {res['per_tree_x']:.2f} x X")
    return results


def _child(value: str) -> dict:
    import os
    import subprocess

    cmd = [sys.executable, str(Path(__file__).resolve()), "--memory-child", value]
    env = dict(os.environ, PYTHONPATH=str(R.REPO))
    return json.loads(subprocess.run(cmd, check=True, capture_output=True, text=True, env=env).stdout)


def table_rows(results: dict) -> list[tuple[str, ...]]:
    """Rows in run.py's table format: (what, forestlab, yardstick, result, must, aim)."""
    rows = []
    for fit in results["fits"]:
        ratio = f"{fit['ratio']:.2f}x" if "ratio" in fit else "n/a"
        c = f"{fit['yardstick_median_s']:.2f} s" if "yardstick_median_s" in fit else "-"
        rows.append((f"fit {fit['label']} (ratio)", f"{fit['forestlab_median_s']:.2f} s", c, ratio, "<= 3.0", "-"))
    for m in results["memory"]:
        what = f"{m['data']} n={m['n']} p={m['p']} {m['trees']} trees"
        rows.append((f"working memory of the fit, {what} (x bytes of X)", f"{m['fit_working'] / 2**20:.0f} MiB",
                     "-", f"{m['fit_x']:.2f}", "<= 1.0", "-"))
        for key in ("oob", "per_tree"):
            rows.append((f"{key}, {what} (seconds; working memory x bytes of X)", f"{m[key + '_s']:.2f} s", "-",
                         f"{m[key + '_x']:.2f}", "bounded", "-"))
    return rows


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__, formatter_class=argparse.RawDescriptionHelpFormatter)
    ap.add_argument("--quick", action="store_true")
    ap.add_argument("--repeats", type=int, default=3)
    ap.add_argument("--memory-only", action="store_true", help="skip the timed fits against the yardstick")
    ap.add_argument("--memory-child", help=argparse.SUPPRESS)
    args = ap.parse_args()
    if args.memory_child:
        name, *sizes = args.memory_child.split(",")
        print(json.dumps(memory_child(name, *map(int, sizes))))
        return
    plan = dict(PLAN["quick" if args.quick else "full"])
    if args.memory_only:
        plan["fits"] = []

    def log(text):
        print(text, file=sys.stderr, flush=True)

    import os
    log(f"load average {os.getloadavg()}")
    yardstick = R.Yardstick()
    try:
        results = bench(plan, yardstick, args.repeats, log)
    finally:
        yardstick.close()
    results["load_average_end"] = os.getloadavg()
    for row in table_rows(results):
        print(" | ".join(row))
    R.OUT.mkdir(parents=True, exist_ok=True)
    (R.OUT / "million-latest.json").write_text(json.dumps(results, indent=1, default=str))


if __name__ == "__main__":
    main()
