"""Batch functions: weights, lagged sums, fractional integrals and
derivatives of whole records."""

from __future__ import annotations

import decimal
import numbers
import os
import sys
import threading

import numpy as np

from ._errors import (
    ArgumentError,
    InputTypeError,
    OutOfMemory,
    RangeError,
    SampleError,
    raise_for_status,
)
from ._fracconv import ffi, lib

__all__ = [
    "weights",
    "lagged_sum",
    "integral",
    "derivative",
    "get_include",
    "trapezoid_start",
    "INTEGRAL_RULES",
    "DERIVATIVE_RULES",
]

RULES = {
    "rectangle": lib.FC_RULE_RECTANGLE,
    "trapezoid": lib.FC_RULE_TRAPEZOID,
    "grunwald": lib.FC_RULE_GRUNWALD,
    "l1": lib.FC_RULE_L1,
}
INTEGRAL_RULES = ("rectangle", "trapezoid")
DERIVATIVE_RULES = ("grunwald", "l1")
ENGINES = {
    "auto": lib.FC_ENGINE_AUTO,
    "direct": lib.FC_ENGINE_DIRECT,
    "blocked": lib.FC_ENGINE_BLOCKED,
    "fft": lib.FC_ENGINE_FFT,
}
MAX_ORDER = 10.0
INDEX_LIMIT = 2**53
# Compressed streams (fc_stream_create in csrc/fracconv.h, fc__cs_create in
# csrc/compressed.c): tol in [1e-15, 1e-2]; horizon in [1, 2**53 - 2], the
# number of samples the tolerance is guaranteed for. The one place Python
# keeps these ranges.
COMPRESSED_TOL_RANGE = (1e-15, 1e-2)
COMPRESSED_HORIZON_RANGE = (1.0, float(INDEX_LIMIT - 2))
# Largest value of size_t (channel counts and other sizes passed to C).
SIZE_MAX = 2**(8 * np.dtype(np.uintp).itemsize) - 1


# ---------------------------------------------------------------- messages

def show(value):
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


def _nbytes_text(n):
    for unit, size in (("TiB", 2**40), ("GiB", 2**30), ("MiB", 2**20), ("KiB", 2**10)):
        if n >= size:
            return f"{n / size:.1f} {unit}"
    return f"{n} bytes"


def _physical_memory():
    try:
        return os.sysconf("SC_PHYS_PAGES") * os.sysconf("SC_PAGE_SIZE")
    except (AttributeError, ValueError, OSError):  # pragma: no cover
        return None


_RAM = _physical_memory()


def check_bytes(what, need, kind="the result"):
    """OutOfMemory naming ``what`` if ``need`` bytes exceed this machine's
    physical memory (checked before allocating)."""
    if _RAM is not None and need > _RAM:
        raise OutOfMemory(
            f"{what}: {kind} would need {_nbytes_text(need)}, more than "
            f"this machine's memory ({_nbytes_text(_RAM)}); nothing was allocated"
        )


def new_result(n, what):
    """An empty float64 array of ``n`` elements for a result whose size the
    caller chose (``what`` names the argument, e.g. ``"count=10"``).

    The size is checked before anything is allocated: more than this
    machine's physical memory raises OutOfMemory naming the argument, and so
    does an allocation that fails."""
    need = n * 8
    check_bytes(what, need)
    try:
        return np.empty(n, dtype=np.float64)
    except MemoryError:
        raise OutOfMemory(
            f"{what}: could not allocate the result ({_nbytes_text(need)})"
        ) from None


def contiguous_copy(name, arr):
    """``arr`` as a C-contiguous float64 array; the copy (of a broadcast
    view, say) is checked against the machine's memory first, and a failed
    allocation is the package's OutOfMemory naming ``name``."""
    need = 8 * int(arr.size)
    check_bytes(name, need, f"a contiguous float64 copy of shape {arr.shape}")
    try:
        return np.ascontiguousarray(arr, dtype=np.float64)
    except MemoryError:
        raise OutOfMemory(
            f"{name}: could not allocate a contiguous float64 copy of shape "
            f"{arr.shape} ({_nbytes_text(need)})"
        ) from None


