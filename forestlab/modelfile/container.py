"""Saving and loading fitted forests: one ``.npz`` file of plain arrays plus a JSON header.

The layout is documented in ``docs/file-format.md``. Writing is atomic (temporary file in the target folder,
then ``os.replace``). Reading never unpickles: every member is checked (name, storage, size, ``.npy`` header,
dtype, shape) before it is read with ``allow_pickle=False``, so no member can be larger than the file itself,
and the trees are validated by :mod:`._modelcheck` before a forest is built from them.
"""

from __future__ import annotations

import errno
import io
import json
import os
import struct
import tempfile
import zipfile
import zlib
from os import PathLike
from typing import Any

import numpy as np
from numpy.typing import NDArray

from .check import NODE_DTYPES, ModelFileError, field, int_field
from .oob import oob_shapes

__all__ = ["FORMAT_NAME", "FORMAT_VERSION", "READ_VERSIONS", "ModelFileError", "read_model", "write_model"]

FORMAT_NAME = "forestlab-forest"
FORMAT_VERSION = 2
#: Versions this forestlab reads: version 1 named the class priors "class weights" (see docs/file-format.md).
READ_VERSIONS = (1, 2)
MAX_MEMBERS = 32
MAX_HEADER_BYTES = 256 * 2**20
NODE_MEMBERS = tuple(NODE_DTYPES)
_READ_ERRORS = (zipfile.BadZipFile, zipfile.LargeZipFile, OSError, EOFError, KeyError, ValueError, TypeError,
                struct.error, NotImplementedError, RuntimeError, zlib.error, OverflowError, MemoryError,
                UnicodeDecodeError, RecursionError, IndexError)


# ------------------------------------------------------------------------------------------------ writing
def write_model(path: str | PathLike, header: dict, arrays: dict[str, NDArray]) -> None:
    """Write ``arrays`` and the JSON ``header`` as one ``.npz`` file at ``path``, atomically."""
    if not isinstance(path, (str, PathLike)):
        raise TypeError(f"`path` must be a str or os.PathLike; got {type(path).__name__}")
    path = os.fspath(path)
    text = json.dumps(header, allow_nan=False, sort_keys=True, indent=1).encode("utf-8")
    members = {"header": np.frombuffer(text, dtype=np.uint8), **arrays}
    folder = os.path.dirname(os.path.abspath(path))
    if not os.path.isdir(folder):
        raise FileNotFoundError(errno.ENOENT, f"cannot save to {path!r}: the folder {folder!r} does not exist")
    try:
        fd, temporary = tempfile.mkstemp(prefix=".forestlab-", suffix=".tmp", dir=folder)
    except OSError as exc:  # it would name the temporary file, not the folder
        raise type(exc)(exc.errno, f"cannot save to {path!r}: cannot write into the folder {folder!r} "
                                   f"({exc.strerror})") from None
    try:
        with os.fdopen(fd, "wb") as fh:
            np.savez(fh, **members)
            fh.flush()
            os.fsync(fh.fileno())
        os.chmod(temporary, _default_mode())
        os.replace(temporary, path)
    except BaseException:
        try:
            os.unlink(temporary)
        except OSError:
            pass
        raise


def _default_mode() -> int:
    """Permissions of a new file under the current umask."""
    mask = os.umask(0)
    os.umask(mask)
    return 0o666 & ~mask


# ------------------------------------------------------------------------------------------------ reading
def read_model(path: str | PathLike) -> tuple[dict, dict[str, NDArray]]:
    """The header and the arrays of the model file at ``path``, checked member by member.

    Returns the header (a dict, format name and version checked) and every array, each with the dtype and
    shape the header implies. Raises :class:`ModelFileError` on anything else.
    """
    if not isinstance(path, (str, PathLike)):
        raise TypeError(f"`path` must be a str or os.PathLike; got {type(path).__name__}")
    with open(path, "rb") as fh:
        blob = fh.read()
    try:
        with zipfile.ZipFile(io.BytesIO(blob)) as zf:
            infos = _check_members(zf, len(blob))
            header = _read_header(zf, infos)
            shapes = _member_shapes(header)
            present = sorted(set(infos) - {"header"})
            if present != sorted(shapes):
                raise ModelFileError(f"the file's members {present} differ from those its header implies "
                                     f"{sorted(shapes)}")
            arrays = {name: _read_array(zf, infos[name], *shapes[name], name) for name in shapes}
    except ModelFileError:
        raise
    except _READ_ERRORS as exc:
        raise ModelFileError(f"{os.fspath(path)!r} is not a readable forestlab forest file "
                             f"({type(exc).__name__}: {exc})") from None
    return header, arrays


def _check_members(zf: zipfile.ZipFile, file_size: int) -> dict[str, zipfile.ZipInfo]:
    """Member name -> ZipInfo, refusing compression, encryption, duplicates and sizes beyond the file."""
    infos = zf.infolist()
    names = [info.filename for info in infos]
    if len(infos) > MAX_MEMBERS or len(set(names)) != len(names):
        raise ModelFileError("the file has too many or repeated members")
    out: dict[str, zipfile.ZipInfo] = {}
    for info in infos:
        if not info.filename.endswith(".npy") or info.compress_type != zipfile.ZIP_STORED \
                or info.flag_bits & 0x1 or info.file_size != info.compress_size:
            raise ModelFileError(f"member {info.filename!r} is not a plain stored .npy array")
        out[info.filename[:-4]] = info
    if sum(info.file_size for info in infos) > file_size:
        raise ModelFileError("the members declare more bytes than the file holds")
    if "header" not in out:
        raise ModelFileError("the file has no 'header' member: not a forestlab forest file")
    return out


