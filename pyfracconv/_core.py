"""Batch functions: weights, lagged sums, fractional integrals and
derivatives of whole records.

The argument checks live in :mod:`pyfracconv._checks`; their names stay
importable from here (the command line and the tests import them from
this module).
"""

from __future__ import annotations

import os
import threading
from typing import Any, Optional

import numpy as np
from numpy.typing import ArrayLike, NDArray

from ._checks import (
    COMPRESSED_HORIZON_RANGE as COMPRESSED_HORIZON_RANGE,
    COMPRESSED_TOL_RANGE as COMPRESSED_TOL_RANGE,
    DERIVATIVE_RULES as DERIVATIVE_RULES,
    ENGINES as ENGINES,
    INDEX_LIMIT as INDEX_LIMIT,
    INTEGRAL_RULES as INTEGRAL_RULES,
    MAX_ORDER as MAX_ORDER,
    RULES as RULES,
    SIZE_MAX as SIZE_MAX,
    _is_masked as _is_masked,
    as_float_array as as_float_array,
    check_axis as check_axis,
    check_bytes as check_bytes,
    check_compressed as check_compressed,
    check_count as check_count,
    check_engine as check_engine,
    check_order as check_order,
    check_real as check_real,
    check_rule as check_rule,
    check_step as check_step,
    check_workers as check_workers,
    contiguous_copy as contiguous_copy,
    new_result as new_result,
    raise_nonfinite as raise_nonfinite,
    refuse_masked as refuse_masked,
    show as show,
)
from ._errors import ArgumentError, InputTypeError, RangeError, raise_for_status
from ._fracconv import ffi, lib

__all__ = [
    "weights",
    "lagged_sum",
    "integral",
    "derivative",
    "get_include",
    "get_lib_dir",
    "trapezoid_start",
    "INTEGRAL_RULES",
    "DERIVATIVE_RULES",
]

FloatArray = NDArray[np.float64]


def dptr(arr: FloatArray) -> Any:
    """cffi double* view of a C-contiguous float64 array (no copy)."""
    return ffi.from_buffer("double[]", arr, require_writable=False)


# ---------------------------------------------------------------- context

_local = threading.local()


def context(threads: int = 1) -> Any:
    """The calling thread's batch context (FFT plans and work space), set
    to use ``threads`` threads (a count check_workers gave)."""
    ctx = getattr(_local, "ctx", None)
    if ctx is None:
        p = ffi.new("fc_context **")
        raise_for_status(lib.fc_context_create(p), "context")
        ctx = ffi.gc(p[0], lib.fc_context_free)
        _local.ctx = ctx
    raise_for_status(lib.fc_context_set_threads(ctx, threads), "context threads")
    return ctx


# ---------------------------------------------------------------- weights


def _index_range(count: object, start: object) -> tuple[int, int]:
    n = check_count("count", count)
    m0 = check_count("start", start)
    if m0 + n > INDEX_LIMIT:
        raise ArgumentError(f"start={show(start)}, count={show(count)}: start + count must be <= 2**53")
    return n, m0


