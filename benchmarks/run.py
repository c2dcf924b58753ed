#!/usr/bin/env python3
"""Speed and memory of forestlab against the targets of issue 4, side by side with a compiled yardstick.

    python3 benchmarks/run.py            # the full table (slow: tens of minutes on 2 shared cores)
    python3 benchmarks/run.py --quick    # smaller sizes of every row, for development (a few minutes)
    python3 benchmarks/run.py --repeats 3 --json my.json

What is measured
----------------
* ``fit ... vs yardstick``: wall time of ``Forest(...).fit(X, y)`` (validation, presort and growth) against
  the single-threaded C program ``cforest`` (its ``presort_seconds + fit_seconds``: presort and growth, not
  file reading or its OOB/test predictions), same data, trees, m and min_leaf, each run in a fresh process
  of its own (forestlab's after a one-tree fit on 500 rows that loads NumPy's code paths, as the C program's
  timer starts after its start-up), runs alternating C / forestlab, median of ``--repeats`` runs each. The
  ratio is forestlab / C. (On a shared virtual machine one process can run a workload 30% slower than the
  next, so every run gets a fresh process on both sides.)
* ``per_tree``: nanoseconds per (row, tree) of ``forest.per_tree(X_test)`` on fully grown trees.
* ``oob``: time of the first ``forest.oob`` access (every attribute read, the error curve included) as a
  fraction of the fit time; skipped with a note while the forest has no ``oob``.
* ``working memory``: a fit in a fresh subprocess; peak resident set (``VmHWM``, reset after X is made)
  minus the resident set just before the fit (interpreter, NumPy, X, y) minus the arrays the forest keeps
  of its data (ranks, statistics, targets) and the fitted forest (trees and in-bag counts), in multiples of
  the bytes of X. ``tracemalloc``'s peak of the same fit is shown beside it (it does not see the grower's
  scratch buffers, which are memory maps of their own).
* ``storage``: bytes of all node arrays of a fitted forest per node.
* ``growth``: fit time at the larger n over fit time at the smaller n (p = 10), fits in fresh processes as
  above, the two sizes alternating; n log n would be 12.5x for 10 000 -> 100 000.
* ``workers``: fit time with ``workers=1`` over ``workers=2`` (speed-up), runs alternating, after one
  untimed ``workers=2`` fit that starts the worker processes (a once-per-process cost, recorded in the JSON).

The data are generated with NumPy exactly as the yardstick's ``drive.py`` does (twonorm: ``a = 2/sqrt(p)``;
Friedman #1 on U[0,1]^p), seed 0, and written as raw float64 for the C program. The yardstick is found
through ``$FORESTLAB_YARDSTICK`` (a folder holding ``cforest.c``) or ``../shared/yardstick`` next to the
repository, and compiled into a temporary folder with ``gcc -O2 -march=native``; without it the C column is
left empty with a note. The machine is shared and noisy: read ratios, not absolute times.

Prints one table and writes everything (every run's seconds included) as JSON to ``benchmarks/out/``.
"""

from __future__ import annotations

import argparse
import datetime as dt
import json
import math
import os
import platform
import shutil
import statistics
import subprocess
import sys
import tempfile
import time
from dataclasses import fields
from pathlib import Path

import numpy as np

REPO = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(REPO))

import forestlab as fl  # noqa: E402

sys.path.insert(0, str(REPO / "benchmarks"))
import many_class_rows  # noqa: E402  (the many-class rows of issue 17)

OUT = REPO / "benchmarks" / "out"