def _read_header(zf: zipfile.ZipFile, infos: dict[str, zipfile.ZipInfo]) -> dict:
    if infos["header"].file_size > MAX_HEADER_BYTES:
        raise ModelFileError("the header member is too large")
    raw = zf.read(infos["header"])
    shape, dtype = _npy_layout(raw, "header")
    if dtype != np.dtype("|u1") or len(shape) != 1:
        raise ModelFileError("the header member must be a 1-D uint8 array")
    text = np.lib.format.read_array(io.BytesIO(raw), allow_pickle=False).tobytes().decode("utf-8")
    header = json.loads(text, parse_constant=_refuse_constant)
    if not isinstance(header, dict) or header.get("format") != FORMAT_NAME:
        raise ModelFileError("the header does not name the forestlab forest format")
    version = field(header, "format_version", int)
    if version not in READ_VERSIONS:
        raise ModelFileError(f"format version {version} is not supported (this forestlab reads versions "
                             f"{', '.join(map(str, READ_VERSIONS))})")
    return header


def _refuse_constant(name: str) -> Any:
    raise ModelFileError(f"the header holds the non-JSON constant {name}")


def _member_shapes(header: dict) -> dict[str, tuple[str, tuple[int, ...]]]:
    """Expected dtype and shape of every member, from the header's counts."""
    trees = int_field(header, "trees", 1)
    nodes = int_field(header, "nodes", trees)
    cases = int_field(header, "cases", 1)
    features = int_field(header, "features", 1)
    shapes = {name: (NODE_DTYPES[name], (nodes,)) for name in NODE_MEMBERS}
    shapes["category_left"] = ("<u8", (nodes, int_field(header, "category_words", 0)))
    levels = int_field(header, "categorical_features", 0)
    shapes["level_features"] = ("<i8", (levels,))
    shapes["level_offsets"] = ("<i8", (levels + 1,))
    shapes["level_values"] = ("<f8", (int_field(header, "category_levels", 0),))
    shapes["offsets"] = ("<i8", (trees + 1,))
    shapes["inbag"] = ("|u1", (trees, cases))
    labels = field(header, "classes", (dict, type(None)))
    if labels is not None:
        shapes["classes"] = (_label_dtype(labels), (int_field(labels, "count", 1, "classes"),))
    if field(header, "has_case_weights", bool):
        shapes["case_weights"] = ("<f8", (cases,))
    if field(header, "has_data", bool):
        shapes["X"] = ("<f8", (cases, features))
        shapes["y"] = ("<i8" if labels is not None else "<f8", (cases,))
    if header.get("has_oob", False) is True:
        task = "classification" if labels is not None else "regression"
        shapes.update(oob_shapes(task, cases, trees, 0 if labels is None else shapes["classes"][1][0]))
    return shapes


def _label_dtype(labels: dict) -> str:
    code = field(labels, "dtype", str, "classes")
    try:
        dtype = np.dtype(code)
    except TypeError:
        raise ModelFileError(f"the class label dtype {code!r} is not a NumPy dtype") from None
    if dtype.kind not in "biufUS" or dtype.str != code:
        raise ModelFileError(f"the class label dtype {code!r} is not allowed (bools, numbers, strings only)")
    return code


def _npy_layout(raw: bytes, name: str) -> tuple[tuple[int, ...], np.dtype]:
    """Shape and dtype from a ``.npy`` header, refusing Fortran order and payloads of the wrong length."""
    buffer = io.BytesIO(raw)
    version = np.lib.format.read_magic(buffer)
    if version == (1, 0):
        shape, fortran, dtype = np.lib.format.read_array_header_1_0(buffer)
    elif version == (2, 0):
        shape, fortran, dtype = np.lib.format.read_array_header_2_0(buffer)
    else:
        raise ModelFileError(f"member {name!r} uses .npy version {version}, which is not read")
    if fortran or dtype.hasobject or dtype.fields is not None or dtype.subdtype is not None:
        raise ModelFileError(f"member {name!r} is not a plain C-ordered array (dtype {dtype})")
    count = 1
    for extent in shape:
        count *= int(extent)
    if count * dtype.itemsize != len(raw) - buffer.tell():
        raise ModelFileError(f"member {name!r} declares shape {shape} but holds {len(raw) - buffer.tell()} bytes")
    return tuple(int(s) for s in shape), dtype


def _read_array(zf: zipfile.ZipFile, info: zipfile.ZipInfo, dtype: str, shape: tuple[int, ...],
                name: str) -> NDArray:
    """One member, read only once its header shows the expected dtype and shape."""
    expected = 1
    for extent in shape:
        expected *= extent
    if info.file_size > expected * np.dtype(dtype).itemsize + 4096:
        raise ModelFileError(f"member {name!r} is larger than its shape {shape} allows")
    raw = zf.read(info)
    got_shape, got_dtype = _npy_layout(raw, name)
    if got_dtype.str != dtype or got_shape != shape:
        raise ModelFileError(f"member {name!r} must be {dtype} of shape {shape}; got {got_dtype.str} of "
                             f"shape {got_shape}")
    return np.lib.format.read_array(io.BytesIO(raw), allow_pickle=False)

