"""The many-class (K > 2) search with categorical features: the elements sorted by code once, then each
categorical candidate's *runs* (one per present category) put in the node's category order.

The generic search read every element's value from X, ordered the categories from dense (candidates,
categories, classes) tables and sorted the categorical elements a second time. Here the level's sort by
(candidate, dense rank, item) already groups each candidate's elements by category, in item order within a
category: one run per present category. Their class weights come from one ``bincount`` over (run, class), a
compact table (present categories only); a candidate with one run has no cut, one with two runs only one
partition (its order from the sign of the shares' difference, :func:`.categories.two_category_first`), and a
node with at most two classes orders by one class's share; only candidates of three or more categories in
nodes of three or more classes build the dense (candidates, categories, classes) tables of the power
iterations (:func:`.categories.principal_scores`). With Gini and every candidate categorical the cuts are
scored at the runs (:mod:`.run_gini`; such levels are not even sorted, :mod:`.category_tables`); otherwise the
runs are moved into that order (one gather of the elements by run; no sort), and the many-class cut search
(:func:`.many_class.many_class_cut_scores`) runs on positions as on numeric values. Elements, orders and
arithmetic are those of the generic search, so the trees are the same (see ``benchmarks/RESULTS.md``).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from numpy.typing import NDArray

from .categories import left_sets, principal_scores, two_category_first
from .cuts import record_cuts
from .many_class import ManyClassPath, entropy_table, many_class_cut_scores, splitter_decrease
from .presort import TrainingData
from .run_gini import run_gini_splits
from .elements import Segments
from .segments import run_starts
from .splitter import CartSplitter, EntropySplitter
from .workspace import Workspace, scratch

__all__ = ["CategoryRunsPath", "category_runs_path"]


def category_runs_path(data: TrainingData, splitter: CartSplitter, counts: NDArray[np.uint8]) -> CategoryRunsPath:
    """The batch's counts and classes packed as for :class:`.many_class.ManyClassPath`."""
    packed = counts.astype(np.int32) | (data.target.astype(np.int32) << 8)[None, :]
    table = entropy_table(int(counts.sum(axis=1).max())) if type(splitter) is EntropySplitter else None
    categorical = np.flatnonzero(data.categories > 0)
    codes = bool(np.all(data.dense[categorical].max(axis=1) == data.categories[categorical] - 1))
    return CategoryRunsPath("many_class", (packed.ravel(),), data, table, codes)


@dataclass(frozen=True)
class CategoryRunsPath(ManyClassPath):
    """:class:`.many_class.ManyClassPath` for data with categorical features (and no missing values);
    ``ranks_are_codes``: every categorical feature's dense ranks are its codes (every code is present)."""

    ranks_are_codes: bool = False

    def sorts_nothing(self, cand) -> bool:
        """Whether the level's candidates ``cand`` (node * p + feature) need no sort: Gini, every candidate
        categorical, ranks that are codes (:mod:`.category_tables`)."""
        data = self.data
        return self.table is None and self.ranks_are_codes and bool(np.all(data.categories[cand % data.features] > 0))

    def best_splits(self, seg, splitter: CartSplitter, min_leaf: float, lightest: float, items, parent, means, out,
                    tie: float, work: Workspace | None):
        """Fill ``out`` with the best split of every node of the sorted segments ``seg`` (reordered here)."""
        K = self.data.classes
        packed = np.take(self.columns[0], items.wi, mode="clip")  # the level's items' count | class << 8
        cell = items.node * K + (packed >> 8)
        node_class = np.bincount(cell, weights=packed & 0xFF, minlength=parent.size * K).astype(np.int64)
        column = np.take(node_class, cell, mode="clip") << 24  # and the node's weight of the item's class
        column |= packed
        L = seg.elements
        elem = seg.item_values(column, scratch(work, "mc_elem", L, np.int64))
        cand = np.right_shift(seg.code, seg.code_shift)
        runs = _order_runs(seg, elem, cand, node_class.reshape(parent.size, K), work)
        if runs is not None and self.table is None and runs.cat.size == runs.start.size:  # Gini, all categorical
            return run_gini_splits(seg, runs, splitter, min_leaf, lightest, node_class.reshape(parent.size, K),
                                   parent, out, tie, work)
        if runs is not None:
            elem = runs.move(seg, elem, work)
        w = np.bitwise_and(elem, 0xFF, out=scratch(work, "mc_w", L, np.int32), casting="unsafe")
        y = np.bitwise_and(np.right_shift(elem, 8), 0xFFFF, out=scratch(work, "mc_y", L, np.int32), casting="unsafe")
        class_total = np.right_shift(elem, 24, out=elem)
        nodes, pick, _, sides = many_class_cut_scores(seg, cand, w, y, class_total, K, self.table, min_leaf,
                                                      lightest, parent, tie, work)
        if nodes.size == 0:
            return out
        chosen = seg.candidate(pick)
        decrease = splitter_decrease(splitter, seg, chosen, pick, w, y, K, parent[nodes])
        record_cuts(seg, out, nodes, pick, decrease, sides[0] >= sides[1], chosen)
        if runs is not None:
            runs.record(seg, out, nodes, chosen, pick)
        return out


