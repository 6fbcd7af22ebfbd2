"""Streams: fractional integrals and derivatives one sample at a time.

A :class:`Stream` returns, for every sample pushed, the value the batch
functions (:func:`pyfracconv.integral`, :func:`pyfracconv.derivative`,
:func:`pyfracconv.lagged_sum`) give at that index on the same samples. In
``mode="exact"`` (the default) the whole history is kept and the result is
the exact lagged sum to rounding, at amortised O(log^2 n) work per sample
(an online dyadic split of the Toeplitz matrix, see ``csrc/stream.c``); in
``mode="compressed"`` memory and work per sample are bounded and the result
is within a stated tolerance over a stated horizon.
"""

from __future__ import annotations

import math
import numbers
import threading

import numpy as np

from ._errors import (
    ArgumentError,
    BusyError,
    HorizonError,
    InputTypeError,
    RangeError,
    SampleError,
    StateError,
    raise_for_status,
)
from ._core import (
    DERIVATIVE_RULES,
    INTEGRAL_RULES,
    RULES,
    SIZE_MAX,
    _is_masked,
    as_float_array,
    check_compressed,
    check_order,
    check_rule,
    check_step,
    show,
)
from ._fracconv import ffi, lib

__all__ = ["Stream"]

_RULE_NAMES = {v: k for k, v in RULES.items()}
_MODES = {"exact": lib.FC_MODE_EXACT, "compressed": lib.FC_MODE_COMPRESSED}
_MODE_NAMES = {v: k for k, v in _MODES.items()}
# What a compressed stream does with a push that would take it past its
# horizon (the horizon_policy keyword and property).
_POLICIES = {"refuse": lib.FC_HORIZON_REFUSE, "continue": lib.FC_HORIZON_CONTINUE}
_POLICY_NAMES = {v: k for k, v in _POLICIES.items()}

# Python envelope around the C state: magic, one byte telling whether the
# stream was made with channels=None (0x5A) or an explicit channel count
# (0xA5; the two differ in every bit), one zero byte; then the C bytes
# (magic "FCSTREAM", version, mode, checksum, ...; see csrc/stream.c).
# Python reads nothing else from the bytes: every parameter of a loaded
# stream comes from the C object once the C loader has accepted the data.
_ENV_MAGIC = b"pyfcS1"
_ENV_SCALAR = 0x5A
_ENV_ARRAY = 0xA5
_ENV_LEN = 8
# The C state starts with its own 8-byte magic: shorter data is refused
# before it reaches the C loader.
_C_MIN_LEN = 8


# ------------------------------------------------------------- validation

def _check_channels(channels):
    if channels is None:
        return 1
    if isinstance(channels, (bool, np.bool_)) or not isinstance(
        channels, numbers.Integral
    ):
        raise InputTypeError(
            f"channels={show(channels)}: expected None or an integer, "
            f"got {type(channels).__name__}"
        )
    c = int(channels)
    if c < 1:
        raise ArgumentError(f"channels={show(channels)}: must be >= 1")
    if c > SIZE_MAX:
        raise ArgumentError(
            f"channels={show(channels)}: must be <= {SIZE_MAX} (the largest size)"
        )
    return c


def _check_mode(mode):
    if not isinstance(mode, str) or mode not in _MODES:
        raise ArgumentError(
            f"mode={show(mode)}: unknown; expected one of 'exact', 'compressed'"
        )
    return _MODES[str(mode)]


def _check_policy(policy):
    if not isinstance(policy, str) or policy not in _POLICIES:
        raise ArgumentError(
            f"horizon_policy={show(policy)}: unknown; expected one of "
            "'refuse', 'continue'"
        )
    return _POLICIES[str(policy)]


def _first_bad(a):
    bad = np.flatnonzero(~np.isfinite(a.ravel()))
    i = int(bad[0])
    return (np.unravel_index(i, a.shape) if a.ndim > 1 else (i,)), float(a.ravel()[i])


