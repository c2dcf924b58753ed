"""A level searched in blocks of candidates, so that its sorted elements stay within a budget (issue 17).

A level of ``L`` sorted elements holds its keys, gathered statistics, running sums and scores, a few tens of
bytes an element: at a million rows the root level (``L = m N``, ``N`` about 632 000 in-bag rows) was most
of a fit's working memory, and every level above a few hundred thousand rows holds about as much. Levels of
more than :data:`BLOCK_ELEMENTS` elements are therefore searched in blocks of consecutive candidates (in the
level's (node, feature) order), each block sorted and scored on its own by :func:`.search.best_splits`:
whole nodes together where they fit, else the candidates of one node a few at a time (at least one
whole candidate a block). A two-class level whose nodes have the same number of candidates takes instead
the same candidates of every node a block (the first of each node, then the second ...): every block then
holds all the level's items, none are taken out, and integer sums are exact in any order.

The splits are those of the search of the whole level, bit for bit:

* every element of a block scores as in the whole level. Integer sums are exact in any order; the
  floating-point running sums (squared error) continue from the blocks before (:class:`.running.Carry`),
  so every segment sees the same operands in the same order as in one search of the level;
* a node searched in one block is searched as in the whole level (its candidates in order, the same tie
  bar). A node's candidates are spread over blocks only where its weight, which the search reads from its
  first candidate's segment, is an integer sum, the same in any block (not for squared error with case
  weights);
* a node whose candidates span blocks takes the block with the largest decrease where every other block's
  falls short of it by far more than the tie tolerance (:data:`_CLEAR_GAP`): then the node's best score
  lies in that block alone, its tie bar is the whole level's, no cut of another block reaches it, and the
  first cut reaching it is that block's pick. Where two blocks come closer (an exact or near tie between
  features, as with duplicated columns), the node is searched again over all its candidates at once,
  its running sums continued from where they stood before its first block.

Only the two-class and squared-error fast paths are searched in blocks (the generic and many-class
searches keep their floating-point running sums to themselves); smaller levels, and every level of a fit
of up to about a hundred thousand rows, take one search as before.
"""

from __future__ import annotations

import numpy as np

from .fast_search import FastPath
from .running import Carry
from .search import Splits, best_splits
from .elements import Items

__all__ = ["BLOCK_ELEMENTS", "level_best_splits"]

#: Sorted elements (node, candidate feature, item) a level's search holds at a time, where it can: larger
#: levels are searched in blocks of candidates (a block holds at least one whole candidate)
BLOCK_ELEMENTS = 1 << 19

#: Relative gap (to the larger of the best decrease and the node's ``W i(t)``) between the best decreases
#: of two blocks of one node beyond which the lower one cannot hold the node's pick: 1000 times the tie
#: tolerance, far beyond any rounding of the decreases
_CLEAR_GAP = 1e-9