# ---------------------------------------------------------------- validation

def check_rule(rule, allowed=tuple(RULES)):
    """Return the C code of ``rule`` if it is one of ``allowed``."""
    if not isinstance(rule, str) or rule not in allowed:
        expected = ", ".join(repr(r) for r in allowed)
        raise ArgumentError(f"rule={show(rule)}: unknown; expected one of {expected}")
    return RULES[str(rule)]


def check_real(name, value):
    """A real scalar as a Python float (InputTypeError if not numeric,
    ArgumentError if beyond the range of a double, e.g. 10**400)."""
    if isinstance(value, (bool, np.bool_)) or not isinstance(value, numbers.Real):
        raise InputTypeError(
            f"{name}={show(value)}: expected a real number, got {type(value).__name__}"
        )
    try:
        return float(value)
    except OverflowError:
        raise ArgumentError(
            f"{name}={show(value)}: beyond the range of a double "
            "(magnitude above 1.8e308)"
        ) from None


def check_order(order, rule):
    a = check_real("order", order)
    if not np.isfinite(a) or a <= 0.0:
        raise ArgumentError(f"order={show(order)}: must be finite and > 0")
    if a > MAX_ORDER:
        raise ArgumentError(f"order={show(order)}: must be <= {MAX_ORDER:g}")
    if rule == "l1" and a >= 1.0:
        raise ArgumentError(
            f"order={show(order)}: the 'l1' rule (Caputo) needs 0 < order < 1"
        )
    return a


def check_step(step):
    h = check_real("step", step)
    if not np.isfinite(h) or h <= 0.0:
        raise ArgumentError(f"step={show(step)}: must be finite and > 0")
    return h


def check_count(name, value, minimum=0, maximum=None):
    if isinstance(value, (bool, np.bool_)) or not isinstance(value, numbers.Integral):
        raise InputTypeError(
            f"{name}={show(value)}: expected an integer, got {type(value).__name__}"
        )
    v = int(value)
    if v < minimum:
        raise ArgumentError(f"{name}={show(value)}: must be >= {minimum}")
    if maximum is not None and v > maximum:
        raise ArgumentError(f"{name}={show(value)}: must be <= {maximum}")
    return v


def check_compressed(tol, horizon):
    """tol and horizon of a compressed stream, as floats, within
    COMPRESSED_TOL_RANGE and COMPRESSED_HORIZON_RANGE."""
    t = check_real("tol", tol)
    hz = check_real("horizon", horizon)
    lo, hi = COMPRESSED_TOL_RANGE
    if not (lo <= t <= hi):
        raise ArgumentError(
            f"tol={show(tol)}: must be in [{lo:g}, {hi:g}] for mode='compressed'"
        )
    lo, hi = COMPRESSED_HORIZON_RANGE
    if not (lo <= hz <= hi):
        raise ArgumentError(
            f"horizon={show(horizon)}: must be in [{lo:g}, 2**53 - 2 = {hi:.0f}] "
            "for mode='compressed' (the number of samples the tolerance is "
            "guaranteed for)"
        )
    return t, hz


def _is_masked(values):
    # numpy.ma is imported only by programs that use it: if it is not
    # loaded, values cannot be a masked array.
    ma = sys.modules.get("numpy.ma")
    return ma is not None and isinstance(values, ma.MaskedArray)


def refuse_masked(name, values):
    """Masked arrays are refused: converting one would drop the mask and
    use the values underneath."""
    if _is_masked(values):
        raise InputTypeError(
            f"{name}: masked arrays are not accepted (the mask would be "
            f"ignored); pass np.ma.filled({name}, fill) or {name}.compressed()"
        )


