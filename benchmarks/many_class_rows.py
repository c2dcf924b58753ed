"""Benchmark rows for many classes (issue 17): synthetic K-class problems against the yardstick, and an
all-categorical many-class problem fitted as categories and as the same codes taken as numbers.

Synthetic data (invented, seeded NumPy generators of our own):

* ``centroids(n, p, K, rng)``: ``K`` class centroids ``mu_k ~ N(0, I_p)``; each case draws its class
  uniformly from ``0..K-1`` and its predictors ``x ~ N(mu_y, I_p)`` (Gaussian classes around the centroids;
  at p = 16, K = 26 the nearest-centroid (Bayes) rule errs on about 9% of the cases). Values are continuous
  (no ties).
* ``category_table(n, p, K, levels, rng)``: ``p`` categorical predictors with ``levels`` categories each,
  drawn uniformly; each feature ``j`` has an effect table ``T_j ~ N(0, 1)`` of shape ``(levels, K)``, and
  the class is the argmax over ``k`` of ``sum_j T_j[x_j, k] + g_k``, ``g_k`` standard Gumbel noise (a
  multinomial-logit draw; at p = 16, K = 10, 8 levels the noise-free argmax errs on about 26% of the cases).
  The codes ``0..levels-1`` are fitted once as categories (``categorical=`` every column) and once as
  numbers, the yardstick fitting the numbers.

Every fit runs in a fresh process of its own (forestlab's after a one-tree fit on 500 rows, as in
``run.py``), the programs alternating, median of the repeats; the ratio is forestlab / yardstick, or, for
the categorical row, categorical fit / numeric-codes fit. ``run.py`` runs these rows with the others; to run
only these::

    python3 benchmarks/many_class_rows.py [--quick] [--repeats 3] [--json out.json]
"""

from __future__ import annotations

import argparse
import json
import os
import statistics
import subprocess
import sys
import time
from pathlib import Path

import numpy as np

HERE = Path(__file__).resolve().parent

#: rows: ("centroids", classes, n, p, m, trees) against the yardstick; ("categories", classes, n, p, levels,
#: m, trees) categorical against numeric codes
FULL = [
    ("centroids", 10, 16_000, 16, 4, 100),
    ("centroids", 26, 16_000, 16, 4, 100),
    ("categories", 10, 8_000, 16, 8, 4, 100),
]
QUICK = [
    ("centroids", 10, 4_000, 16, 4, 20),
    ("centroids", 26, 4_000, 16, 4, 20),
    ("categories", 10, 4_000, 16, 8, 4, 20),
]


def centroids(n: int, p: int, K: int, rng: np.random.Generator):
    """``n`` cases of ``p`` continuous predictors and ``K`` classes (see the module docstring)."""
    mu = rng.standard_normal((K, p))
    y = rng.integers(0, K, n)
    X = mu[y] + rng.standard_normal((n, p))
    return X, y.astype(np.float64)


def category_table(n: int, p: int, K: int, levels: int, rng: np.random.Generator):
    """``n`` cases of ``p`` categorical predictors (codes ``0..levels-1`` as floats) and ``K`` classes."""
    X = rng.integers(0, levels, size=(n, p))
    table = rng.standard_normal((p, levels, K))
    score = table[np.arange(p), X].sum(axis=1) + rng.gumbel(size=(n, K))
    return X.astype(np.float64), np.argmax(score, axis=1).astype(np.float64)


def make_data(row) -> dict:
    """The row's data set (seed 0) in the form ``run.py``'s yardstick reads."""
    rng = np.random.default_rng(0)
    if row[0] == "centroids":
        _, K, n, p, _, _ = row
        X, y = centroids(n, p, K, rng)
    else:
        _, K, n, p, levels, _, _ = row
        X, y = category_table(n, p, K, levels, rng)
    return {"X": X, "y": y, "task": "classification"}


def label(row) -> str:
    if row[0] == "centroids":
        _, K, n, p, m, trees = row
        return f"{K} classes (centroids) n={n:_} p={p} m={m}, {trees} trees".replace("_", " ")
    _, K, n, p, levels, m, trees = row
    return f"{K} classes, {p} categorical x {levels} levels n={n:_} m={m}, {trees} trees".replace("_", " ")


def child(spec: dict) -> dict:
    """In a fresh process: one timed fit of the row (after a one-tree fit on 500 rows)."""
    import forestlab as fl
    row = tuple(spec["row"])
    data = make_data(row)
    m, trees = row[-2], row[-1]
    categorical = list(range(data["X"].shape[1])) if spec["categorical"] else None
    y = data["y"].astype(np.int64)
    fl.Forest(trees=1, sampler=m, categorical=categorical, rng=0).fit(data["X"][:500], y[:500])
    forest = fl.Forest(trees=trees, sampler=m, categorical=categorical, rng=1)
    start = time.perf_counter()
    forest.fit(data["X"], y)
    seconds = time.perf_counter() - start
    import warnings
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        error = float(forest.oob.error)
    return {"seconds": seconds, "oob_error": error, "forestlab": fl.__file__}