def weights(rule: str, order: float, count: int, step: float = 1.0, start: int = 0) -> FloatArray:
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
    ArgumentError
        Unknown rule, order or step out of range, count or start negative,
        start + count above 2**53.
    InputTypeError
        order or step not a real number, count or start not an integer.
    OutOfMemory
        The result (8 * count bytes) is larger than this machine's memory
        (checked before anything is allocated) or cannot be allocated.
    RangeError
        A weight is beyond the range of double precision (step or order too
        large).

    See Also
    --------
    lagged_sum : apply weights (or any kernel) to samples.
    integral, derivative : the rules applied to a record.

    Examples
    --------
    Grunwald-Letnikov weights are g_m = (-1)^m binom(a, m) (Podlubny 1999,
    section 2.2); at a = 1 they are the first difference 1, -1, 0, ...:

    >>> import numpy as np
    >>> import pyfracconv
    >>> pyfracconv.weights("grunwald", 1.0, 4).tolist() == [1.0, -1.0, 0.0, 0.0]
    True

    At a = 0.5 they are 1, -1/2, -1/8, -1/16:

    >>> pyfracconv.weights("grunwald", 0.5, 4)
    array([ 1.    , -0.5   , -0.125 , -0.0625])

    The rectangle weights telescope: their first n sum to
    h^a n^a / Gamma(a+1) (common practice; Diethelm, Ford and Freed 2004),
    here with h = 0.25, a = 0.5, n = 16, i.e. 2 / Gamma(1.5) = 4/sqrt(pi):

    >>> w = pyfracconv.weights("rectangle", 0.5, 16, step=0.25)
    >>> bool(np.isclose(w.sum(), 4 / np.sqrt(np.pi), rtol=1e-14))
    True

    ``start`` gives later indices without the earlier ones:

    >>> bool(np.array_equal(pyfracconv.weights("grunwald", 0.5, 2, start=2), [-0.125, -0.0625]))
    True
    """
    code = check_rule(rule)
    a = check_order(order, rule)
    h = check_step(step)
    n, m0 = _index_range(count, start)
    out = new_result(n, f"count={n}")
    st = lib.fc_weights(code, a, h, m0, n, ffi.from_buffer("double[]", out))
    if st == lib.FC_ERR_RANGE:
        raise RangeError(
            f"step={show(step)} (or order={show(order)}): the weights are beyond the double range"
        )
    raise_for_status(st, f"weights(rule={show(rule)}, order={show(order)})")
    return out


def trapezoid_start(order: float, count: int, step: float = 1.0, start: int = 0) -> FloatArray:
    """Starting weights h^a/Gamma(a+2) A_n of the trapezoid rule,
    n = start .. start+count-1 (A_0 = 0)."""
    a = check_order(order, "trapezoid")
    h = check_step(step)
    n, m0 = _index_range(count, start)
    out = new_result(n, f"count={n}")
    st = lib.fc_trapezoid_start(a, h, m0, n, ffi.from_buffer("double[]", out))
    if st == lib.FC_ERR_RANGE:
        raise RangeError(
            f"step={show(step)} (or order={show(order)}): the weights are beyond the double range"
        )
    raise_for_status(st, f"trapezoid_start(order={show(order)})")
    return out


# ---------------------------------------------------------------- lagged sums


def _rows(name: str, samples: object, axis: object) -> tuple[FloatArray, int, tuple[int, ...], FloatArray]:
    """Samples moved to a C-contiguous (nsig, n) float64 block."""
    arr = as_float_array(name, samples)
    if arr.ndim == 0:
        raise ArgumentError(f"{name}: expected at least one dimension, got a scalar")
    ax = check_axis(axis, arr.ndim)
    if ax == arr.ndim - 1 and arr.flags.c_contiguous:
        # time already last and contiguous (as_float_array made it so for
        # float64 input): a view, no axis moves (the common 1-D call)
        nsig = 1
        for d in arr.shape[:-1]:
            nsig *= d
        return arr, ax, arr.shape, arr.reshape(nsig, arr.shape[-1])
    moved = np.moveaxis(arr, ax, -1)
    nsig = int(np.prod(moved.shape[:-1], dtype=np.int64))
    block = contiguous_copy(name, moved).reshape(nsig, arr.shape[ax])
    return arr, ax, moved.shape, block


def _unrows(block: FloatArray, moved_shape: tuple[int, ...], ax: int) -> FloatArray:
    if ax == len(moved_shape) - 1:
        return block.reshape(moved_shape)
    return np.moveaxis(block.reshape(moved_shape), -1, ax)


def _largest(arr: FloatArray) -> str:
    return show(float(np.max(np.abs(arr)))) if arr.size else "0.0"


def lagged_sum(
    samples: ArrayLike,
    kernel: ArrayLike,
    axis: int = -1,
    engine: str = "auto",
    *,
    workers: Optional[int] = None,
) -> FloatArray:
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
    workers : int, optional (keyword)
        Threads to use, SciPy's convention (as ``scipy.fft``): None (the
        default) or 1 is the calling thread alone; a negative count counts
        back from ``os.cpu_count()`` (-1: every CPU, -2: all but one);
        0 is refused; more than 256 are used as 256. The work is split over
        the signals and, for one long signal, over the independent segment
        products of the blocked engine (the output ranges of the direct
        one): the result is the same, bit for bit, for every value. Calls
        with fewer than about 2**15 samples in all (2**17 when the signals
        are split) run on the calling
        thread whatever the value. The C call releases the GIL, so other
        Python threads run meanwhile.

    Returns
    -------
    numpy.ndarray
        float64, the shape of ``samples``.

    Raises
    ------
    SampleError
        A sample or a kernel value is NaN or infinite (the message names the
        first one).
    ArgumentError
        samples is a scalar, kernel is empty or not 1-D, axis out of range,
        unknown engine, workers 0 or below -os.cpu_count().
    InputTypeError
        Non-numeric or masked samples or kernel, or workers not an integer.
    RangeError
        A result beyond the range of double precision.

    See Also
    --------
    weights : the kernels of the four rules.
    integral, derivative : a rule's kernel applied to a record.
    pyfracconv.Stream.from_kernel : the same sum one sample at a time.

    Examples
    --------
    The causal lagged sum is the first n+1 terms of the full discrete
    convolution (common practice), here with a two-tap moving sum:

    >>> import numpy as np
    >>> import pyfracconv
    >>> x = np.array([1.0, 2.0, 3.0, 4.0])
    >>> pyfracconv.lagged_sum(x, [1.0, 1.0])
    array([1., 3., 5., 7.])
    >>> bool(np.array_equal(pyfracconv.lagged_sum(x, [0.5, 0.25, 2.0]),
    ...                     np.convolve(x, [0.5, 0.25, 2.0])[:4]))
    True

    Every row of a 2-D array is its own signal (time along the last axis):

    >>> pyfracconv.lagged_sum([[1.0, 0.0, 0.0], [0.0, 1.0, 0.0]], [3.0, 2.0, 1.0])
    array([[3., 2., 1.],
           [0., 3., 2.]])
    """
    nthreads = check_workers(workers)
    arr, ax, moved_shape, block = _rows("samples", samples, axis)
    k = np.ascontiguousarray(as_float_array("kernel", kernel))
    if k.ndim != 1 or k.size == 0:
        raise ArgumentError(f"kernel: expected a non-empty 1-D array, got shape {k.shape}")
    if not np.all(np.isfinite(k)):
        raise_nonfinite("kernel", k)
    eng = check_engine(engine)
    nsig, n = block.shape
    out = np.empty_like(block)
    st = lib.fc_lagged_sum(
        context(nthreads), dptr(block), nsig, n, dptr(k), k.size, eng, ffi.from_buffer("double[]", out)
    )
    if st == lib.FC_ERR_RANGE:
        raise RangeError(
            "samples (or kernel): the result is beyond the double range "
            f"(largest |sample| {_largest(block)}, largest |kernel value| "
            f"{_largest(k)})"
        )
    raise_for_status(st, "lagged_sum", samples=("samples", arr))
    return _unrows(out, moved_shape, ax)