def level_best_splits(data, splitter, min_leaf: float, batch, items: Items, node_tree, mask, parent,
                      means=None) -> Splits:
    """:func:`.search.best_splits` of a level, in blocks of candidates where its sorted elements would
    exceed :data:`BLOCK_ELEMENTS`; the same splits bit for bit."""
    search = (data, splitter, min_leaf, batch)
    budget = BLOCK_ELEMENTS
    N, K = items.row.size, mask.shape[0]
    if not isinstance(batch.fast, FastPath) or N * mask.shape[1] <= budget:
        return best_splits(*search, items, node_tree, mask, parent, means)
    ncand = np.count_nonzero(mask, axis=1)
    m = int(ncand.max(initial=0))
    if N * m <= budget:
        return best_splits(*search, items, node_tree, mask, parent, means)
    if batch.fast.kind == "binary" and K > 1 and bool(np.all(ncand == m)):  # (integer sums: in any order)
        return _slot_blocks(search, items, node_tree, mask, parent, m, max(1, budget // N))
    size = np.bincount(items.node, minlength=K)
    elements = size * ncand
    if int(elements.sum()) <= budget:
        return best_splits(*search, items, node_tree, mask, parent, means)
    first, last = _node_groups(elements, budget)
    # a node's weight is read from its first candidate's segment: exact in any block where it is an integer
    # sum (no case weights, or two classes, whose weights are counts), else the node is not split into blocks
    big = (elements[first] > budget) & (batch.fast.kind == "binary" or data.weights is None)
    out = Splits.none(K, data.category_words)
    carry = Carry()
    of_group = None if first.size == 1 else np.repeat(np.arange(first.size, dtype=_group_type(first.size)),
                                                       last - first)
    group_of_item = None if of_group is None else np.take(of_group, items.node, mode="clip")
    for g, (lo, hi) in enumerate(zip(first.tolist(), last.tolist())):
        sub = items if group_of_item is None else _group_items(items, group_of_item, g, lo)
        part = slice(lo, hi)
        args = (node_tree[part], parent[part], None if means is None else means[part])
        if not big[g]:  # whole nodes
            out.update(part, _search(search, sub, mask[part], args, carry))
            continue
        before = carry.copy()  # (where the node's running sums start, should it be searched again)
        features = np.flatnonzero(mask[lo])
        step = max(1, budget // int(size[lo]))
        results = []
        for at in range(0, features.size, step):
            one = np.zeros((1, mask.shape[1]), dtype=bool)
            one[0, features[at:at + step]] = True
            results.append(_search(search, sub, one, args, carry))
        chosen = _clear_pick(results, float(parent[lo]))
        if chosen is None:  # blocks too close to tell: the node's candidates searched together
            chosen = _search(search, sub, mask[part], args, before.copy())
        out.update(part, chosen)
    return out


def _slot_blocks(search, items: Items, node_tree, mask, parent, m: int, step: int) -> Splits:
    """The two-class search of a level whose nodes have ``m`` candidates each, in blocks of ``step``
    candidates of every node (the first ``step`` of each node, then the next ...): every block holds all the
    level's items, so none are taken out, and its integer sums are exact in any order."""
    K, p = mask.shape
    feature = (np.flatnonzero(mask) % p).reshape(K, m)  # each node's candidates, in order
    rows = np.arange(K)[:, None]
    results = []
    for at in range(0, m, step):
        part = np.zeros_like(mask)
        part[rows, feature[:, at:at + step]] = True
        results.append(best_splits(*search, items, node_tree, part, parent))
    close, chosen = _close_blocks(results, parent)
    out = Splits.none(K, search[0].category_words)
    for b, result in enumerate(results):
        mine = np.flatnonzero((close == 1) & (chosen == b))
        out.update(mine, result, mine)
    again = np.flatnonzero(close > 1)  # blocks too close to tell: those nodes searched whole
    if again.size:
        keep = np.zeros(K, dtype=bool)
        keep[again] = True
        sub = items.take(np.flatnonzero(np.take(keep, items.node, mode="clip")))
        sub.node = np.take(np.cumsum(keep) - 1, sub.node, mode="clip")
        out.update(again, best_splits(*search, sub, node_tree[again], mask[again], parent[again]))
    return out


def _close_blocks(results: list[Splits], parent):
    """:func:`_clear_pick` for every node of a level at once: per node, how many blocks found a cut within
    :data:`_CLEAR_GAP` of its largest decrease (1: that block holds the pick; 0: none found a cut), and the
    first block holding the largest."""
    found = np.stack([r.found for r in results])
    decrease = np.where(found, np.stack([r.decrease for r in results]), -np.inf)
    best = decrease.max(axis=0)
    bar = best - _CLEAR_GAP * np.maximum(np.abs(best), np.abs(parent))
    return np.count_nonzero(found & (decrease >= bar), axis=0), np.argmax(decrease, axis=0)


def _search(search, items: Items, mask, args, carry: Carry) -> Splits:
    node_tree, parent, means = args
    return best_splits(*search, items, node_tree, mask, parent, means, carry)


def _node_groups(elements, budget: int):
    """Consecutive node ranges ``[first, last)`` of at most ``budget`` elements each, or of one larger node,
    each range as long as the budget allows (a loop over the ranges, each found by one ``searchsorted``)."""
    K = elements.size
    end = np.cumsum(elements)
    first, k = [], 0
    while k < K:
        first.append(k)
        k = max(k + 1, int(np.searchsorted(end, end[k] - elements[k] + budget, side="right")))
    first = np.array(first, dtype=np.int64)
    return first, np.append(first[1:], K)


def _group_type(groups: int) -> type:
    """The narrowest integer type numbering ``groups`` groups (one byte or two an item, compared faster)."""
    return np.uint8 if groups <= 1 << 8 else np.uint16 if groups <= 1 << 16 else np.int64


def _group_items(items: Items, group_of_item, g: int, lo: int) -> Items:
    """The items of the nodes of group ``g`` (whose first node is ``lo``), in order, numbered among them."""
    sub = items.take(np.flatnonzero(group_of_item == g))
    sub.node -= lo
    return sub


def _clear_pick(results: list[Splits], parent: float) -> Splits | None:
    """The block holding one node's pick: the one with the largest decrease, if every other block that found
    a cut falls short of it by more than :data:`_CLEAR_GAP`; None where two come closer."""
    found = [r for r in results if r.found[0]]
    if not found:
        return results[0]
    decrease = np.array([r.decrease[0] for r in found])
    best = int(np.argmax(decrease))
    bar = decrease[best] - _CLEAR_GAP * max(abs(float(decrease[best])), abs(parent))
    return found[best] if np.count_nonzero(decrease >= bar) == 1 else None
