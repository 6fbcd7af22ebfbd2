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

import numbers
import struct
import threading

import numpy as np

from ._errors import (
    ArgumentError,
    BusyError,
    InputTypeError,
    SampleError,
    StateError,
    raise_for_status,
)
from ._core import (
    DERIVATIVE_RULES,
    INTEGRAL_RULES,
    RULES,
    as_float_array,
    check_order,
    check_real,
    check_rule,
    check_step,
)
from ._fracconv import ffi, lib

__all__ = ["Stream"]

_RULE_NAMES = {v: k for k, v in RULES.items()}
_MODES = {"exact": lib.FC_MODE_EXACT, "compressed": lib.FC_MODE_COMPRESSED}
_MODE_NAMES = {v: k for k, v in _MODES.items()}

# Python envelope around the C state: magic, one byte telling whether the
# stream was made with channels=None (0x5A) or an explicit channel count
# (0xA5; the two differ in every bit), one zero byte; then the C bytes
# (magic "FCSTREAM", version, mode, checksum, ...; see csrc/stream.c).
_ENV_MAGIC = b"pyfcS1"
_ENV_SCALAR = 0x5A
_ENV_ARRAY = 0xA5
_ENV_LEN = 8
# The C header fields Python reads back (after the C library validated
# them): magic, version, mode, kind, rule, order, step, channels, tol,
# horizon.
_C_HEADER = struct.Struct("<8sIIIiddQdd")
_C_KIND_KERNEL = 1


# ------------------------------------------------------------- validation

def _check_channels(channels):
    if channels is None:
        return 1
    if isinstance(channels, (bool, np.bool_)) or not isinstance(
        channels, numbers.Integral
    ):
        raise InputTypeError(
            f"channels={channels!r}: expected None or an integer, "
            f"got {type(channels).__name__}"
        )
    c = int(channels)
    if c < 1:
        raise ArgumentError(f"channels={channels!r}: must be >= 1")
    return c


def _check_mode(mode):
    if not isinstance(mode, str) or mode not in _MODES:
        raise ArgumentError(
            f"mode={mode!r}: unknown; expected one of 'exact', 'compressed'"
        )
    return _MODES[mode]


def _check_tol(tol, horizon):
    t = check_real("tol", tol)
    hz = check_real("horizon", horizon)
    if not (1e-15 <= t <= 1e-2):
        raise ArgumentError(f"tol={tol!r}: must be in [1e-15, 1e-2]")
    if not (np.isfinite(hz) and hz >= 1.0):
        raise ArgumentError(f"horizon={horizon!r}: must be finite and >= 1")
    return t, hz


def _first_bad(a):
    bad = np.flatnonzero(~np.isfinite(a.ravel()))
    i = int(bad[0])
    return (np.unravel_index(i, a.shape) if a.ndim > 1 else (i,)), float(a.ravel()[i])


# ------------------------------------------------------------------ class