# Full sizes (issue 4) and --quick sizes of every row.
PLANS = {
    "full": {
        "fits": [  # (label, data, n, p, m, trees, min_leaf)
            ("twonorm n=10 000 p=50 m=7, 100 trees", "twonorm", 10_000, 50, 7, 100, 1),
            ("twonorm n=100 000 p=10 m=3, 100 trees", "twonorm", 100_000, 10, 3, 100, 1),
            ("twonorm n=1 000 p=10 m=3, 200 trees", "twonorm", 1_000, 10, 3, 200, 1),
            ("friedman1 n=100 000 p=10 m=3, 100 trees, min_leaf 5", "friedman1", 100_000, 10, 3, 100, 5),
        ],
        "per_tree": {"n": 100_000, "p": 10, "trees": 100, "rows": 100_000},
        "oob": {"n": 10_000, "p": 10, "trees": 500},
        "memory": {"n": 100_000, "p": 50, "trees": 100},
        "growth": {"small": 10_000, "large": 100_000, "p": 10, "trees": 100},
        "workers": {"n": 10_000, "p": 10, "trees": 200},
        "million": "full",  # benchmarks/million_rows.py: its plan of this name (issue 17)
        "many_class": many_class_rows.FULL,
    },
    "quick": {
        "fits": [
            ("twonorm n=10 000 p=50 m=7, 20 trees", "twonorm", 10_000, 50, 7, 20, 1),
            ("twonorm n=1 000 p=10 m=3, 200 trees", "twonorm", 1_000, 10, 3, 200, 1),
            ("friedman1 n=10 000 p=10 m=3, 20 trees, min_leaf 5", "friedman1", 10_000, 10, 3, 20, 5),
        ],
        "per_tree": {"n": 10_000, "p": 10, "trees": 20, "rows": 20_000},
        "oob": {"n": 2_000, "p": 10, "trees": 100},
        "memory": {"n": 20_000, "p": 50, "trees": 10},
        "growth": {"small": 2_000, "large": 20_000, "p": 10, "trees": 20},
        "workers": {"n": 10_000, "p": 10, "trees": 40},
        "million": "quick",
        "many_class": many_class_rows.QUICK,
    },
}


# ------------------------------------------------------------------------------------------- data
def twonorm(n, p, rng):
    """As the yardstick's drive.py: y ~ Bernoulli(1/2), x ~ N(+-a 1, I), a = 2/sqrt(p)."""
    y = rng.integers(0, 2, n)
    a = 2.0 / np.sqrt(p)
    X = rng.standard_normal((n, p)) + np.where(y[:, None] == 1, a, -a)
    return X, y.astype(np.float64)


def friedman1(n, p, rng, noise=1.0):
    """As the yardstick's drive.py: Friedman (1991) #1 on U[0,1]^p."""
    X = rng.uniform(size=(n, p))
    y = (10 * np.sin(np.pi * X[:, 0] * X[:, 1]) + 20 * (X[:, 2] - 0.5) ** 2
         + 10 * X[:, 3] + 5 * X[:, 4] + noise * rng.standard_normal(n))
    return X, y


GENERATORS = {"twonorm": (twonorm, "classification"), "friedman1": (friedman1, "regression")}


def make_data(name, n, p, seed=0, test=0):
    gen, task = GENERATORS[name]
    rng = np.random.default_rng(seed)
    X, y = gen(n, p, rng)
    out = {"X": X, "y": y, "task": task}
    if test:
        out["X_test"], out["y_test"] = gen(test, p, rng)
    return out


def forestlab_target(data):
    return data["y"].astype(np.int64) if data["task"] == "classification" else data["y"]


# ------------------------------------------------------------------------------------------- yardstick
class Yardstick:
    """The C program, compiled into a temporary folder, or the reason it is not available."""

    def __init__(self) -> None:
        self.binary: Path | None = None
        self.note = ""
        self.folder = Path(tempfile.mkdtemp(prefix="forestlab-bench-"))
        source = self._find_source()
        if source is None:
            self.note = "yardstick not found (set FORESTLAB_YARDSTICK to the folder holding cforest.c)"
            return
        if shutil.which("gcc") is None:
            self.note = "gcc not found, yardstick not built"
            return
        binary = self.folder / "cforest"
        done = subprocess.run(["gcc", "-O2", "-march=native", "-o", str(binary), str(source), "-lm"],
                              capture_output=True, text=True)
        if done.returncode:
            self.note = f"yardstick failed to build: {done.stderr.strip()[:200]}"
            return
        self.binary, self.source = binary, source

    @staticmethod
    def _find_source() -> Path | None:
        candidates = [os.environ.get("FORESTLAB_YARDSTICK", ""), REPO.parent / "shared" / "yardstick",
                      REPO.parents[1] / "shared" / "yardstick"]
        for folder in candidates:
            if folder and (Path(folder) / "cforest.c").is_file():
                return Path(folder) / "cforest.c"
        return None

    def files(self, data, tag):
        paths = []
        for key in ("X", "y"):
            path = self.folder / f"{tag}_{key}.f64"
            if not path.exists():
                np.ascontiguousarray(data[key], dtype="<f8").tofile(path)
            paths.append(str(path))
        return paths

    def fit_seconds(self, data, tag, m, trees, min_leaf, seed=1) -> float:
        n, p = data["X"].shape
        X, y = self.files(data, tag)
        task = "clf" if data["task"] == "classification" else "reg"
        cmd = [str(self.binary), "fit", X, y, str(n), str(p), "--task", task, "--trees", str(trees),
               "--m", str(m), "--seed", str(seed), "--min-leaf", str(min_leaf)]
        res = json.loads(subprocess.run(cmd, check=True, capture_output=True, text=True).stdout)
        return res["presort_seconds"] + res["fit_seconds"]

    def close(self) -> None:
        shutil.rmtree(self.folder, ignore_errors=True)


