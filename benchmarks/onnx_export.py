"""Size of the exported ONNX file for 500 trees at n = 10 000, and onnxruntime's agreement with forestlab.

Run from the repository root: ``PYTHONPATH=. python3 benchmarks/onnx_export.py [--trees 500]`` (needs
``pip install -e '.[onnx,test]'``). Two forests of 500 trees on n = 10 000 cases: waveform (3 classes, 21
inputs; Breiman et al. 1984) and Friedman #1 (regression, 10 inputs; Friedman 1991), their inputs recorded to
two decimals and 5% missing. Each is exported and scored in onnxruntime on 10 000 fresh cases of the same
kind, and on the same cases rounded to float32. Prints a table; figures go in benchmarks/RESULTS.md.
"""

from __future__ import annotations

import argparse
import os
import tempfile
import time

import numpy as np
import onnxruntime as ort

import forestlab as fl
from forestlab.export.thresholds import forest_thresholds
from forestlab.synthetic import friedman1, waveform

N = 10_000


def recorded(X: np.ndarray, rng: np.random.Generator) -> np.ndarray:
    """Inputs as a data logger writes them: two decimals, 5% missing."""
    X = np.round(X, 2)
    X[rng.random(X.shape) < 0.05] = np.nan
    return X


def measure(name: str, make, trees: int) -> dict:
    rng = np.random.default_rng(7)
    X, y = make(N, rng=1)
    X = recorded(X, rng)
    start = time.perf_counter()
    forest = fl.Forest(trees=trees, rng=2).fit(X, y)
    fit = time.perf_counter() - start
    with tempfile.TemporaryDirectory() as folder:
        path = os.path.join(folder, "forest.onnx")
        start = time.perf_counter()
        forest.to_onnx(path)
        export = time.perf_counter() - start
        size = os.path.getsize(path)
        start = time.perf_counter()
        session = ort.InferenceSession(path, providers=["CPUExecutionProvider"])
        load = time.perf_counter() - start
        fresh = recorded(make(N, rng=3)[0], rng)
        row = {"name": name, "trees": trees, "fit s": fit, "export s": export, "MB": size / 1e6,
               "nodes": sum(forest.tree(b).nodes for b in range(trees)), "load s": load,
               "moved": forest_thresholds(forest._view)[1]}
        for kind, rows in (("decimal", fresh), ("float32", fresh.astype(np.float32).astype(np.float64))):
            start = time.perf_counter()
            out = session.run(None, {"X": rows.astype(np.float32)})
            row[f"run s ({kind})"] = time.perf_counter() - start
            if forest.task == "classification":
                gap = np.abs(out[1] - forest.votes(rows)).max(axis=1)
                row[f"labels equal ({kind})"] = float(np.mean(out[0] == forest.predict(rows)))
                row[f"max share diff ({kind})"] = float(gap.max())
                row[f"rows with another vote ({kind})"] = int(np.count_nonzero(gap > 0.5 / trees))
            else:
                gap = np.abs(out[0] - forest.predict(rows))
                leaves = max(np.abs(forest.tree(b).value).max() for b in range(trees))
                row[f"max mean diff ({kind})"] = float(gap.max())
                # beyond float32 summation of the trees' values (Higham 2002, section 4.2): another leaf
                row[f"rows beyond rounding ({kind})"] = int(np.count_nonzero(gap > (trees + 1) * 2.0**-24 * leaves))
    return row


def main() -> None:
    parser = argparse.ArgumentParser()
    parser.add_argument("--trees", type=int, default=500)
    args = parser.parse_args()
    print(f"forestlab {fl.__version__}, onnxruntime {ort.__version__}, n = {N}, {args.trees} trees")
    for name, make in (("waveform", waveform), ("friedman1", friedman1)):
        row = measure(name, make, args.trees)
        print("  ".join(f"{k}: {v:.3g}" if isinstance(v, float) else f"{k}: {v}" for k, v in row.items()))


if __name__ == "__main__":
    main()