def run_child(row, categorical: bool) -> dict:
    cmd = [sys.executable, str(Path(__file__).resolve()), "--child",
           json.dumps({"row": list(row), "categorical": categorical})]
    env = dict(os.environ, PYTHONPATH=str(HERE.parent))
    return json.loads(subprocess.run(cmd, check=True, capture_output=True, text=True, env=env).stdout)


def bench(rows, yardstick, repeats: int, log) -> list[dict]:
    """Every row, runs alternating (yardstick, forestlab numeric, forestlab categorical), medians."""
    out = []
    for row in rows:
        data, name = make_data(row), label(row)
        tag = "_".join(map(str, row))
        theirs, ours, cats, errors = [], [], [], {}
        for r in range(repeats):
            if yardstick is not None and yardstick.binary is not None:
                theirs.append(yardstick.fit_seconds(data, tag, row[-2], row[-1], 1))
            numeric = run_child(row, False)
            ours.append(numeric["seconds"])
            errors["numeric"] = numeric["oob_error"]
            text = f"forestlab {ours[-1]:.2f} s" + (f", yardstick {theirs[-1]:.2f} s" if theirs else "")
            if row[0] == "categories":
                categorical = run_child(row, True)
                cats.append(categorical["seconds"])
                errors["categorical"] = categorical["oob_error"]
                text += f", categorical {cats[-1]:.2f} s"
            log(f"  {name}: run {r + 1}: {text}")
        result = {"label": name, "row": list(row), "forestlab_s": ours, "yardstick_s": theirs,
                  "forestlab_median_s": statistics.median(ours), "oob_error": errors}
        if theirs:
            result["yardstick_median_s"] = statistics.median(theirs)
            result["ratio"] = result["forestlab_median_s"] / result["yardstick_median_s"]
        if cats:
            result["categorical_s"] = cats
            result["categorical_median_s"] = statistics.median(cats)
            result["categorical_ratio"] = result["categorical_median_s"] / result["forestlab_median_s"]
        out.append(result)
    return out


def table_rows(results: list[dict]) -> list[tuple[str, ...]]:
    """The rows of ``run.py``'s table (what, forestlab, yardstick, result, must, aim)."""
    rows = []
    for res in results:
        c = f"{res['yardstick_median_s']:.2f} s" if "yardstick_median_s" in res else "-"
        ratio = f"{res['ratio']:.2f}x" if "ratio" in res else "n/a"
        if "categorical_median_s" in res:
            rows.append((f"fit {res['label']}, as numeric codes (ratio)", f"{res['forestlab_median_s']:.2f} s", c,
                         ratio, "-", "-"))
            rows.append((f"fit {res['label']}, categorical / numeric codes",
                         f"{res['categorical_median_s']:.2f} s", "-", f"{res['categorical_ratio']:.2f}x", "<= 2.0",
                         "-"))
        else:
            rows.append((f"fit {res['label']} (ratio)", f"{res['forestlab_median_s']:.2f} s", c, ratio, "<= 4.0",
                         "<= 2.5"))
    return rows


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__, formatter_class=argparse.RawDescriptionHelpFormatter)
    ap.add_argument("--quick", action="store_true", help="smaller sizes")
    ap.add_argument("--repeats", type=int, default=3, help="runs per timing (median; default 3)")
    ap.add_argument("--json", help="also write the results to this file")
    ap.add_argument("--only", type=int, nargs="*", help="run only these rows (positions in the plan)")
    ap.add_argument("--child", help=argparse.SUPPRESS)
    args = ap.parse_args()
    if args.child:
        print(json.dumps(child(json.loads(args.child))))
        return
    sys.path.insert(0, str(HERE))
    from run import Yardstick, machine

    def log(text):
        print(text, file=sys.stderr, flush=True)

    rows = QUICK if args.quick else FULL
    rows = rows if args.only is None else [rows[i] for i in args.only]
    info = machine()
    log(f"many-class rows on {info['cpu']}, NumPy {info['numpy']}, load average {info['load_average']}")
    yardstick = Yardstick()
    try:
        results = bench(rows, yardstick, args.repeats, log)
    finally:
        yardstick.close()
    info["load_average_after"] = list(os.getloadavg())
    for row in table_rows(results):
        print(" | ".join(row))
    log(f"load average after: {info['load_average_after']}")
    if args.json:
        Path(args.json).write_text(json.dumps({"machine": info, "rows": results}, indent=1, default=str))


if __name__ == "__main__":
    main()