def _make_push1(stream, s, y1, lock):
    """push() of a one-channel scalar stream, with every lookup bound."""
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
        except TypeError:
            st = None
        finally:
            release()
        if st is None:
            stream._scalar_value("x", x)
        stream._raise_sample(st, "x", x)

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
    shape) leaves the stream exactly as it was.

    Compressed mode guarantee: for every n <= horizon,
    ``|y_n - y_n(exact)| <= tol * (sum_k |c_{n-k} u_k| + |corr_n x_0|)``
    plus rounding, where c is the rule's kernel, u the samples (their
    differences for ``l1``) and corr_n x_0 the trapezoid rule's starting
    term. The sum of exponentials behind it is checked against the rule's
    weights over the whole lag range when the stream is created (creation
    fails otherwise). Orders 0 < a < 1, and 1 <= a < 2 for the rectangle
    integral; memory and work per sample are constant.

    Notes
    -----
    Exact mode memory grows like O(n) (about 40 bytes per sample and channel
    plus shared kernel spectra; see ``bench/stream_memory.py``); work is
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
    def _wrap(cls, ptr, scalar, kind, rule, order, step, mode, tol, horizon):
        self = object.__new__(cls)
        self._s = ffi.gc(ptr, lib.fc_stream_free)
        cp = ffi.new("size_t *")
        lib.fc_stream_channels(self._s, cp)
        self._C = int(cp[0])
        self._scalar = bool(scalar)
        self._lock = threading.Lock()
        self._y1 = ffi.new("double[1]")
        self._x1 = ffi.new("double[1]")
        self._yarr = np.empty(self._C)
        self._yptr = ffi.from_buffer("double[]", self._yarr)
        self._kind = kind
        self._rule = rule
        self._order = order
        self._step = step
        self._mode = mode
        self._tol = tol
        self._horizon = horizon
        if self._scalar:
            # the hot path: a closure over prebuilt buffers (shadows the
            # documented method Stream.push on this instance)
            self.push = _make_push1(self, self._s, self._y1, self._lock)
        return self

    @classmethod
    def _create_rule(cls, rule, allowed, order, step, channels, mode, tol,
                     horizon):
        code = check_rule(rule, allowed)
        a = check_order(order, rule)
        h = check_step(step)
        C = _check_channels(channels)
        m = _check_mode(mode)
        if m == lib.FC_MODE_COMPRESSED:
            if a >= 2.0 or (a >= 1.0 and rule != "rectangle"):
                raise ArgumentError(
                    f"order={order!r}: mode='compressed' supports orders "
                    "0 < order < 1, and 1 <= order < 2 for the integral with "
                    "rule='rectangle' (use mode='exact' for higher orders)"
                )
            t, hz = _check_tol(tol, horizon)
        else:
            t, hz = 0.0, 0.0
        pp = ffi.new("fc_stream **")
        st = lib.fc_stream_create(code, a, h, C, m, t, hz, pp)
        if st:
            raise_for_status(
                st,
                f"Stream(rule={rule!r}, order={order!r}, step={step!r}, "
                f"channels={channels!r}, mode={mode!r}"
                + (f", tol={tol!r}, horizon={horizon!r})" if m else ")"),
            )
        return cls._wrap(pp[0], channels is None, "rule", rule, a, h, mode,
                         t if m else None, hz if m else None)

    @classmethod
    def integral(cls, order, step, rule="rectangle", channels=None,
                 mode="exact", tol=1e-12, horizon=1e9):
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
            Compressed mode only: relative tolerance in [1e-15, 1e-2] and the
            number of samples it is guaranteed for.

        Returns
        -------
        Stream
        """
        return cls._create_rule(rule, INTEGRAL_RULES, order, step, channels,
                                mode, tol, horizon)

    @classmethod
    def derivative(cls, order, step, rule="grunwald", channels=None,
                   mode="exact", tol=1e-12, horizon=1e9):
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
        channels, mode, tol, horizon
            As for :meth:`integral`.

        Returns
        -------
        Stream
        """
        return cls._create_rule(rule, DERIVATIVE_RULES, order, step, channels,
                                mode, tol, horizon)

    @classmethod
    def from_kernel(cls, kernel, channels=None):
        """An exact stream of y_n = sum_{k<=n} kernel[n-k] x_k.

        Parameters
        ----------
        kernel : array_like, 1-D
            At least one finite value; kernel[m] = 0 for m >= len(kernel).
            Copied.
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
            raise ArgumentError(f"kernel[{i}]={v!r}: must be finite")
        C = _check_channels(channels)
        pp = ffi.new("fc_stream **")
        st = lib.fc_stream_create_kernel(ffi.from_buffer("double[]", k), k.size,
                                         C, pp)
        if st:
            raise_for_status(st, f"Stream.from_kernel(len(kernel)={k.size}, "
                                 f"channels={channels!r})")
        return cls._wrap(pp[0], channels is None, "kernel", None, None, None,
                         "exact", None, None)

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

    def _scalar_value(self, name, x):
        """Reject what cffi refused as a double: shape or type problem."""
        if isinstance(x, (np.ndarray, list, tuple)):
            a = np.asarray(x)
            if a.dtype.kind in "biuf":
                raise ArgumentError(
                    f"{name}: expected a scalar (channels=None), got shape {a.shape}"
                )
        raise InputTypeError(
            f"{name}={x!r}: expected a real number, got {type(x).__name__}"
        )

    def _raise_sample(self, st, name, x):
        if st == lib.FC_ERR_NONFINITE:
            try:
                shown = repr(float(x))
            except (TypeError, ValueError):
                shown = repr(x)
            raise SampleError(f"{name}={shown}: sample is NaN or infinite; "
                              "the stream is unchanged")
        raise_for_status(st, name)

    # ---------------------------------------------------------- streaming

    def push(self, x):
        """Push one time step; return the output at this time step.

        Parameters
        ----------
        x : float or array_like of shape (channels,)

        Returns
        -------
        float or ndarray of shape (channels,)
        """
        if not self._lock.acquire(False):
            raise self._busy()
        try:
            if self._scalar:
                try:
                    st = lib.fc_stream_push1(self._s, x, self._y1)
                except TypeError:
                    self._scalar_value("x", x)
                if st:
                    self._raise_sample(st, "x", x)
                return self._y1[0]
            a = self._sample_vector("x", x)
            st = lib.fc_stream_push(self._s, ffi.from_buffer("double[]", a),
                                    self._yptr)
            if st:
                if st == lib.FC_ERR_NONFINITE:
                    (i,), v = _first_bad(a)
                    raise SampleError(f"x[{i}]={v!r}: sample is NaN or infinite; "
                                      "the stream is unchanged")
                raise_for_status(st, "x")
            return self._yarr.copy()
        finally:
            self._lock.release()

    def push_many(self, xs):
        """Push a block of time steps; return the outputs.

        Parameters
        ----------
        xs : array_like of shape (T,) (channels=None) or (T, channels)

        Returns
        -------
        ndarray of the same shape: element t is what push(xs[t]) would have
        returned. A block with any non-finite sample pushes nothing.
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
                        f"xs[{where}]={v!r}: sample is NaN or infinite; "
                        "nothing was pushed"
                    )
                raise_for_status(st, f"xs (shape {a.shape})")
            return y
        finally:
            self._lock.release()

    def preview(self, x):
        """What push(x) would return, bit for bit, without pushing x."""
        if not self._lock.acquire(False):
            raise self._busy()
        try:
            if self._scalar:
                try:
                    self._x1[0] = x
                except TypeError:
                    self._scalar_value("x", x)
                st = lib.fc_stream_preview(self._s, self._x1, self._y1)
                if st:
                    self._raise_sample(st, "x", x)
                return self._y1[0]
            a = self._sample_vector("x", x)
            st = lib.fc_stream_preview(self._s, ffi.from_buffer("double[]", a),
                                       self._yptr)
            if st:
                if st == lib.FC_ERR_NONFINITE:
                    (i,), v = _first_bad(a)
                    raise SampleError(f"x[{i}]={v!r}: sample is NaN or infinite")
                raise_for_status(st, "x")
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
        """
        if not self._lock.acquire(False):
            raise self._busy()
        try:
            st = lib.fc_stream_history(self._s, self._yptr)
            if st:
                raise_for_status(st, "history()")
            return float(self._yarr[0]) if self._scalar else self._yarr.copy()
        finally:
            self._lock.release()

    def reset(self):
        """Forget every sample (the kernel and reserved memory are kept)."""
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
                f"n={n!r}: expected an integer, got {type(n).__name__}"
            )
        if n < 0 or n >= 2**64:
            raise ArgumentError(f"n={n!r}: must be >= 0")
        if not self._lock.acquire(False):
            raise self._busy()
        try:
            raise_for_status(lib.fc_stream_reserve(self._s, int(n)), f"n={n!r}")
        finally:
            self._lock.release()

    # ------------------------------------------------------------ state

    def save(self):
        """The state as bytes (a versioned, checksummed, little-endian
        format; not pickle). :meth:`load` resumes bit for bit."""
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
        if (len(b) < _ENV_LEN + _C_HEADER.size or b[:6] != _ENV_MAGIC
                or b[6] not in (_ENV_SCALAR, _ENV_ARRAY) or b[7] != 0):
            raise StateError(
                f"data ({len(b)} bytes): not a saved pyfracconv stream "
                "(wrong magic or truncated)"
            )
        scalar = b[6] == _ENV_SCALAR
        blob = memoryview(b)[_ENV_LEN:]
        pp = ffi.new("fc_stream **")
        st = lib.fc_stream_load(ffi.from_buffer("unsigned char[]", blob), len(blob), pp)
        if st:
            raise_for_status(st, f"data ({len(b)} bytes)")
        ptr = pp[0]
        (_, _, mode, kind, rule, order, step, channels, tol,
         horizon) = _C_HEADER.unpack_from(blob, 0)
        if scalar and channels != 1:
            lib.fc_stream_free(ptr)
            raise StateError(
                f"data ({len(b)} bytes): inconsistent channel count {channels}"
            )
        mname = _MODE_NAMES[mode]
        if kind == _C_KIND_KERNEL:
            return cls._wrap(ptr, scalar, "kernel", None, None, None, mname,
                             None, None)
        comp = mode == lib.FC_MODE_COMPRESSED
        return cls._wrap(ptr, scalar, "rule", _RULE_NAMES[rule], order, step,
                         mname, tol if comp else None, horizon if comp else None)

    def __reduce__(self):
        return (Stream.load, (self.save(),))

    # ------------------------------------------------------- properties

    def _query(self, fn, ctype, what):
        if not self._lock.acquire(False):
            raise self._busy()
        try:
            p = ffi.new(ctype)
            raise_for_status(fn(self._s, p), what)
            return int(p[0])
        finally:
            self._lock.release()

    @property
    def count(self):
        """Samples pushed (per channel) since creation or the last reset."""
        return self._query(lib.fc_stream_count, "uint64_t *", "count")

    @property
    def nbytes(self):
        """Bytes of memory the C stream holds."""
        return self._query(lib.fc_stream_nbytes, "size_t *", "nbytes")

    @property
    def terms(self):
        """Number of exponential terms (compressed mode); 0 in exact mode."""
        return self._query(lib.fc_stream_terms, "size_t *", "terms")

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
            what = f"rule={self._rule!r}, order={self._order!r}, step={self._step!r}"
        return (f"<pyfracconv.Stream {what}, channels={self.channels!r}, "
                f"mode={self._mode!r}>")
