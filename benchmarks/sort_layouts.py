#!/usr/bin/env python3
"""Prototypes of a level's sort in other layouts, against the engine's one ``np.sort`` of packed 64-bit keys
(issue 17): would sorting each segment apart pay where the 64-bit sort is dear (AVX2 kernels)?

    python3 benchmarks/sort_layouts.py                      # Friedman #1, n = 100 000, one tree
    python3 benchmarks/sort_layouts.py --problem twonorm

One tree is fitted with ``np.sort`` (``key_sort.MODE = "numpy"``: the radix path builds no item bits) and
the packed keys of every level search of more than 4 000 elements are captured (the slot-major ``(candidate <<
dense_bits | dense rank) << item_bits | item`` of ``segments.pair_keys``). Each
level is then sorted three ways, each median of 7 calls:

* ``today``: ``np.sort`` of the 64-bit keys and the items decoded from their low bits;
* ``segmented``: the items grouped by node (a stable ``argsort`` of the node ids), the 64-bit keys scattered
  into padded rows of a power-of-two width per segment, ``np.sort(axis=1)`` per width, the valid entries
  gathered back (everything timed);
* ``grouped``: the best case of an engine that kept the items grouped by node from level to level: the keys
  ``dense << 15 | position in the node`` (32 bits; levels whose nodes hold at most 2**15 items) are formed in
  segment order ahead of the timing, and only the padded rows (with every element's slot in them), their
  32-bit row sorts, the gather back and the items decoded from the positions are timed.

Every way is checked to give the items in the order of ``today``. Prints one table and writes JSON to
``benchmarks/out/sort_layouts-<stamp>.json``.
"""

from __future__ import annotations

import argparse
import datetime as dt
import json
import sys
import time
from pathlib import Path

import numpy as np

REPO = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(REPO))

import forestlab as fl  # noqa: E402
from forestlab.engine import key_sort, segments  # noqa: E402

sys.path.insert(0, str(REPO / "benchmarks"))
from run import forestlab_target, machine, make_data  # noqa: E402

OUT = REPO / "benchmarks" / "out"


def capture(problem: str, n: int) -> list[dict]:
    """The slot-major packed keys of every level search of one tree with more than 4 000 elements."""
    data = make_data(problem, n, 10, 0)
    levels = []
    original = segments.pair_keys

    def keep(data_, items, cand_feat, ncand, first, item_bits, work=None):
        key, pair_item = original(data_, items, cand_feat, ncand, first, item_bits, work)
        if item_bits and pair_item is None and key.size > 4_000:
            levels.append({"key": key.copy(), "node": items.node.copy(), "ncand": ncand.copy(),
                           "first": first.copy(), "item_bits": item_bits, "dense_bits": data_.dense_bits})
        return key, pair_item

    segments.pair_keys, mode = keep, key_sort.MODE
    key_sort.MODE = "numpy"
    try:
        min_leaf = 5 if data["task"] == "regression" else None
        fl.Forest(1, sampler=3, min_leaf=min_leaf, task=data["task"], rng=0).fit(data["X"], forestlab_target(data))
    finally:
        segments.pair_keys, key_sort.MODE = original, mode
    return levels


def layout(level: dict) -> dict:
    """Segment sizes, padded rows (one block of rows a power-of-two width) and each item's place in its node."""
    node, ncand = level["node"], level["ncand"]
    K, N = ncand.size, node.size
    node_size = np.bincount(node, minlength=K)
    node_start = np.cumsum(node_size) - node_size
    grouped = np.argsort(node, kind="stable")  # the items by node, in item order within a node
    size = np.repeat(node_size, ncand)  # (C,) every candidate's segment
    start = np.cumsum(size) - size
    width_bits = np.ceil(np.log2(np.maximum(size, 1))).astype(np.int64)
    by_width = np.argsort(width_bits, kind="stable")
    width = (1 << width_bits)[by_width]
    row_start = np.empty(size.size, np.int64)
    row_start[by_width] = np.cumsum(width) - width
    bounds = np.searchsorted(width_bits[by_width], np.arange(width_bits.max() + 2))
    blocks = [(int((np.cumsum(width) - width)[bounds[b]]), int(bounds[b + 1] - bounds[b]), 1 << b)
              for b in range(width_bits.max() + 1) if bounds[b + 1] > bounds[b]]
    return {"K": K, "N": N, "node_size": node_size, "node_start": node_start, "grouped": grouped, "size": size,
            "start": start, "row_start": row_start, "blocks": blocks, "padded": int(width.sum()),
            "cand_node": np.repeat(np.arange(K), ncand)}


def padded_slots(lay: dict) -> np.ndarray:
    """Every element's slot among the padded rows (segment order; timed: a level would form it anew)."""
    slot = np.repeat(lay["row_start"] - lay["start"], lay["size"])
    slot += np.arange(slot.size)
    return slot


def sort_rows(padded: np.ndarray, blocks) -> None:
    for first, rows, width in blocks:
        padded[first:first + rows * width].reshape(rows, width).sort(axis=1)


