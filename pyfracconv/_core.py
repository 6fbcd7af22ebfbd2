"""Batch functions: weights, lagged sums, fractional integrals and
derivatives of whole records."""

from __future__ import annotations

import numbers
import os
import threading

import numpy as np

from ._errors import ArgumentError, InputTypeError, SampleError, raise_for_status
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


# ---------------------------------------------------------------- validation

def check_rule(rule, allowed=tuple(RULES)):
    """Return the C code of ``rule`` if it is one of ``allowed``."""
    if not isinstance(rule, str) or rule not in allowed:
        expected = ", ".join(repr(r) for r in allowed)
        raise ArgumentError(f"rule={rule!r}: unknown; expected one of {expected}")
    return RULES[rule]


def check_real(name, value):
    """A real scalar as a Python float (InputTypeError if not numeric)."""
    if isinstance(value, (bool, np.bool_)) or not isinstance(value, numbers.Real):
        raise InputTypeError(
            f"{name}={value!r}: expected a real number, got {type(value).__name__}"
        )
    return float(value)


def check_order(order, rule):
    a = check_real("order", order)
    if not np.isfinite(a) or a <= 0.0:
        raise ArgumentError(f"order={order!r}: must be finite and > 0")
    if a > MAX_ORDER:
        raise ArgumentError(f"order={order!r}: must be <= {MAX_ORDER:g}")
    if rule == "l1" and a >= 1.0:
        raise ArgumentError(
            f"order={order!r}: the 'l1' rule (Caputo) needs 0 < order < 1"
        )
    return a


def check_step(step):
    h = check_real("step", step)
    if not np.isfinite(h) or h <= 0.0:
        raise ArgumentError(f"step={step!r}: must be finite and > 0")
    return h


def check_count(name, value, minimum=0):
    if isinstance(value, (bool, np.bool_)) or not isinstance(value, numbers.Integral):
        raise InputTypeError(
            f"{name}={value!r}: expected an integer, got {type(value).__name__}"
        )
    v = int(value)
    if v < minimum:
        raise ArgumentError(f"{name}={value!r}: must be >= {minimum}")
    return v


def as_float_array(name, values):
    """``values`` as a C-contiguous float64 ndarray (no copy when it already
    is one); InputTypeError for non-numeric data."""
    if type(values) is np.ndarray and values.dtype == np.float64:
        return values if values.flags.c_contiguous else np.ascontiguousarray(values)
    try:
        arr = np.asarray(values)
    except Exception as exc:  # ragged lists and the like
        raise InputTypeError(f"{name}: cannot be read as a numeric array ({exc})") from None
    if arr.dtype.kind not in "biuf":
        raise InputTypeError(
            f"{name}: expected real numbers, got an array of dtype {arr.dtype}"
        )
    return np.asarray(arr, dtype=np.float64, order="C")


def raise_nonfinite(name, arr):
    """Raise SampleError naming the first non-finite element of ``arr``."""
    bad = np.argwhere(~np.isfinite(arr))
    if len(bad) == 0:  # pragma: no cover - only called when C found one
        raise SampleError(f"{name}: a value is NaN or infinite")
    idx = tuple(int(i) for i in bad[0])
    where = idx[0] if len(idx) == 1 else idx
    raise SampleError(
        f"{name}[{where}]={arr[idx]!r}: samples must be finite (first bad index {where})"
    )


def check_engine(engine):
    if not isinstance(engine, str) or engine not in ENGINES:
        expected = ", ".join(repr(e) for e in ENGINES)
        raise ArgumentError(f"engine={engine!r}: unknown; expected one of {expected}")
    return ENGINES[engine]


def check_axis(axis, ndim):
    if isinstance(axis, (bool, np.bool_)) or not isinstance(axis, numbers.Integral):
        raise InputTypeError(f"axis={axis!r}: expected an integer")
    if not -ndim <= axis < ndim:
        raise ArgumentError(f"axis={axis!r}: out of range for an array of {ndim} dimension(s)")
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
            f"start={start!r}, count={count!r}: start + count must be <= 2**53"
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
    """
    code = check_rule(rule)
    a = check_order(order, rule)
    h = check_step(step)
    n, m0 = _index_range(count, start)
    out = np.empty(n, dtype=np.float64)
    st = lib.fc_weights(code, a, h, m0, n, ffi.from_buffer("double[]", out))
    raise_for_status(st, f"weights(rule={rule!r}, order={order!r})")
    return out


def trapezoid_start(order, count, step=1.0, start=0):
    """Starting weights h^a/Gamma(a+2) A_n of the trapezoid rule,
    n = start .. start+count-1 (A_0 = 0)."""
    a = check_order(order, "trapezoid")
    h = check_step(step)
    n, m0 = _index_range(count, start)
    out = np.empty(n, dtype=np.float64)
    st = lib.fc_trapezoid_start(a, h, m0, n, ffi.from_buffer("double[]", out))
    raise_for_status(st, f"trapezoid_start(order={order!r})")
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
    block = np.ascontiguousarray(moved).reshape(nsig, arr.shape[ax])
    return arr, ax, moved.shape, block


def _unrows(block, moved_shape, ax):
    return np.moveaxis(block.reshape(moved_shape), -1, ax)


def lagged_sum(samples, kernel, axis=-1, engine="auto"):
    """Causal lagged sum y_n = sum_{k<=n} kernel[n-k] * samples[k].

    Parameters
    ----------
    samples : array_like
        Real samples; the sum runs along ``axis``; every other axis is an
        independent signal sharing the kernel.
    kernel : array_like, 1-D
        The kernel c_0, c_1, ...; any length >= 1 (lags past its end are 0).
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
    raise_for_status(st, f"{kind}(rule={rule!r}, order={order!r}, step={step!r})")
    return _unrows(out, moved_shape, ax)


def integral(samples, order, step, rule="rectangle", axis=-1, engine="auto"):
    """Riemann-Liouville fractional integral of order ``order`` of a sampled
    signal, from t = 0.

    Parameters
    ----------
    samples : array_like
        f(t_k) at t_k = k*step along ``axis``.
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
        f(t_k) at t_k = k*step along ``axis``.
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
