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

__all__ = ["Workspace", "scratch"]


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
