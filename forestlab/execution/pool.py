"""A pool of worker processes of our own (``workers=k``): how they start, and how they are stopped.

Started with the ``forkserver`` method where the platform has it (``spawn`` elsewhere). ``fork`` is avoided on
purpose: forking a process that runs threads (a dask client, a GUI, a thread pool, some BLAS builds) can copy
a held lock into the child and hang it.
"""

from __future__ import annotations

import multiprocessing
import os
from concurrent.futures import ProcessPoolExecutor

from . import shared as _shared
from .collect import BlockFailed, collect, failure
from .work import Grown, grow_block_shared, init_worker

__all__ = ["run_own_pool", "start_method", "stop_pool", "worker_context"]

def start_method() -> str:
    """Start method of our own worker pools: ``forkserver`` where available, else ``spawn``."""
    return "forkserver" if "forkserver" in multiprocessing.get_all_start_methods() else "spawn"


_preload_asked = False


def worker_context() -> multiprocessing.context.BaseContext:
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


def run_own_pool(data, rules, root, blocks, report, workers: int) -> list[Grown]:
    context = worker_context()
    with _shared.SharedTrainingData(data) as handle, _shared.BlockBoard(len(blocks)) as board:
        pool = ProcessPoolExecutor(min(workers, len(blocks)), mp_context=context, initializer=init_worker,
                                   initargs=(os.getpid(),))
        try:
            futures = {pool.submit(grow_block_shared, handle, board.handle, k, rules, root, ids): k
                       for k, ids in enumerate(blocks)}
            results = collect(futures, blocks, report)
        except BlockFailed as failed:
            stop_pool(pool)
            raise failure(failed, blocks, board.snapshot()) from failed.error
        except BaseException:
            stop_pool(pool)
            raise
        pool.shutdown(wait=True)
    return results


def stop_pool(pool: ProcessPoolExecutor) -> None:
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
