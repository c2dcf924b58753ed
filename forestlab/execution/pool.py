"""A pool of worker processes of our own (``workers=k``): how they start, how blocks reach them, how they stop.

Every worker is a fresh interpreter started from forestlab's own entry point (:mod:`.worker`, run as
``python -c <boot>``); it never imports the user's ``__main__``, so a script without a main guard, ``python
-c``, an interactive session and a notebook all fit alike, and nothing of them runs twice. ``fork`` is not
used: forking a process that runs threads (a dask client, a GUI, a thread pool, some BLAS builds) can copy a
held lock into the child and hang it.

The training data go once into shared memory; each worker gets the job (:mod:`.channel` messages over its
stdin and stdout) and then one block at a time, from a thread of the fitting process that waits for its
replies. The fitting thread takes the replies from a queue, reports progress, and on a failure, a dead
worker or Ctrl-C terminates and waits for the fit's workers before the shared memory is unlinked.

A worker costs a Python start and ``import forestlab`` (about 0.2 s of processor time), so after a fit that
succeeded its workers wait, idle, for the next fit of this process, unless the job named code of the user's
(a sampler or splitter class of their own, which a later fit could have changed): they are then let go.
Idle workers end with the process (``atexit``; if it dies, they see it within ``PARENT_CHECK_SECONDS``).
"""

from __future__ import annotations

import atexit
import collections
import os
import pickle
import queue
import subprocess
import sys
import threading
import types
from pathlib import Path
from typing import Any

from . import shared as _shared
from . import worker as _worker
from .channel import WorkerTraceback, receive, send, send_bytes
from .collect import BlockFailed, TreeGrowthError, died_while, failure, report_progress
from .work import Grown

__all__ = ["BOOT", "run_own_pool", "worker_command"]

#: What a worker runs: ignore Ctrl-C first, then put forestlab (``argv[1]``) on the path and serve.
BOOT = ("import signal; signal.signal(signal.SIGINT, signal.SIG_IGN); import sys; sys.path.insert(0, sys.argv[1]); "
        "from forestlab.execution.worker import serve; serve()")
#: A worker whose job named classes or functions of other packages than these is not kept for another fit.
KEPT_PACKAGES = frozenset({"forestlab", "numpy", "builtins", "copyreg"})
#: Seconds to wait for an idle worker to exit at the end of the process before it is killed.
EXIT_SECONDS = 5.0

MSG_NO_PROCESSES = ("could not start worker processes for `workers={}` ({}); fit with `workers=1`, or give "
                    "`executor=` a pool of your own")
MSG_IN_WORKER = ("a worker process cannot start worker processes of its own; this one was asked to while it "
                 "imported the module that defines your sampler or splitter, which fits a forest with `workers > 1` "
                 "when imported: move that fit under `if __name__ == \"__main__\":` or out of the module")
MSG_UNPICKLABLE = ("`{}` cannot be sent to worker processes ({}); keep its attributes to plain data, or fit "
                   "with `workers=1`")
MSG_MAIN = ("`{}`: {} is defined in your script, notebook or session (`__main__`), which worker processes "
            "do not run; define it in a module of its own and import it from there, or fit with `workers=1`")


def worker_command() -> list[str]:
    """The command line of a worker: this interpreter with its flags, the boot code, forestlab's folder."""
    if not sys.executable:
        raise OSError("this interpreter does not know its executable (sys.executable is empty)")
    flags = getattr(subprocess, "_args_from_interpreter_flags", list)()  # -X dev, -W ..., as multiprocessing
    return [sys.executable, *flags, "-c", BOOT, str(Path(__file__).resolve().parents[2])]


def run_own_pool(data, rules, root, blocks, report, workers: int) -> list[Grown]:
    """Grow ``blocks`` in ``workers`` processes of our own; results in block order."""
    if _worker.pipes:  # a module imported in a worker fits with workers: refuse rather than start workers on
        raise RuntimeError(MSG_IN_WORKER)
    packages = set()
    for argument in ("sampler", "splitter"):
        packages |= _packages_of(getattr(rules, argument), argument)
    with _shared.SharedTrainingData(data) as handle:
        job = pickle.dumps((handle, rules, root), protocol=pickle.HIGHEST_PROTOCOL)
        try:
            hired = _hire(min(workers, len(blocks)))
        except OSError as exc:
            raise RuntimeError(MSG_NO_PROCESSES.format(workers, exc)) from exc
        crew = _Crew(hired, blocks, job, keep=packages <= KEPT_PACKAGES)
        try:
            return crew.collect(report)
        finally:
            crew.stop()


class _Worker:
    """One worker process and the fitting process's ends of its pipes."""

    def __init__(self, command: list[str]) -> None:
        self.process = subprocess.Popen(command, stdin=subprocess.PIPE, stdout=subprocess.PIPE, bufsize=0)
        self.tasks, self.replies, self.pid = self.process.stdin, self.process.stdout, self.process.pid

    def alive(self) -> bool:
        return self.process.poll() is None

    def end(self, terminate: bool, seconds: float | None = None) -> None:
        """Terminate the process (or close its task pipe, so that it exits), wait for it, close the pipes."""
        if terminate and self.alive():
            self.process.terminate()
        _close(self.tasks)
        try:
            self.process.wait(seconds)
        except subprocess.TimeoutExpired:
            self.process.kill()
            self.process.wait()
        _close(self.replies)


_idle: list[_Worker] = []
_idle_lock = threading.Lock()
_idle_owner = os.getpid()


