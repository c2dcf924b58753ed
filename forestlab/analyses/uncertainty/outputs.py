"""What the result objects of the uncertainty analyses share: read-only arrays, and the plain text tables they
print as (a header row and aligned columns, numbers right)."""

from __future__ import annotations

import numbers
from collections.abc import Sequence

import numpy as np

__all__ = ["SHOWN_ROWS", "cell", "more_rows", "read_only", "table"]

# Rows a result prints (its arrays always hold every row).
SHOWN_ROWS = 10


def read_only(result: object) -> None:
    """Mark every array attribute of ``result`` read-only (a result object's arrays are its record)."""
    for value in vars(result).values():
        if isinstance(value, np.ndarray):
            value.flags.writeable = False


def cell(value: object, digits: int = 4) -> str:
    """A table cell: reals to ``digits`` significant digits, everything else as ``str``."""
    if isinstance(value, numbers.Real) and not isinstance(value, (numbers.Integral, np.bool_)):
        return f"{float(value):.{digits}g}"
    return str(value)


def table(head: Sequence[str], rows: Sequence[Sequence[str]], left: Sequence[int] = ()) -> list[str]:
    """The lines of a table: ``head`` and ``rows`` of cells, each column as wide as its widest cell, the
    columns in ``left`` aligned left and the others right; no lines when there are no rows."""
    if not rows:
        return []
    widths = [max([len(h)] + [len(row[j]) for row in rows]) for j, h in enumerate(head)]
    align = [str.ljust if j in left else str.rjust for j in range(len(head))]
    return ["  ".join(f(c, w) for f, c, w in zip(align, line, widths)) for line in [list(head), *rows]]


def more_rows(total: int, shown: int) -> list[str]:
    """The closing line of a cut table."""
    return [f"... and {total - shown} more (all of them are in the arrays)"] if total > shown else []