def today(level: dict):
    key = level["key"].copy()
    key.sort()
    return np.bitwise_and(key, (1 << level["item_bits"]) - 1)


def segmented(level: dict, lay: dict):
    key, node, first = level["key"], level["node"], level["first"]
    m = key.size // lay["N"]
    place = np.empty(lay["N"], np.int64)  # each item's position among its node's items
    grouped = np.argsort(node, kind="stable")
    place[grouped] = np.arange(lay["N"]) - np.repeat(lay["node_start"], lay["node_size"])
    padded = np.full(lay["padded"], np.iinfo(np.int64).max, np.int64)
    for j, keys in enumerate(key.reshape(m, lay["N"])):
        padded[lay["row_start"].take(first.take(node) + j) + place] = keys
    sort_rows(padded, lay["blocks"])
    return np.bitwise_and(padded.take(padded_slots(lay)), (1 << level["item_bits"]) - 1)


def grouped_keys(level: dict, lay: dict) -> np.ndarray:
    """``dense << 15 | position in the node`` in segment order, as an engine keeping the grouping would form
    them (not timed)."""
    key, node, first, ib = level["key"], level["node"], level["first"], level["item_bits"]
    m = key.size // lay["N"]
    place = np.empty(lay["N"], np.int64)
    place[lay["grouped"]] = np.arange(lay["N"]) - np.repeat(lay["node_start"], lay["node_size"])
    dense = (key.reshape(m, lay["N"]) >> ib) & ((1 << level["dense_bits"]) - 1)
    cand = first[node][None, :] + np.arange(m)[:, None]
    places = np.broadcast_to(place, (m, lay["N"])).ravel()
    order = np.lexsort((places, cand.ravel()))
    return ((dense.ravel() << 15) | places).astype(np.uint32)[order]


def grouped(keys32: np.ndarray, lay: dict):
    padded = np.full(lay["padded"], 0xFFFFFFFF, np.uint32)
    slot = padded_slots(lay)
    padded[slot] = keys32
    sort_rows(padded, lay["blocks"])
    at = np.bitwise_and(padded.take(slot), 0x7FFF, dtype=np.int64, casting="unsafe")
    at += np.repeat(lay["node_start"][lay["cand_node"]], lay["size"])
    return lay["grouped"].take(at)


def median_time(f, repeats: int = 7) -> float:
    times = []
    for _ in range(repeats):
        t0 = time.perf_counter()
        f()
        times.append(time.perf_counter() - t0)
    return sorted(times)[repeats // 2]


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__, formatter_class=argparse.RawDescriptionHelpFormatter)
    ap.add_argument("--problem", default="friedman1", choices=["friedman1", "twonorm"])
    ap.add_argument("--n", type=int, default=100_000)
    args = ap.parse_args()
    info = machine()
    print(f"sort layouts on {info['cpu']}, NumPy {info['numpy']}, SIMD {', '.join(info['simd_found'])}; "
          f"{args.problem} n={args.n}, one tree\n")
    print("| elements | nodes | today ns/el | segmented ns/el | grouped ns/el |\n|---|---|---|---|---|")
    rows = []
    for level in capture(args.problem, args.n):
        lay = layout(level)
        L = level["key"].size
        expected = today(level)
        assert np.array_equal(segmented(level, lay), expected), "segmented: another order"
        row = {"elements": L, "nodes": lay["K"], "today_s": median_time(lambda: today(level)),
               "segmented_s": median_time(lambda: segmented(level, lay)), "grouped_s": None}
        if lay["node_size"].max() <= 1 << 15 and level["dense_bits"] <= 17:
            keys32 = grouped_keys(level, lay)
            assert np.array_equal(grouped(keys32, lay), expected), "grouped: another order"
            row["grouped_s"] = median_time(lambda: grouped(keys32, lay))
        rows.append(row)
        cells = [row[k] / L * 1e9 if row[k] is not None else None for k in ("today_s", "segmented_s", "grouped_s")]
        print(f"| {L} | {lay['K']} | " + " | ".join("-" if c is None else f"{c:.2f}" for c in cells) + " |",
              flush=True)
    both = [r for r in rows if r["grouped_s"] is not None]
    total = {k: sum(r[k] for r in both) for k in ("today_s", "segmented_s", "grouped_s")}
    print(f"\nlevels with all three ({len(both)}): today {total['today_s'] * 1e3:.1f} ms, segmented "
          f"{total['segmented_s'] * 1e3:.1f} ms, grouped {total['grouped_s'] * 1e3:.1f} ms")
    OUT.mkdir(parents=True, exist_ok=True)
    path = OUT / f"sort_layouts-{dt.datetime.now().strftime('%Y%m%d-%H%M%S')}.json"
    path.write_text(json.dumps({"machine": info, "problem": args.problem, "n": args.n, "levels": rows},
                               indent=1, default=str))
    print(f"written: {path}")


if __name__ == "__main__":
    main()
