"""The elements of a level as the searches read them: the open (tree, row) items (:class:`Items`) and the
items of every (node, candidate feature) pair sorted by that feature (:class:`Segments`, which
:func:`.segments.sorted_segments` forms), and gathers by a narrow index (:func:`gather`)."""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from numpy.typing import NDArray

from .presort import TrainingData

__all__ = ["Items", "Segments", "gather"]


@dataclass
class Items:
    """The open (tree, row) pairs of one level; ``node`` indexes the level's open nodes, ``wi`` is
    ``slot * n + row``, the pair's column in the batch's weighted statistics (the same array as ``row`` in a
    batch of one tree). ``size``, when known (a fast search's record of its parents' cuts), holds the items
    of every node, which :func:`.segments.sorted_segments` then need not count."""

    row: NDArray[np.int64]
    node: NDArray[np.int64]
    wi: NDArray[np.int64]
    size: NDArray[np.int64] | None = None

    def take(self, keep: NDArray[np.intp]) -> Items:
        row = self.row.take(keep, mode="clip")
        wi = row if self.wi is self.row else self.wi.take(keep, mode="clip")
        return Items(row, self.node.take(keep, mode="clip"), wi)


@dataclass
class Segments:
    """The items of every (node, candidate feature) pair, sorted by that feature, concatenated.

    ``code`` is ``candidate << code_shift | v`` per element: ``v`` is the dense rank (int64 codes; uint32 on
    the radix sort's path where they fit 32 bits), the dense rank with the item below it (int64 codes when
    every candidate feature is tie-free), or ``feature * n + position`` (uint32 codes, from
    :func:`.segments._position_segments`). ``no_cut[e]`` is True where
    element ``e`` and the next hold equal values of the same candidate (and at the last element): no cut lies
    after such an element; None when every candidate feature is tie-free (no neighbours hold equal values).
    Elements are known by their ``item`` (the generic search then fills ``x``,
    ``wi`` and ``row``, :meth:`materialise`) or, from :func:`.segments._position_segments`, by ``row`` and ``wi``
    directly (``item`` None).
    """

    cand_node: NDArray[np.int64]   # (C,) node of each candidate
    cand_feat: NDArray[np.int64]   # (C,) feature of each candidate
    cand_tree: NDArray[np.int64]   # (C,) batch slot of each candidate
    start: NDArray[np.int64]       # (C,) first element of each candidate's segment
    size: NDArray[np.int64]        # (C,) elements of each candidate's segment
    node_first: NDArray[np.int64]  # first candidate of every node that has candidates
    _item: NDArray | None          # (L,) the level's item of each element, int32 where it fits (read as
                                   # ``item``; None: ``row``, ``wi`` given, or formed from ``_pairs``)
    _code: NDArray                 # (L,) candidate and value of each element (read as ``code``)
    no_cut: NDArray[np.bool_] | None  # (L,) equal value next (None: never)
    items: Items
    data: TrainingData
    code_shift: int                # bits below the candidate in ``code``
    x: NDArray[np.float64] | None = None   # (L,) feature value (category position for categorical), NaN last
    wi: NDArray[np.int64] | None = None    # (L,) index of each element's (tree, row) in the weighted statistics
    row: NDArray | None = None             # (L,) training row of each element (the order table's dtype from positions)
    _cand_of: NDArray[np.int64] | None = None
    _order: NDArray[np.intp] | None = None  # the order ``_code`` is still to be put in (None: it is)
    _pairs: NDArray[np.intp] | None = None  # (L,) slot-major pair ``j * N + i`` of each element, where the
                                            # items are formed from it when read (radix path)
    _slot_base: NDArray[np.int64] | None = None  # (C,) ``j * N`` of each candidate's slot ``j``

    @property
    def item(self) -> NDArray | None:
        """(L,) the level's item of each element (int32 where it fits), or None where the elements are known
        by ``row`` and ``wi``. On the radix path formed when first read, from each element's pair less its
        candidate's slot base (the fast searches read the items' values through :meth:`item_values`
        instead, and single elements' items through :meth:`items_at`)."""
        if self._item is None and self._pairs is not None:
            N = self.items.row.size
            self._item = np.subtract(self._pairs, self._slot_base.repeat(self.size),
                                     dtype=_item_type(max(1, (N - 1).bit_length())), casting="unsafe")
        return self._item

    @item.setter
    def item(self, value: NDArray | None) -> None:
        self._item, self._pairs = value, None

    @property
    def by_item(self) -> bool:
        """Whether the elements are known by their items (else by ``row`` and ``wi``)."""
        return self._item is not None or self._pairs is not None

    def item_values(self, values: NDArray, out: NDArray) -> NDArray:
        """``values[item]`` of every element into ``out``, ``values`` holding one value per item. From
        slot-major pairs whose items are not formed: one gather by pair from the values repeated once per
        slot (1.1 against 2.7-3.0 ns an element for forming the items and gathering by them, 190 000
        elements, AMD EPYC family 25 model 17)."""
        if self._item is None and self._pairs is not None:
            slots = self._pairs.size // max(1, values.size)  # (every item has one pair a slot)
            return np.tile(values, slots).take(self._pairs, out=out, mode="clip")
        return gather(values, self.item, out)

    def items_at(self, element: NDArray[np.intp]) -> NDArray:
        """The items of the given elements (without forming every element's)."""
        if self._item is None and self._pairs is not None:
            return self._pairs.take(element, mode="clip") - self._slot_base.take(self.candidate(element))
        return self.item[element]

    @property
    def code(self) -> NDArray:
        """(L,) candidate and value of each element. The radix sort's path leaves the codes of tie-free
        levels in pair order with their order beside them (the fast searches mostly need the elements'
        candidates only, which :attr:`cand_of` repeats without them): they are put in order on first reading
        (about 1 ns an element)."""
        if self._order is not None:
            self._code.take(self._order, out=self._code, mode="clip")  # (through a temporary copy)
            self._order = None
        return self._code

    @property
    def cand_of(self) -> NDArray[np.int64]:
        """(L,) candidate of each element (int64 codes: formed in place of ``code``; codes not yet in order:
        each candidate repeated over its segment, the codes left as they are)."""
        if self._cand_of is None:
            if self._order is not None:
                self._cand_of = np.repeat(np.arange(self.start.size), self.size)
            elif self._code.dtype == np.int64:
                self._cand_of = np.right_shift(self._code, self.code_shift, out=self._code)
            else:
                self._cand_of = np.right_shift(self._code, self.code_shift, dtype=np.int64)
        return self._cand_of

    @property
    def elements(self) -> int:
        """L, the number of elements."""
        return int(self.start[-1] + self.size[-1]) if self.start.size else 0

    def int32_candidates(self, out: NDArray[np.int32]) -> NDArray[np.int32]:
        """:attr:`cand_of` as int32, in ``out`` from the codes, or (codes not yet in order) repeated per
        segment, the codes left as they are."""
        if self._order is not None:
            return np.repeat(np.arange(self.start.size, dtype=np.int32), self.size)
        return np.right_shift(self.code, self.code_shift, out=out, casting="unsafe")

    def candidates_at(self, element: NDArray[np.intp]) -> NDArray[np.int64]:
        """Candidate of each of the given elements, read from the codes or from :attr:`cand_of` where the
        codes are not yet in order."""
        if self._order is not None:
            return self.cand_of.take(element, mode="clip")
        return np.right_shift(self._code.take(element, mode="clip"), self.code_shift).astype(np.int64, copy=False)

    def spare_codes(self) -> NDArray[np.int64] | None:
        """The int64 codes' buffer, for a caller that reads no code after it (a level's spent scratch: the
        candidates are formed first, :attr:`cand_of`), or None (narrower codes)."""
        if self._code.dtype != np.int64:
            return None
        self.cand_of  # noqa: B018 (the candidates first: in place of the codes, or repeated)
        spare, self._code, self._order = self._code, None, None
        return spare

    def candidate(self, element: NDArray[np.intp]) -> NDArray[np.int64]:
        """Candidate of the given elements (segments are never empty)."""
        return self.start.searchsorted(element, side="right") - 1

    def rows_of(self, element: NDArray[np.intp]) -> NDArray[np.intp]:
        """Training rows of the given elements, as ``intp`` (fancy indexing with int32 beside int64 indices
        costs about 3 us a call more)."""
        rows = self.items.row[self.items_at(element)] if self.row is None else self.row[element]
        return rows.astype(np.intp, copy=False)

    def materialise(self) -> None:
        """Fill ``row``, ``wi`` and ``x`` (NaN for missing values) for the generic search."""
        self.row = self.items.row[self.item]
        self.wi = self.items.wi[self.item]
        self.x = self.data.X.ravel()[self.row * self.data.features + self.cand_feat[self.cand_of]]


def _item_type(item_bits: int) -> type:
    """int32 items where they fit (half the bytes of a level's largest index array; read with :func:`gather`
    or fancy indexing, which cast them a block at a time), else int64."""
    return np.int32 if item_bits <= 31 else np.int64


def gather(values: NDArray, index: NDArray, out: NDArray) -> NDArray:
    """``np.take(values, index, out=out, mode="clip")``; an index array that is not ``intp`` is read
    ``_GATHER_BLOCK`` elements at a time (``np.take`` would cast the whole array to a temporary first)."""
    if index.dtype == np.intp or index.size <= _GATHER_BLOCK:
        return values.take(index, out=out, mode="clip")
    for lo in range(0, index.size, _GATHER_BLOCK):
        values.take(index[lo:lo + _GATHER_BLOCK], out=out[lo:lo + _GATHER_BLOCK], mode="clip")
    return out


#: Elements of a narrow index array cast and gathered at a time by :func:`gather` (512 KiB of intp)
_GATHER_BLOCK = 1 << 16
