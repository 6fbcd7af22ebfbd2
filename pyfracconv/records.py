"""Records larger than memory: a ``.npy`` file in, a ``.npy`` file out.

:func:`apply_npy` maps the input file in memory, pushes it through a
:class:`pyfracconv.Stream` one chunk of time steps at a time and writes the
outputs into a memory-mapped ``.npy`` file. Time runs along axis 0 (one row
per time step, the layout of :meth:`Stream.push_many` and of the command
line's ``.npy`` files); a 2-D record has one signal per column.

Memory (``README.md``, "Records larger than memory", has the measured
figures):

- ``mode="compressed"`` (the default): bounded, whatever the record's
  length. The stream holds 5-7 KB for one column and about 2 KB for each
  further one (its sums of exponentials, fixed at creation); three chunk buffers of
  ``8 * chunk * columns`` bytes (the input copy, the outputs, the engine's
  block); and at most :data:`MAP_BUDGET` bytes of each mapped file are kept
  resident, since the files are mapped again after every
  :data:`MAP_BUDGET` bytes processed. Outputs are within the stream's
  stated tolerance of the exact ones (see :class:`pyfracconv.Stream`).
- ``mode="exact"``: the exact stream keeps the whole history, about
  68-76 bytes per sample and column (47-52 with several columns), reserved
  before the first chunk: a record of n samples and c columns needs about
  ``76 * n * c`` bytes plus the chunk buffers. A record whose estimate
  exceeds the machine's memory is refused with
  :class:`pyfracconv.OutOfMemory` before anything is written.

The output is written to a temporary file in the output's directory and
renamed over ``out_path`` only when every chunk has been written and
flushed: a failure (a bad sample found half-way, a full disk, an
interrupt) leaves no partial output (the output's disk space is
allocated before the first chunk, so a full disk is found there), and an older file at ``out_path``
is kept as it was.
"""

from __future__ import annotations

import errno
import math
import os
import tempfile
from typing import Any, Literal, NamedTuple, Optional, Union

import numpy as np

from . import _checks
from ._checks import (
    DERIVATIVE_RULES,
    INTEGRAL_RULES,
    check_compressed,
    check_count,
    check_mode,
    check_order,
    check_rule,
    check_step,
)
from ._errors import ArgumentError, InputTypeError, OutOfMemory, SampleError, show
from .stream import Stream

__all__ = ["apply_npy", "RecordSummary", "MAP_BUDGET", "EXACT_BYTES_PER_SAMPLE"]

PathLike = Union[str, "os.PathLike[str]"]

#: Bytes of each mapped file processed between two mappings: pages already
#: processed leave the process when the file is mapped again, so the
#: resident part of each mapping stays below about this.
MAP_BUDGET = 16 * 2**20
#: Rows per chunk by default: 2**18 values (2 MiB) per chunk buffer.
CHUNK_VALUES = 2**18
#: Bytes per sample and column an exact stream holds (the largest measured
#: by ``bench/stream_memory.py`` and by ``Stream.reserve``: 68-76 B with one
#: column from 1e5 to 1e7 samples, 2026-12-03), the estimate checked
#: against the machine's memory.
EXACT_BYTES_PER_SAMPLE = 76

_OPS = ("integral", "derivative")


class RecordSummary(NamedTuple):
    """What :func:`apply_npy` did."""

    #: Shape of the record (and of the output).
    shape: tuple[int, ...]
    #: 'compressed' or 'exact'.
    mode: str
    #: Tolerance and horizon of the compressed stream (None in exact mode).
    tol: Optional[float]
    horizon: Optional[float]
    #: Rows (time steps) per chunk.
    chunk: int
    #: Bytes the stream held at the end (``Stream.nbytes``).
    stream_nbytes: int


# ------------------------------------------------------------------ checks


def _check_path(name: str, path: object) -> str:
    if isinstance(path, (bytes, bytearray)) or not isinstance(path, (str, os.PathLike)):
        raise InputTypeError(
            f"{name}={show(path)}: expected a file name (str or path), got {type(path).__name__}"
        )
    p = os.fspath(path)
    if not isinstance(p, str) or not p:
        raise ArgumentError(f"{name}={show(path)}: expected a non-empty file name")
    return p


def _same_file(a: str, b: str) -> bool:
    if os.path.abspath(a) == os.path.abspath(b):
        return True
    try:
        return os.path.exists(b) and os.path.samefile(a, b)
    except OSError:
        return False


