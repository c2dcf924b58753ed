"""Growing the trees of a forest in blocks: in this process, in worker processes, threads or a cluster.

The unit of work is a *block* of consecutive tree indices; a worker grows a block with one
``grow_batch(data, rules, [tree_seed(root, b) for b in block])`` call and sends back the trees and their
in-bag counts. Tree ``b`` draws only from its own seed, so the forest is bit-identical whatever the number of
workers, the executor, the block size or the order in which blocks finish.

Where the data come from depends on the executor:

- ``workers=k`` (k > 1): a pool of k processes of our own (:mod:`.pool`), each a fresh interpreter started
  from forestlab's own entry point (:mod:`.worker`), so nothing of the user's ``__main__`` is imported or run
  in it; ``fork`` is never used. Workers map the training data read-only from shared memory (``_shared``),
  get their blocks over pipes, ignore Ctrl-C (the fitting process handles it and stops them), and exit if
  the fitting process disappears.
- any other ``concurrent.futures.Executor`` whose workers run on this machine (a ``ProcessPoolExecutor``, ...):
  the same shared memory, mapped per block; a ``ThreadPoolExecutor`` simply shares the arrays.
- a dask distributed executor (``client.get_executor()``, recognised by duck typing, dask is never imported
  here): the data are scattered once to every worker (``broadcast=True``) and each block names that copy.

Failures: when a block raises, or a worker process dies, the fit stops with a :class:`TreeGrowthError` that
names the block's trees; pending blocks are cancelled, our own pool is terminated and joined, and every
shared-memory segment is unlinked before the error reaches the caller. Ctrl-C (``KeyboardInterrupt``) or an
exception raised by the progress callback take the same path. The caller's ``X`` and ``y`` are never written.
"""

from __future__ import annotations

import os
from collections.abc import Sequence
from concurrent.futures import Executor, ThreadPoolExecutor
from typing import Any

import numpy as np

from ..engine.grow import GrowthRules
from ..engine.presort import TrainingData
from ..engine.workspace import Workspace, keep_freed_memory
from . import shared as _shared
from .collect import TreeGrowthError, assemble, report_progress, submit_and_collect
from .pool import run_own_pool
from .progress import ProgressCallback, progress_callback
from .work import Grown, grow_block, grow_block_shared

__all__ = ["BLOCKS_PER_WORKER", "TreeGrowthError", "grow_trees", "plan_blocks"]

#: Blocks per worker when trees are spread over several: enough to even out uneven blocks, few enough that
#: each block still batches trees together at small n.
BLOCKS_PER_WORKER = 4


def plan_blocks(ids: Sequence[int], batch: int, parallelism: int = 1) -> list[list[int]]:
    """Cut ``ids`` into consecutive blocks of at most ``batch`` trees, at least ``BLOCKS_PER_WORKER`` per worker.

    In one process, a last block shorter than a quarter of ``batch`` is spread over the others instead (each
    then holds at most ``batch + batch // 4`` trees): a level costs about the same fixed time however few
    trees it grows, so a small last batch costs nearly as much as a full one.
    """
    ids = list(ids)
    size = batch
    if parallelism > 1:
        size = max(1, min(batch, -(-len(ids) // (BLOCKS_PER_WORKER * parallelism))))
    elif len(ids) > batch and len(ids) % batch and len(ids) % batch < batch / 4:
        count = len(ids) // batch
        size = -(-len(ids) // count)
    return [ids[i:i + size] for i in range(0, len(ids), size)]


def _dask_client(executor: Executor) -> Any:
    """The dask client behind a ``client.get_executor()`` executor, or None (duck typing, no import)."""
    client = getattr(executor, "_client", None)
    if client is not None and type(executor).__module__.split(".")[0] == "distributed" \
            and callable(getattr(client, "scatter", None)):
        return client
    return None


def _parallelism(executor: Executor | None, workers: int) -> int:
    if executor is None:
        return workers
    client = _dask_client(executor)
    if client is not None:
        return max(1, sum(client.nthreads().values()))
    return int(getattr(executor, "_max_workers", None) or os.cpu_count() or 1)


def grow_trees(data: TrainingData, rules: GrowthRules, root: np.random.SeedSequence, tree_ids: Sequence[int],
               batch: int, *, workers: int = 1, executor: Executor | None = None,
               progress: bool | ProgressCallback | None = None) -> Grown:
    """Grow trees ``tree_ids`` and return them with their in-bag counts ``(len(tree_ids), n)``, in id order.

    ``batch`` is the most trees grown together in one ``grow_batch`` call. ``progress`` (see
    :func:`forestlab._progress.progress_callback`) is called as ``progress(done, total)`` in this thread, once
    with ``done = 0`` and after every block.
    """
    report = progress_callback(progress)
    blocks = plan_blocks(tree_ids, batch, _parallelism(executor, workers))
    keep_freed_memory()
    if executor is None and workers == 1:
        return assemble(_run_here(data, rules, root, blocks, report))
    if executor is None:
        return assemble(run_own_pool(data, rules, root, blocks, report, workers))
    if isinstance(executor, ThreadPoolExecutor):
        return assemble(_run_threads(executor, data, rules, root, blocks, report))
    client = _dask_client(executor)
    if client is not None:
        return assemble(_run_dask(executor, client, data, rules, root, blocks, report))
    return assemble(_run_shared(executor, data, rules, root, blocks, report))


def _run_here(data, rules, root, blocks, report) -> list[Grown]:
    total = sum(map(len, blocks))
    results, done = [], 0
    report_progress(report, 0, total)
    work = Workspace()
    for ids in blocks:
        results.append(grow_block(data, rules, root, ids, work))
        done += len(ids)
        report_progress(report, done, total)
    return results


def _run_shared(executor, data, rules, root, blocks, report) -> list[Grown]:
    with _shared.SharedTrainingData(data) as handle, _shared.BlockBoard(len(blocks)) as board:
        return submit_and_collect(
            lambda k, ids: executor.submit(grow_block_shared, handle, board.handle, k, rules, root, ids),
            blocks, report, board)


def _run_threads(executor, data, rules, root, blocks, report) -> list[Grown]:
    return submit_and_collect(lambda k, ids: executor.submit(grow_block, data, rules, root, ids), blocks, report)


def _run_dask(executor, client, data, rules, root, blocks, report) -> list[Grown]:
    shared = client.scatter(data, broadcast=True, hash=False)  # X travels once per worker
    try:  # positional arguments only: keywords of submit go to the client
        return submit_and_collect(lambda k, ids: executor.submit(grow_block, shared, rules, root, ids), blocks,
                                   report)
    finally:
        shared.release()
