"""Checks for the files forestlab writes (a path must name a file in a folder that exists)."""

from __future__ import annotations

import os
from os import PathLike
from pathlib import Path

__all__ = ["output_path"]


def output_path(path: str | PathLike, name: str = "path") -> Path:
    """``path`` as a Path to write to; a clear error when it is not a path, is a folder, or its folder is missing."""
    if not isinstance(path, (str, PathLike)):
        raise TypeError(f"`{name}` must be a str or os.PathLike; got {type(path).__name__}")
    target = Path(path)
    if target.is_dir():
        raise IsADirectoryError(f"`{name}` {os.fspath(path)!r} is a folder; give the name of a file to write")
    folder = Path(os.path.abspath(target)).parent
    if not folder.is_dir():
        raise FileNotFoundError(f"`{name}` {os.fspath(path)!r} is in a folder that does not exist ({folder}); "
                                "create the folder first")
    return target