def open_npy(path: str, label: str, mmap_mode: Optional[Literal["r"]] = "r") -> np.ndarray[Any, Any]:
    """A ``.npy`` record of signals (1-D, or 2-D with time along axis 0)
    after its checks, memory-mapped read-only by default; every error
    names ``label``. The command line reads its ``.npy`` inputs here too.

    Parameters
    ----------
    path : str
        The ``.npy`` file.
    label : str
        How errors name the file (for example ``"input a.npy"``).
    mmap_mode : {'r', None}, optional
        ``'r'`` (default): memory-mapped read-only; None: read into memory.

    Returns
    -------
    numpy.ndarray
        The record, 1-D or 2-D (time along axis 0), of real numbers.

    Raises
    ------
    ArgumentError
        The file is empty, unreadable, not a ``.npy`` array (an ``.npz``
        archive), not 1-D or 2-D, or holds no samples.
    InputTypeError
        The values are not real numbers (integer or floating point).

    See Also
    --------
    apply_npy : an operator from one ``.npy`` file to another.

    Examples
    --------
    >>> import os, tempfile
    >>> import numpy as np
    >>> import pyfracconv
    >>> from pyfracconv.records import open_npy
    >>> with tempfile.TemporaryDirectory() as d:
    ...     path = os.path.join(d, "x.npy")
    ...     np.save(path, np.arange(6.0).reshape(3, 2))
    ...     print(open_npy(path, "input x.npy", mmap_mode=None).shape)
    ...     np.save(path, np.array(["a", "b"]))
    ...     try:
    ...         open_npy(path, "input x.npy")
    ...     except pyfracconv.InputTypeError as exc:
    ...         print(exc)
    (3, 2)
    input x.npy: holds values of dtype <U1; expected real numbers (integer or floating point)
    """
    try:
        if os.path.getsize(path) == 0:
            raise ArgumentError(f"{label}: the file is empty")
        arr = np.load(path, mmap_mode=mmap_mode, allow_pickle=False)
    except ArgumentError:
        raise
    except OSError as exc:
        if getattr(exc, "strerror", None):
            raise ArgumentError(f"{label}: cannot read it ({exc.strerror})") from None
        raise ArgumentError(f"{label}: not a readable .npy file ({exc})") from None
    except (ValueError, EOFError) as exc:
        raise ArgumentError(f"{label}: not a readable .npy file ({exc})") from None
    if not isinstance(arr, np.ndarray):  # an .npz archive
        if hasattr(arr, "close"):
            arr.close()
        raise ArgumentError(f"{label}: not a .npy array file (an .npz archive?)")
    if arr.dtype.kind not in "iuf":
        raise InputTypeError(
            f"{label}: holds values of dtype {arr.dtype}; expected real numbers (integer or floating point)"
        )
    if arr.ndim not in (1, 2):
        raise ArgumentError(
            f"{label}: array of shape {arr.shape}; expected 1-D (one signal) or "
            "2-D (time along axis 0, one signal per column)"
        )
    if arr.shape[0] == 0 or (arr.ndim == 2 and arr.shape[1] == 0):
        raise ArgumentError(f"{label}: array of shape {arr.shape} holds no samples")
    return arr


class _Mapped:
    """A ``.npy`` file mapped in memory, and mapped again after every
    ``budget`` bytes processed so that the pages already processed leave
    the process (its resident memory stays bounded)."""

    def __init__(self, path: str, mode: Literal["r", "r+"], budget: int) -> None:
        self.path = path
        self.mode: Literal["r", "r+"] = mode
        self.budget = budget
        self.done = 0
        self.arr: Optional[np.ndarray[Any, Any]] = None
        self._map()

    def _map(self) -> None:
        self.arr = np.load(self.path, mmap_mode=self.mode, allow_pickle=False)
        self.done = 0

    def processed(self, nbytes: int) -> None:
        self.done += nbytes
        if self.done >= self.budget:
            self.close()
            self._map()

    def close(self) -> None:
        arr, self.arr = self.arr, None
        if arr is not None and self.mode != "r" and isinstance(arr, np.memmap):
            arr.flush()
        del arr  # the last reference: the mapping goes with it


def _allocate(path: str) -> None:
    """Reserve the disk space of the whole file now: writing through a
    mapping into a file the disk has no room for kills the process
    (SIGBUS) instead of raising, so a full disk must be found here."""
    fallocate = getattr(os, "posix_fallocate", None)
    if fallocate is None:  # pragma: no cover - not on this platform
        return
    size = os.path.getsize(path)
    with open(path, "rb+") as fh:
        try:
            fallocate(fh.fileno(), 0, size)
        except OSError as exc:
            if exc.errno in (errno.EINVAL, errno.EOPNOTSUPP):
                return  # a file system without it: writes are checked later
            raise


def _umask() -> int:
    mask = os.umask(0o022)
    os.umask(mask)
    return mask


def _tqdm() -> Any:
    from .solve import _tqdm as solve_tqdm  # the same optional extra, 'progress'

    return solve_tqdm()


