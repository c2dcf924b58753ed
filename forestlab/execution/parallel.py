"""Growing the trees of a forest in blocks: in this process, in worker processes, threads or a cluster.

The unit of work is a *block* of consecutive tree indices; a worker grows a block with one
``grow_batch(data, rules, [tree_seed(root, b) for b in block])`` call and sends back the trees and their
in-bag counts. Tree ``b`` draws only from its own seed, so the forest is bit-identical whatever the number of
workers, the executor, the block size or the order in which blocks finish.

Where the data come from depends on the executor:

- ``workers=k`` (k > 1): a pool of k processes of our own, started with the ``forkserver`` method where the
  platform has it (``spawn`` elsewhere). ``fork`` is avoided on purpose: forking a process that runs threads
  (a dask client, a GUI, a thread pool, some BLAS builds) can copy a held lock into the child and hang it.
  Workers map the training data read-only from shared memory (``_shared``), ignore Ctrl-C (the fitting
  process handles it and stops them), and exit if the fitting process disappears.
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

import multiprocessing
import os
import signal
import threading
from collections.abc import Sequence
from concurrent.futures import FIRST_COMPLETED, BrokenExecutor, Executor, Future, ProcessPoolExecutor, \
    ThreadPoolExecutor, wait
from dataclasses import fields
from typing import Any

import numpy as np
from numpy.typing import NDArray

from . import shared as _shared
from ..engine.grow import GrowthRules, grow_batch
from ..engine.presort import TrainingData
from .progress import ProgressCallback, progress_callback
from ..engine.seeding import tree_seed
from ..engine.tree import Tree
from ..engine.workspace import Workspace, keep_freed_memory

__all__ = ["TreeGrowthError", "grow_block", "grow_trees", "plan_blocks", "start_method"]

#: Blocks per worker when trees are spread over several: enough to even out uneven blocks, few enough that
#: each block still batches trees together at small n.
BLOCKS_PER_WORKER = 4

#: Seconds between checks, in a worker of our own pool, that the fitting process is still alive.
PARENT_CHECK_SECONDS = 1.0

Grown = tuple[list[Tree], NDArray[np.uint8]]


class TreeGrowthError(RuntimeError):
    """Growing a block of trees failed in a worker: the work raised, or the worker process died.

    The original exception, when there is one, is chained as ``__cause__``.

    Attributes
    ----------
    trees : tuple of int
        Indices of the trees of the failed block(s).
    """

    def __init__(self, message: str, trees: Sequence[int] = ()) -> None:
        super().__init__(message)
        self.trees = tuple(trees)


class _BlockFailed(Exception):
    """Internal: block ``k`` finished with exception ``error``."""

    def __init__(self, k: int, error: BaseException) -> None:
        super().__init__(k, error)
        self.k, self.error = k, error


# ------------------------------------------------------------------------------------------- the work
def grow_block(data: TrainingData, rules: GrowthRules, root: np.random.SeedSequence, ids: Sequence[int],
               work: Workspace | None = None) -> Grown:
    """Grow trees ``ids`` (spawn indices under ``root``) in one batch; a pure function of its arguments
    (``work`` lends scratch buffers, see :class:`~forestlab._workspace.Workspace`)."""
    return grow_batch(data, rules, [tree_seed(root, b) for b in ids], work)


_current: tuple[NDArray[np.int64], int] | None = None  # (board, block) being grown in this worker process
_pool_workspace: Workspace | None = None  # scratch buffers shared by the blocks of one of our own workers


def _grow_block_shared(handle: _shared.SegmentHandle, board_handle: _shared.SegmentHandle, k: int,
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


def _init_worker(parent: int) -> None:
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


def start_method() -> str:
    """Start method of our own worker pools: ``forkserver`` where available, else ``spawn``."""
    return "forkserver" if "forkserver" in multiprocessing.get_all_start_methods() else "spawn"


_preload_asked = False


def _worker_context() -> multiprocessing.context.BaseContext:
    """The context of our own pools; the fork server (started once per process) preloads NumPy and forestlab.

    Workers forked from it start in milliseconds instead of re-importing NumPy (about 0.4 s a fit). The
    preload list is set only once and only adds to the default (``__main__``); it has no effect if the fork
    server was already running.
    """
    global _preload_asked
    context = multiprocessing.get_context(start_method())
    if context.get_start_method() == "forkserver" and not _preload_asked:
        context.set_forkserver_preload(["__main__", __name__])
        _preload_asked = True
    return context


# ------------------------------------------------------------------------------------------- planning
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


# ------------------------------------------------------------------------------------------- dispatch
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
        return _assemble(_run_here(data, rules, root, blocks, report))
    if executor is None:
        return _assemble(_run_own_pool(data, rules, root, blocks, report, workers))
    if isinstance(executor, ThreadPoolExecutor):
        return _assemble(_run_threads(executor, data, rules, root, blocks, report))
    client = _dask_client(executor)
    if client is not None:
        return _assemble(_run_dask(executor, client, data, rules, root, blocks, report))
    return _assemble(_run_shared(executor, data, rules, root, blocks, report))


def _run_here(data, rules, root, blocks, report) -> list[Grown]:
    total = sum(map(len, blocks))
    results, done = [], 0
    _report(report, 0, total)
    work = Workspace()
    for ids in blocks:
        results.append(grow_block(data, rules, root, ids, work))
        done += len(ids)
        _report(report, done, total)
    return results


def _run_own_pool(data, rules, root, blocks, report, workers: int) -> list[Grown]:
    context = _worker_context()
    with _shared.SharedTrainingData(data) as handle, _shared.BlockBoard(len(blocks)) as board:
        pool = ProcessPoolExecutor(min(workers, len(blocks)), mp_context=context, initializer=_init_worker,
                                   initargs=(os.getpid(),))
        try:
            futures = {pool.submit(_grow_block_shared, handle, board.handle, k, rules, root, ids): k
                       for k, ids in enumerate(blocks)}
            results = _collect(futures, blocks, report)
        except _BlockFailed as failed:
            _stop_pool(pool)
            raise _failure(failed, blocks, board.snapshot()) from failed.error
        except BaseException:
            _stop_pool(pool)
            raise
        pool.shutdown(wait=True)
    return results


def _run_shared(executor, data, rules, root, blocks, report) -> list[Grown]:
    with _shared.SharedTrainingData(data) as handle, _shared.BlockBoard(len(blocks)) as board:
        return _submit_and_collect(
            lambda k, ids: executor.submit(_grow_block_shared, handle, board.handle, k, rules, root, ids),
            blocks, report, board)


def _submit_and_collect(submit, blocks, report, board=None) -> list[Grown]:
    """Submit every block with ``submit(k, ids)``, collect in block order; cancel the rest on any failure
    (the ``board``, when given, tells which worker held which block)."""
    futures: dict[Future, int] = {}
    try:
        for k, ids in enumerate(blocks):
            futures[submit(k, ids)] = k
        return _collect(futures, blocks, report)
    except _BlockFailed as failed:
        _cancel(futures)
        raise _failure(failed, blocks, None if board is None else board.snapshot()) from failed.error
    except BaseException:
        _cancel(futures)
        raise


def _run_threads(executor, data, rules, root, blocks, report) -> list[Grown]:
    return _submit_and_collect(lambda k, ids: executor.submit(grow_block, data, rules, root, ids), blocks, report)


def _run_dask(executor, client, data, rules, root, blocks, report) -> list[Grown]:
    shared = client.scatter(data, broadcast=True, hash=False)  # X travels once per worker
    try:  # positional arguments only: keywords of submit go to the client
        return _submit_and_collect(lambda k, ids: executor.submit(grow_block, shared, rules, root, ids), blocks,
                                   report)
    finally:
        shared.release()


# ------------------------------------------------------------------------------------------- collecting
def _report(report: ProgressCallback | None, done: int, total: int) -> None:
    if report is not None:
        report(done, total)


def _collect(futures: dict[Future, int], blocks: list[list[int]], report) -> list[Grown]:
    """Wait for every block, reporting progress; raise ``_BlockFailed`` for the first failed block seen."""
    total = sum(map(len, blocks))
    results: list[Grown | None] = [None] * len(blocks)
    done = 0
    _report(report, 0, total)
    pending = set(futures)
    while pending:
        finished, pending = wait(pending, return_when=FIRST_COMPLETED)
        for future in sorted(finished, key=futures.__getitem__):
            k = futures[future]
            error = future.exception()
            if error is not None:
                raise _BlockFailed(k, error)
            results[k] = future.result()
            done += len(blocks[k])
            _report(report, done, total)
    return results


def _cancel(futures: dict[Future, int]) -> None:
    for future in futures:
        future.cancel()


def _stop_pool(pool: ProcessPoolExecutor) -> None:
    """Cancel what has not started, terminate the workers and wait until they and the manager thread are gone.

    ``shutdown`` forgets the pool's processes, manager thread and result queue, so they are taken beforehand
    (private attributes, stable since Python 3.9; there is no public way before ``terminate_workers`` in 3.14).
    """
    processes = list((getattr(pool, "_processes", None) or {}).values())
    manager = getattr(pool, "_executor_manager_thread", None)
    results = getattr(pool, "_result_queue", None)
    pool.shutdown(wait=False, cancel_futures=True)
    for process in processes:
        if process.is_alive():
            process.terminate()
    for process in processes:
        process.join()
    # A worker stopped while it was sending a result leaves half a message in the result pipe, and the
    # manager thread would wait for the rest forever. With every worker gone, closing this process's copy of
    # the pipe's write end (the last one) turns that wait into end-of-file, which the manager treats as a
    # broken pool: it fails what is left and exits.
    writer = getattr(results, "_writer", None)
    if writer is not None:
        writer.close()
    if manager is not None:
        manager.join()


def _span(ids: Sequence[int]) -> str:
    return f"tree {ids[0]}" if len(ids) == 1 else f"trees {ids[0]}-{ids[-1]}"


def _failure(failed: _BlockFailed, blocks: list[list[int]], board: NDArray[np.int64] | None) -> TreeGrowthError:
    """The error for the caller: which trees, and what went wrong."""
    count = len(blocks)
    if isinstance(failed.error, BrokenExecutor):
        lost = [] if board is None else [j for j in range(count) if board[j, 1] == _shared.STARTED]
        if not lost:
            return TreeGrowthError(
                f"a worker process died unexpectedly before it started on any block (it could not start up, "
                f"or was killed); {_span(blocks[failed.k])} (block {failed.k + 1} of {count}) and the rest "
                "were not grown and no trees were kept", blocks[failed.k])
        where = "; ".join(
            f"{_span(blocks[j])} (block {j + 1} of {count}"
            + (f", worker pid {board[j, 0]})" if board is not None and board[j, 0] else ")")
            for j in lost
        )
        message = (f"a worker process died unexpectedly (killed, out of memory or crashed) while growing {where}; "
                   "the fit was stopped and no trees were kept")
        trees = [b for j in lost for b in blocks[j]]
    else:
        error = failed.error
        message = (f"growing {_span(blocks[failed.k])} (block {failed.k + 1} of {count}) failed in a worker: "
                   f"{type(error).__name__}: {error}")
        trees = blocks[failed.k]
    return TreeGrowthError(message, trees)


def _assemble(results: list[Grown]) -> Grown:
    """Trees in id order (made read-only again after unpickling) and the stacked in-bag counts."""
    trees: list[Tree] = []
    for grown, _ in results:
        for tree in grown:
            for f in fields(tree):
                getattr(tree, f.name).flags.writeable = False
        trees += grown
    inbag = np.concatenate([counts for _, counts in results])
    return trees, inbag
