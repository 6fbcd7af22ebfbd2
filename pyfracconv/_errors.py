"""Exceptions of pyfracconv, and the one place that turns C status codes
into them."""

from __future__ import annotations

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
    "raise_for_status",
]


class FracconvError(Exception):
    """Base class of every exception raised by pyfracconv."""


class ArgumentError(FracconvError, ValueError):
    """An argument has a bad value (order, step, rule, count, shape ...)."""


class SampleError(ArgumentError):
    """A sample is NaN or infinite."""


class StateError(FracconvError, ValueError):
    """Saved stream state that is truncated, corrupted or foreign."""


class InputTypeError(FracconvError, TypeError):
    """An argument is not numeric (or not of a usable type)."""


class OutOfMemory(FracconvError, MemoryError):
    """The C library could not allocate memory."""


class BusyError(FracconvError, RuntimeError):
    """An object was used from two threads at once."""


class RangeError(ArgumentError):
    """A result would be beyond the range of double precision (the samples,
    the step or the order are too large for the operator)."""


class HorizonError(FracconvError, RuntimeError):
    """A push would take a compressed stream past its horizon, beyond which
    its tolerance is not promised."""


# C status code -> (exception class, short name); messages come from
# fc_strerror so that C and Python say the same thing.
_CLASSES = {
    1: ArgumentError,   # FC_ERR_NULL
    2: ArgumentError,   # FC_ERR_RULE
    3: ArgumentError,   # FC_ERR_ORDER
    4: ArgumentError,   # FC_ERR_STEP
    5: ArgumentError,   # FC_ERR_SIZE
    6: SampleError,     # FC_ERR_NONFINITE
    7: OutOfMemory,     # FC_ERR_NOMEM
    8: ArgumentError,   # FC_ERR_MODE
    9: ArgumentError,   # FC_ERR_TOL
    10: StateError,     # FC_ERR_FORMAT
    11: BusyError,      # FC_ERR_BUSY
    12: ArgumentError,  # FC_ERR_KERNEL
    13: ArgumentError,  # FC_ERR_ARG
    14: ArgumentError,  # FC_ERR_INDEX
    15: RangeError,     # FC_ERR_RANGE
    16: HorizonError,   # FC_ERR_HORIZON
}


def raise_for_status(status: int, context: str = "") -> None:
    """Raise the exception for a nonzero C status code.

    ``context`` is prepended to the C library's message; callers put the
    argument name and value there, e.g. ``"order=-1.0"``.
    """
    if status == 0:
        return
    from ._fracconv import ffi, lib

    msg = ffi.string(lib.fc_strerror(status)).decode("ascii", "replace")
    cls = _CLASSES.get(status, FracconvError)
    if context:
        msg = f"{context}: {msg}"
    raise cls(msg)