# ------------------------------------------------------------------------------------------- measurements
def fit_forestlab(data, m, trees, min_leaf, workers=1, rng=1):
    forest = fl.Forest(trees=trees, sampler=m, min_leaf=min_leaf, task=data["task"], workers=workers, rng=rng)
    y = forestlab_target(data)
    start = time.perf_counter()
    forest.fit(data["X"], y)
    return time.perf_counter() - start, forest


def forest_bytes(forest) -> tuple[int, int]:
    """Bytes of all node arrays, and number of nodes."""
    nbytes = nodes = 0
    for tree in (forest.tree(b) for b in range(forest.trees)):
        nbytes += sum(getattr(tree, f.name).nbytes for f in fields(tree))
        nodes += tree.nodes
    return nbytes, nodes


def bench_fit(row, yardstick, repeats, log):
    label, name, n, p, m, trees, min_leaf = row
    data = make_data(name, n, p)
    ours, theirs, nodes = [], [], None
    for r in range(repeats):
        if yardstick.binary is not None:
            theirs.append(yardstick.fit_seconds(data, f"{name}_n{n}_p{p}", m, trees, min_leaf))
        child = run_child("--fit-child", f"{name},{n},{p},{m},{trees},{min_leaf}")
        ours.append(child["seconds"])
        nodes = (child["node_bytes"], child["nodes"])
        c_text = f", yardstick {theirs[-1]:.2f} s" if theirs else ""
        log(f"  {label}: run {r + 1}: forestlab {ours[-1]:.2f} s{c_text}")
    out = {"label": label, "key": (name, n, p, m, trees, min_leaf), "forestlab_s": ours, "yardstick_s": theirs,
           "forestlab_median_s": statistics.median(ours), "bytes_per_node": nodes[0] / nodes[1]}
    if theirs:
        out["yardstick_median_s"] = statistics.median(theirs)
        out["ratio"] = out["forestlab_median_s"] / out["yardstick_median_s"]
    return out


def fit_child(name, n, p, m, trees, min_leaf) -> dict:
    """Run in a fresh process, as the yardstick runs: one timed fit (after a one-tree fit on a few rows that
    loads NumPy's code paths), its seconds and node storage."""
    data = make_data(name, n, p)
    rows = min(n, 500)
    fl.Forest(trees=1, sampler=m, min_leaf=min_leaf, task=data["task"], rng=0).fit(
        data["X"][:rows], forestlab_target(data)[:rows])
    seconds, forest = fit_forestlab(data, m, trees, min_leaf)
    node_bytes, nodes = forest_bytes(forest)
    return {"seconds": seconds, "node_bytes": node_bytes, "nodes": nodes}


def run_child(flag: str, value: str) -> dict:
    """This script in a fresh process with ``flag value``; its JSON answer."""
    cmd = [sys.executable, str(Path(__file__).resolve()), flag, value]
    env = dict(os.environ, PYTHONPATH=str(REPO))
    return json.loads(subprocess.run(cmd, check=True, capture_output=True, text=True, env=env).stdout)


