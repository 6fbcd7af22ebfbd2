"""Exceptions of pyfracconv, and the one place that turns C status codes
into them.

:data:`STATUS_CLASSES` maps the *name* of every ``FC_ERR_*`` constant of
``csrc/fracconv.h`` to its exception class; the numbers are read from the
compiled library when this module is imported, so the table cannot drift
from the header. A non-finite sample (``FC_ERR_NONFINITE``) is reported by
:func:`nonfinite_error`, which names the first offending element.
"""

from __future__ import annotations

import decimal
import numbers
from typing import Dict, Optional, Tuple, Type

import numpy as np

from ._fracconv import ffi, lib

__all__ = [
    "FracconvError",
    "ArgumentError",
    "SampleError",
    "StateError",
    "InputTypeError",
    "OutOfMemory",
    "BusyError",
    "RangeError",
    "HorizonError",
    "FileError",
    "SolverError",
    "RhsError",
    "NewtonError",
    "STATUS_CLASSES",
    "show",
    "nonfinite_error",
    "status_error",
    "raise_for_status",
]


class FracconvError(Exception):
    """Base class of every exception raised by pyfracconv.

    Examples
    --------
    >>> import pyfracconv
    >>> try:
    ...     pyfracconv.integral([1.0, 2.0], order=-1.0, step=0.1)
    ... except pyfracconv.FracconvError as exc:
    ...     print(exc)
    order=-1.0: must be finite and > 0

    See Also
    --------
    ArgumentError, SampleError, StateError, InputTypeError, OutOfMemory,
    BusyError, RangeError, HorizonError
    """


class ArgumentError(FracconvError, ValueError):
    """An argument has a bad value (order, step, rule, count, shape ...).

    Examples
    --------
    >>> import pyfracconv
    >>> pyfracconv.weights("simpson", 0.5, 3)
    Traceback (most recent call last):
    ...
    pyfracconv._errors.ArgumentError: rule='simpson': unknown; expected one of 'rectangle', ...

    See Also
    --------
    SampleError, RangeError : the subclasses for bad samples and results
    beyond the double range.
    """


class SampleError(ArgumentError):
    """A sample is NaN or infinite; the message names the first one.

    Examples
    --------
    >>> import pyfracconv
    >>> pyfracconv.integral([0.0, 1.0, float("nan")], 0.5, 0.1)
    Traceback (most recent call last):
    ...
    pyfracconv._errors.SampleError: samples[2]=nan: sample is NaN or infinite (first bad index 2)

    See Also
    --------
    ArgumentError
    """


class StateError(FracconvError, ValueError):
    """Saved stream state that is truncated, corrupted or foreign.

    Examples
    --------
    >>> import pyfracconv
    >>> pyfracconv.Stream.load(b"not a saved stream")
    Traceback (most recent call last):
    ...
    pyfracconv._errors.StateError: data (18 bytes): not a saved pyfracconv stream ...

    See Also
    --------
    pyfracconv.Stream.save, pyfracconv.Stream.load
    """


class InputTypeError(FracconvError, TypeError):
    """An argument is not numeric (or not of a usable type).

    Examples
    --------
    >>> import pyfracconv
    >>> pyfracconv.integral([1.0, 2.0], "0.5", 0.1)
    Traceback (most recent call last):
    ...
    pyfracconv._errors.InputTypeError: order='0.5': expected a real number, got str

    See Also
    --------
    ArgumentError : a usable type with a bad value.
    """


class OutOfMemory(FracconvError, MemoryError):
    """The C library could not allocate memory, or a result would be larger
    than this machine's memory (checked before allocating).

    Examples
    --------
    >>> import pyfracconv
    >>> pyfracconv.weights("rectangle", 0.5, 2**52)
    Traceback (most recent call last):
    ...
    pyfracconv._errors.OutOfMemory: count=4503599627370496: the result would need 32768.0 TiB, ...

    See Also
    --------
    pyfracconv.Stream.reserve
    """


class BusyError(FracconvError, RuntimeError):
    """An object was used from two threads at once; the call that found it
    in use changed nothing.

    Examples
    --------
    >>> import pyfracconv
    >>> issubclass(pyfracconv.BusyError, RuntimeError)
    True

    See Also
    --------
    pyfracconv.Stream
    """


