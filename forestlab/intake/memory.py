"""Will the trees fit in memory? A floor on what a fit keeps, checked before any tree is grown.

A fitted forest keeps one byte of in-bag count per tree and case, and every tree, however small, costs its
node arrays and the Python objects that hold them: ``TREE_FLOOR_BYTES`` (about 1.1 KB for a one-node tree,
measured with tracemalloc on NumPy 2.4; every further node adds some 25 bytes). The rule: a fit is refused
when ``trees * (cases + TREE_FLOOR_BYTES)`` exceeds the memory the system reports as available. That is a
floor, so any fit refused could not have finished, while a fit let through can still run short if its trees
grow large; where the system does not say (no ``/proc/meminfo`` and no ``sysconf``), nothing is checked.
"""

from __future__ import annotations

import os

__all__ = ["TREE_FLOOR_BYTES", "available_memory", "check_memory"]

#: Bytes a tree of one node takes at least (its node arrays and their Python objects).
TREE_FLOOR_BYTES = 1000


def available_memory() -> int | None:
    """Bytes of memory available to new allocations (Linux ``MemAvailable``, else free physical pages), or None."""
    try:
        with open("/proc/meminfo") as fh:
            for line in fh:
                if line.startswith("MemAvailable:"):
                    return int(line.split()[1]) * 1024
    except (OSError, ValueError, IndexError):
        pass
    try:
        return os.sysconf("SC_AVPHYS_PAGES") * os.sysconf("SC_PAGE_SIZE")
    except (ValueError, OSError, AttributeError):
        return None


def check_memory(trees: int, cases: int, available: int | None = None) -> None:
    """Raise MemoryError when ``trees`` trees on ``cases`` cases cannot fit (the rule of the module docstring)."""
    available = available_memory() if available is None else available
    inbag, floor = trees * cases, trees * TREE_FLOOR_BYTES
    if available is not None and inbag + floor > available:
        raise MemoryError(
            f"{trees:,} trees (`trees`) on {cases:,} cases need at least {_size(inbag + floor)} of memory "
            f"(in-bag counts {_size(inbag)}: one byte per tree and case; the trees at least {_size(floor)}: about "
            f"{TREE_FLOOR_BYTES} bytes each), more than the {_size(available)} available; grow fewer trees "
            "(`forest.oob.error_curve` shows where more stop helping)")


def _size(count: int) -> str:
    for unit, scale in (("TB", 1e12), ("GB", 1e9), ("MB", 1e6), ("kB", 1e3)):
        if count >= scale:
            return f"{count / scale:.1f} {unit}"
    return f"{count} bytes"