def _get(fn, s, ctype):
    p = ffi.new(ctype)
    raise_for_status(fn(s, p), fn.__name__)
    return p[0]


def _horizon_error(s, what, pushing=1):
    """HorizonError for a call on the C stream ``s`` that would produce
    ``pushing`` outputs past the horizon; ``what`` names the argument."""
    horizon = _get(lib.fc_stream_horizon, s, "double *")
    count = int(_get(lib.fc_stream_count, s, "uint64_t *"))
    left = int(_get(lib.fc_stream_remaining, s, "uint64_t *"))
    last = int(math.floor(horizon))
    asked = (f"{pushing} time steps asked for, {left} left"
             if pushing != 1 else f"{count} samples pushed, none left")
    return HorizonError(
        f"{what}: past the horizon (horizon={horizon:g}: outputs 0 .. {last} "
        f"are within tol; {asked}); the stream is unchanged. Create the "
        "stream with horizon_policy='continue' (or set "
        "stream.horizon_policy = 'continue') to go on without the promise"
    )


def _scalar_error(name, x):
    """The exception for a scalar that cffi refused as a double."""
    if isinstance(x, numbers.Real) and not isinstance(x, (bool, np.bool_)):
        try:
            float(x)
        except OverflowError:  # 10**400, Fraction(10**400), ...
            return SampleError(
                f"{name}={show(x)}: beyond the range of a double (samples must "
                "be finite); the stream is unchanged"
            )
    if _is_masked(x):
        return InputTypeError(
            f"{name}: masked arrays are not accepted (the mask would be ignored)"
        )
    if isinstance(x, (np.ndarray, list, tuple)):
        a = np.asarray(x)
        if a.dtype.kind in "biuf":
            return ArgumentError(
                f"{name}: expected a scalar (channels=None), got shape {a.shape}"
            )
    return InputTypeError(
        f"{name}={show(x)}: expected a real number, got {type(x).__name__}"
    )


def _scalar_push_error(s, st, name, x):
    """The exception for a scalar push or preview of ``x`` on the C stream
    ``s`` that returned status ``st`` (None: cffi refused x)."""
    if st is None:
        return _scalar_error(name, x)
    if st == lib.FC_ERR_NONFINITE:
        if _is_masked(x):  # np.ma.masked converts to nan
            return InputTypeError(
                f"{name}=masked: masked values are not accepted (the mask would "
                "be ignored); the stream is unchanged"
            )
        try:
            shown = show(float(x))
        except (TypeError, ValueError, OverflowError):
            shown = show(x)
        return SampleError(f"{name}={shown}: sample is NaN or infinite; "
                           "the stream is unchanged")
    if st == lib.FC_ERR_HORIZON:
        return _horizon_error(s, f"{name}={show(x)}")
    if st == lib.FC_ERR_RANGE:
        return RangeError(
            f"{name}={show(x)}: the output would be beyond the double range; "
            "the stream is unchanged"
        )
    try:
        raise_for_status(st, name)
    except Exception as exc:
        return exc
    return None  # pragma: no cover - st is never 0 here


def _make_push1(s, y1, lock):
    """push() of a one-channel scalar stream, with every lookup bound.

    The closure holds the C stream, its output buffer and its lock, never
    the Stream itself: a Stream must not be part of a reference cycle, so
    that ``del stream`` frees the C object at once."""
    acquire = lock.acquire
    release = lock.release
    push1 = lib.fc_stream_push1

    def push(x):
        if not acquire(False):
            raise BusyError("this stream is being used by another thread")
        try:
            st = push1(s, x, y1)
            if st == 0:
                return y1[0]
        except (TypeError, OverflowError):
            st = None
        finally:
            release()
        raise _scalar_push_error(s, st, "x", x)

    push.__doc__ = Stream.push.__doc__
    return push


