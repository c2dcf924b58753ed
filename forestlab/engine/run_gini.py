"""The many-class Gini search of a level whose candidates are all categorical, at the runs, not the elements.

Once a candidate's runs (one per present category, :mod:`.category_runs`) are in the node's category order,
its cuts lie only between runs, and a side's class weights at a cut are the running sums of the runs' class
weights: integers, exact in floating point, so its ``W`` and ``Q = sum_k c_k**2`` are the exact integers
that :func:`.many_class.many_class_cut_scores` forms from the elements, and ``Q_l / W_l + Q_r / W_r`` is the
same score with the same roundings. So one pass over a (runs, classes) table replaces the class ranks and
the running sums over the elements, and the elements are never moved. The cut is picked as there (the first
within the tie tolerance, :func:`.cuts.pick_cuts`) at the element that ends its run in the new order, and
the decrease is formed from the sides' class weights by the splitter, as :func:`.many_class.splitter_decrease`
forms it.
"""

from __future__ import annotations

import numpy as np

from .cuts import per_node, pick_cuts
from .segments import run_starts
from .splitter import CartSplitter, call_splitter
from .workspace import Workspace

__all__ = ["run_gini_splits"]


def run_gini_splits(seg, runs, splitter: CartSplitter, min_leaf: float, lightest: float, node_class, parent, out,
                    tie: float, work: Workspace | None):
    """Fill ``out`` with the best Gini split of every node from the ordered runs ``runs`` (a
    :class:`.category_runs._Runs` whose runs are all categorical) and the nodes' class weights ``node_class``
    (nodes, K)."""
    K = node_class.shape[1]
    seq = runs.sequence
    group = run_starts(runs.cat_cand)  # (G,) every candidate's first run (the same places in the new order)
    count = np.diff(np.append(group, runs.cat_cand.size))
    node_total = node_class.astype(np.float64)  # (nodes, K)
    cand_total = node_total[seg.cand_node[runs.cat_cand[group]]]  # (G, K) a candidate's runs sum to its node
    table = runs.by_class[seq]  # (P, K) the runs in the new order
    across = np.einsum("pk,pk->p", table, node_total[seg.cand_node[runs.cat_cand]])  # each run's T . c
    table[group[1:]] -= cand_total[:-1]  # so that one cumsum restarts at every candidate
    left = np.cumsum(table, axis=0, out=table)
    weight = runs.weight[seq]
    weight[group[1:]] -= cand_total[:-1].sum(axis=1)
    wl = np.cumsum(weight, out=weight)
    q_left = np.einsum("pk,pk->p", left, left)
    # the right side: W_r = W - W_l and Q_r = sum (T_k - l_k)**2 = Q - 2 T . l + Q_l (integers: exact), T . l
    # the running sum of the runs' T . c
    node_q = np.einsum("nk,nk->n", node_total, node_total)
    cand_q = np.repeat(node_q[seg.cand_node[runs.cat_cand[group]]], count)
    cand_w = np.repeat(node_total.sum(axis=1)[seg.cand_node[runs.cat_cand[group]]], count)
    across[group[1:]] -= np.add.reduceat(across, group)[:-1]
    dot = np.cumsum(across, out=across)
    wr = cand_w - wl
    q_right = cand_q - 2 * dot + q_left
    with np.errstate(divide="ignore", invalid="ignore"):
        score = np.divide(q_left, wl)
        score += q_right / wr
    score[group + count - 1] = -np.inf  # no cut after a candidate's last run
    if min_leaf > lightest:
        score[(wl < min_leaf) | (wr < min_leaf)] = -np.inf
    nodes = seg.cand_node[seg.node_first]
    counts = node_total[nodes]
    base = per_node(seg, parent, -np.einsum("nk,nk->n", counts, counts) / counts.sum(axis=1))
    element = runs.new_start + runs.size[seq] - 1  # the last element of each run
    nodes, pick, _ = pick_cuts(seg, parent, base, tie, score, None, work, at=element)
    if nodes.size == 0:
        return out
    run, element = pick, element[pick]
    chosen = runs.cat_cand[run]
    S = np.empty((run.size, 2, 1 + K))
    S[:, 0, 1:] = left[run]
    S[:, 1, 1:] = node_total[nodes] - left[run]
    S[..., 0] = S[..., 1:].sum(axis=-1)
    impurity = call_splitter(splitter, "impurity", S)
    decrease = parent[nodes] - S[:, 0, 0] * impurity[:, 0] - S[:, 1, 0] * impurity[:, 1]
    out.found[nodes] = True  # (the threshold of a categorical split is NaN, its dense cut rank unused)
    out.feature[nodes] = seg.cand_feat[chosen]
    out.decrease[nodes] = decrease
    out.missing_left[nodes] = wl[run] >= wr[run]  # (categories absent from the node: to the heavier side)
    runs.record(seg, out, nodes, chosen, element)
    return out