def bench_per_tree(spec, repeats, log):
    data = make_data("twonorm", spec["n"], spec["p"], test=spec["rows"])
    _, forest = fit_forestlab(data, int(math.sqrt(spec["p"])), spec["trees"], 1)
    times = []
    for _ in range(repeats):
        start = time.perf_counter()
        forest.per_tree(data["X_test"])
        times.append(time.perf_counter() - start)
    ns = statistics.median(times) / (spec["rows"] * spec["trees"]) * 1e9
    nbytes, nodes = forest_bytes(forest)
    log(f"  per_tree: {ns:.0f} ns per row-tree")
    return {"ns_per_row_tree": ns, "seconds": times, "bytes_per_node": nbytes / nodes, "nodes": nodes}


def _read_oob(forest):
    oob = forest.oob
    for name in ("predictions", "votes", "coverage", "error", "error_curve", "margins"):
        getattr(oob, name, None)
    doubtful = getattr(oob, "doubtful", None)
    if callable(doubtful):
        doubtful()


def bench_oob(spec, repeats, log):
    import copy

    if not hasattr(fl.Forest, "oob"):
        return {"skipped": "Forest has no `oob` yet"}
    data = make_data("twonorm", spec["n"], spec["p"])
    fit_s, forest = fit_forestlab(data, int(math.sqrt(spec["p"])), spec["trees"], 1)
    times = []
    for _ in range(repeats):
        fresh = copy.copy(forest)  # the first access on each copy (a cached result is not reused)
        start = time.perf_counter()
        _read_oob(fresh)
        times.append(time.perf_counter() - start)
    share = statistics.median(times) / fit_s
    log(f"  oob: {share:.1%} of the fit time")
    return {"fit_s": fit_s, "oob_s": times, "share_of_fit": share}


def memory_child(n, p, trees) -> dict:
    """Run in a fresh process: one fit, its peak memory beyond X, presort and forest.

    The process's high-water mark is reset after the data are made (Linux ``/proc/self/clear_refs``), so the
    temporaries of generating X do not count; the peak is the kernel's ``VmHWM`` after the fit.
    """
    import gc
    import tracemalloc

    data = make_data("twonorm", n, p)
    X, y = data["X"], forestlab_target(data)
    del data
    gc.collect()
    with open("/proc/self/clear_refs", "w") as f:
        f.write("5")  # reset the peak resident set to the current one
    rss_before = _status_kib("VmRSS") * 1024
    tracemalloc.start()
    tracemalloc.reset_peak()
    traced_before = tracemalloc.get_traced_memory()[0]
    forest = fl.Forest(trees=trees, sampler=int(math.sqrt(p)), min_leaf=1, rng=1).fit(X, y)
    traced_peak = tracemalloc.get_traced_memory()[1] - traced_before
    tracemalloc.stop()
    peak = _status_kib("VmHWM") * 1024
    d = forest._data  # every array the fitted forest keeps of its data except X itself (the caller's)
    presort = sum(getattr(d, f.name).nbytes for f in fields(d)
                  if isinstance(getattr(d, f.name), np.ndarray) and f.name != "X")
    fitted = forest_bytes(forest)[0] + forest.inbag.nbytes
    return {"n": n, "p": p, "trees": trees, "x_bytes": X.nbytes, "presort_bytes": presort,
            "forest_bytes": fitted, "rss_before": rss_before, "peak_rss": peak,
            "working_rss": peak - rss_before - presort - fitted,
            "working_traced": traced_peak - presort - fitted}


def _status_kib(field: str) -> int:
    """A ``kB`` field of ``/proc/self/status``."""
    with open("/proc/self/status") as f:
        for line in f:
            if line.startswith(field + ":"):
                return int(line.split()[1])
    raise KeyError(field)


def bench_memory(spec, log):
    if not Path("/proc/self/clear_refs").exists():
        return {"skipped": "needs /proc/self/clear_refs (Linux)"}
    res = run_child("--memory-child", f"{spec['n']},{spec['p']},{spec['trees']}")
    res["x_multiple_rss"] = res["working_rss"] / res["x_bytes"]
    res["x_multiple_traced"] = res["working_traced"] / res["x_bytes"]
    log(f"  memory: {res['x_multiple_rss']:.2f} x X (rss), {res['x_multiple_traced']:.2f} x X (tracemalloc)")
    return res


