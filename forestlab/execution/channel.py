"""Messages between the fitting process and a worker process of our own: pickles framed by their length.

Both ends hold unbuffered binary pipe ends (``readinto`` and ``write``); a message is an 8-byte big-endian
length and that many bytes of pickle. Reading stops at the end of the pipe with :class:`EOFError`, also in
the middle of a message, which is how the fitting process learns that a worker died.
"""

from __future__ import annotations

import pickle
import struct
from typing import Any, BinaryIO

__all__ = ["HEADER", "WorkerTraceback", "receive", "send", "send_bytes"]

HEADER = struct.Struct("!Q")


class WorkerTraceback(Exception):
    """The traceback of an exception raised in a worker process, chained as the cause of the exception."""

    def __init__(self, text: str) -> None:
        super().__init__(text)
        self.text = text

    def __str__(self) -> str:
        return f"\n\nin the worker process:\n{self.text}"


def send_bytes(pipe: BinaryIO, payload: bytes) -> None:
    """Write one framed message (``payload`` already pickled)."""
    _write(pipe, HEADER.pack(len(payload)))
    _write(pipe, payload)


def send(pipe: BinaryIO, message: Any) -> None:
    """Pickle ``message`` and write it as one framed message."""
    send_bytes(pipe, pickle.dumps(message, protocol=pickle.HIGHEST_PROTOCOL))


def receive(pipe: BinaryIO) -> Any:
    """The next message; :class:`EOFError` when the pipe ends before a whole message arrived."""
    (size,) = HEADER.unpack(_read(pipe, HEADER.size))
    return pickle.loads(_read(pipe, size))


def _write(pipe: BinaryIO, data: bytes) -> None:
    view = memoryview(data)
    while view:
        view = view[pipe.write(view):]


def _read(pipe: BinaryIO, size: int) -> bytearray:
    buffer = bytearray(size)
    view, got = memoryview(buffer), 0
    while got < size:
        count = pipe.readinto(view[got:])
        if not count:
            raise EOFError(f"the pipe ended {got} bytes into a message of {size}")
        got += count
    return buffer
