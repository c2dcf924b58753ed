#!/usr/bin/env python3
"""Speed and working memory of the uncertainty analyses against the fit they read (issue 21).

    python3 benchmarks/uncertainty.py               # the table of record: n = 10 000, 500 trees, 10 000 rows
    python3 benchmarks/uncertainty.py --quick       # n = 2 000, 200 trees, 2 000 rows, for development
    python3 benchmarks/uncertainty.py --repeats 7

What is measured
----------------
Every repeat is a fresh process that fits two forests with default settings and then runs the analyses on
as many new rows as there are training cases, the analyses in alternating order from one repeat to the next
(forward, then backward), so a slow phase of the shared machine falls on all of them alike:

* regression, Friedman #1 (p = 10): ``variance`` (average of IJ-U and J-U), ``intervals`` by jackknife+
  (``forest.oob`` computed before it, and timed on its own), ``intervals(method="quantile")``;
* classification, twonorm (p = 20): ``variance`` of the vote shares, ``prediction_sets(by_class=True)``.

Each analysis's time is divided by the fit time of its forest in the same process (a paired ratio); the table
gives the median over the repeats. Working memory: the process's peak resident set (``VmHWM``, reset just
before the call through ``/proc/self/clear_refs``) minus its resident set before the call, so it counts what
the call allocates beyond the forest and its data, the result included.

Prints one table and writes every run as JSON to ``benchmarks/out/uncertainty-*.json``.
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
import warnings
from pathlib import Path

REPO = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(REPO))

import forestlab as fl  # noqa: E402
from forestlab.synthetic import friedman1, twonorm  # noqa: E402

sys.path.insert(0, str(Path(__file__).resolve().parent))
from run import _status_kib  # noqa: E402  (benchmarks/run.py: a kB field of /proc/self/status)

OUT = REPO / "benchmarks" / "out"
PLANS = {"full": {"n": 10_000, "trees": 500}, "quick": {"n": 2_000, "trees": 200}}
ANALYSES = {
    "regression": [("variance", lambda f, X: f.variance(X)),
                   ("intervals, jackknife+", lambda f, X: f.intervals(X, level=0.9)),
                   ("intervals, quantile", lambda f, X: f.intervals(X, level=0.9, method="quantile"))],
    "classification": [("variance", lambda f, X: f.variance(X)),
                       ("prediction sets", lambda f, X: f.prediction_sets(X, level=0.9, by_class=True, rng=1))],
}
TARGETS = {"variance": (1.0, 0.5), "intervals, jackknife+": (1.0, None), "intervals, quantile": (1.0, None),
           "prediction sets": (1.0, None)}
MEMORY_TARGET_MB = {"variance": 200}


def _measured(call):
    """Seconds and working memory (bytes beyond the resident set before the call) of ``call()``."""
    with open("/proc/self/clear_refs", "w") as f:
        f.write("5")
    before = _status_kib("VmRSS") * 1024
    start = time.perf_counter()
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        result = call()
    seconds = time.perf_counter() - start
    peak = _status_kib("VmHWM") * 1024
    return result, seconds, peak - before, [str(w.message) for w in caught]


def child(task: str, n: int, trees: int, backward: bool) -> dict:
    """One repeat in this process: fit, then the task's analyses in the given order."""
    if task == "regression":
        (X, y), (rows, _) = friedman1(n, rng=1), friedman1(n, rng=2)
    else:
        (X, y), (rows, _) = twonorm(n, rng=1), twonorm(n, rng=2)
    fl.Forest(trees=1, rng=0).fit(X[:500], y[:500])          # load NumPy's code paths before timing
    start = time.perf_counter()
    forest = fl.Forest(trees=trees, rng=1).fit(X, y)
    out = {"task": task, "n": n, "trees": trees, "rows": len(rows), "fit_s": time.perf_counter() - start,
           "backward": backward, "analyses": {}}
    _, out["oob_s"], out["oob_bytes"], _ = _measured(lambda: forest.oob)
    for name, call in (reversed(ANALYSES[task]) if backward else ANALYSES[task]):
        _, seconds, working, caught = _measured(lambda call=call: call(forest, rows))
        out["analyses"][name] = {"seconds": seconds, "ratio": seconds / out["fit_s"], "working_bytes": working,
                                 "warnings": caught}
    return out