def bench_growth(spec, repeats, log):
    """Fit time at two n, each fit in a fresh process, the two sizes alternating (so both see the same
    machine: on a shared one, timings taken minutes apart drift more than the effect measured)."""
    times = {"small": [], "large": []}
    for r in range(repeats):
        for key in ("small", "large"):
            child = run_child("--fit-child", f"twonorm,{spec[key]},{spec['p']},3,{spec['trees']},1")
            times[key].append(child["seconds"])
        log(f"  growth: run {r + 1}: n={spec['small']} {times['small'][-1]:.2f} s, "
            f"n={spec['large']} {times['large'][-1]:.2f} s")
    out = {key: {"n": spec[key], "seconds": times[key], "median_s": statistics.median(times[key])}
           for key in ("small", "large")}
    out["factor"] = out["large"]["median_s"] / out["small"]["median_s"]
    out["n_log_n"] = spec["large"] * math.log(spec["large"]) / (spec["small"] * math.log(spec["small"]))
    return out


def bench_workers(spec, repeats, log):
    data = make_data("twonorm", spec["n"], spec["p"])
    # The first parallel fit of a process also starts the worker processes (once per process): timed apart.
    first = fit_forestlab(data, 3, spec["trees"], 1, workers=2)[0]
    log(f"  workers: first fit with workers=2 (starts the workers) {first:.2f} s")
    one, two = [], []
    for _ in range(repeats):
        one.append(fit_forestlab(data, 3, spec["trees"], 1, workers=1)[0])
        two.append(fit_forestlab(data, 3, spec["trees"], 1, workers=2)[0])
        log(f"  workers: 1 -> {one[-1]:.2f} s, 2 -> {two[-1]:.2f} s")
    return {"workers1_s": one, "workers2_s": two, "first_workers2_s": first,
            "speedup": statistics.median(one) / statistics.median(two)}


# ------------------------------------------------------------------------------------------- machine
def machine() -> dict:
    info = {"date": dt.datetime.now().isoformat(timespec="seconds"), "python": platform.python_version(),
            "numpy": np.__version__, "forestlab": fl.__version__, "cores": os.cpu_count(),
            "platform": platform.platform()}
    try:
        lscpu = subprocess.run(["lscpu"], capture_output=True, text=True).stdout
        info["cpu"] = next((ln.split(":", 1)[1].strip() for ln in lscpu.splitlines()
                            if ln.startswith("Model name")), platform.processor())
    except OSError:
        info["cpu"] = platform.processor()
    info["load_average"] = os.getloadavg() if hasattr(os, "getloadavg") else None
    info.update(simd())
    from forestlab.engine import key_sort
    info["key_sort"] = key_sort.sort_mode()  # the sort this machine's fits take (measured once a process)
    return info


def simd() -> dict:
    """SIMD extensions NumPy found on this CPU (its runtime dispatch decides np.sort's kernel)."""
    try:
        from numpy._core import _multiarray_umath as core
    except ImportError:  # NumPy < 2
        from numpy.core import _multiarray_umath as core
    found = [f for f in core.__cpu_dispatch__ if core.__cpu_features__.get(f)]
    missing = [f for f in core.__cpu_dispatch__ if not core.__cpu_features__.get(f)]
    # x86-simd-sort serves np.sort / argsort of 32- and 64-bit keys on AVX512_SKX (NumPy >= 2.4 calls that level
    # X86_V4) and on AVX2 (X86_V3) since NumPy 2.0; 16-bit keys on AVX512_ICL / AVX512_SPR.
    have = set(found) | set(core.__cpu_baseline__)
    sort = [f for f in ("AVX512_SPR", "AVX512_ICL", "X86_V4", "AVX512_SKX", "X86_V3", "AVX2") if f in have]
    return {"simd_baseline": list(core.__cpu_baseline__), "simd_found": found, "simd_not_found": missing,
            "sort_kernels": sort}


