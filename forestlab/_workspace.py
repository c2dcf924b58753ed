"""Scratch arrays reused from level to level of a batch.

Fresh NumPy arrays of a few megabytes are page-faulted in on every allocation once the allocator has
returned their memory to the system, and on a virtual machine that costs more than the arithmetic done in
them. The grower keeps one :class:`Workspace` per batch; the level's large temporaries are views of its
buffers, written with ``out=``, so each buffer is faulted in once per batch instead of once per level.
"""

from __future__ import annotations

import numpy as np
from numpy.typing import DTypeLike, NDArray

__all__ = ["Workspace"]


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
            buf = np.empty(max(size, int(1.25 * buf.size) if buf is not None else size), dtype=dtype)
            self._buffers[name] = buf
        return buf[:size]


def scratch(work: Workspace | None, name: str, size: int, dtype: DTypeLike) -> NDArray:
    """A buffer from ``work``, or a fresh array when there is no workspace."""
    return np.empty(size, dtype=dtype) if work is None else work.get(name, size, dtype)