# ------------------------------------------------------------------ apply


def apply_npy(
    in_path: PathLike,
    out_path: PathLike,
    op: str,
    order: float,
    step: float,
    *,
    rule: Optional[str] = None,
    mode: str = "compressed",
    tol: float = 1e-12,
    horizon: Optional[float] = None,
    chunk: Optional[int] = None,
    progress: bool = False,
) -> RecordSummary:
    """Apply a fractional integral or derivative to a ``.npy`` record of
    any length, chunk by chunk, into a ``.npy`` file.

    Parameters
    ----------
    in_path : str or path
        A ``.npy`` file of a 1-D array (one signal) or a 2-D array (time
        along axis 0, one signal per column) of real numbers, sampled at
        t_k = k*step. It is memory-mapped, never read whole.
    out_path : str or path
        Where the float64 result of the input's shape goes (written to a
        temporary file beside it, then renamed). Must not be the input.
    op : {'integral', 'derivative'}
    order, step : float
        As for :func:`pyfracconv.integral` and :func:`pyfracconv.derivative`.
    rule : str, optional
        'rectangle' (default) or 'trapezoid' for the integral, 'grunwald'
        (default) or 'l1' for the derivative.
    mode : {'compressed', 'exact'}
        ``'compressed'`` (default): bounded memory, outputs within ``tol``
        of the exact ones in the stream's componentwise sense (see
        :class:`pyfracconv.Stream`); orders below 1, or below 2 for the
        integral rules (rectangle and trapezoid). ``'exact'``: the exact stream, equal to the
        batch functions to rounding, memory about 70 bytes per sample and
        column (refused before any work when that exceeds this machine's
        memory).
    tol : float
        Compressed mode: relative tolerance in [1e-15, 1e-2].
    horizon : float, optional
        Compressed mode: samples the tolerance is promised for; by default
        the record's length (at least that, since every output of the
        record must be within the promise).
    chunk : int, optional
        Time steps per chunk (default 2**18 values per chunk: 2**18 //
        columns rows, at least 1). Results do not depend on it in
        compressed mode, and in exact mode they are those of an exact
        stream fed the same chunks.
    progress : bool
        A progress bar on standard error (needs the optional ``progress``
        extra, tqdm).

    Returns
    -------
    RecordSummary
        shape, mode, tol, horizon, chunk, and the stream's bytes at the end.

    Raises
    ------
    ArgumentError
        A bad value (named with it), an input that is not a readable 1-D or
        2-D ``.npy`` file of real numbers, ``out_path`` the input or in a
        folder that cannot be written, a horizon shorter than the record.
    InputTypeError
        A value of the wrong type, or an input of another dtype.
    SampleError
        A NaN or infinite sample, named by its index in the record (no
        output is written).
    OutOfMemory
        ``mode='exact'`` on a record whose history does not fit.
    OSError
        The output cannot be created (no room on the disk is found here,
        before the first chunk, since the whole file is allocated at
        once) or writing failed: the temporary file is removed, no output.

    See Also
    --------
    pyfracconv.Stream.push_many : what each chunk goes through.

    Examples
    --------
    At order 1 the rectangle rule is the left rectangle sum
    h (x_0 + ... + x_{n-1}) (common practice):

    >>> import os, tempfile
    >>> import numpy as np
    >>> import pyfracconv.records as records
    >>> d = tempfile.mkdtemp()
    >>> np.save(os.path.join(d, "in.npy"), np.array([1.0, 2.0, 3.0, 4.0]))
    >>> _ = records.apply_npy(os.path.join(d, "in.npy"), os.path.join(d, "out.npy"),
    ...                       "integral", 1.0, 0.5, mode="exact", chunk=3)
    >>> np.load(os.path.join(d, "out.npy"))
    array([0. , 0.5, 1.5, 3. ])
    """
    # every argument is checked before a file is touched
    if not isinstance(op, str) or op not in _OPS:
        raise ArgumentError(f"op={show(op)}: unknown; expected 'integral' or 'derivative'")
    allowed = INTEGRAL_RULES if op == "integral" else DERIVATIVE_RULES
    if rule is None:
        rule = allowed[0]
    check_rule(rule, allowed)
    check_order(order, rule)
    check_step(step)
    check_mode(mode)
    compressed = mode == "compressed"
    if compressed:
        check_compressed(tol, 1.0 if horizon is None else horizon)
    if chunk is not None:
        chunk = check_count("chunk", chunk, 1)
    if not isinstance(progress, (bool, np.bool_)):
        raise InputTypeError(f"progress={show(progress)}: expected True or False")
    inp = _check_path("in_path", in_path)
    out = _check_path("out_path", out_path)
    if _same_file(inp, out):
        raise ArgumentError(
            f"out_path={show(out)}: is the input file (in_path={show(inp)}); "
            "refusing to overwrite the input (choose another output name)"
        )
    out_dir = os.path.dirname(os.path.abspath(out))
    if not os.path.isdir(out_dir):
        raise ArgumentError(f"out_path={show(out)}: the folder {out_dir!r} does not exist")
    if os.path.isdir(out):
        raise ArgumentError(f"out_path={show(out)}: is a folder; expected a file name")
    bar_cls = _tqdm() if progress else None

    src = open_npy(inp, f"in_path={show(inp)}")
    shape = tuple(int(n) for n in src.shape)
    T = shape[0]
    C = shape[1] if len(shape) == 2 else 1
    del src
    rows = chunk if chunk is not None else max(1, CHUNK_VALUES // C)
    rows = min(rows, T)
    channels = C if len(shape) == 2 else None
    make = Stream.integral if op == "integral" else Stream.derivative
    if compressed:
        hz = float(max(T - 1, 1)) if horizon is None else float(horizon)
        if math.floor(hz) < T - 1:
            raise ArgumentError(
                f"horizon={show(horizon)}: shorter than the record ({T} samples: "
                f"outputs 0 .. {T - 1} need horizon >= {T - 1})"
            )
        check_compressed(tol, hz)
        s = make(order, step, rule=rule, channels=channels, mode="compressed", tol=tol, horizon=hz)
    else:
        need = EXACT_BYTES_PER_SAMPLE * T * C + 3 * 8 * rows * C
        ram = _checks._RAM
        if ram is not None and need > ram:
            raise OutOfMemory(
                f"mode='exact' on in_path={show(inp)} (shape {shape}): the exact "
                f"stream's history would need about {_checks._nbytes_text(need)} "
                f"({EXACT_BYTES_PER_SAMPLE} bytes per sample and column), more than "
                f"this machine's memory ({_checks._nbytes_text(ram)}); use "
                "mode='compressed' (bounded memory); nothing was written"
            )
        s = make(order, step, rule=rule, channels=channels, mode="exact")
        s.reserve(T)  # OutOfMemory here, before the output exists

    tmp: Optional[str] = None
    src_map: Optional[_Mapped] = None
    dst_map: Optional[_Mapped] = None
    bar = None
    try:
        try:
            fd, tmp = tempfile.mkstemp(prefix=".pyfracconv-", suffix=".npy.tmp", dir=out_dir)
            os.close(fd)
            # the header is written now; the mapping is dropped at once
            del_me = np.lib.format.open_memmap(tmp, mode="w+", dtype=np.float64, shape=shape)
            del del_me
            _allocate(tmp)
            os.chmod(tmp, 0o666 & ~_umask())  # as np.save would create it
        except OSError as exc:
            raise OSError(
                exc.errno,
                f"out_path={show(out)}: cannot create the output in {out_dir!r} "
                f"({exc.strerror or exc}); nothing was written",
            ) from None
        row_bytes = 8 * C
        src_map = _Mapped(inp, "r", MAP_BUDGET)
        dst_map = _Mapped(tmp, "r+", MAP_BUDGET)
        if bar_cls is not None:
            bar = bar_cls(total=T, unit="sample", unit_scale=True)
        i = 0
        while i < T:
            j = min(i + rows, T)
            assert src_map.arr is not None and dst_map.arr is not None
            x = np.array(src_map.arr[i:j], dtype=np.float64, order="C")
            src_map.processed((j - i) * src_map.arr.itemsize * C)
            if not np.isfinite(x).all():
                bad = tuple(int(k) for k in np.argwhere(~np.isfinite(x))[0])
                where = ", ".join(str(k) for k in (i + bad[0],) + bad[1:])
                raise SampleError(
                    f"in_path={show(inp)}: element [{where}] is "
                    f"{show(x[bad])}, not finite (NaN and infinite samples "
                    f"cannot be processed); no output was written"
                )
            dst_map.arr[i:j] = s.push_many(x)
            dst_map.processed((j - i) * row_bytes)
            if bar is not None:
                bar.update(j - i)
            i = j
        src_map.close()
        dst_map.close()
        with open(tmp, "rb+") as fh:
            os.fsync(fh.fileno())
        os.replace(tmp, out)
        tmp = None
    finally:
        if bar is not None:
            bar.close()
        if src_map is not None:
            src_map.close()
        if dst_map is not None:
            dst_map.close()
        if tmp is not None:
            try:
                os.unlink(tmp)
            except OSError:
                pass
    return RecordSummary(shape, "compressed" if compressed else "exact", s.tol, s.horizon, rows, s.nbytes)