class SolverError(FracconvError, RuntimeError):
    """A run stopped at a step: ``step`` (its index, 0 for f(t0, y0)),
    ``time`` and ``partial`` (a :class:`pyfracconv.SolveResult` with the
    solution up to the last good step)."""

    def __init__(
        self, message: str, step: Optional[int] = None, time: Optional[float] = None, partial: object = None
    ) -> None:
        super().__init__(message)
        self.step = step
        self.time = time
        self.partial = partial


class RhsError(SolverError):
    """The right-hand side (or the Jacobian) raised, returned a value of
    the wrong shape, or a NaN or infinite value."""


class NewtonError(SolverError):
    """Newton's method of an implicit method did not converge."""


class RangeError(ArgumentError):
    """A result would be beyond the range of double precision (the samples,
    the step or the order are too large for the operator).

    Examples
    --------
    Grunwald-Letnikov weights scale as h^-a: with h = 1e-40 and a = 10 the
    first weight, 1e400, is beyond the double range (about 1.8e308):

    >>> import pyfracconv
    >>> pyfracconv.weights("grunwald", 10, 3, step=1e-40)
    Traceback (most recent call last):
    ...
    pyfracconv._errors.RangeError: step=1e-40 (or order=10): the weights are beyond the double range

    See Also
    --------
    ArgumentError
    """


class HorizonError(FracconvError, RuntimeError):
    """A push would take a compressed stream past its horizon, beyond which
    its tolerance is not promised; nothing was pushed.

    Examples
    --------
    >>> import pyfracconv
    >>> s = pyfracconv.Stream.integral(0.5, 0.1, mode="compressed", horizon=2)
    >>> s.push_many([1.0, 1.0, 1.0]).shape      # outputs 0, 1, 2: within the horizon
    (3,)
    >>> s.push(1.0)
    Traceback (most recent call last):
    ...
    pyfracconv._errors.HorizonError: x=1.0: past the horizon (horizon=2: outputs 0 .. 2 ...

    See Also
    --------
    pyfracconv.Stream.remaining, pyfracconv.Stream.horizon_policy
    """


class FileError(FracconvError, OSError):
    """A checkpoint file could not be written or read (missing directory,
    permission denied, disk full, not a regular file ...). The message
    names the path and the system's reason; ``errno`` and ``filename`` are
    set as for :class:`OSError` when the cause is known. A failed
    ``save_file`` leaves the file that was there (if any) and the object
    unchanged.

    Examples
    --------
    >>> import pyfracconv
    >>> s = pyfracconv.Stream.integral(0.5, 0.1)
    >>> s.save_file("/no/such/directory/state.bin")
    Traceback (most recent call last):
    ...
    pyfracconv._errors.FileError: save_file(path='/no/such/directory/state.bin'): ...

    See Also
    --------
    pyfracconv.Stream.save_file, pyfracconv.Stream.load_file
    """

    def __init__(self, message: str, errno: Optional[int] = None, filename: Optional[str] = None) -> None:
        super().__init__(message)
        self.errno = errno
        self.filename = filename

    def __str__(self) -> str:
        return str(self.args[0]) if self.args else ""


# ---------------------------------------------------------------- the table

#: Exception class of every C status code, keyed by the name of its
#: constant in csrc/fracconv.h (every ``FC_ERR_*`` must have an entry:
#: tests/test_status_table.py checks the compiled library against it).
STATUS_CLASSES: Dict[str, Type[FracconvError]] = {
    "FC_ERR_NULL": ArgumentError,
    "FC_ERR_RULE": ArgumentError,
    "FC_ERR_ORDER": ArgumentError,
    "FC_ERR_STEP": ArgumentError,
    "FC_ERR_SIZE": ArgumentError,
    "FC_ERR_NONFINITE": SampleError,
    "FC_ERR_NOMEM": OutOfMemory,
    "FC_ERR_MODE": ArgumentError,
    "FC_ERR_TOL": ArgumentError,
    "FC_ERR_FORMAT": StateError,
    "FC_ERR_BUSY": BusyError,
    "FC_ERR_KERNEL": ArgumentError,
    "FC_ERR_ARG": ArgumentError,
    "FC_ERR_INDEX": ArgumentError,
    "FC_ERR_RANGE": RangeError,
    "FC_ERR_HORIZON": HorizonError,
    "FC_ERR_IO": FileError,
    "FC_ERR_CALLBACK": RhsError,
    "FC_ERR_NEWTON": NewtonError,
    "FC_ERR_NORHS": SolverError,
}