@dataclass
class _Runs:
    """The level's runs of equal (candidate, value) and the order of the categorical candidates' runs."""

    start: NDArray[np.intp]        # (R,) first element of every run, in the sorted order
    size: NDArray[np.int64]        # (R,) elements of every run
    cat: NDArray[np.intp]          # (P,) the categorical runs (indices into the R runs), in (candidate, code) order
    cat_cand: NDArray[np.int64]    # (P,) their candidates
    weight: NDArray[np.float64]    # (P,) their weights
    position: NDArray[np.int64]    # (P,) their positions in their candidate's order
    sequence: NDArray[np.intp]     # (R,) the runs in their new order
    new_start: NDArray[np.int64]   # (R,) first element of the run at each place of the new order
    first_item: NDArray | None     # (P,) the item of every categorical run's first element (None: codes = ranks)
    by_class: NDArray[np.float64]  # (P, K) the class weights of every categorical run
    rank: NDArray[np.int64]        # (P,) their dense ranks

    def move(self, seg: Segments, elem, work: Workspace | None):
        """Put the elements in the new run order: ``seg.item`` and ``seg.no_cut`` in place, and ``elem``
        (returned, in another buffer)."""
        L = elem.size
        size = self.size[self.sequence]
        source = np.repeat(self.start[self.sequence] - self.new_start, size)
        source += np.arange(L)
        moved = np.take(elem, source, out=scratch(work, "cat_elem", L, np.int64), mode="clip")
        seg.item = np.take(seg.item, source, out=scratch(work, "cat_item", L, seg.item.dtype), mode="clip")
        no_cut = scratch(work, "no_cut", L, np.bool_) if seg.no_cut is None else seg.no_cut
        no_cut[:] = True  # no cut inside a run; the runs of a candidate hold distinct values
        no_cut[self.new_start[1:] - 1] = False
        no_cut[-1] = True
        seg.no_cut = no_cut
        return moved

    def record(self, seg: Segments, out, nodes, chosen, pick) -> None:
        """Left-category bit sets of the nodes whose chosen split is categorical; their threshold becomes NaN."""
        data = seg.data
        is_cat = data.categories[seg.cand_feat[chosen]] > 0
        if not is_cat.any():
            return
        nodes, chosen, pick = nodes[is_cat], chosen[is_cat], pick[is_cat]
        k = int(data.categories.max())
        lo = np.searchsorted(self.cat_cand, chosen, side="left")
        count = np.searchsorted(self.cat_cand, chosen, side="right") - lo
        owner = np.repeat(np.arange(chosen.size), count)
        run = np.arange(owner.size) + np.repeat(lo - (np.cumsum(count) - count), count)
        if self.first_item is None:
            code = self.rank[run]
        else:
            code = data.X[seg.items.row[self.first_item[run]], seg.cand_feat[chosen][owner]].astype(np.int64)
        weight = np.zeros((chosen.size, k))
        weight[owner, code] = self.weight[run]
        pos = np.zeros((chosen.size, k), dtype=np.int64)
        pos[owner, code] = self.position[run]
        at = np.searchsorted(self.new_start, pick, side="right") - 1  # the run ending at each cut
        local = np.searchsorted(self.cat, self.sequence[at])
        out.category_left[nodes] = left_sets(pos, weight, self.position[local], out.missing_left[nodes],
                                             data.category_words)
        out.threshold[nodes] = np.nan


def _order_runs(seg: Segments, elem, cand, node_class, work: Workspace | None) -> _Runs | None:
    """The runs of the level and the category order of every categorical candidate (None without one)."""
    data = seg.data
    L = elem.size
    if seg.no_cut is None:  # every value distinct: one run per element
        start = np.arange(L)
    else:
        first = scratch(work, "cat_first", L, np.bool_)
        first[0] = True
        np.logical_not(seg.no_cut[:-1], out=first[1:])
        start = np.flatnonzero(first)
    size = np.diff(np.append(start, L))
    run_cand = cand[start]
    cat = np.flatnonzero(data.categories[seg.cand_feat[run_cand]] > 0)
    if cat.size == 0:
        return None
    K, db = data.classes, data.dense_bits
    rank = (seg.code[start[cat]] >> (seg.code_shift - db)) & ((1 << db) - 1)
    by_class = _run_classes(elem, start, size, cat, K)
    return _ordered(seg, start, size, cat, run_cand[cat], rank, by_class, node_class, seg.item[start[cat]])


