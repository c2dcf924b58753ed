#!/usr/bin/env python3
"""Where a level's time goes: wall time per (item, level) and per sorted element of every pass of the level
loop, for the fit rows of ``benchmarks/run.py`` (issue 17).

    python3 benchmarks/level_passes.py                 # the four fit rows, a few trees each
    python3 benchmarks/level_passes.py --rows friedman1 --trees 4

How: the engine's functions of each pass are wrapped (module attributes replaced for the duration of the
fit) by timers that add their wall time to a pass, nested calls subtracted from the caller, so every second
of the level loop lands in exactly one pass. The sort (``np.sort``, or the radix sort where
``engine/key_sort.py`` measured it faster: the header says which) runs inside ``sorted_segments``: the sort,
with the decoding of the sorted keys, is what remains of ``sorted_segments`` after the key build.
The wrappers add about 1 us a call (a few hundred calls a tree). Each pass is also split by level size (items
of the search): a pass whose time per element rises with the level's size, while the work per element stays
the same, is bound by memory traffic (its arrays left the L2 / L3 caches), one that stays flat by arithmetic.

Passes:

* ``keys``: gather of dense ranks by (feature, row) and the packed keys (``segments.pair_keys``,
  ``_slot_ranks``);
* ``sort``: the sort of the keys and their decoding (``sorted_segments`` less the keys);
* ``gather``: the statistics of every sorted element (``FastPath.best_splits`` less the search below it);
* ``cumsum``: running sums (``running_sums``, ``_sums_at``);
* ``class changes``: the two-class search's cut positions (``_class_changes``);
* ``segment totals``, ``light cuts``: as named in ``cuts.py`` (the squared-error search forms both inside its
  scoring, in pieces: counted under ``score``);
* ``score``: the impurity arithmetic (what remains of the fast search);
* ``pick``: the best cut per node (``pick_cuts``), ``record``: writing it (``record_cuts``, ``record_sides``);
* ``partition``: children of every item (``grow._partition``), ``subset``: open items of a level
  (``grow._items_of``);
* ``node sums``: the nodes' weights and sums (``FastPath.sides``, ``summaries``), ``draws``: candidates.

Prints one table and writes JSON to ``benchmarks/out/level_passes-<stamp>.json``.
"""

from __future__ import annotations

import argparse
import datetime as dt
import json
import os
import sys
import time
from collections import defaultdict
from pathlib import Path

import numpy as np

REPO = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(REPO))

import forestlab as fl  # noqa: E402
from forestlab.engine import fast_search, grow, level_blocks, search, segments, squared_error  # noqa: E402

sys.path.insert(0, str(REPO / "benchmarks"))
from run import PLANS, forestlab_target, machine, make_data  # noqa: E402

OUT = REPO / "benchmarks" / "out"

#: (module, attribute, pass); classes as "Class.method"
WRAPPED = [
    (segments, "pair_keys", "keys"), (segments, "_slot_ranks", "keys"),
    (search, "sorted_segments", "sort"),
    (fast_search.FastPath, "best_splits", "gather"),
    (fast_search, "binary_best_splits", "score"), (fast_search, "squared_error_best_splits", "score"),
    (fast_search, "running_sums", "cumsum"), (fast_search, "_sums_at", "cumsum"),
    (squared_error, "running_sums", "cumsum"), (squared_error, "pick_cuts", "pick"),
    (squared_error, "record_cuts", "record"), (squared_error, "record_sides", "record"),
    (fast_search, "_class_changes", "class changes"), (fast_search, "_class_boundaries", "class changes"),
    (fast_search, "segment_totals", "segment totals"), (fast_search, "light_cuts", "light cuts"),
    (fast_search, "pick_cuts", "pick"), (fast_search, "record_cuts", "record"),
    (fast_search, "record_sides", "record"),
    (grow, "_partition", "partition"), (grow, "_items_of", "subset"),
    (fast_search.FastPath, "sides", "node sums"), (fast_search.FastPath, "summaries", "node sums"),
    (grow, "draw_masks", "draws"), (grow, "_grow_level", "other"),
]
#: where the level's size is read: the search a level calls, and the level itself
SIZED = [(level_blocks, "best_splits"), (grow, "_grow_level")]
PASSES = ["keys", "sort", "gather", "cumsum", "class changes", "segment totals", "light cuts", "score", "pick",
          "record", "partition", "subset", "node sums", "draws", "other"]