def _object_to_float(name, arr):
    """An object array of Python numbers as float64, naming the first
    element beyond the range of a double."""
    out = np.empty(arr.shape, dtype=np.float64)
    for idx, v in np.ndenumerate(arr):
        if isinstance(v, (bool, np.bool_)) or not isinstance(v, numbers.Real):
            raise InputTypeError(
                f"{name}: expected real numbers, got an array of dtype object "
                f"holding {type(v).__name__}"
            )
        try:
            out[idx] = float(v)
        except OverflowError:
            where = idx[0] if len(idx) == 1 else idx
            raise SampleError(
                f"{name}[{where}]={show(v)}: beyond the range of a double "
                "(samples must be finite)"
            ) from None
    return out


def as_float_array(name, values):
    """``values`` as a C-contiguous float64 ndarray (no copy when it already
    is one); InputTypeError for non-numeric data and for masked arrays."""
    if type(values) is np.ndarray and values.dtype == np.float64:
        return values if values.flags.c_contiguous else contiguous_copy(name, values)
    refuse_masked(name, values)
    try:
        arr = np.asarray(values)
    except Exception as exc:  # ragged lists and the like
        raise InputTypeError(f"{name}: cannot be read as a numeric array ({exc})") from None
    if arr.dtype.kind == "O":  # Python integers too large for int64, ...
        return _object_to_float(name, arr)
    if arr.dtype.kind not in "biuf":
        raise InputTypeError(
            f"{name}: expected real numbers, got an array of dtype {arr.dtype}"
        )
    if arr.dtype == np.float64 and arr.flags.c_contiguous:
        return arr
    return contiguous_copy(name, arr)


def raise_nonfinite(name, arr):
    """Raise SampleError naming the first non-finite element of ``arr``."""
    bad = np.argwhere(~np.isfinite(arr))
    if len(bad) == 0:  # pragma: no cover - only called when C found one
        raise SampleError(f"{name}: a value is NaN or infinite")
    idx = tuple(int(i) for i in bad[0])
    where = idx[0] if len(idx) == 1 else idx
    raise SampleError(
        f"{name}[{where}]={show(arr[idx])}: samples must be finite (first bad index {where})"
    )


def check_engine(engine):
    if not isinstance(engine, str) or engine not in ENGINES:
        expected = ", ".join(repr(e) for e in ENGINES)
        raise ArgumentError(f"engine={show(engine)}: unknown; expected one of {expected}")
    return ENGINES[str(engine)]


def check_axis(axis, ndim):
    if isinstance(axis, (bool, np.bool_)) or not isinstance(axis, numbers.Integral):
        raise InputTypeError(f"axis={show(axis)}: expected an integer")
    if not -ndim <= axis < ndim:
        raise ArgumentError(f"axis={show(axis)}: out of range for an array of {ndim} dimension(s)")
    return int(axis) % ndim


def dptr(arr):
    """cffi double* view of a C-contiguous float64 array (no copy)."""
    return ffi.from_buffer("double[]", arr, require_writable=False)


# ---------------------------------------------------------------- context

_local = threading.local()


def context():
    """The calling thread's batch context (FFT plans and work space)."""
    ctx = getattr(_local, "ctx", None)
    if ctx is None:
        p = ffi.new("fc_context **")
        raise_for_status(lib.fc_context_create(p), "context")
        ctx = ffi.gc(p[0], lib.fc_context_free)
        _local.ctx = ctx
    return ctx


# ---------------------------------------------------------------- weights

def _index_range(count, start):
    n = check_count("count", count)
    m0 = check_count("start", start)
    if m0 + n > INDEX_LIMIT:
        raise ArgumentError(
            f"start={show(start)}, count={show(count)}: start + count must be <= 2**53"
        )
    return n, m0


