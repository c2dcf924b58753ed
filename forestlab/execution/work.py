"""The work of one block of trees, alone or on the worker of an executor that maps the data from shared memory.

A block is a list of consecutive tree indices grown in one ``grow_batch`` call: a pure function of its
arguments (``work`` lends scratch buffers). On an executor's worker the block maps the training data from
shared memory and marks itself on the board (started, done, failed), so the fitting process can tell which
block a dead worker held. Our own pool's workers are :mod:`.worker`.
"""

from __future__ import annotations

import os
from collections.abc import Sequence

import numpy as np
from numpy.typing import NDArray

from ..engine.grow import GrowthRules, grow_batch
from ..engine.presort import TrainingData
from ..engine.seeding import tree_seed
from ..engine.tree import Tree
from ..engine.workspace import Workspace
from . import shared as _shared

__all__ = ["Grown", "grow_block", "grow_block_shared"]


Grown = tuple[list[Tree], NDArray[np.uint8]]


def grow_block(data: TrainingData, rules: GrowthRules, root: np.random.SeedSequence, ids: Sequence[int],
               work: Workspace | None = None) -> Grown:
    """Grow trees ``ids`` (spawn indices under ``root``) in one batch; a pure function of its arguments
    (``work`` lends scratch buffers, see :class:`~forestlab._workspace.Workspace`)."""
    return grow_batch(data, rules, [tree_seed(root, b) for b in ids], work)


def grow_block_shared(handle: _shared.SegmentHandle, board_handle: _shared.SegmentHandle, k: int,
                       rules: GrowthRules, root: np.random.SeedSequence, ids: Sequence[int]) -> Grown:
    """Worker side of a shared-memory block on an executor's worker: map the data, mark the board, grow."""
    board = _shared.attach_board(board_handle)
    try:
        board[k] = (os.getpid(), _shared.STARTED)
        grown = grow_block(_shared.attach(handle), rules, root, ids)
        board[k, 1] = _shared.DONE
    except BaseException:
        board[k, 1] = _shared.FAILED
        raise
    return grown
