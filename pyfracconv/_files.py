"""Checkpoint files: the Python side of ``fc_file_write`` / ``fc_file_read``
(csrc/file.c), the one atomic writer and bounded reader of the library.

Every ``save_file`` of the package writes the bytes of the object's
``save()`` through :func:`write_file`; every ``load_file`` reads them back
through :func:`read_file` and hands them to the object's ``load()``, which
treats them as untrusted input. Nothing here writes or reads a file itself.
"""

from __future__ import annotations

import errno as errno_mod
import numbers
import os
from typing import Any

import numpy as np

from ._errors import ArgumentError, FileError, InputTypeError, StateError, raise_for_status, show
from ._fracconv import ffi, lib

__all__ = [
    "DEFAULT_MAX_SIZE",
    "check_path",
    "check_write_path",
    "check_max_size",
    "write_file",
    "read_file",
    "state_error",
]

#: Default bound of the bytes a ``load_file`` reads (1 GiB): a longer file
#: is refused before it is all read. Pass ``max_size`` for larger states.
DEFAULT_MAX_SIZE = 2**30


def check_path(name: str, path: object) -> bytes:
    """``path`` (str, bytes or os.PathLike) as the bytes the system takes."""
    try:
        p = os.fspath(path)  # type: ignore[call-overload]
    except TypeError:
        raise InputTypeError(
            f"{name}={show(path)}: expected a path (str, bytes or os.PathLike), got {type(path).__name__}"
        ) from None
    b = os.fsencode(p)
    if not b:
        raise ArgumentError(f"{name}={show(path)}: the path is empty")
    if b"\0" in b:
        raise ArgumentError(f"{name}={show(path)}: the path contains a NUL character")
    return b


def check_write_path(path: object) -> bytes:
    """The path of a save_file, checked (a file name, not a directory's)."""
    p = check_path("path", path)
    if p.endswith(b"/"):
        raise ArgumentError(f"path={show(path)}: names a directory, not a file")
    return p


def check_max_size(max_size: object) -> int:
    """The bound of a load_file: an integer in [0, 2**63 - 1]."""
    if isinstance(max_size, (bool, np.bool_)) or not isinstance(max_size, numbers.Integral):
        raise InputTypeError(f"max_size={show(max_size)}: expected an integer, got {type(max_size).__name__}")
    n = int(max_size)
    if not 0 <= n < 2**63:
        raise ArgumentError(f"max_size={show(max_size)}: must be in [0, 2**63 - 1]")
    return n


def _io_error(what: str, path: bytes, err: int, doing: str, after: str) -> FileError:
    name = os.fsdecode(path)
    reason = os.strerror(err) if err else "unknown system error"
    return FileError(f"{what}(path={name!r}): {doing}: [Errno {err}] {reason}; {after}", err or None, name)


def write_file(what: str, path: bytes, data: bytes, obj: str) -> None:
    """Replace the file at ``path`` by ``data`` atomically (fc_file_write).
    ``what`` names the calling method, ``obj`` the object ("the stream")."""
    st = lib.fc_file_write(path, data, len(data))
    if st == 0:
        return
    if st == lib.FC_ERR_IO:
        raise _io_error(
            what,
            path,
            ffi.errno,
            "could not write the checkpoint file",
            f"the file at that path, if any, is unchanged and so is {obj}",
        )
    raise_for_status(st, f"{what}(path={os.fsdecode(path)!r})")


def read_file(what: str, path: bytes, max_size: int) -> bytes:
    """The bytes of the file at ``path``, at most ``max_size`` of them
    (fc_file_read)."""
    pp = ffi.new("unsigned char **")
    np_ = ffi.new("size_t *")
    st = lib.fc_file_read(path, max_size, pp, np_)
    if st == lib.FC_ERR_IO:
        err = ffi.errno
        doing = "not a regular file" if err == errno_mod.EINVAL else "could not read the checkpoint file"
        raise _io_error(what, path, err, doing, "nothing was loaded")
    if st == lib.FC_ERR_SIZE:
        raise StateError(
            f"{what}(path={os.fsdecode(path)!r}): the file is longer than "
            f"max_size={max_size} bytes; nothing was loaded (pass a larger max_size "
            "if the file is a checkpoint that large)"
        )
    raise_for_status(st, f"{what}(path={os.fsdecode(path)!r})")
    buf: Any = pp[0]
    try:
        return bytes(ffi.buffer(buf, int(np_[0])))
    finally:
        lib.fc_file_data_free(buf)


def state_error(what: str, path: bytes, exc: StateError) -> StateError:
    """``exc`` (from an object's load) with the path in front."""
    return StateError(f"{what}(path={os.fsdecode(path)!r}): {exc}")