# The same table keyed by the numbers of the compiled library. A name the
# library does not define is left out here (the test names it).
_CLASSES: Dict[int, Type[FracconvError]] = {
    int(getattr(lib, name)): cls for name, cls in STATUS_CLASSES.items() if hasattr(lib, name)
}
_NONFINITE = int(lib.FC_ERR_NONFINITE)


# ---------------------------------------------------------------- messages


def show(value: object) -> str:
    """``value`` as messages show it: plain numbers (``nan``, ``-0.5``,
    ``3``), never NumPy's repr (``np.float64(nan)``); integers too long to
    read in scientific notation; other objects by a short repr."""
    if isinstance(value, (bool, np.bool_)):
        return repr(bool(value))
    if isinstance(value, numbers.Integral):
        digits = str(int(value))
        if len(digits.lstrip("-")) > 21:
            mant, exp = format(decimal.Decimal(int(value)), ".6e").split("e")
            return f"{mant.rstrip('0').rstrip('.')}e{exp}"
        return digits
    if isinstance(value, str):
        return repr(str(value))
    if isinstance(value, np.generic):  # NumPy scalars: str is the plain form
        return str(value)
    if isinstance(value, float):
        return repr(value)
    text = repr(value)
    return text if len(text) <= 60 else text[:57] + "..."


def nonfinite_error(name: str, values: object, after: str = "") -> SampleError:
    """The SampleError for a NaN or infinite sample in ``values`` (the
    argument called ``name``): ``name[i]=value`` for the first non-finite
    element of an array (C order), ``name=value`` for a scalar. ``after``
    (e.g. ``"the stream is unchanged"``) ends the message."""
    tail = f"; {after}" if after else ""
    try:
        arr = np.asarray(values, dtype=np.float64)
    except (TypeError, ValueError, OverflowError):  # a scalar only C could read
        return SampleError(f"{name}={show(values)}: sample is NaN or infinite{tail}")
    if arr.ndim == 0:
        return SampleError(f"{name}={show(float(arr))}: sample is NaN or infinite{tail}")
    bad = np.flatnonzero(~np.isfinite(arr.ravel()))
    if bad.size == 0:  # pragma: no cover - only called when C found one
        return SampleError(f"{name}: a value is NaN or infinite{tail}")
    i = int(bad[0])
    idx: Tuple[int, ...] = tuple(int(j) for j in np.unravel_index(i, arr.shape))
    where = ", ".join(str(j) for j in idx)
    first = str(idx[0]) if len(idx) == 1 else str(idx)
    return SampleError(
        f"{name}[{where}]={show(arr.ravel()[i])}: sample is NaN or infinite (first bad index {first}){tail}"
    )


def status_error(
    status: int, context: str = "", *, samples: Optional[Tuple[str, object]] = None, after: str = ""
) -> FracconvError:
    """The exception for the nonzero C status code ``status``.

    ``context`` is prepended to the C library's message; callers put the
    argument name and value there, e.g. ``"order=-1.0"``. For
    ``FC_ERR_NONFINITE``, ``samples=(name, array)`` names the argument the
    C call checked: the message then names its first bad element
    (:func:`nonfinite_error`, ending with ``after``).
    """
    if status == _NONFINITE and samples is not None:
        return nonfinite_error(samples[0], samples[1], after)
    msg = ffi.string(lib.fc_strerror(status)).decode("ascii", "replace")
    cls = _CLASSES.get(status, FracconvError)
    if context:
        msg = f"{context}: {msg}"
    return cls(msg)


def raise_for_status(
    status: int, context: str = "", *, samples: Optional[Tuple[str, object]] = None, after: str = ""
) -> None:
    """Raise :func:`status_error` for a nonzero C status code; return for
    ``FC_OK`` (0)."""
    if status != 0:
        raise status_error(status, context, samples=samples, after=after)
