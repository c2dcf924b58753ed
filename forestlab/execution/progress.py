"""Progress of a fit: a callback ``progress(done, total)`` in trees, and a plain-text line for ``progress=True``."""

from __future__ import annotations

import sys
import time
from collections.abc import Callable
from typing import TextIO

__all__ = ["ProgressLine", "progress_callback"]

ProgressCallback = Callable[[int, int], object]


class ProgressLine:
    """Writes ``forestlab: 120/500 trees (24%), 0:12 elapsed, about 0:38 left`` to a stream.

    On a terminal the line is rewritten in place; elsewhere (a log file, a notebook's captured stderr) a new
    line is written at most every ``interval`` seconds, plus the first and the last.

    Parameters
    ----------
    stream : text stream or None
        Where to write; None is ``sys.stderr`` at the time of each call.
    interval : float, default 5.0
        Seconds between lines when the stream is not a terminal.
    """

    def __init__(self, stream: TextIO | None = None, interval: float = 5.0) -> None:
        self._stream = stream
        self._interval = interval
        self._start = 0.0
        self._last = -float("inf")

    def __call__(self, done: int, total: int) -> None:
        now = time.monotonic()
        if done == 0:
            self._start, self._last = now, -float("inf")
        stream = self._stream if self._stream is not None else sys.stderr
        tty = bool(getattr(stream, "isatty", lambda: False)())
        if not tty and done not in (0, total) and now - self._last < self._interval:
            return
        self._last = now
        text = _line(done, total, now - self._start)
        end = "\n" if not tty or done == total else ""
        stream.write(("\r" if tty else "") + text + end)
        stream.flush()


def _clock(seconds: float) -> str:
    minutes, secs = divmod(int(round(seconds)), 60)
    hours, minutes = divmod(minutes, 60)
    return f"{hours}:{minutes:02d}:{secs:02d}" if hours else f"{minutes}:{secs:02d}"


def _line(done: int, total: int, elapsed: float) -> str:
    text = f"forestlab: {done}/{total} trees ({100 * done // max(total, 1)}%), {_clock(elapsed)} elapsed"
    if 0 < done < total:
        text += f", about {_clock(elapsed * (total - done) / done)} left"
    return text


def progress_callback(progress: bool | ProgressCallback | None) -> ProgressCallback | None:
    """The callable a fit reports to: None, a :class:`ProgressLine` on stderr for True, or ``progress``."""
    if progress is None or progress is False:
        return None
    if progress is True:
        return ProgressLine()
    return progress