def weights(rule, order, count, step=1.0, start=0):
    """Quadrature weights of a rule, scaled by the step.

    Parameters
    ----------
    rule : {'rectangle', 'trapezoid', 'grunwald', 'l1'}
        The rule (see the README for formulas and sources).
    order : float
        The order a; 0 < a <= 10 (``'l1'``: 0 < a < 1).
    count : int
        Number of weights, >= 0.
    step : float, optional
        Grid step h > 0.
    start : int, optional
        First index m, >= 0; start + count <= 2**53.

    Returns
    -------
    numpy.ndarray
        float64 array of the weights for m = start .. start+count-1:
        ``rectangle`` h^a/Gamma(a+1) ((m+1)^a - m^a); ``trapezoid``
        h^a/Gamma(a+2) a_m; ``grunwald`` h^-a g_m; ``l1`` h^-a/Gamma(2-a) d_m.

    Raises
    ------
    OutOfMemory
        The result (8 * count bytes) is larger than this machine's memory
        (checked before anything is allocated) or cannot be allocated.
    RangeError
        A weight is beyond the range of double precision (step or order too
        large).
    """
    code = check_rule(rule)
    a = check_order(order, rule)
    h = check_step(step)
    n, m0 = _index_range(count, start)
    out = new_result(n, f"count={n}")
    st = lib.fc_weights(code, a, h, m0, n, ffi.from_buffer("double[]", out))
    if st == lib.FC_ERR_RANGE:
        raise RangeError(
            f"step={show(step)} (or order={show(order)}): the weights are "
            "beyond the double range"
        )
    raise_for_status(st, f"weights(rule={show(rule)}, order={show(order)})")
    return out


def trapezoid_start(order, count, step=1.0, start=0):
    """Starting weights h^a/Gamma(a+2) A_n of the trapezoid rule,
    n = start .. start+count-1 (A_0 = 0)."""
    a = check_order(order, "trapezoid")
    h = check_step(step)
    n, m0 = _index_range(count, start)
    out = new_result(n, f"count={n}")
    st = lib.fc_trapezoid_start(a, h, m0, n, ffi.from_buffer("double[]", out))
    if st == lib.FC_ERR_RANGE:
        raise RangeError(
            f"step={show(step)} (or order={show(order)}): the weights are "
            "beyond the double range"
        )
    raise_for_status(st, f"trapezoid_start(order={show(order)})")
    return out


# ---------------------------------------------------------------- lagged sums

def _rows(name, samples, axis):
    """Samples moved to a C-contiguous (nsig, n) float64 block."""
    arr = as_float_array(name, samples)
    if arr.ndim == 0:
        raise ArgumentError(f"{name}: expected at least one dimension, got a scalar")
    ax = check_axis(axis, arr.ndim)
    moved = np.moveaxis(arr, ax, -1)
    nsig = int(np.prod(moved.shape[:-1], dtype=np.int64))
    block = contiguous_copy(name, moved).reshape(nsig, arr.shape[ax])
    return arr, ax, moved.shape, block


def _unrows(block, moved_shape, ax):
    return np.moveaxis(block.reshape(moved_shape), -1, ax)


def lagged_sum(samples, kernel, axis=-1, engine="auto"):
    """Causal lagged sum y_n = sum_{k<=n} kernel[n-k] * samples[k].

    Parameters
    ----------
    samples : array_like
        Real samples; the sum runs along ``axis``; every other axis is an
        independent signal sharing the kernel. Masked arrays are refused
        (InputTypeError) whatever their mask, since the mask would be
        ignored: pass ``np.ma.filled(x, fill)`` or ``x.compressed()``.
    kernel : array_like, 1-D
        The kernel c_0, c_1, ...; any length >= 1 (lags past its end are 0).
        Masked arrays are refused likewise.
    axis : int, optional
        Axis of time (default last).
    engine : {'auto', 'direct', 'blocked', 'fft'}, optional
        ``auto`` picks direct summation for short kernels and the blockwise
        FFT otherwise; both are accurate componentwise. ``fft`` (one
        full-length FFT) is accurate only normwise.

    Returns
    -------
    numpy.ndarray
        float64, the shape of ``samples``.

    Raises
    ------
    RangeError
        A result beyond the range of double precision.
    """
    arr, ax, moved_shape, block = _rows("samples", samples, axis)
    k = np.ascontiguousarray(as_float_array("kernel", kernel))
    if k.ndim != 1 or k.size == 0:
        raise ArgumentError(
            f"kernel: expected a non-empty 1-D array, got shape {k.shape}"
        )
    if not np.all(np.isfinite(k)):
        raise_nonfinite("kernel", k)
    eng = check_engine(engine)
    nsig, n = block.shape
    out = np.empty_like(block)
    st = lib.fc_lagged_sum(context(), dptr(block), nsig, n, dptr(k), k.size, eng,
                           ffi.from_buffer("double[]", out))
    if st == lib.FC_ERR_NONFINITE:
        raise_nonfinite("samples", arr)
    if st == lib.FC_ERR_RANGE:
        raise RangeError(
            f"samples (largest |value| {show(float(np.max(np.abs(block))))}) or "
            f"kernel (largest |value| {show(float(np.max(np.abs(k))))}): the "
            "result is beyond the double range"
        )
    raise_for_status(st, "lagged_sum")
    return _unrows(out, moved_shape, ax)