def _ordered(seg: Segments, start, size, cat, cat_cand, rank, by_class, node_class, first_item) -> _Runs:
    """The runs with their categorical candidates' order (:func:`_run_scores`) and new sequence."""
    weight = by_class @ np.ones(by_class.shape[1])  # (integer sums: exact in any order)
    groups = _Groups(cat_cand, seg.cand_node, node_class)
    position = groups.positions(_run_scores(seg.data, groups, rank, weight, by_class))
    sequence = np.arange(start.size)
    sequence[cat[groups.first_run + position]] = cat  # (a candidate's runs stay in its place)
    new_size = size[sequence]
    new_start = np.cumsum(new_size) - new_size
    return _Runs(start, size, cat, cat_cand, weight, position, sequence, new_start, first_item, by_class, rank)


def _run_classes(elem, start, size, cat, K: int) -> NDArray[np.float64]:
    """(P, K) weight of every class in every categorical run (one ``bincount`` over their elements)."""
    if cat.size == start.size:
        elements = elem
        local = np.repeat(np.arange(cat.size), size)
    else:
        count = size[cat]
        local = np.repeat(np.arange(cat.size), count)
        elements = elem[np.arange(local.size) + np.repeat(start[cat] - (np.cumsum(count) - count), count)]
    local *= K
    local += (elements >> 8) & 0xFFFF
    return np.bincount(local, weights=elements & 0xFF, minlength=cat.size * K).reshape(cat.size, K)


class _Groups:
    """The categorical runs grouped by candidate (a candidate's runs are contiguous, in code order)."""

    def __init__(self, cat_cand, cand_node, node_class) -> None:
        self.start = run_starts(cat_cand)  # (G,) first run of every categorical candidate
        self.count = np.diff(np.append(self.start, cat_cand.size))  # its runs: its present categories
        self.first_run = np.repeat(self.start, self.count)  # (P,) first run of every run's candidate
        self.slot = np.arange(cat_cand.size) - self.first_run  # (P,) the run's place among them
        present = node_class > 0
        node = cand_node[cat_cand[self.start]]
        self.classes = np.count_nonzero(present, axis=1)[node]  # (G,) classes in the candidate's node
        self.first_class = np.argmax(present, axis=1)[node]  # (G,) the lowest of them

    def runs(self, which: NDArray[np.intp]) -> NDArray[np.intp]:
        """The runs of the groups ``which``, group by group."""
        count = self.count[which]
        return np.arange(count.sum()) + np.repeat(self.start[which] - (np.cumsum(count) - count), count)

    def positions(self, score: NDArray[np.float64]) -> NDArray[np.int64]:
        """Every run's place in its candidate's order by ``score``, ties in code order."""
        position = np.zeros(score.size, dtype=np.int64)
        two = self.start[self.count == 2]
        position[two] = score[two + 1] < score[two]
        position[two + 1] = 1 - position[two]
        more = np.flatnonzero(self.count > 2)
        if more.size:
            runs = self.runs(more)
            width = int(self.count[more].max())
            owner = np.repeat(np.arange(more.size), self.count[more])
            table = np.full((more.size, width), np.inf)
            table[owner, self.slot[runs]] = score[runs]
            order = np.argsort(table, axis=1, kind="stable")
            place = np.empty_like(order)
            np.put_along_axis(place, order, np.arange(width)[None, :], axis=1)
            position[runs] = place[owner, self.slot[runs]]
        return position


def _run_scores(data: TrainingData, groups: _Groups, rank, weight, by_class):
    """Every categorical run's score in its candidate's order (lower first; ties in code order): the share of
    the node's first class (nodes of at most two classes), 0 / 1 for two categories, else the projection
    on the first principal component (:mod:`.categories`)."""
    score = np.zeros(weight.size)
    few = np.flatnonzero((groups.classes <= 2) & (groups.count > 1))
    runs = groups.runs(few)
    score[runs] = by_class[runs, np.repeat(groups.first_class[few], groups.count[few])] / weight[runs]
    pair = groups.start[(groups.classes > 2) & (groups.count == 2)]  # the first run of each such candidate
    if pair.size:
        shares = np.stack([by_class[pair] / weight[pair, None], by_class[pair + 1] / weight[pair + 1, None]], axis=1)
        score[pair + 1] = np.where(two_category_first(shares), 1.0, -1.0)
    many = np.flatnonzero((groups.classes > 2) & (groups.count > 2))
    if many.size:
        k = int(data.categories.max())
        runs = groups.runs(many)
        cells = np.repeat(np.arange(many.size) * k, groups.count[many]) + rank[runs]
        dense_weight = np.zeros(many.size * k)
        dense_weight[cells] = weight[runs]
        dense_class = np.zeros((many.size * k, by_class.shape[1]))
        dense_class[cells] = by_class[runs]
        scores = principal_scores(dense_weight.reshape(many.size, k), dense_class.reshape(many.size, k, -1))
        score[runs] = scores.ravel()[cells]
    return score