class Stream:
    """A fractional integral, derivative or lagged sum, one sample at a time.

    Create streams with :meth:`integral`, :meth:`derivative`,
    :meth:`from_kernel` or :meth:`load`, not with the constructor.

    The n-th value returned (n = 0, 1, ...) equals element n of the batch
    function on the same samples: to rounding in ``mode="exact"``, to the
    stated tolerance in ``mode="compressed"``.

    A stream must not be used from two threads at once: a call that finds
    the stream in use raises :class:`pyfracconv.BusyError` and changes
    nothing. Every rejected call (bad argument, non-finite sample, wrong
    shape, a push past the horizon) leaves the stream exactly as it was.
    Masked arrays (``numpy.ma``) are refused with
    :class:`pyfracconv.InputTypeError` wherever samples are taken, since
    their mask would be ignored.

    Compressed mode guarantee: for every n <= horizon,
    ``|y_n - y_n(exact)| <= tol * (sum_k |c_{n-k} u_k| + |corr_n x_0|)``
    plus rounding, where c is the rule's kernel, u the samples (their
    differences for ``l1``) and corr_n x_0 the trapezoid rule's starting
    term. The sum of exponentials behind it is checked against the rule's
    weights over the whole lag range when the stream is created (creation
    fails otherwise). Orders 0 < a < 1, and 1 <= a < 2 for the rectangle
    integral; memory and work per sample are constant.

    Past the horizon: with ``horizon_policy="refuse"`` (the default) a
    push, block, preview or history that would produce an output n >
    horizon raises :class:`pyfracconv.HorizonError` and changes nothing;
    with ``horizon_policy="continue"`` the stream goes on and
    :attr:`past_horizon` becomes True. :attr:`remaining` tells how many
    samples are left under the promise.

    Notes
    -----
    Exact mode memory grows like O(n) (about 70 bytes per sample with one
    channel, as ``bench/stream_memory.py`` measures: the history, the block
    spectra, the kernel spectra and the FFT plans); work is
    amortised O(log^2 n) per sample, but a single push that completes the
    largest block so far costs O(n log n).
    """

    def __init__(self, *args, **kwargs):
        raise TypeError(
            "use Stream.integral(), Stream.derivative(), Stream.from_kernel() "
            "or Stream.load() to create a stream"
        )

    # ------------------------------------------------------- construction

    @classmethod
    def _wrap(cls, ptr, scalar):
        """A Stream around the C stream ``ptr`` (owned from now on: freed if
        this raises). Every parameter is read from the C object."""
        self = object.__new__(cls)
        self._s = s = ffi.gc(ptr, lib.fc_stream_free)
        C = int(_get(lib.fc_stream_channels, s, "size_t *"))
        if scalar and C != 1:
            raise StateError(
                f"the envelope says channels=None but the state holds {C} channels"
            )
        mode = int(_get(lib.fc_stream_mode, s, "int *"))
        rule = int(_get(lib.fc_stream_rule, s, "int *"))
        if mode not in _MODE_NAMES or (rule != -1 and rule not in _RULE_NAMES):
            raise StateError(f"unknown mode {mode} or rule {rule}")
        self._C = C
        self._scalar = bool(scalar)
        self._mode = _MODE_NAMES[mode]
        self._compressed = mode == lib.FC_MODE_COMPRESSED
        if rule == -1:
            self._kind, self._rule, self._order, self._step = "kernel", None, None, None
        else:
            self._kind = "rule"
            self._rule = _RULE_NAMES[rule]
            self._order = float(_get(lib.fc_stream_order, s, "double *"))
            self._step = float(_get(lib.fc_stream_step, s, "double *"))
        if self._compressed:
            self._tol = float(_get(lib.fc_stream_tol, s, "double *"))
            self._horizon = float(_get(lib.fc_stream_horizon, s, "double *"))
        else:
            self._tol = self._horizon = None
        self._lock = threading.Lock()
        self._y1 = ffi.new("double[1]")
        self._x1 = ffi.new("double[1]")
        self._yarr = np.empty(C)
        self._yptr = ffi.from_buffer("double[]", self._yarr)
        if self._scalar:
            # the hot path: a closure over prebuilt buffers (shadows the
            # documented method Stream.push on this instance); it does not
            # refer to self, so a Stream is never part of a reference cycle
            self.push = _make_push1(s, self._y1, self._lock)
        return self

    @classmethod
    def _create_rule(cls, rule, allowed, order, step, channels, mode, tol,
                     horizon, horizon_policy):
        code = check_rule(rule, allowed)
        a = check_order(order, rule)
        h = check_step(step)
        C = _check_channels(channels)
        m = _check_mode(mode)
        pol = _check_policy(horizon_policy)
        if m == lib.FC_MODE_COMPRESSED:
            if a >= 2.0 or (a >= 1.0 and rule != "rectangle"):
                raise ArgumentError(
                    f"order={show(order)}: mode='compressed' supports orders "
                    "0 < order < 1, and 1 <= order < 2 for the integral with "
                    "rule='rectangle' (use mode='exact' for higher orders)"
                )
            t, hz = check_compressed(tol, horizon)
        else:
            t, hz = 0.0, 0.0
        pp = ffi.new("fc_stream **")
        st = lib.fc_stream_create(code, a, h, C, m, t, hz, pp)
        if st:
            comp = m == lib.FC_MODE_COMPRESSED
            if comp and st == lib.FC_ERR_ORDER:
                raise ArgumentError(
                    f"order={show(order)}: mode='compressed' cannot serve this "
                    f"order with rule={show(rule)} (its construction does not "
                    "reach it); use mode='exact'"
                )
            if comp and st == lib.FC_ERR_TOL:
                # tol and horizon are in range (checked above): the
                # construction found no sum of exponentials meeting them
                raise ArgumentError(
                    f"order={show(order)} (tol={show(tol)}, "
                    f"horizon={show(horizon)}): mode='compressed' could not "
                    "build an approximation within tol up to the horizon for "
                    f"this order with rule={show(rule)}; use mode='exact', or "
                    "a larger tol or a shorter horizon"
                )
            if st == lib.FC_ERR_RANGE:
                raise RangeError(
                    f"step={show(step)} (or order={show(order)}): the kernel "
                    "is beyond the double range"
                )
            raise_for_status(
                st,
                f"Stream(rule={show(rule)}, order={show(order)}, "
                f"step={show(step)}, channels={show(channels)}, mode={show(mode)}"
                + (f", tol={show(tol)}, horizon={show(horizon)})" if comp else ")"),
            )
        self = cls._wrap(pp[0], channels is None)
        raise_for_status(lib.fc_stream_set_horizon_policy(self._s, pol),
                         f"horizon_policy={show(horizon_policy)}")
        return self

    @classmethod
    def integral(cls, order, step, rule="rectangle", channels=None,
                 mode="exact", tol=1e-12, horizon=1e9,
                 horizon_policy="refuse"):
        """A stream of the Riemann-Liouville integral of order ``order``.

        Parameters
        ----------
        order : float
            Order a > 0 (at most 10; ``mode="compressed"`` needs a < 1, or
            a < 2 with ``rule="rectangle"``).
        step : float
            Grid step h > 0.
        rule : {'rectangle', 'trapezoid'}
            Product rectangle (left end points) or product trapezoidal rule.
        channels : None or int
            None: one signal, scalars in and out; an integer c >= 1: c
            signals sharing the kernel, arrays of shape (c,) in and out.
        mode : {'exact', 'compressed'}
            Exact lagged sum (memory O(n)) or the bounded-memory
            sum-of-exponentials approximation.
        tol, horizon : float
            Compressed mode only: relative tolerance in [1e-15, 1e-2] and
            the horizon in [1, 2**53 - 2]: outputs 0 .. floor(horizon) are
            within the tolerance.
        horizon_policy : {'refuse', 'continue'}
            Compressed mode: what a push that would produce an output past
            the horizon does. ``'refuse'`` (default) raises
            :class:`pyfracconv.HorizonError` and changes nothing;
            ``'continue'`` goes on, and :attr:`past_horizon` becomes True
            (nothing is promised for those outputs). Exact mode accepts
            either and has no horizon.

        Returns
        -------
        Stream
        """
        return cls._create_rule(rule, INTEGRAL_RULES, order, step, channels,
                                mode, tol, horizon, horizon_policy)

    @classmethod
    def derivative(cls, order, step, rule="grunwald", channels=None,
                   mode="exact", tol=1e-12, horizon=1e9,
                   horizon_policy="refuse"):
        """A stream of a fractional derivative of order ``order``.

        Parameters
        ----------
        order : float
            Order a > 0 (at most 10); the 'l1' rule needs 0 < a < 1.
        step : float
            Grid step h > 0.
        rule : {'grunwald', 'l1'}
            Grunwald-Letnikov (Riemann-Liouville derivative) or the L1
            scheme (Caputo derivative).
        channels, mode, tol, horizon, horizon_policy
            As for :meth:`integral`.

        Returns
        -------
        Stream
        """
        return cls._create_rule(rule, DERIVATIVE_RULES, order, step, channels,
                                mode, tol, horizon, horizon_policy)

    @classmethod
    def from_kernel(cls, kernel, channels=None):
        """An exact stream of y_n = sum_{k<=n} kernel[n-k] x_k.

        Parameters
        ----------
        kernel : array_like, 1-D
            At least one finite value; kernel[m] = 0 for m >= len(kernel).
            Copied. Masked arrays are refused (InputTypeError).
        channels : None or int
            As for :meth:`integral`.

        Returns
        -------
        Stream
        """
        k = as_float_array("kernel", kernel)
        if k.ndim != 1 or k.size == 0:
            raise ArgumentError(
                f"kernel: expected a non-empty 1-D array, got shape {k.shape}"
            )
        if not np.all(np.isfinite(k)):
            (i,), v = _first_bad(k)
            raise ArgumentError(f"kernel[{i}]={show(v)}: must be finite")
        C = _check_channels(channels)
        pp = ffi.new("fc_stream **")
        st = lib.fc_stream_create_kernel(ffi.from_buffer("double[]", k), k.size,
                                         C, pp)
        if st:
            raise_for_status(st, f"Stream.from_kernel(len(kernel)={k.size}, "
                                 f"channels={show(channels)})")
        return cls._wrap(pp[0], channels is None)

    # ------------------------------------------------------------ helpers

    def _busy(self):
        return BusyError("this stream is being used by another thread")

    def _sample_vector(self, name, x):
        a = as_float_array(name, x)
        if a.shape != (self._C,):
            raise ArgumentError(
                f"{name}: expected shape ({self._C},), got {a.shape}"
            )
        return a

    def _vector_error(self, st, name, a, what="the stream is unchanged"):
        """The exception for a push or preview of the vector ``a``."""
        if st == lib.FC_ERR_NONFINITE:
            (i,), v = _first_bad(a)
            return SampleError(f"{name}[{i}]={show(v)}: sample is NaN or "
                               f"infinite; {what}")
        if st == lib.FC_ERR_HORIZON:
            return _horizon_error(self._s, name)
        if st == lib.FC_ERR_RANGE:
            return RangeError(f"{name}: an output would be beyond the double "
                              f"range; {what}")
        try:
            raise_for_status(st, name)
        except Exception as exc:
            return exc

    def _refuse_past_horizon(self, name):
        """HorizonError if the next output would pass the horizon of a
        compressed stream that refuses it (preview and history)."""
        if (self._compressed
                and _get(lib.fc_stream_horizon_policy, self._s, "int *")
                == lib.FC_HORIZON_REFUSE
                and _get(lib.fc_stream_remaining, self._s, "uint64_t *") == 0):
            raise _horizon_error(self._s, name)

    # ---------------------------------------------------------- streaming

    def push(self, x):
        """Push one time step; return the output at this time step.

        Parameters
        ----------
        x : float or array_like of shape (channels,)
            Finite samples (masked arrays are refused).

        Returns
        -------
        float or ndarray of shape (channels,)

        Raises
        ------
        HorizonError
            Compressed stream with ``horizon_policy='refuse'`` at its
            horizon: nothing is pushed.
        """
        if not self._lock.acquire(False):
            raise self._busy()
        try:
            if self._scalar:
                try:
                    st = lib.fc_stream_push1(self._s, x, self._y1)
                except (TypeError, OverflowError):
                    raise _scalar_error("x", x) from None
                if st:
                    raise _scalar_push_error(self._s, st, "x", x)
                return self._y1[0]
            a = self._sample_vector("x", x)
            st = lib.fc_stream_push(self._s, ffi.from_buffer("double[]", a),
                                    self._yptr)
            if st:
                raise self._vector_error(st, "x", a)
            return self._yarr.copy()
        finally:
            self._lock.release()

    def push_many(self, xs):
        """Push a block of time steps; return the outputs.

        Parameters
        ----------
        xs : array_like of shape (T,) (channels=None) or (T, channels)
            Finite samples (masked arrays are refused).

        Returns
        -------
        ndarray of the same shape: element t is what push(xs[t]) would have
        returned. A block with any non-finite sample pushes nothing, and so
        does a block that would pass the horizon of a compressed stream
        with ``horizon_policy='refuse'`` (HorizonError).
        """
        if not self._lock.acquire(False):
            raise self._busy()
        try:
            a = as_float_array("xs", xs)
            if self._scalar:
                if a.ndim != 1:
                    raise ArgumentError(f"xs: expected shape (T,), got {a.shape}")
                T = a.shape[0]
            else:
                if a.ndim != 2 or a.shape[1] != self._C:
                    raise ArgumentError(
                        f"xs: expected shape (T, {self._C}), got {a.shape}"
                    )
                T = a.shape[0]
            y = np.empty(a.shape)
            if a.size == 0:
                return y
            st = lib.fc_stream_push_block(self._s, ffi.from_buffer("double[]", a),
                                          T, ffi.from_buffer("double[]", y))
            if st:
                if st == lib.FC_ERR_NONFINITE:
                    idx, v = _first_bad(a)
                    where = ", ".join(str(int(i)) for i in idx)
                    raise SampleError(
                        f"xs[{where}]={show(v)}: sample is NaN or infinite; "
                        "nothing was pushed"
                    )
                if st == lib.FC_ERR_HORIZON:
                    raise _horizon_error(self._s, f"xs (shape {a.shape})", T)
                if st == lib.FC_ERR_RANGE:
                    raise RangeError(
                        f"xs (shape {a.shape}): an output would be beyond the "
                        "double range; nothing was pushed"
                    )
                raise_for_status(st, f"xs (shape {a.shape})")
            return y
        finally:
            self._lock.release()

    def preview(self, x):
        """What push(x) would return, bit for bit, without pushing x
        (HorizonError where push(x) would raise it)."""
        if not self._lock.acquire(False):
            raise self._busy()
        try:
            if self._scalar:
                try:
                    self._x1[0] = x
                except (TypeError, OverflowError):
                    raise _scalar_error("x", x) from None
                if math.isfinite(self._x1[0]):
                    self._refuse_past_horizon(f"x={show(x)}")
                st = lib.fc_stream_preview(self._s, self._x1, self._y1)
                if st:
                    raise _scalar_push_error(self._s, st, "x", x)
                return self._y1[0]
            a = self._sample_vector("x", x)
            if np.all(np.isfinite(a)):
                self._refuse_past_horizon("x")
            st = lib.fc_stream_preview(self._s, ffi.from_buffer("double[]", a),
                                       self._yptr)
            if st:
                raise self._vector_error(st, "x", a)
            return self._yarr.copy()
        finally:
            self._lock.release()

    def history(self):
        """The history term of the next output.

        The part of the next output that does not depend on the next sample
        x: the next push returns history() + w0 * x (w0 the lag-0 weight; for
        the 'l1' rule w0 * (x - previous x)). At the very first sample of the
        'trapezoid' and 'l1' rules the output is 0 and history() is 0.

        Returns
        -------
        float or ndarray of shape (channels,)

        Raises
        ------
        HorizonError
            Compressed stream with ``horizon_policy='refuse'`` at its
            horizon (the next output is not promised).
        """
        if not self._lock.acquire(False):
            raise self._busy()
        try:
            self._refuse_past_horizon("history()")
            st = lib.fc_stream_history(self._s, self._yptr)
            if st:
                if st == lib.FC_ERR_HORIZON:
                    raise _horizon_error(self._s, "history()")
                raise_for_status(st, "history()")
            return float(self._yarr[0]) if self._scalar else self._yarr.copy()
        finally:
            self._lock.release()

    def reset(self):
        """Forget every sample (the kernel, reserved memory and the horizon
        policy are kept)."""
        if not self._lock.acquire(False):
            raise self._busy()
        try:
            raise_for_status(lib.fc_stream_reset(self._s), "reset()")
        finally:
            self._lock.release()

    def reserve(self, n):
        """Make room so that pushing up to ``n`` samples in all allocates
        nothing (exact mode; a no-op in compressed mode)."""
        if isinstance(n, (bool, np.bool_)) or not isinstance(n, numbers.Integral):
            raise InputTypeError(
                f"n={show(n)}: expected an integer, got {type(n).__name__}"
            )
        if n < 0 or n >= 2**64:
            raise ArgumentError(f"n={show(n)}: must be in [0, 2**64 - 1]")
        if not self._lock.acquire(False):
            raise self._busy()
        try:
            raise_for_status(lib.fc_stream_reserve(self._s, int(n)), f"n={show(n)}")
        finally:
            self._lock.release()

    # ------------------------------------------------------------ state

    def save(self):
        """The state as bytes (a versioned, checksummed, little-endian
        format; not pickle). :meth:`load` resumes bit for bit. The horizon
        policy is a setting, not state: it is not saved."""
        if not self._lock.acquire(False):
            raise self._busy()
        try:
            sp = ffi.new("size_t *")
            raise_for_status(lib.fc_stream_save_size(self._s, sp), "save()")
            size = int(sp[0])
            out = bytearray(_ENV_LEN + size)
            out[:_ENV_LEN] = _ENV_MAGIC + bytes(
                [_ENV_SCALAR if self._scalar else _ENV_ARRAY, 0]
            )
            view = memoryview(out)[_ENV_LEN:]
            raise_for_status(
                lib.fc_stream_save(self._s, ffi.from_buffer("unsigned char[]", view,
                                                            require_writable=True),
                                   size, sp),
                "save()",
            )
            return bytes(out)
        finally:
            self._lock.release()

    @classmethod
    def load(cls, data):
        """Rebuild a stream from :meth:`save` output.

        The loaded stream has ``horizon_policy='refuse'`` whatever the saved
        stream had (the policy is not part of the state); set
        :attr:`horizon_policy` to go on past the horizon. Its parameters
        (rule, order, step, tol, horizon, channels) are read from the C
        object once the C library has accepted the data.

        Raises
        ------
        InputTypeError
            data is not bytes-like.
        StateError
            data is truncated, corrupted, of another format or version.
        """
        if not isinstance(data, (bytes, bytearray, memoryview)):
            raise InputTypeError(
                f"data: expected bytes, got {type(data).__name__}"
            )
        b = bytes(data)
        if (len(b) < _ENV_LEN + _C_MIN_LEN or b[:6] != _ENV_MAGIC
                or b[6] not in (_ENV_SCALAR, _ENV_ARRAY) or b[7] != 0):
            raise StateError(
                f"data ({len(b)} bytes): not a saved pyfracconv stream "
                "(wrong magic or truncated)"
            )
        blob = memoryview(b)[_ENV_LEN:]
        pp = ffi.new("fc_stream **")
        st = lib.fc_stream_load(ffi.from_buffer("unsigned char[]", blob), len(blob), pp)
        if st:
            raise_for_status(st, f"data ({len(b)} bytes)")
        try:
            return cls._wrap(pp[0], b[6] == _ENV_SCALAR)
        except StateError as exc:
            raise StateError(f"data ({len(b)} bytes): {exc}") from None

    @classmethod
    def _unpickle(cls, data, horizon_policy):
        self = cls.load(data)
        self.horizon_policy = horizon_policy
        return self

    def __reduce__(self):
        # pickle and copy keep the horizon policy (load() alone does not)
        return (Stream._unpickle, (self.save(), self.horizon_policy))

    # ------------------------------------------------------- properties

    def _query(self, fn, ctype):
        if not self._lock.acquire(False):
            raise self._busy()
        try:
            return _get(fn, self._s, ctype)
        finally:
            self._lock.release()

    @property
    def count(self):
        """Samples pushed (per channel) since creation or the last reset."""
        return int(self._query(lib.fc_stream_count, "uint64_t *"))

    @property
    def nbytes(self):
        """Bytes of memory the C stream holds."""
        return int(self._query(lib.fc_stream_nbytes, "size_t *"))

    @property
    def terms(self):
        """Number of exponential terms (compressed mode); 0 in exact mode."""
        return int(self._query(lib.fc_stream_terms, "size_t *"))

    @property
    def remaining(self):
        """Samples (per channel) that can still be pushed under the promise:
        compressed mode floor(horizon) + 1 - count (0 once at or past the
        horizon); exact mode the samples the stream can still take."""
        return int(self._query(lib.fc_stream_remaining, "uint64_t *"))

    @property
    def past_horizon(self):
        """True once an output beyond the horizon has been produced (only
        possible with ``horizon_policy='continue'``); always False in exact
        mode. reset() clears it."""
        return bool(self._query(lib.fc_stream_past_horizon, "int *"))

    @property
    def horizon_policy(self):
        """'refuse' or 'continue': what a push past the horizon does (see
        :meth:`integral`). Settable; a loaded stream starts with 'refuse'."""
        return _POLICY_NAMES[int(self._query(lib.fc_stream_horizon_policy, "int *"))]

    @horizon_policy.setter
    def horizon_policy(self, policy):
        code = _check_policy(policy)
        if not self._lock.acquire(False):
            raise self._busy()
        try:
            raise_for_status(lib.fc_stream_set_horizon_policy(self._s, code),
                             f"horizon_policy={show(policy)}")
        finally:
            self._lock.release()

    @property
    def channels(self):
        """None (scalar stream) or the number of channels."""
        return None if self._scalar else self._C

    @property
    def mode(self):
        """'exact' or 'compressed'."""
        return self._mode

    @property
    def order(self):
        """The order (None for a kernel stream)."""
        return self._order

    @property
    def step(self):
        """The step (None for a kernel stream)."""
        return self._step

    @property
    def rule(self):
        """The rule name (None for a kernel stream)."""
        return self._rule

    @property
    def tol(self):
        """Tolerance (compressed mode), else None."""
        return self._tol

    @property
    def horizon(self):
        """Horizon (compressed mode), else None."""
        return self._horizon

    def __repr__(self):
        if self._kind == "kernel":
            what = "kernel"
        else:
            what = (f"rule={self._rule!r}, order={show(self._order)}, "
                    f"step={show(self._step)}")
        return (f"<pyfracconv.Stream {what}, channels={self.channels!r}, "
                f"mode={self._mode!r}>")
