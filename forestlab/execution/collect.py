"""Collecting the blocks of a fit: waiting in block order, reporting progress, and turning a failed block or
a dead worker into one :class:`TreeGrowthError` that names the trees."""

from __future__ import annotations

from collections.abc import Sequence
from concurrent.futures import FIRST_COMPLETED, BrokenExecutor, Future, wait

import numpy as np
from numpy.typing import NDArray

from ..engine.tree import Tree
from . import shared as _shared
from .progress import ProgressCallback
from .work import Grown

__all__ = ["BlockFailed", "TreeGrowthError", "assemble", "cancel", "collect", "died_while", "failure",
           "report_progress", "submit_and_collect"]

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


class BlockFailed(Exception):
    """Internal: block ``k`` finished with exception ``error``."""

    def __init__(self, k: int, error: BaseException) -> None:
        super().__init__(k, error)
        self.k, self.error = k, error


def submit_and_collect(submit, blocks, report, board=None) -> list[Grown]:
    """Submit every block with ``submit(k, ids)``, collect in block order; cancel the rest on any failure
    (the ``board``, when given, tells which worker held which block)."""
    futures: dict[Future, int] = {}
    try:
        for k, ids in enumerate(blocks):
            futures[submit(k, ids)] = k
        return collect(futures, blocks, report)
    except BlockFailed as failed:
        cancel(futures)
        raise failure(failed, blocks, None if board is None else board.snapshot()) from failed.error
    except BaseException:
        cancel(futures)
        raise


def report_progress(report: ProgressCallback | None, done: int, total: int) -> None:
    if report is not None:
        report(done, total)


def collect(futures: dict[Future, int], blocks: list[list[int]], report) -> list[Grown]:
    """Wait for every block, reporting progress; raise ``BlockFailed`` for the first failed block seen."""
    total = sum(map(len, blocks))
    results: list[Grown | None] = [None] * len(blocks)
    done = 0
    report_progress(report, 0, total)
    pending = set(futures)
    while pending:
        finished, pending = wait(pending, return_when=FIRST_COMPLETED)
        for future in sorted(finished, key=futures.__getitem__):
            k = futures[future]
            error = future.exception()
            if error is not None:
                raise BlockFailed(k, error)
            results[k] = future.result()
            done += len(blocks[k])
            report_progress(report, done, total)
    return results


def cancel(futures: dict[Future, int]) -> None:
    for future in futures:
        future.cancel()


def span(ids: Sequence[int]) -> str:
    return f"tree {ids[0]}" if len(ids) == 1 else f"trees {ids[0]}-{ids[-1]}"


def failure(failed: BlockFailed, blocks: list[list[int]], board: NDArray[np.int64] | None) -> TreeGrowthError:
    """The error for the caller: which trees, and what went wrong."""
    count = len(blocks)
    if isinstance(failed.error, BrokenExecutor):
        lost = [] if board is None else [(j, int(board[j, 0])) for j in range(count) if board[j, 1] == _shared.STARTED]
        return died_while(blocks, lost, failed.k)
    error = failed.error
    message = (f"growing {span(blocks[failed.k])} (block {failed.k + 1} of {count}) failed in a worker: "
               f"{type(error).__name__}: {error}")
    return TreeGrowthError(message, blocks[failed.k])


def died_while(blocks: list[list[int]], lost: list[tuple[int, int]], waiting: int | None = None) -> TreeGrowthError:
    """The error for a worker process that died: ``lost`` lists ``(block, pid)`` of the blocks it was growing
    (pid 0 when unknown); with none, the worker died before it started on any (``waiting`` is then a block
    that was not grown, when known)."""
    count = len(blocks)
    if not lost:
        what = "" if waiting is None else f"{span(blocks[waiting])} (block {waiting + 1} of {count}) and the rest " \
            "were not grown and "
        return TreeGrowthError(
            "a worker process died unexpectedly before it started on any block (it could not start up, or was "
            f"killed; anything it printed is on stderr); {what}no trees were kept; should it keep happening, fit "
            "with `workers=1` or give `executor=` a pool of your own",
            () if waiting is None else blocks[waiting])
    where = "; ".join(f"{span(blocks[j])} (block {j + 1} of {count}" + (f", worker pid {pid})" if pid else ")")
                      for j, pid in lost)
    return TreeGrowthError(f"a worker process died unexpectedly (killed, out of memory or crashed) while growing "
                           f"{where}; the fit was stopped and no trees were kept",
                           [b for j, _ in lost for b in blocks[j]])


def assemble(results: list[Grown]) -> Grown:
    """Trees in id order and the stacked in-bag counts (trees are read-only as made, and again after
    unpickling: ``Tree.__setstate__``)."""
    trees: list[Tree] = [tree for grown, _ in results for tree in grown]
    inbag = np.concatenate([counts for _, counts in results])
    return trees, inbag