# ------------------------------------------------------------------------------------------- table
def table(results, mode, yardstick_note) -> str:
    rows = [("what", "forestlab", "yardstick", "result", "must", "aim")]
    for fit in results["fits"]:
        ratio = f"{fit['ratio']:.2f}x" if "ratio" in fit else "n/a"
        c = f"{fit['yardstick_median_s']:.2f} s" if "yardstick_median_s" in fit else "-"
        rows.append((f"fit {fit['label']} (ratio)", f"{fit['forestlab_median_s']:.2f} s", c, ratio, "<= 4.0",
                     "<= 2.5"))
    rows += [row for key, rows_of in _ROWS.items() if key in results for row in rows_of(results, mode)]
    widths = [max(len(r[i]) for r in rows) for i in range(len(rows[0]))]
    lines = ["| " + " | ".join(c.ljust(wd) for c, wd in zip(r, widths)) + " |" for r in rows]
    lines.insert(1, "|" + "|".join("-" * (wd + 2) for wd in widths) + "|")
    if yardstick_note:
        lines.append(f"\nNote: {yardstick_note}; the yardstick column is empty.")
    if mode == "quick":
        lines.append("\nNote: --quick sizes, smaller than the targets of issue 4; run without --quick for them.")
    return "\n".join(lines)


def _per_tree_rows(results, mode):
    pt, spec = results["per_tree"], PLANS[mode]["per_tree"]
    return [(f"per_tree, {spec['rows']} rows x {spec['trees']} trees", f"{pt['ns_per_row_tree']:.0f} ns", "-",
             f"{pt['ns_per_row_tree']:.0f} ns/row-tree", "<= 300", "<= 100"),
            ("forest storage (bytes per node)", f"{pt['bytes_per_node']:.1f}", "-", f"{pt['bytes_per_node']:.1f}",
             "<= 32", "<= 24")]


def _oob_rows(results, mode):
    oob, spec = results["oob"], PLANS[mode]["oob"]
    label = f"oob, {spec['trees']} trees n={spec['n']} (share of fit)"
    if "skipped" in oob:
        return [(label, "-", "-", f"skipped: {oob['skipped']}", "<= 20%", "<= 5%")]
    return [(label, f"{statistics.median(oob['oob_s']):.2f} s", "-", f"{oob['share_of_fit']:.1%}", "<= 20%",
             "<= 5%")]


def _memory_rows(results, mode):
    mem, spec = results["memory"], PLANS[mode]["memory"]
    label = f"working memory, {spec['trees']} trees n={spec['n']} p={spec['p']} (x bytes of X)"
    if "skipped" in mem:
        return [(label, "-", "-", f"skipped: {mem['skipped']}", "<= 1.0", "<= 0.5")]
    return [(label, f"{mem['working_rss'] / 2**20:.0f} MiB", "-",
             f"{mem['x_multiple_rss']:.2f} (tracemalloc {mem['x_multiple_traced']:.2f})", "<= 1.0", "<= 0.5")]


def _growth_rows(results, mode):
    g = results["growth"]
    return [(f"fit time growth n={g['small']['n']} -> {g['large']['n']} (p=10)",
             f"{g['small']['median_s']:.2f} -> {g['large']['median_s']:.2f} s", "-", f"{g['factor']:.1f}x",
             "<= 13x", f"n log n ({g['n_log_n']:.1f}x)")]


def _workers_rows(results, mode):
    w, spec = results["workers"], PLANS[mode]["workers"]
    return [(f"workers=2 vs 1, n={spec['n']} {spec['trees']} trees (speed-up)",
             f"{statistics.median(w['workers1_s']):.2f} -> {statistics.median(w['workers2_s']):.2f} s", "-",
             f"{w['speedup']:.2f}x", ">= 1.7x", "1.9x")]


#: The table's rows after the fits, in order, for the benches that ran (``--only``)
def _million_rows():
    """The million-row rows (issue 17), in a module of their own beside this script."""
    import million_rows

    return million_rows


_ROWS = {"per_tree": _per_tree_rows, "oob": _oob_rows, "memory": _memory_rows, "growth": _growth_rows,
         "workers": _workers_rows,
         "million": lambda results, mode: _million_rows().table_rows(results["million"]),
         "many_class": lambda results, mode: many_class_rows.table_rows(results["many_class"])}


