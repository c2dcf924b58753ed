"""Scratch arrays reused from level to level and from batch to batch.

Fresh NumPy arrays of a few megabytes are page-faulted in on every allocation once the allocator has
returned their memory to the system, and on a virtual machine that costs more than the arithmetic done in
them. The grower keeps one :class:`Workspace` for the batches it grows one after another; the level's large
temporaries are views of its buffers, written with ``out=``, so each buffer is faulted in once instead of
once per level.

Buffers are anonymous memory maps of their own rather than ``malloc`` blocks: they live as long as the fit,
and inside the C heap they would pin the heap's top above the short-lived arrays freed around them, so the
process would keep that freed memory resident. A map is returned to the system as soon as its buffer goes.
"""

from __future__ import annotations

import mmap

import numpy as np
from numpy.typing import DTypeLike, NDArray

__all__ = ["Workspace", "keep_freed_memory", "scratch"]


class Workspace:
    """Named, growable scratch buffers; ``get(name, size, dtype)`` is a view of ``size`` elements.

    A view stays valid until the same name is requested again, so every caller uses its own names, and no
    result that outlives a level may be a view of a buffer.
    """

    def __init__(self) -> None:
        self._buffers: dict[str, NDArray] = {}

    def get(self, name: str, size: int, dtype: DTypeLike) -> NDArray:
        buf = self._buffers.get(name)
        if buf is None or buf.size < size or buf.dtype != np.dtype(dtype):
            self._buffers.pop(name, None)  # released before its successor is mapped
            buf = _mapped(size + size // 16, np.dtype(dtype))  # room for a slightly larger level later
            self._buffers[name] = buf
        return buf[:size]


def _mapped(size: int, dtype: np.dtype) -> NDArray:
    """An uninitialised array of ``size`` elements in an anonymous memory map of its own."""
    return np.frombuffer(mmap.mmap(-1, max(1, size * dtype.itemsize)), dtype=dtype, count=size)


def scratch(work: Workspace | None, name: str, size: int, dtype: DTypeLike) -> NDArray:
    """A buffer from ``work``, or a fresh array when there is no workspace."""
    return np.empty(size, dtype=dtype) if work is None else work.get(name, size, dtype)


def keep_freed_memory(block_bytes: int = 8 << 20) -> None:
    """Ask the C allocator to keep freed blocks of up to ``block_bytes`` for reuse (best effort).

    glibc's ``malloc`` gives blocks above a threshold back to the system as soon as they are freed, and it
    raises that threshold (and the heap's trim threshold, to twice as much) to the size of the largest such
    block freed so far. A fit allocates and frees arrays of up to a few megabytes on every level; in a
    process that has not freed a large block yet (a fresh worker, a short script), each of them would be
    mapped and unmapped every time, at a page fault per 4 KiB: about a third of a fit's time. Allocating and
    freeing one block of ``block_bytes`` (never touched, so never resident) raises the thresholds as any
    earlier large array would have. Other allocators are not affected.
    """
    block = np.empty(block_bytes, dtype=np.uint8)
    del block
