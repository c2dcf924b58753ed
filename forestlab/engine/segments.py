"""The sorted elements of a level: every open (tree, row) item, and the items of every (node, candidate
feature) pair sorted by that feature's dense rank, concatenated into segments.

Two ways to sort, both exact (see ``ENGINE.md``): one ``np.sort`` of packed 64-bit (candidate, dense rank,
item) keys, or, for the fast paths where it fits, of 32-bit codes ``candidate << bits | feature * n + position``
read back through the presorted row order. Where the machine runs a radix sort faster (:mod:`.key_sort`), the
(candidate, dense rank) codes are put in their stable order instead (no item in the key, no read-back).
"""

from __future__ import annotations

import numpy as np
from numpy.typing import NDArray

from .elements import _GATHER_BLOCK, Items, Segments, _item_type
from .key_sort import radix_wanted, stable_order
from .presort import TrainingData
from .workspace import Workspace, scratch

__all__ = ["pair_keys", "run_starts", "sorted_segments"]


def sorted_segments(data: TrainingData, items: Items, node_tree, mask, cand, work: Workspace | None = None,
                     by_position: bool = False) -> Segments:
    """Sort all (candidate, item) pairs of a level by candidate and value with one ``np.sort``.

    Each pair's key is ``code << item_bits | item`` with ``code = candidate << dense_bits | dense rank``:
    sorting the keys sorts every candidate's items by value, ties in item order, and the item comes back
    in the low bits; neighbours with equal codes hold equal values. Should the key need more than 63 bits,
    a stable argsort of the codes does the same, as does the radix sort of :mod:`.key_sort` (which needs no
    item in the key) where it is the faster. With ``by_position`` (the fast searches, which need each
    element's row and statistics index, not its item), :func:`_position_segments` sorts 32-bit codes
    instead where it applies, unless the radix sort is the faster (it sorts the codes' digits without an
    item either way, and the read-back through the row order costs more than the item's recovery: 0.92-0.99x
    the fit without it, AMD EPYC family 25 model 17); the elements come out in the same order.
    """
    p = data.features
    K = mask.shape[0]
    cand_node, cand_feat = np.divmod(cand, p)
    ncand = np.bincount(cand_node, minlength=K)
    first = ncand.cumsum() - ncand
    size = (np.bincount(items.node, minlength=K) if items.size is None else items.size)[cand_node]
    start = size.cumsum() - size
    parts = (cand_node, cand_feat, node_tree[cand_node], start, size, first[ncand > 0])
    tie_free = data.tie_free is not None and bool(data.tie_free[cand_feat].all())
    code_bits = (cand.size - 1).bit_length() + data.dense_bits
    radix = radix_wanted(int(size.sum()), code_bits)
    if by_position and tie_free and not radix and _positions_fit(data, cand_feat, ncand):
        return _position_segments(data, items, parts, ncand, work)
    N = items.row.size
    item_bits = max(1, (N - 1).bit_length())
    shift = data.dense_bits
    if code_bits + item_bits <= 63 and not radix:
        key, _ = pair_keys(data, items, cand_feat, ncand, first, item_bits, work)
        key.sort()
        item = np.bitwise_and(key, (1 << item_bits) - 1, out=scratch(work, "item", key.size, _item_type(item_bits)),
                              casting="unsafe")
        if tie_free:  # the key serves as code (shifted only if the candidates are asked for)
            code, shift = key, shift + item_bits
        else:
            code = np.right_shift(key, item_bits, out=key)
    else:  # the codes' stable order (the radix sort needs no item in the key: it keeps ties in pair order)
        code, pair_item = pair_keys(data, items, cand_feat, ncand, first, 0, work, narrow=code_bits <= 32)
        perm = stable_order(code, code_bits)
        # pair j * N + i is item i (slot-major pairs); a candidate's pairs are all of its node's slot j. The
        # items and the ordered codes are formed when read (:attr:`Segments.item`, :attr:`Segments.code`),
        # except on large levels (working memory: the order would live through the search, and the values
        # repeated per slot beside the elements'); codes with ties are put in order for their equal neighbours
        pairs = perm if pair_item is None else None
        seg = Segments(*parts, None if pairs is not None else pair_item.take(perm), code, None, items, data, shift,
                       _order=perm, _pairs=pairs,
                       _slot_base=None if pairs is None else (np.arange(cand.size) - first[cand_node]) * N)
        if perm.size > LAZY_ELEMENTS:  # (formed now, and the order dropped)
            seg.item = seg.item
            seg.code  # noqa: B018
        if not tie_free:
            seg.no_cut = _equal_next(seg.code, work)
        return seg
    return Segments(*parts, item, code, None if tie_free else _equal_next(code, work), items, data, shift)