#: Below this many samples ``engine='auto'`` with ``t=`` uses the direct
#: engine (measured with bench/test_bench_grid.py: the direct engine's
#: O(N^2) work and the fast engine's construction of its sum of
#: exponentials, about 0.3-1 ms, cross near 150-200 samples on the 2-core
#: test machine).
GRID_FAST_FROM = 200

#: Default tolerance of the fast engine with ``t=``.
GRID_FAST_TOL = 1e-12


def _fast_grid_ok(rule: str, a: float) -> bool:
    # integrals at 1 < a < 2: the engine runs on X = I^1 x~ with the
    # completely monotone kernel of order a - 1 (csrc/grid_soe.c)
    return 0.0 < a < 1.0 if rule == "l1" else 0.0 < a < 2.0


def _apply_grid(
    kind: str,
    samples: object,
    order: object,
    t: object,
    rule: object,
    axis: object,
    engine: object,
    tol: object,
) -> FloatArray:
    """integral / derivative with sample times ``t``: the direct engine of
    :mod:`pyfracconv.grid` or the fast engine (fc_grid_apply, sums of
    exponentials), chosen by ``engine`` (no switch to the uniform engines)."""
    from . import grid

    allowed = INTEGRAL_RULES if kind == "integral" else DERIVATIVE_RULES
    grid._refuse_grunwald(rule)
    check_rule(rule, tuple(r for r in allowed if r in grid.GRID_RULES))
    a = check_order(order, rule)
    if not isinstance(engine, str) or engine not in ("auto", "direct", "fast"):
        raise ArgumentError(
            f"engine={show(engine)}: with t= the engines are 'auto', 'direct' "
            "(the direct O(N^2) sum) and 'fast' (sums of exponentials, O(N K)); "
            "'blocked' and 'fft' need a uniform grid given as step="
        )
    name = str(rule)
    if tol is None:
        tl = GRID_FAST_TOL
    else:
        tl = check_real("tol", tol)
        lo, hi = COMPRESSED_TOL_RANGE
        if not lo <= tl <= hi:
            raise ArgumentError(f"tol={show(tol)}: must be in [{lo:g}, {hi:g}]")
        if engine == "direct":
            raise ArgumentError(
                f"tol={show(tol)} with engine='direct': the direct engine has no "
                "tolerance (it is accurate to rounding); give engine='fast' or 'auto'"
            )
    if engine == "fast" and not _fast_grid_ok(name, a):
        span = "0 < order < 1" if name == "l1" else "0 < order < 2"
        raise ArgumentError(
            f"order={show(order)} with engine='fast': the fast engine on a grid "
            f"serves {span} (the kernel must be completely monotone); use "
            "engine='direct'"
        )
    arr, ax, moved_shape, block = _rows("samples", samples, axis)
    tt = grid.check_times(t, block.shape[1])
    if not np.all(np.isfinite(block)):
        raise_nonfinite("samples", arr)
    nsig, n = block.shape
    use_fast = engine == "fast" or (engine == "auto" and n >= GRID_FAST_FROM and _fast_grid_ok(name, a))
    if use_fast:
        out = np.empty_like(block)
        tc = np.ascontiguousarray(tt)
        st = lib.fc_grid_apply(
            check_rule(rule),
            a,
            dptr(tc),
            dptr(block),
            nsig,
            n,
            tl,
            ffi.from_buffer("double[]", out),
            ffi.NULL,
        )
        if st == lib.FC_ERR_TOL:
            width = float(tt[-1] - tt[0])
            hmin = float(np.min(np.diff(tt)))
            if width / hmin > 2.0**99:
                raise ArgumentError(
                    f"t: the span t[-1] - t[0] = {show(width)} is more than 2**100 "
                    "times the smallest step: too wide for the fast engine; use "
                    "engine='direct'"
                )
            raise ArgumentError(  # pragma: no cover (not seen: tests/test_grid_fast.py)
                f"tol={show(tl)}: no sum of exponentials met this tolerance on this "
                "grid; use a larger tol or engine='direct'"
            )
        if st == lib.FC_ERR_RANGE:
            raise RangeError(
                f"samples (or t, order={show(order)}): the result is beyond the "
                f"double range (largest |sample| {_largest(block)})"
            )
        raise_for_status(
            st, f"{kind}(rule={show(rule)}, order={show(order)}, t=...)", samples=("samples", arr)
        )
        return _unrows(out, moved_shape, ax)
    with np.errstate(over="ignore", invalid="ignore"):
        out = grid.apply_on_grid(name, a, block, tt)
    if not np.all(np.isfinite(out)):
        raise RangeError(
            f"samples (or t, order={show(order)}): the result is beyond the "
            f"double range (largest |sample| {_largest(block)})"
        )
    return _unrows(out, moved_shape, ax)


