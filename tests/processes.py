"""Test helpers about processes and shared memory: is a process alive, which are left, which segments remain."""

from __future__ import annotations

import os
import time
from pathlib import Path

from forestlab.execution import shared as _shared

SHM = Path("/dev/shm")


def leftover_segments(pid: int | None = None) -> list[str]:
    """Shared-memory segments of forestlab's that the process ``pid`` (this one by default) created and left."""
    prefix = f"{_shared.SEGMENT_PREFIX}{os.getpid() if pid is None else pid}_"
    return sorted(p.name for p in SHM.iterdir() if p.name.startswith(prefix)) if SHM.is_dir() else []


def alive(pid: int) -> bool:
    """The process exists and is not a zombie."""
    try:
        os.kill(pid, 0)
    except ProcessLookupError:
        return False
    try:
        return Path(f"/proc/{pid}/stat").read_text().split(")")[-1].split()[0] != "Z"
    except OSError:
        return True


def wait_gone(pids, seconds: float = 20.0) -> list[int]:
    """Pids still alive after waiting up to ``seconds`` (not a timing check: a bound on a hang)."""
    end = time.monotonic() + seconds
    while time.monotonic() < end and any(alive(p) for p in pids):
        time.sleep(0.05)
    return [p for p in pids if alive(p)]


def _live_processes(field: int, value: int) -> list[int]:
    """Pids of live processes whose ``/proc/<pid>/stat`` field (after the name) equals ``value``."""
    out = []
    for entry in Path("/proc").iterdir():
        if entry.name.isdigit():
            try:
                stat = (entry / "stat").read_text().split(")")[-1].split()
            except OSError:
                continue
            if int(stat[field]) == value and stat[0] != "Z":
                out.append(int(entry.name))
    return out


def session_members(sid: int) -> list[int]:
    """Pids of live processes in session ``sid`` (a subprocess started in a new session and all it started)."""
    return _live_processes(3, sid)


def children(pid: int) -> list[int]:
    """Pids of the live child processes of ``pid``."""
    return _live_processes(1, pid)