#: Levels (or blocks of a level) of more sorted elements than this form their items and put their codes in
#: order right after the radix sort rather than when read (a million-row tree's root: 632 000 elements, whose
#: order and repeated values would add about 0.2x the bytes of X to the fit's working memory)
LAZY_ELEMENTS = 1 << 18


def _equal_next(code: NDArray[np.int64], work: Workspace | None) -> NDArray[np.bool_]:
    """Where an element's code equals the next one's (True at the last element)."""
    no_cut = scratch(work, "no_cut", code.size, np.bool_)
    np.equal(code[1:], code[:-1], out=no_cut[:-1])
    no_cut[-1] = True
    return no_cut


def _position_bits(data: TrainingData) -> int:
    """Bits of ``feature * n + position`` (an index into ``data.order``)."""
    return max(1, (data.features * data.rows - 1).bit_length())


def _positions_fit(data: TrainingData, cand_feat, ncand) -> bool:
    """Whether :func:`_position_segments` applies to tie-free candidates: ``data.order`` exists, every node
    has the same number of candidates, and ``candidate << bits | feature * n + position`` fits 32 bits."""
    if data.order is None or cand_feat.size == 0:
        return False
    m = int(ncand[0])
    return m > 0 and (cand_feat.size - 1).bit_length() + _position_bits(data) <= 32 and bool((ncand == m).all())


def _position_segments(data: TrainingData, items: Items, parts, ncand, work: Workspace | None) -> Segments:
    """The sorted segments from one sort of 32-bit codes ``candidate << bits | feature * n + rank``.

    For a tie-free feature the dense rank is the row's position in ``data.order``, so the low bits of a
    sorted code index ``data.order`` and give the element's row: no item need travel in the key, and the
    sort takes about half the time of a 64-bit one (4 against 8.6 ns an element on the Intel test machine).
    A node's items are distinct (tree, row) pairs, so no two codes of a segment are equal, no neighbours hold
    equal values, and the order is that of the 64-bit keys.
    """
    cand_node, cand_feat, cand_tree, start, size, _ = parts
    n, bits = data.rows, _position_bits(data)
    N, m = items.row.size, int(ncand[0])
    L = m * N
    index, ranks = _slot_ranks(data, items, cand_feat, m, work)
    index = index.ravel()
    high = ((np.arange(cand_feat.size, dtype=np.uint32) << bits) + (cand_feat * n).astype(np.uint32))
    if ranks.dtype == np.uint32:  # (the int32 ranks viewed: the code formed in their buffer)
        code = ranks.ravel()
        code.reshape(m, N)[:] += high.reshape(-1, m).T.take(items.node, axis=1,
                                         out=scratch(work, "high32", L, np.uint32).reshape(m, N), mode="clip")
    else:  # uint16 ranks: the code formed in a buffer of its own
        code = scratch(work, "code32", L, np.uint32)
        high.reshape(-1, m).T.take(items.node, axis=1, out=code.reshape(m, N), mode="clip")
        code.reshape(m, N)[:] += ranks
    code.sort()  # (never radix: where the radix sort is the faster, the codes' stable order is used instead)
    at = np.bitwise_and(code, (1 << bits) - 1, out=index, dtype=np.int64)
    row = data.order.ravel().take(at, out=scratch(work, "row32", L, data.order.dtype), mode="clip")
    if items.wi is items.row:  # one tree: a row is its own statistics index (int64: the positions are spent)
        wi = index
        np.copyto(wi, row)
    else:  # slot * n + row: the elements of a tree are contiguous, the trees in slot order (rows kept narrow)
        tree_start = run_starts(cand_tree)
        wi = (cand_tree[tree_start] * n).repeat(np.add.reduceat(size, tree_start))
        wi += row
    return Segments(*parts, None, code, None, items, data, bits, wi=wi, row=row)