#: level sizes (items of the search) by which the passes are split (int64 arrays of 4k items: 32 KiB, the L1d;
#: 32k items: 256 KiB, a quarter of the 1 MiB L2)
BINS = [(0, 4_096, "< 4k items"), (4_096, 32_768, "4k-32k"), (32_768, 1 << 62, ">= 32k")]


class Timers:
    """Exclusive wall time per (pass, level-size bin), and the items and elements searched per bin."""

    def __init__(self) -> None:
        self.seconds = defaultdict(float)
        self.items = defaultdict(int)
        self.elements = defaultdict(int)
        self.level_items = defaultdict(int)
        self.stack: list[list[float]] = []
        self.bin = BINS[-1][2]

    def wrap(self, name: str, func):
        def timed(*args, **kwargs):
            frame = [0.0]
            self.stack.append(frame)
            t0 = time.perf_counter()
            try:
                return func(*args, **kwargs)
            finally:
                spent = time.perf_counter() - t0
                self.stack.pop()
                self.seconds[(name, self.bin)] += spent - frame[0]
                if self.stack:
                    self.stack[-1][0] += spent
        return timed


def _search_size(timers: Timers, func):
    """Wrap ``best_splits`` to set the level-size bin and count the items and sorted elements searched."""
    def counted(data, splitter, min_leaf, batch, items, node_tree, mask, *rest):
        N, level_bin = items.row.size, timers.bin
        timers.bin = next(label for lo, hi, label in BINS if lo <= N < hi)
        timers.items[timers.bin] += N
        # elements: every item once per candidate of its node
        timers.elements[timers.bin] += int(np.take(mask.sum(axis=1), items.node).sum()) if N else 0
        try:
            return func(data, splitter, min_leaf, batch, items, node_tree, mask, *rest)
        finally:
            timers.bin = level_bin
    return counted


def _level_size(timers: Timers, func):
    def sized(data, rules, gens, subspace, batch, items, node_tree, depth, sides=None):
        N = items.row.size
        timers.bin = next(label for lo, hi, label in BINS if lo <= N < hi)
        timers.level_items[timers.bin] += N
        return func(data, rules, gens, subspace, batch, items, node_tree, depth, sides)
    return sized


def profile(row, trees: int) -> dict:
    label, name, n, p, m, _, min_leaf = row
    data = make_data(name, n, p)
    y = forestlab_target(data)
    settings = dict(sampler=m, min_leaf=min_leaf, task=data["task"])
    fl.Forest(trees=1, rng=0, **settings).fit(data["X"][:500], y[:500])  # NumPy's code paths loaded
    timers = Timers()
    saved = [(owner, attr, owner.__dict__[attr]) for owner, attr, _ in WRAPPED] + \
        [(owner, attr, owner.__dict__[attr]) for owner, attr in SIZED]
    try:
        for owner, attr, pas in WRAPPED:
            setattr(owner, attr, timers.wrap(pas, owner.__dict__[attr]))
        level_blocks.best_splits = _search_size(timers, search.best_splits)
        grow._grow_level = _level_size(timers, grow._grow_level)
        t0 = time.perf_counter()
        fl.Forest(trees=trees, rng=1, **settings).fit(data["X"], y)
        wall = time.perf_counter() - t0
    finally:
        for owner, attr, func in saved:
            setattr(owner, attr, func)
    return _summary(label, trees, wall, timers)