def _apply(kind, samples, order, step, rule, axis, engine):
    allowed = INTEGRAL_RULES if kind == "integral" else DERIVATIVE_RULES
    code = check_rule(rule, allowed)
    a = check_order(order, rule)
    h = check_step(step)
    eng = check_engine(engine)
    arr, ax, moved_shape, block = _rows("samples", samples, axis)
    nsig, n = block.shape
    out = np.empty_like(block)
    st = lib.fc_apply(context(), code, a, h, dptr(block), nsig, n, eng,
                      ffi.from_buffer("double[]", out))
    if st == lib.FC_ERR_NONFINITE:
        raise_nonfinite("samples", arr)
    if st == lib.FC_ERR_RANGE:
        raise RangeError(
            f"samples (largest |value| {show(float(np.max(np.abs(block))))}), "
            f"step={show(step)} or order={show(order)}: the result is beyond "
            "the double range"
        )
    raise_for_status(st, f"{kind}(rule={show(rule)}, order={show(order)}, "
                         f"step={show(step)})")
    return _unrows(out, moved_shape, ax)


def integral(samples, order, step, rule="rectangle", axis=-1, engine="auto"):
    """Riemann-Liouville fractional integral of order ``order`` of a sampled
    signal, from t = 0.

    Parameters
    ----------
    samples : array_like
        f(t_k) at t_k = k*step along ``axis``. Masked arrays are refused
        (InputTypeError), see :func:`lagged_sum`.
    order : float
        0 < order <= 10.
    step : float
        Grid step h > 0.
    rule : {'rectangle', 'trapezoid'}, optional
        Product rectangle rule (order 1) or product trapezoidal rule (order 2
        for smooth f).
    axis : int, optional
        Axis of time.
    engine : {'auto', 'direct', 'blocked', 'fft'}, optional
        See :func:`lagged_sum`.

    Returns
    -------
    numpy.ndarray
        float64, same shape; element n approximates I^a f(t_n).
    """
    return _apply("integral", samples, order, step, rule, axis, engine)


def derivative(samples, order, step, rule="grunwald", axis=-1, engine="auto"):
    """Fractional derivative of a sampled signal, from t = 0.

    Parameters
    ----------
    samples : array_like
        f(t_k) at t_k = k*step along ``axis``. Masked arrays are refused
        (InputTypeError), see :func:`lagged_sum`.
    order : float
        ``grunwald``: Riemann-Liouville derivative, 0 < order <= 10;
        ``l1``: Caputo derivative, 0 < order < 1.
    step : float
        Grid step h > 0.
    rule : {'grunwald', 'l1'}, optional
        Grunwald-Letnikov (order 1) or the L1 scheme (order 2 - a).
    axis, engine : optional
        See :func:`lagged_sum`.

    Returns
    -------
    numpy.ndarray
        float64, same shape; element n approximates the derivative at t_n.
    """
    return _apply("derivative", samples, order, step, rule, axis, engine)


def get_include():
    """The folder holding the installed C header ``fracconv.h``."""
    here = os.path.dirname(os.path.abspath(__file__))
    inc = os.path.join(here, "include")
    if os.path.exists(os.path.join(inc, "fracconv.h")):
        return inc
    src = os.path.join(os.path.dirname(here), "csrc")  # a source checkout
    return src
