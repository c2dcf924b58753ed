"""A worker process of our own pool: forestlab's own entry point, serving blocks of trees over two pipes.

:mod:`.pool` starts it as ``python -c <boot> <folder of forestlab>``; the boot code ignores Ctrl-C (the
fitting process handles it and stops the workers), puts forestlab on the path and calls :func:`serve`. The
user's ``__main__`` is never imported, so nothing of a script, notebook or interactive session runs here.

The conversation, in :mod:`.channel` messages from the fitting process and the worker's replies:

- ``("job", sys_path, job)``: take the fitting process's ``sys.path``, then read ``job`` (a pickle of the
  shared-memory handle of the training data, the growth rules, the root seed and the fitting process's pid);
  reply ``("ready", pid)``, or ``("broken", None, traceback text)`` when the job cannot be read;
- ``("block", k, ids)``: grow block ``k``; reply ``("done", k, grown)`` or ``("failed", k, exception,
  traceback text)``;
- ``("end",)``: let go of the job's data and wait for the next job (no reply).

The end of the task pipe tells the worker to exit; so does the end of the fitting process (checked every
``PARENT_CHECK_SECONDS``).
"""

from __future__ import annotations

import os
import pickle
import sys
import threading
import traceback
from typing import Any

from ..engine.workspace import Workspace, keep_freed_memory
from . import shared as _shared
from .channel import receive, send
from .work import grow_block

__all__ = ["PARENT_CHECK_SECONDS", "pipes", "serve"]

#: Seconds between checks that the fitting process is still alive.
PARENT_CHECK_SECONDS = 1.0

#: The pipe ends of this worker once :func:`serve` runs (empty in any other process).
pipes: dict[str, Any] = {}


def serve() -> None:
    """Serve jobs and their blocks until the task pipe ends (see the module docstring)."""
    tasks, replies = _own_pipes()
    pipes.update(tasks=tasks, replies=replies)
    if os.name == "posix":
        threading.Thread(target=_watch_parent, args=(os.getppid(),), daemon=True).start()
    keep_freed_memory()
    try:
        _serve(tasks, replies)
    finally:
        tasks.close()
        replies.close()


def _serve(tasks: Any, replies: Any) -> None:
    job: tuple | None = None
    while True:
        try:
            message = receive(tasks)
        except EOFError:
            return
        if message[0] == "job":
            job = _start(message[1], message[2], replies)
        elif message[0] == "block":
            _, k, ids = message
            data, rules, root, work = job
            try:
                reply = ("done", k, grow_block(data, rules, root, ids, work))
            except BaseException as error:  # noqa: B036 - whatever user code raises goes back to the caller
                reply = ("failed", k, _portable(error), traceback.format_exc())
            send(replies, reply)
        else:
            job = None  # the data's mapping goes with the last view of it


def _start(path: list[str], job: bytes, replies: Any) -> tuple | None:
    """The arguments of ``grow_block`` but the ids (data, rules, root seed, scratch buffers), or None when
    the job cannot be read (an unimportable component, say), which the fitting process then reports."""
    sys.path[:] = path
    try:
        handle, rules, root = pickle.loads(job)
        arguments = (_shared.attach(handle), rules, root, Workspace())
    except Exception:
        send(replies, ("broken", None, traceback.format_exc()))
        return None
    send(replies, ("ready", os.getpid()))
    return arguments


def _own_pipes() -> tuple[Any, Any]:
    """The task and reply pipes (this process's stdin and stdout when it starts), moved to descriptors of
    their own: stdin becomes the null device and stdout writes to stderr, so a ``print`` in user code (a
    splitter, say) shows up on stderr instead of corrupting the replies."""
    tasks = os.fdopen(os.dup(0), "rb", buffering=0)
    replies = os.fdopen(os.dup(1), "wb", buffering=0)
    null = os.open(os.devnull, os.O_RDONLY)
    os.dup2(null, 0)
    os.close(null)
    os.dup2(2, 1)
    return tasks, replies


def _portable(error: BaseException) -> BaseException:
    """``error`` if it survives pickling, else a RuntimeError that names it."""
    try:
        pickle.loads(pickle.dumps(error, protocol=pickle.HIGHEST_PROTOCOL))
        return error
    except Exception:
        return RuntimeError(f"{type(error).__qualname__}: {error}")


def _watch_parent(parent: int) -> None:
    """Exit at once when the fitting process is gone (this process then has another parent)."""
    event = threading.Event()
    while not event.wait(PARENT_CHECK_SECONDS):
        if os.getppid() != parent:
            os._exit(1)