def _hire(count: int) -> list[_Worker]:
    """``count`` workers: idle ones of this process first, then new ones."""
    global _idle_owner
    with _idle_lock:
        if _idle_owner != os.getpid():  # a forked copy of the process: the idle workers are the original's
            _idle.clear()
            _idle_owner = os.getpid()
        hired = []
        while _idle and len(hired) < count:
            worker = _idle.pop()
            if worker.alive():
                hired.append(worker)
            else:
                worker.end(terminate=True)
    try:
        command = worker_command()
        while len(hired) < count:
            hired.append(_Worker(command))
    except OSError:
        for worker in hired:
            worker.end(terminate=True)
        raise
    return hired


@atexit.register
def _end_idle() -> None:
    with _idle_lock:
        workers = list(_idle) if _idle_owner == os.getpid() else []
        _idle.clear()
    for worker in workers:
        worker.end(terminate=False, seconds=EXIT_SECONDS)


class _Crew:
    """The workers of one fit, a thread per worker talking to it, and the queue of their replies."""

    def __init__(self, workers: list[_Worker], blocks: list[list[int]], job: bytes, keep: bool) -> None:
        self.workers, self.blocks, self.keep = workers, blocks, keep
        self.todo = collections.deque(enumerate(blocks))
        self.replies: queue.SimpleQueue = queue.SimpleQueue()
        self.finished = False
        start = pickle.dumps(("job", list(sys.path), job), protocol=pickle.HIGHEST_PROTOCOL)
        self.threads = [threading.Thread(target=self._converse, args=(w, start), daemon=True) for w in workers]
        for thread in self.threads:
            thread.start()

    def _converse(self, worker: _Worker, start: bytes) -> None:
        """In a thread of the fitting process: send the job, then blocks while there are any; queue replies."""
        k = None
        try:
            send_bytes(worker.tasks, start)
            reply = receive(worker.replies)
            while reply[0] == "ready" or reply[0] == "done":
                if reply[0] == "done":
                    self.replies.put(reply)
                try:
                    k, ids = self.todo.popleft()
                except IndexError:
                    send(worker.tasks, ("end",))
                    return
                send(worker.tasks, ("block", k, ids))
                reply = receive(worker.replies)
            self.replies.put(reply)
        except (EOFError, OSError):
            self.replies.put(("died", k, worker.pid))
        except Exception as exc:  # a reply that cannot be read is the block's failure
            self.replies.put(("failed", k, exc, ""))

    def collect(self, report) -> list[Grown]:
        """Wait for every block, reporting progress; raise :class:`TreeGrowthError` for the first failure."""
        blocks = self.blocks
        results: list[Grown | None] = [None] * len(blocks)
        total, done, left = sum(map(len, blocks)), 0, len(blocks)
        report_progress(report, 0, total)
        while left:
            kind, k, *rest = self.replies.get()
            if kind == "done":
                results[k] = rest[0]
                done, left = done + len(blocks[k]), left - 1
                report_progress(report, done, total)
            elif kind == "failed":
                error, text = rest
                if text:
                    error.__cause__ = WorkerTraceback(text)
                raise failure(BlockFailed(k, error), blocks, None) from error
            elif kind == "died":
                raise died_while(blocks, [] if k is None else [(k, rest[0])])
            else:
                text = rest[0].strip()
                raise TreeGrowthError(f"the worker processes could not read the fit's job: {text.splitlines()[-1]}"
                                      f"\n\nin a worker:\n{text}")
        self.finished = True
        return results

    def stop(self) -> None:
        """After a complete fit, keep the workers for the next (or let them exit); otherwise terminate them.
        Either way the threads are gone on return, and so are the processes not kept."""
        self.todo.clear()
        if not self.finished:
            for worker in self.workers:
                if worker.alive():
                    worker.process.terminate()
        for thread in self.threads:
            thread.join()
        kept = [w for w in self.workers if self.finished and self.keep and w.alive()]
        for worker in self.workers:
            if worker not in kept:
                worker.end(terminate=not self.finished)
        with _idle_lock:
            _idle.extend(kept)


def _close(pipe: Any) -> None:
    try:
        pipe.close()
    except OSError:
        pass


class _Finder(pickle.Pickler):
    """Pickles to nowhere, noting the modules of the classes and functions it meets; stops at ``__main__``."""

    def __init__(self) -> None:
        super().__init__(_Discard(), protocol=pickle.HIGHEST_PROTOCOL)
        self.met: dict[str, str] = {}  # module -> the first class or function of it met

    def reducer_override(self, obj: Any) -> Any:
        if isinstance(obj, (type, types.FunctionType)):
            module = getattr(obj, "__module__", None) or ""
            self.met.setdefault(module, f"{'the class' if isinstance(obj, type) else 'the function'} "
                                        f"{obj.__qualname__}")
            if module == "__main__":
                raise _InMain
        return NotImplemented


class _InMain(Exception):
    """Raised by the finder at the first part of ``__main__``."""


class _Discard:
    def write(self, data: bytes) -> int:
        return len(data)


def _packages_of(component: Any, argument: str) -> set[str]:
    """The top-level packages of the classes and functions ``component`` is made of (worker processes import
    them to rebuild it); ``__main__`` is refused, as worker processes do not run it."""
    finder = _Finder()
    try:
        finder.dump(component)
    except _InMain:
        raise ValueError(MSG_MAIN.format(argument, finder.met["__main__"])) from None
    except (pickle.PicklingError, TypeError, AttributeError) as exc:
        raise TypeError(MSG_UNPICKLABLE.format(argument, exc)) from exc
    return {module.partition(".")[0] for module in finder.met}