def _apply(
    kind: str,
    samples: object,
    order: object,
    step: object,
    rule: object,
    axis: object,
    engine: object,
    t: object = None,
    tol: object = None,
    workers: object = None,
) -> FloatArray:
    nthreads = check_workers(workers)
    if step is not None and t is not None:
        raise ArgumentError(
            f"step={show(step)} and t: give exactly one of step (a uniform grid "
            "t_k = k*step) or t (the sample times), not both"
        )
    if step is None and t is None:
        raise InputTypeError(
            "step=None and t=None: give exactly one of step (a uniform grid "
            "t_k = k*step) or t (the sample times)"
        )
    if t is not None:
        return _apply_grid(kind, samples, order, t, rule, axis, engine, tol)
    if tol is not None:
        raise ArgumentError(
            f"tol={show(tol)}: a tolerance is taken only with t= (the fast "
            "engine on a grid of times); the uniform engines are accurate to "
            "rounding"
        )
    if engine == "fast":
        raise ArgumentError(
            "engine='fast': the engine of sample times (t=); with step= the "
            "engines are 'auto', 'direct', 'blocked' and 'fft'"
        )
    allowed = INTEGRAL_RULES if kind == "integral" else DERIVATIVE_RULES
    code = check_rule(rule, allowed)
    a = check_order(order, rule)
    h = check_step(step)
    eng = check_engine(engine)
    arr, ax, moved_shape, block = _rows("samples", samples, axis)
    nsig, n = block.shape
    out = np.empty_like(block)
    st = lib.fc_apply(
        context(nthreads), code, a, h, dptr(block), nsig, n, eng, ffi.from_buffer("double[]", out)
    )
    if st == lib.FC_ERR_RANGE:
        raise RangeError(
            f"samples (or step={show(step)}, order={show(order)}): the result "
            f"is beyond the double range (largest |sample| {_largest(block)})"
        )
    if st != 0:  # the message only when there is one to give
        raise_for_status(
            st, f"{kind}(rule={show(rule)}, order={show(order)}, step={show(step)})", samples=("samples", arr)
        )
    return _unrows(out, moved_shape, ax)