def pair_keys(data: TrainingData, items: Items, cand_feat, ncand, first, item_bits: int,
               work: Workspace | None = None, narrow: bool = False) -> tuple[NDArray, NDArray[np.int64] | None]:
    """The key ``(candidate << dense_bits | dense[feature, row]) << item_bits | item`` of every (item,
    candidate of its node) pair (``item_bits = 0``: no item), and the item of every pair (None when the
    pairs are slot-major: pair ``j * N + i`` is item ``i``). ``narrow``: slot-major keys as ``uint32`` (the
    caller knows they fit)."""
    n, db = data.rows, data.dense_bits
    dense = data.dense.ravel()
    N = items.row.size
    m = int(ncand[0])
    if m and np.all(ncand == m):
        # slot-major (m, N), a block of items at a time: the block's (candidate, item) bits are one gather of
        # the nodes' slot-0 bases plus the items, and slot j's are slot 0's plus j << (db + item_bits); each
        # slot adds them to its ranks (five whole-block calls a slot: the block's index into ``dense``, formed
        # in the key row, the ranks, their shift, the bases). Temporaries hold a block, not N bases.
        dtype = np.uint32 if narrow else np.int64
        key = scratch(work, "key32" if narrow else "key", m * N, dtype).reshape(m, N)
        rank = scratch(work, "slot_rank", min(N, _GATHER_BLOCK), data.dense.dtype)
        index = scratch(work, "slot_index", min(N, _GATHER_BLOCK), np.int64) if narrow else None
        feature_base = cand_feat.reshape(-1, m).T * n
        step, node_base = 1 << (db + item_bits), ((first << db) << item_bits).astype(dtype)
        for lo in range(0, N, _GATHER_BLOCK):
            node = items.node[lo:lo + _GATHER_BLOCK]
            base = node_base.take(node, mode="clip")  # (block,) slot 0's candidate bits
            if item_bits:
                base += np.arange(lo, lo + node.size)
            for j in range(m):
                part, ranks = key[j, lo:lo + node.size], rank[:node.size]
                at = part if index is None else index[:node.size]  # (the index into ``dense``, int64)
                feature_base[j].take(node, out=at, mode="clip")
                at += items.row[lo:lo + node.size]
                dense.take(at, out=ranks, mode="clip")
                if index is None:
                    np.left_shift(ranks, item_bits, out=part, dtype=np.int64)
                    part += base
                else:  # (no item bits: the key is the rank plus the base)
                    np.add(ranks, base, out=part, dtype=np.uint32, casting="unsafe")
                if j + 1 < m:
                    base += step
        return key.ravel(), None
    reps = ncand[items.node]
    pair_item = np.repeat(np.arange(N), reps)
    offsets = np.arange(pair_item.size) - np.repeat(np.cumsum(reps) - reps, reps)
    pair_cand = first[items.node][pair_item] + offsets
    code = (pair_cand << db) | dense[cand_feat[pair_cand] * n + items.row[pair_item]]
    return (code << item_bits) | pair_item if item_bits else code, pair_item


def _slot_ranks(data: TrainingData, items: Items, cand_feat, m: int, work: Workspace | None):
    """Slot-major (m, N) dense ranks of every (item, candidate of its node) pair, every node having ``m``
    candidates, and the (m, N) int64 buffer of their indices into ``data.dense`` (``feature * n + row``; the
    caller may reuse it). Both are views of scratch buffers (``key`` and ``rank``)."""
    N = items.row.size
    index = scratch(work, "key", m * N, np.int64).reshape(m, N)
    (cand_feat.reshape(-1, m).T * data.rows).take(items.node, axis=1, out=index, mode="clip")
    index += items.row
    dtype = np.uint32 if data.dense.dtype == np.int32 else data.dense.dtype  # (int32 ranks read as uint32)
    ranks = data.dense.ravel().view(dtype).take(index, out=scratch(work, "rank", m * N, dtype).reshape(m, N),
                                                mode="clip")
    return index, ranks


def run_starts(values: NDArray) -> NDArray[np.intp]:
    """Where each run of equal neighbours of a non-empty array starts."""
    change = np.empty(values.size, dtype=bool)
    change[0] = True
    np.not_equal(values[1:], values[:-1], out=change[1:])
    return change.nonzero()[0]
