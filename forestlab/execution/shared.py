"""The training data in shared memory: written once by the fitting process, mapped read-only by workers.

The fitting process copies the arrays of a :class:`~forestlab._presort.TrainingData` into one POSIX
shared-memory segment (named ``forestlab_<pid>_<token>d``) and hands workers a small picklable
:class:`SegmentHandle`. A worker maps the segment read-only (``PROT_READ``, prefaulted) and builds the same
``TrainingData`` from views, so no worker copies X or the presort and nothing big is pickled per task; a
stray write in a worker is a segmentation fault, not silent damage to the data.

A second, tiny segment (``...s``) is a :class:`BlockBoard`: one ``(pid, state)`` row per block of trees,
written by the worker that grows it, so the fitting process can tell which block a dead worker was on.

Only the creator unlinks (its ``with`` block ends, whatever the reason); the creator's segments are also
registered with multiprocessing's resource tracker, which unlinks them should the creator itself be killed.
Workers never register or unlink: their mapping is released when the last view of it is garbage collected.
"""

from __future__ import annotations

import mmap
import os
import secrets
from dataclasses import dataclass, fields
from multiprocessing import shared_memory
from typing import Any

import numpy as np
from numpy.typing import NDArray

from ..engine.presort import TrainingData

__all__ = ["SEGMENT_PREFIX", "SegmentHandle", "SharedTrainingData", "BlockBoard", "attach", "attach_board"]

#: Every segment forestlab creates starts with this (tests look for leftovers in /dev/shm with it).
SEGMENT_PREFIX = "forestlab_"

_ALIGN = 64

# Block states on the board.
PENDING, STARTED, DONE, FAILED = 0, 1, 2, 3


@dataclass(frozen=True)
class SegmentHandle:
    """What a worker needs to map a segment: its name, size and the layout of the arrays in it."""

    name: str
    size: int
    layout: tuple[tuple[str, int, tuple[int, ...], str], ...]  # (field, byte offset, shape, dtype)
    extras: tuple[tuple[str, Any], ...] = ()  # the fields that are not arrays (small), sent as they are


def _layout(data: TrainingData) -> tuple[tuple[tuple[str, int, tuple[int, ...], str], ...], int]:
    """Byte offsets (64-byte aligned) of every array field of ``data`` in one segment, and the total size."""
    out, offset = [], 0
    for f in fields(data):
        arr = getattr(data, f.name)
        if isinstance(arr, np.ndarray):
            out.append((f.name, offset, tuple(arr.shape), arr.dtype.str))
            offset += -(-arr.nbytes // _ALIGN) * _ALIGN
    return tuple(out), max(offset, 1)


def _extras(data: TrainingData) -> tuple[tuple[str, Any], ...]:
    return tuple((f.name, getattr(data, f.name)) for f in fields(data)
                 if not isinstance(getattr(data, f.name), np.ndarray))


def _new_name(kind: str) -> str:
    # Short: macOS limits POSIX shared-memory names to 31 characters.
    return f"{SEGMENT_PREFIX}{os.getpid()}_{secrets.token_hex(4)}{kind}"


class SharedTrainingData:
    """Context manager: copy ``data`` into a fresh segment; unlink it on exit, whatever happened.

    ``with SharedTrainingData(data) as handle:`` gives the :class:`SegmentHandle` to send to workers.
    """

    def __init__(self, data: TrainingData) -> None:
        self._data = data
        self._segment: shared_memory.SharedMemory | None = None

    def __enter__(self) -> SegmentHandle:
        layout, size = _layout(self._data)
        self._segment = shared_memory.SharedMemory(name=_new_name("d"), create=True, size=size)
        try:
            for name, offset, shape, dtype in layout:
                view = np.ndarray(shape, dtype=dtype, buffer=self._segment.buf, offset=offset)
                view[...] = getattr(self._data, name)
                del view
        except BaseException:
            _release(self._segment)
            raise
        return SegmentHandle(self._segment.name, size, layout, _extras(self._data))

    def __exit__(self, *exc: object) -> None:
        if self._segment is not None:
            _release(self._segment)
            self._segment = None


def _release(segment: shared_memory.SharedMemory) -> None:
    """Close and unlink a segment this process created (unlink even if closing fails)."""
    try:
        segment.close()
    finally:
        try:
            segment.unlink()
        except FileNotFoundError:
            pass


def _map(name: str, size: int, writable: bool) -> mmap.mmap:
    """Map an existing segment without registering it anywhere (the creator owns its lifetime)."""
    if os.name == "nt":  # pragma: no cover - named file mappings on Windows
        access = mmap.ACCESS_WRITE if writable else mmap.ACCESS_READ
        return mmap.mmap(-1, size, tagname=name, access=access)
    import _posixshmem  # the module multiprocessing.shared_memory itself uses on POSIX

    fd = _posixshmem.shm_open("/" + name, os.O_RDWR if writable else os.O_RDONLY, mode=0o600)
    try:
        prot = mmap.PROT_READ | (mmap.PROT_WRITE if writable else 0)
        return mmap.mmap(fd, size, flags=mmap.MAP_SHARED | getattr(mmap, "MAP_POPULATE", 0), prot=prot)
    finally:
        os.close(fd)


def attach(handle: SegmentHandle) -> TrainingData:
    """The ``TrainingData`` of a segment, as read-only views of a read-only mapping."""
    buffer = _map(handle.name, handle.size, writable=False)
    arrays = {}
    for name, offset, shape, dtype in handle.layout:
        count = int(np.prod(shape, dtype=np.int64))
        arrays[name] = np.frombuffer(buffer, dtype=dtype, count=count, offset=offset).reshape(shape)
    return TrainingData(**arrays, **dict(handle.extras))


# ------------------------------------------------------------------------------------------- block board
class BlockBoard:
    """Context manager owning a small segment of ``(pid, state)`` per block; ``view()`` reads it."""

    def __init__(self, blocks: int) -> None:
        self.blocks = blocks
        self._segment: shared_memory.SharedMemory | None = None

    def __enter__(self) -> BlockBoard:
        size = max(1, self.blocks) * 2 * 8
        self._segment = shared_memory.SharedMemory(name=_new_name("s"), create=True, size=size)
        self.handle = SegmentHandle(self._segment.name, size, (("board", 0, (max(1, self.blocks), 2), "<i8"),))
        board = np.ndarray((max(1, self.blocks), 2), dtype=np.int64, buffer=self._segment.buf)
        board[...] = 0
        del board
        return self

    def snapshot(self) -> NDArray[np.int64]:
        """A copy of the board: column 0 the pid of the block's worker, column 1 its state."""
        board = np.ndarray((max(1, self.blocks), 2), dtype=np.int64, buffer=self._segment.buf)
        out = board.copy()
        del board
        return out

    def __exit__(self, *exc: object) -> None:
        if self._segment is not None:
            _release(self._segment)
            self._segment = None


def attach_board(handle: SegmentHandle) -> NDArray[np.int64]:
    """A worker's writable view of a block board."""
    _, offset, shape, dtype = handle.layout[0]
    buffer = _map(handle.name, handle.size, writable=True)
    return np.frombuffer(buffer, dtype=dtype, count=shape[0] * shape[1], offset=offset).reshape(shape)