def integral(
    samples: ArrayLike,
    order: float,
    step: Optional[float] = None,
    rule: str = "rectangle",
    axis: int = -1,
    engine: str = "auto",
    *,
    t: Optional[ArrayLike] = None,
    tol: Optional[float] = None,
    workers: Optional[int] = None,
) -> FloatArray:
    """Riemann-Liouville fractional integral of order ``order`` of a sampled
    signal, from t = 0.

    Parameters
    ----------
    samples : array_like
        f(t_k) at t_k = k*step (or at the times ``t``) along ``axis``.
        Masked arrays are refused (InputTypeError), see :func:`lagged_sum`.
    order : float
        0 < order <= 10.
    step : float, optional
        Grid step h > 0 of a uniform grid. Exactly one of ``step`` and ``t``
        is given; ``step`` is the uniform path (the fast engines).
    rule : {'rectangle', 'trapezoid'}, optional
        Product rectangle rule (order 1) or product trapezoidal rule (order 2
        for smooth f).
    axis : int, optional
        Axis of time.
    engine : {'auto', 'direct', 'blocked', 'fft', 'fast'}, optional
        See :func:`lagged_sum`. With ``t``: ``'auto'``, ``'direct'`` or
        ``'fast'`` (below).
    t : array_like, 1-D, optional (keyword)
        Sample times t_0 < t_1 < ..., finite, strictly increasing, one per
        sample along ``axis``; the integral runs from t_0. The weights are
        those of :func:`pyfracconv.grid.grid_weights`. ``engine='direct'``
        applies them by an O(N^2) sum (blocks of rows, bounded memory; each
        value one pairwise sum, componentwise accurate to rounding).
        ``engine='fast'`` (0 < order < 2) replaces the kernel
        t^(a-1)/Gamma(a) beyond the last interval by a sum of K
        exponentials (at 1 < order < 2 the kernel t^(a-2)/Gamma(a-1)
        applied to the running integral of the interpolated samples,
        carried in double-double), O(N K) work (C, fc_grid_apply), with the
        componentwise promise |y_n - y_n(direct)| <= (tol + (K + 64) 2**-52)
        times the sum of the absolute values of the terms of y_n
        (sum_k |w_{n,k} x_k|); K is 28-64 (tol 1e-6 .. 1e-13, spans of 1e6
        smallest steps). ``engine='auto'`` takes the fast engine from
        ``GRID_FAST_FROM`` (200) samples on, when the order allows it,
        else the direct one. A uniform ``t`` is not detected: give a
        uniform grid as ``step`` for the uniform engines.
    tol : float, optional (keyword)
        Tolerance of the fast engine with ``t``, in [1e-15, 1e-2]; default
        1e-12 (``GRID_FAST_TOL``). Refused without ``t`` and with
        ``engine='direct'``.
    workers : int, optional (keyword)
        Threads to use, SciPy's convention; see :func:`lagged_sum` (bit for
        bit the same result for every value; the GIL is released during
        the C call). With ``t`` the count is checked but the engine runs on
        the calling thread.

    Returns
    -------
    numpy.ndarray
        float64, same shape; element n approximates I^a f(t_n).

    Raises
    ------
    ArgumentError
        Unknown or derivative rule, order or step out of range, samples a
        scalar, axis out of range, unknown engine; both ``step`` and ``t``;
        ``t`` not 1-D, of another length than the samples, not finite or
        not strictly increasing (the message names the first offending
        index and its values); ``engine`` other than auto/direct/fast
        with ``t``, ``'fast'`` without ``t`` or at an order it does not
        serve (above 1; L1: 1 and above); ``tol`` out of range, without
        ``t`` or with ``engine='direct'``; with ``engine='fast'``, a span
        of ``t`` beyond 2**100 smallest steps;
        ``workers`` 0 or below -os.cpu_count().
    SampleError
        A sample is NaN or infinite (the message names the first one).
    InputTypeError
        Non-numeric or masked samples or t, order or step not a real
        number; neither ``step`` nor ``t`` given; workers not an integer.
    RangeError
        A result beyond the range of double precision.

    See Also
    --------
    derivative : the fractional derivative.
    weights : the rules' weights.
    pyfracconv.Stream.integral : the same integral one sample at a time.

    Examples
    --------
    I^a 1 = t^a / Gamma(a+1) (Podlubny 1999), and the rectangle rule gives
    exactly h^a n^a / Gamma(a+1) at t_n on a constant (common practice:
    the weights telescope). With a = 0.5, h = 0.25, t_4 = 1 the value is
    1/Gamma(1.5) = 2/sqrt(pi):

    >>> import numpy as np
    >>> import pyfracconv
    >>> y = pyfracconv.integral(np.ones(5), 0.5, 0.25)
    >>> bool(np.allclose(y, np.sqrt(np.arange(5) * 0.25) * 2 / np.sqrt(np.pi), rtol=1e-14))
    True

    At order 1 the rectangle rule is the left rectangle sum
    h (x_0 + ... + x_{n-1}) (common practice):

    >>> pyfracconv.integral([1.0, 2.0, 3.0, 4.0], 1.0, 0.5)
    array([0. , 0.5, 1.5, 3. ])

    The product trapezoidal rule is exact on linear f (Diethelm, Ford and
    Freed 2004): I^a t = t^(1+a) / Gamma(2+a), at a = 0.5 and t = 1 equal
    to 4 / (3 sqrt(pi)):

    >>> t = np.linspace(0.0, 1.0, 9)
    >>> y = pyfracconv.integral(t, 0.5, 0.125, rule="trapezoid")
    >>> bool(np.isclose(y[-1], 4 / (3 * np.sqrt(np.pi)), rtol=1e-13))
    True

    Time runs along ``axis`` (default the last); other axes are signals:

    >>> pyfracconv.integral(np.ones((3, 2)), 1.0, 1.0, axis=0)
    array([[0., 0.],
           [1., 1.],
           [2., 2.]])

    Time-stamped samples: ``t`` gives the times. The product trapezoidal
    rule is exact on linear f on any grid, I^a t = t^(1+a) / Gamma(2+a)
    (Podlubny 1999), at a = 0.5 equal to 4 t^1.5 / (3 sqrt(pi)):

    >>> times = np.array([0.0, 0.1, 0.15, 0.4, 0.9, 1.0])
    >>> y = pyfracconv.integral(times, 0.5, t=times, rule="trapezoid")
    >>> bool(np.allclose(y, 4 * times**1.5 / (3 * np.sqrt(np.pi)), rtol=1e-13))
    True
    """
    return _apply("integral", samples, order, step, rule, axis, engine, t, tol, workers)