def results_markdown(results) -> str:
    """The table with the machine it was measured on, as benchmarks/RESULTS.md has it."""
    m = results["machine"]
    lines = [
        f"## {results['mode']} run of {m['date']}", "",
        f"- machine: {m['cpu']}, {m['cores']} cores; {m['platform']}; load average at start "
        f"{', '.join(f'{x:.2f}' for x in m['load_average'] or [])}",
        f"- Python {m['python']}, NumPy {m['numpy']}, forestlab {m['forestlab']}",
        f"- NumPy SIMD extensions found: {', '.join(m['simd_found']) or 'none'}; not found: "
        f"{', '.join(m['simd_not_found']) or 'none'}",
        f"- sort kernels: np.sort / argsort dispatch to x86-simd-sort on "
        f"{', '.join(m['sort_kernels']) or 'none of AVX512_SPR, AVX512_ICL, AVX512_SKX, AVX2 (plain sort)'}",
        f"- median of {results['repeats']} runs per timing; C and forestlab runs alternate", "",
        results["table"], "",
    ]
    return "\n".join(lines)


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__, formatter_class=argparse.RawDescriptionHelpFormatter)
    ap.add_argument("--quick", action="store_true", help="smaller sizes of every row")
    ap.add_argument("--repeats", type=int, default=5, help="runs per timing (median; default 5)")
    ap.add_argument("--json", help="also write the results to this file")
    ap.add_argument("--results", help="also write the table and machine as Markdown to this file")
    ap.add_argument("--only", help="comma-separated rows to run: fits (or words of a fit's label, e.g. "
                    "friedman1), per_tree, oob, memory, growth, workers, million, many_class; default every row")
    ap.add_argument("--memory-child", help=argparse.SUPPRESS)
    ap.add_argument("--fit-child", help=argparse.SUPPRESS)
    args = ap.parse_args()
    if args.memory_child:
        n, p, trees = map(int, args.memory_child.split(","))
        print(json.dumps(memory_child(n, p, trees)))
        return
    if args.fit_child:
        name, *sizes = args.fit_child.split(",")
        print(json.dumps(fit_child(name, *map(int, sizes))))
        return
    mode = "quick" if args.quick else "full"
    plan = PLANS[mode]

    def log(text):
        print(text, file=sys.stderr, flush=True)

    info = machine()
    log(f"forestlab benchmarks ({mode}) on {info['cpu']}, {info['cores']} cores, NumPy {info['numpy']}, "
        f"key sort {info['key_sort']}, load average {info['load_average']}")
    yardstick = Yardstick()
    if yardstick.note:
        log(f"  note: {yardstick.note}")
    results = {"mode": mode, "machine": info, "repeats": args.repeats, "yardstick_note": yardstick.note}
    only = None if args.only is None else [w.strip() for w in args.only.split(",")]
    benches = {"per_tree": lambda: bench_per_tree(plan["per_tree"], args.repeats, log),
               "oob": lambda: bench_oob(plan["oob"], args.repeats, log),
               "memory": lambda: bench_memory(plan["memory"], log),
               "growth": lambda: bench_growth(plan["growth"], args.repeats, log),
               "workers": lambda: bench_workers(plan["workers"], args.repeats, log),
               "million": lambda: _million_rows().bench(_million_rows().PLAN[plan["million"]], yardstick,
                                                         args.repeats, log),
               "many_class": lambda: many_class_rows.bench(plan["many_class"], yardstick, args.repeats, log)}
    try:
        results["fits"] = [bench_fit(row, yardstick, args.repeats, log) for row in plan["fits"]
                           if only is None or "fits" in only or any(w in row[0] for w in only)]
        for key, bench in benches.items():
            if only is None or key in only:
                results[key] = bench()
    finally:
        yardstick.close()
    results["table"] = table(results, mode, yardstick.note)
    print(results["table"])
    OUT.mkdir(parents=True, exist_ok=True)
    stamp = dt.datetime.now().strftime("%Y%m%d-%H%M%S")
    for path in [OUT / f"{mode}-{stamp}.json", OUT / f"{mode}-latest.json"] + ([Path(args.json)] if args.json else []):
        path.write_text(json.dumps(results, indent=1, default=str))
    if args.results:
        Path(args.results).write_text(results_markdown(results))
    log(f"written: {OUT / f'{mode}-{stamp}.json'}")


if __name__ == "__main__":
    main()
