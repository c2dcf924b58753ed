"""The work of one block of trees, and what a worker process of our own does around it.

A block is a list of consecutive tree indices grown in one ``grow_batch`` call: a pure function of its
arguments (``work`` lends scratch buffers). In a worker of our own pool, the worker maps the training data
from shared memory, marks its block on the board (started, done, failed, stopped), ignores Ctrl-C (the
fitting process handles it) and exits if the fitting process disappears.
"""

from __future__ import annotations

import os
import signal
import threading
from collections.abc import Sequence
from typing import Any

import numpy as np
from numpy.typing import NDArray

from ..engine.grow import GrowthRules, grow_batch
from ..engine.presort import TrainingData
from ..engine.seeding import tree_seed
from ..engine.tree import Tree
from ..engine.workspace import Workspace, keep_freed_memory
from . import shared as _shared

__all__ = ["PARENT_CHECK_SECONDS", "Grown", "grow_block", "grow_block_shared", "init_worker"]

#: Seconds between checks, in a worker of our own pool, that the fitting process is still alive.
PARENT_CHECK_SECONDS = 1.0


Grown = tuple[list[Tree], NDArray[np.uint8]]


def grow_block(data: TrainingData, rules: GrowthRules, root: np.random.SeedSequence, ids: Sequence[int],
               work: Workspace | None = None) -> Grown:
    """Grow trees ``ids`` (spawn indices under ``root``) in one batch; a pure function of its arguments
    (``work`` lends scratch buffers, see :class:`~forestlab._workspace.Workspace`)."""
    return grow_batch(data, rules, [tree_seed(root, b) for b in ids], work)


_current: tuple[NDArray[np.int64], int] | None = None  # (board, block) being grown in this worker process


_pool_workspace: Workspace | None = None  # scratch buffers shared by the blocks of one of our own workers


def grow_block_shared(handle: _shared.SegmentHandle, board_handle: _shared.SegmentHandle, k: int,
                       rules: GrowthRules, root: np.random.SeedSequence, ids: Sequence[int]) -> Grown:
    """Worker side of a shared-memory block: map the data, mark the board, grow the block."""
    global _current
    board = _shared.attach_board(board_handle)
    _current = (board, k)  # first, so that a SIGTERM from now on marks the block as stopped
    try:
        board[k] = (os.getpid(), _shared.STARTED)
        grown = grow_block(_shared.attach(handle), rules, root, ids, _pool_workspace)
        board[k, 1] = _shared.DONE
    except BaseException:
        board[k, 1] = _shared.FAILED
        raise
    finally:
        _current = None
    return grown


def init_worker(parent: int) -> None:
    """Initializer of our own pool's workers (see the module docstring)."""
    global _pool_workspace
    _pool_workspace = Workspace()
    keep_freed_memory()
    signal.signal(signal.SIGINT, signal.SIG_IGN)
    signal.signal(signal.SIGTERM, _on_terminate)
    threading.Thread(target=_watch_parent, args=(parent,), daemon=True).start()


def _on_terminate(signum: int, frame: Any) -> None:
    """The pool stops this worker: mark its block as stopped (not the cause of a failure), then die."""
    if _current is not None:
        board, k = _current
        board[k, 1] = _shared.STOPPED
    signal.signal(signal.SIGTERM, signal.SIG_DFL)
    os.kill(os.getpid(), signal.SIGTERM)


def _watch_parent(parent: int) -> None:
    event = threading.Event()
    while not event.wait(PARENT_CHECK_SECONDS):
        try:
            os.kill(parent, 0)
        except ProcessLookupError:
            os._exit(1)
        except PermissionError:  # pragma: no cover - pid reused by another user's process
            os._exit(1)