def derivative(
    samples: ArrayLike,
    order: float,
    step: Optional[float] = None,
    rule: str = "grunwald",
    axis: int = -1,
    engine: str = "auto",
    *,
    t: Optional[ArrayLike] = None,
    tol: Optional[float] = None,
    workers: Optional[int] = None,
) -> FloatArray:
    """Fractional derivative of a sampled signal, from t = 0.

    Parameters
    ----------
    samples : array_like
        f(t_k) at t_k = k*step (or at the times ``t``) along ``axis``.
        Masked arrays are refused (InputTypeError), see :func:`lagged_sum`.
    order : float
        ``grunwald``: Riemann-Liouville derivative, 0 < order <= 10;
        ``l1``: Caputo derivative, 0 < order < 1.
    step : float, optional
        Grid step h > 0 of a uniform grid. Exactly one of ``step`` and ``t``
        is given; ``step`` is the uniform path (the fast engines).
    rule : {'grunwald', 'l1'}, optional
        Grunwald-Letnikov (order 1) or the L1 scheme (order 2 - a). With
        ``t`` only ``'l1'`` (Grunwald-Letnikov has no standard non-uniform
        form and is refused).
    axis : int, optional
        Axis of time (default last).
    engine : {'auto', 'direct', 'blocked', 'fft', 'fast'}, optional
        See :func:`lagged_sum`. With ``t``: ``'auto'``, ``'direct'`` or
        ``'fast'`` (below).
    t : array_like, 1-D, optional (keyword)
        Sample times t_0 < t_1 < ..., finite, strictly increasing, one per
        sample along ``axis``; the derivative is taken from t_0. The L1
        weights are those of :func:`pyfracconv.grid.grid_weights`, applied
        to the sample increments: ``engine='direct'`` by an O(N^2) sum
        (componentwise accurate to rounding), ``engine='fast'`` with the
        kernel t^(-a)/Gamma(1-a) beyond the last interval replaced by a
        sum of K exponentials, O(N K) work, promising
        |y_n - y_n(direct)| <= (tol + (K + 64) 2**-52) sum_k |c_{n,k}
        (x_{k+1} - x_k)| for every n. ``engine='auto'``: the fast engine
        from ``GRID_FAST_FROM`` (200) samples on, else the direct one. A
        uniform ``t`` is not detected: give a uniform grid as ``step`` for
        the uniform engines.
    tol : float, optional (keyword)
        Tolerance of the fast engine with ``t``, in [1e-15, 1e-2]; default
        1e-12. Refused without ``t`` and with ``engine='direct'``.
    workers : int, optional (keyword)
        Threads to use, SciPy's convention; see :func:`lagged_sum` (bit for
        bit the same result for every value; the GIL is released during
        the C call). With ``t`` the count is checked but the engine runs on
        the calling thread.

    Returns
    -------
    numpy.ndarray
        float64, same shape; element n approximates the derivative at t_n.

    Raises
    ------
    ArgumentError
        Unknown or integral rule, order or step out of range (``'l1'``
        needs order < 1), samples a scalar, axis out of range, unknown
        engine; both ``step`` and ``t``; ``rule='grunwald'`` with ``t``;
        ``t`` not 1-D, of another length than the samples, not finite or
        not strictly increasing (the message names the first offending
        index and its values); ``engine`` other than auto/direct/fast
        with ``t``, ``'fast'`` without ``t`` or at an order it does not
        serve (above 1; L1: 1 and above); ``tol`` out of range, without
        ``t`` or with ``engine='direct'``; with ``engine='fast'``, a span
        of ``t`` beyond 2**100 smallest steps;
        ``workers`` 0 or below -os.cpu_count().
    SampleError
        A sample is NaN or infinite (the message names the first one).
    InputTypeError
        Non-numeric or masked samples or t, order or step not a real
        number; neither ``step`` nor ``t`` given; workers not an integer.
    RangeError
        A result beyond the range of double precision.

    See Also
    --------
    integral : the fractional integral.
    weights : the rules' weights.
    pyfracconv.Stream.derivative : the same derivative one sample at a time.

    Examples
    --------
    At order 1 the Grunwald-Letnikov rule is the backward difference
    quotient (x_n - x_{n-1}) / h, with x_{-1} = 0 (common practice):

    >>> import numpy as np
    >>> import pyfracconv
    >>> pyfracconv.derivative([0.0, 1.0, 4.0, 9.0], 1.0, 0.5)
    array([ 0.,  2.,  6., 10.])

    The L1 scheme is exact on linear f (Lin and Xu 2007): the Caputo
    derivative of t is t^(1-a) / Gamma(2-a) (Diethelm 2010), at a = 0.5
    equal to 2 sqrt(t / pi):

    >>> t = np.linspace(0.0, 1.0, 5)
    >>> y = pyfracconv.derivative(t, 0.5, 0.25, rule="l1")
    >>> bool(np.allclose(y, 2 * np.sqrt(t / np.pi), rtol=1e-13))
    True

    The same on time-stamped samples (the L1 scheme is exact on linear f on
    any grid, since the interpolant is f itself):

    >>> times = np.array([0.0, 0.01, 0.3, 0.35, 1.0])
    >>> y = pyfracconv.derivative(times, 0.5, t=times, rule="l1")
    >>> bool(np.allclose(y, 2 * np.sqrt(times / np.pi), rtol=1e-13))
    True
    """
    return _apply("derivative", samples, order, step, rule, axis, engine, t, tol, workers)