def _summary(label: str, trees: int, wall: float, timers: Timers) -> dict:
    bins = [b for _, _, b in BINS]
    level_items = sum(timers.level_items.values())
    elements = sum(timers.elements.values())
    rows = []
    for pas in PASSES:
        per_bin = {b: timers.seconds[(pas, b)] for b in bins}
        total = sum(per_bin.values())
        rows.append({
            "pass": pas, "ms_per_tree": 1e3 * total / trees, "share": total / wall,
            "ns_per_item_level": 1e9 * total / max(level_items, 1),
            "ns_per_element": 1e9 * total / max(elements, 1),
            "ns_per_element_by_size": {b: 1e9 * per_bin[b] / max(timers.elements[b], 1) for b in bins},
            "ms_per_tree_by_size": {b: 1e3 * per_bin[b] / trees for b in bins}})
    timed = sum(timers.seconds.values())
    return {"row": label, "trees": trees, "wall_s": wall, "timed_s": timed, "item_levels": level_items,
            "elements": elements, "elements_by_size": dict(timers.elements),
            "ns_per_item_level": 1e9 * wall / max(level_items, 1), "passes": rows}


def table(result: dict) -> str:
    bins = [b for _, _, b in BINS]
    head = ["pass", "ms/tree", "share", "ns/(item, level)", "ns/element"] + [f"ns/el {b}" for b in bins]
    lines = [f"{result['row']}: {result['trees']} trees, {result['wall_s']:.2f} s, "
             f"{result['item_levels'] / result['trees']:.0f} (item, level) pairs and "
             f"{result['elements'] / result['trees']:.0f} sorted elements a tree, "
             f"{result['ns_per_item_level']:.0f} ns per (item, level); elements by level size: "
             + ", ".join(f"{b} {result['elements_by_size'].get(b, 0) / max(result['elements'], 1):.0%}" for b in bins)
             + "; time by level size: " + ", ".join(
                 f"{b} {sum(r['ms_per_tree_by_size'][b] for r in result['passes']):.1f} ms/tree" for b in bins),
             "", "| " + " | ".join(head) + " |", "|" + "---|" * len(head)]
    for r in result["passes"]:
        cells = [r["pass"], f"{r['ms_per_tree']:.1f}", f"{r['share']:.1%}", f"{r['ns_per_item_level']:.1f}",
                 f"{r['ns_per_element']:.2f}"] + [f"{r['ns_per_element_by_size'][b]:.2f}" for b in bins]
        lines.append("| " + " | ".join(cells) + " |")
    return "\n".join(lines)


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__, formatter_class=argparse.RawDescriptionHelpFormatter)
    ap.add_argument("--rows", default="", help="comma-separated words of the fit rows to profile (default all)")
    ap.add_argument("--trees", type=int, default=0, help="trees per fit (default: 8, 200 at n = 1 000)")
    args = ap.parse_args()
    words = [w for w in args.rows.split(",") if w]
    info = machine()
    results = {"machine": info, "rows": []}
    print(f"level passes on {info['cpu']}, NumPy {info['numpy']}, SIMD {', '.join(info['simd_found'])}, "
          f"key sort {info['key_sort']}, load average {', '.join(f'{x:.2f}' for x in info['load_average'])}\n")
    for row in PLANS["full"]["fits"]:
        if words and not any(w in row[0] for w in words):
            continue
        trees = args.trees or (200 if row[2] <= 1_000 else 20 if row[2] <= 10_000 else 8)
        result = profile(row, trees)
        result["load_average"] = os.getloadavg()
        results["rows"].append(result)
        print(table(result) + "\n", flush=True)
    OUT.mkdir(parents=True, exist_ok=True)
    stamp = dt.datetime.now().strftime("%Y%m%d-%H%M%S")
    path = OUT / f"level_passes-{stamp}.json"
    path.write_text(json.dumps(results, indent=1, default=str))
    print(f"written: {path}")


if __name__ == "__main__":
    main()