def run_child(task: str, n: int, trees: int, backward: bool) -> dict:
    cmd = [sys.executable, str(Path(__file__).resolve()), "--child", f"{task},{n},{trees},{int(backward)}"]
    env = dict(os.environ, PYTHONPATH=str(REPO))
    return json.loads(subprocess.run(cmd, check=True, capture_output=True, text=True, env=env).stdout)


def table(runs: list[dict], plan: dict) -> str:
    lines = [f"n = {plan['n']} training cases, {plan['trees']} trees, {plan['n']} new rows; median over "
             f"{len(runs) // 2} fresh processes per task (analysis / fit of the same process)", "",
             "| task | analysis | time | / fit | must | aim | working memory | must |",
             "|---|---|---|---|---|---|---|---|"]
    for task in ("regression", "classification"):
        mine = [r for r in runs if r["task"] == task]
        fit = statistics.median(r["fit_s"] for r in mine)
        oob = statistics.median(r["oob_s"] / r["fit_s"] for r in mine)
        lines.append(f"| {task} | fit | {fit:.2f} s | 1 | | | | |")
        lines.append(f"| {task} | `forest.oob` (first access) | | {oob:.3f} | | | | |")
        for name, _ in ANALYSES[task]:
            seconds = statistics.median(r["analyses"][name]["seconds"] for r in mine)
            ratio = statistics.median(r["analyses"][name]["ratio"] for r in mine)
            memory = statistics.median(r["analyses"][name]["working_bytes"] for r in mine) / 2**20
            must, aim = TARGETS[name]
            limit = MEMORY_TARGET_MB.get(name)
            lines.append(f"| {task} | {name} | {seconds:.2f} s | {ratio:.3f} | <= {must:g} | "
                         f"{'' if aim is None else f'<= {aim:g}'} | {memory:.0f} MB | "
                         f"{'' if limit is None else f'< {limit} MB'} |")
    return "\n".join(lines)


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__, formatter_class=argparse.RawDescriptionHelpFormatter)
    ap.add_argument("--quick", action="store_true", help="n = 2 000 and 200 trees")
    ap.add_argument("--repeats", type=int, default=5, help="fresh processes per task (median; default 5)")
    ap.add_argument("--child", help=argparse.SUPPRESS)
    args = ap.parse_args()
    if args.child:
        task, n, trees, backward = args.child.split(",")
        print(json.dumps(child(task, int(n), int(trees), bool(int(backward)))))
        return
    mode = "quick" if args.quick else "full"
    plan = PLANS[mode]
    start = {"date": dt.datetime.now().isoformat(timespec="minutes"), "load_average": os.getloadavg(),
             "platform": platform.platform(), "python": platform.python_version()}
    runs = []
    for r in range(args.repeats):
        for task in ("regression", "classification"):
            runs.append(run_child(task, plan["n"], plan["trees"], backward=bool(r % 2)))
            print(f"  {task} run {r + 1}: fit {runs[-1]['fit_s']:.2f} s, "
                  + ", ".join(f"{k} {v['ratio']:.3f}" for k, v in runs[-1]["analyses"].items()), file=sys.stderr)
    text = table(runs, plan)
    print(text)
    OUT.mkdir(parents=True, exist_ok=True)
    stamp = dt.datetime.now().strftime("%Y%m%d-%H%M%S")
    record = {"mode": mode, "plan": plan, "machine": start, "load_average_end": os.getloadavg(), "runs": runs,
              "table": text}
    for path in (OUT / f"uncertainty-{mode}-{stamp}.json", OUT / f"uncertainty-{mode}-latest.json"):
        path.write_text(json.dumps(record, indent=1))


if __name__ == "__main__":
    main()