def get_include() -> str:
    """The folder holding the C header ``fracconv.h``.

    Returns
    -------
    str
        The installed package's ``include`` folder, or the ``csrc`` folder
        of a source checkout (an editable install).

    Raises
    ------
    None
        The folder is found from the package's own location; nothing is
        checked or built.

    See Also
    --------
    pyfracconv.c_version : the version of the compiled C library.

    Examples
    --------
    A C extension or program builds against the header found there:

    >>> import os
    >>> import pyfracconv
    >>> os.path.isfile(os.path.join(pyfracconv.get_include(), "fracconv.h"))
    True
    """
    here = os.path.dirname(os.path.abspath(__file__))
    inc = os.path.join(here, "include")
    if os.path.exists(os.path.join(inc, "fracconv.h")):
        return inc
    src = os.path.join(os.path.dirname(here), "csrc")  # a source checkout
    return src


def _version_major() -> str:
    return str(int(lib.FC_VERSION_MAJOR))


def get_lib_dir() -> str:
    """The folder holding the C library: ``libfracconv.so.MAJOR`` (the
    shared object under its SONAME) and ``libfracconv.a``.

    Returns
    -------
    str
        The installed package's ``lib`` folder, or, for an editable
        install of a source checkout, the checkout's
        ``build/pyfracconv-lib`` (where that install put the library).

    Raises
    ------
    FileNotFoundError
        When the package was built without the library (platforms other
        than Linux) or the checkout's copy is missing.

    See Also
    --------
    get_include : the folder of the headers.

    Notes
    -----
    ``pyfracconv flags [--cflags] [--libs] [--static]`` prints the compiler
    and linker flags for these folders (with a run-time path, so the program
    finds the shared object).

    Examples
    --------
    >>> import os
    >>> import pyfracconv
    >>> os.path.isfile(os.path.join(pyfracconv.get_lib_dir(), "libfracconv.a"))
    True
    """
    here = os.path.dirname(os.path.abspath(__file__))
    name = "libfracconv.so." + _version_major()
    installed = os.path.join(here, "lib")
    checkout = os.path.join(os.path.dirname(here), "build", "pyfracconv-lib")
    for d in (installed, checkout):
        if os.path.isfile(os.path.join(d, name)) and os.path.isfile(os.path.join(d, "libfracconv.a")):
            return d
    raise FileNotFoundError(
        f"pyfracconv: no C library ({name}, libfracconv.a) in {installed}"
        + (f" or {checkout}" if os.path.isdir(os.path.dirname(checkout)) else "")
        + ": the package ships it on Linux; reinstall (pip install --force-reinstall "
        "pyfracconv, or pip install -e . in a checkout), or build it with make "
        "from the source checkout"
    )


def c_flags(cflags: bool = True, libs: bool = True, static: bool = False) -> list[str]:
    """Compiler and linker flags for a C, C++ or Fortran program using the
    package's copy of the library (what ``pyfracconv flags`` prints).

    ``cflags``: ``-I`` of :func:`get_include`. ``libs``: the shared object
    by its path, a run-time path (``-Wl,-rpath``) to its folder so the
    program runs without ``LD_LIBRARY_PATH``, and ``-lm``; with
    ``static=True`` the static library instead (no run-time path needed)
    and ``-lm -pthread`` (the batch engines' threads).
    """
    out: list[str] = []
    if cflags:
        out.append("-I" + get_include())
    if libs:
        d = get_lib_dir()
        if static:
            out += [os.path.join(d, "libfracconv.a"), "-lm", "-pthread"]
        else:
            out += [os.path.join(d, "libfracconv.so." + _version_major()), "-Wl,-rpath," + d, "-lm"]
    return out
