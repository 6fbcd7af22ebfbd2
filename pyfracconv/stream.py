"""Streams: fractional integrals and derivatives one sample at a time.

A :class:`Stream` returns, for every sample pushed, the value the batch
functions (:func:`pyfracconv.integral`, :func:`pyfracconv.derivative`,
:func:`pyfracconv.lagged_sum`) give at that index on the same samples. In
``mode="exact"`` (the default) the whole history is kept and the result is
the exact lagged sum to rounding, at amortised O(log^2 n) work per sample
(an online dyadic split of the Toeplitz matrix, see ``csrc/stream_exact.c``); in
``mode="compressed"`` memory and work per sample are bounded and the result
is within a stated tolerance over a stated horizon.
"""

from __future__ import annotations

import math
import numbers
import os
from typing import Any, Callable, Optional, Union, cast

import numpy as np
from numpy.typing import ArrayLike, NDArray

from ._checks import (
    DERIVATIVE_RULES,
    INTEGRAL_RULES,
    MODES,
    POLICIES,
    RULES,
    as_float_array,
    check_axis,
    check_workers,
    check_channels,
    check_compressed,
    check_mode,
    check_order,
    check_policy,
    check_rule,
    check_step,
    is_masked,
    show,
)
from ._errors import (
    ArgumentError,
    BusyError,
    FracconvError,
    HorizonError,
    InputTypeError,
    RangeError,
    SampleError,
    StateError,
    raise_for_status,
    status_error,
)
from ._files import (
    DEFAULT_MAX_SIZE,
    check_max_size,
    check_path,
    check_write_path,
    read_file,
    state_error,
    write_file,
)
from ._fracconv import ffi, lib

__all__ = ["Stream"]

FloatArray = NDArray[np.float64]
#: What a push, preview or history returns: a float for a scalar stream
#: (channels=None), an array of shape (channels,) otherwise.
Output = Union[float, FloatArray]

_RULE_NAMES = {v: k for k, v in RULES.items()}
_MODE_NAMES = {v: k for k, v in MODES.items()}
_POLICY_NAMES = {v: k for k, v in POLICIES.items()}

# Python envelope around the C state: magic, one byte telling whether the
# stream was made with channels=None (0x5A) or an explicit channel count
# (0xA5; the two differ in every bit), one zero byte; then the C bytes
# (magic "FCSTREAM", version, mode, checksum, ...; see csrc/stream.c).
# Python reads nothing else from the bytes: every parameter of a loaded
# stream comes from the C object once the C loader has accepted the data.
_ENV_MAGIC = b"pyfcS1"
_ENV_SCALAR = 0x5A
_ENV_ARRAY = 0xA5


def _save_stream(s: Any, scalar: bool, magic: bytes) -> bytes:
    """fc_stream_save's bytes behind the Python envelope (magic, the
    scalar/array flag, 0); the caller holds the stream's busy guard."""
    sp = ffi.new("size_t *")
    raise_for_status(lib.fc_stream_save_size(s, sp), "save()")
    size = int(sp[0])
    out = bytearray(_ENV_LEN + size)
    out[:_ENV_LEN] = magic + bytes([_ENV_SCALAR if scalar else _ENV_ARRAY, 0])
    view = memoryview(out)[_ENV_LEN:]
    raise_for_status(
        lib.fc_stream_save(s, ffi.from_buffer("unsigned char[]", view, require_writable=True), size, sp),
        "save()",
    )
    return bytes(out)


def _load_stream_file(cls: Any, path: Any, max_size: int, magic: bytes) -> Any:
    """cls.load of a checkpoint file (Stream, TimedStream): at most max_size
    bytes read; a file the C library wrote (fc_stream_save_file, no
    Python envelope) gets the envelope ``magic`` of an array stream."""
    p = check_path("path", path)
    data = read_file("load_file", p, check_max_size(max_size))
    if data[:8] == b"FCSTREAM":  # written by fc_stream_save_file
        data = magic + bytes([_ENV_ARRAY, 0]) + data
    try:
        return cls.load(data)
    except StateError as exc:
        raise state_error("load_file", p, exc) from None


_ENV_LEN = 8
# The C state starts with its own 8-byte magic: shorter data is refused
# before it reaches the C loader.
_C_MIN_LEN = 8


# ------------------------------------------------------------- helpers


def _get(fn: Any, s: Any, ctype: str) -> Any:
    p = ffi.new(ctype)
    raise_for_status(fn(s, p), fn.__name__)
    return p[0]


def _horizon_error(s: Any, what: str, pushing: int = 1) -> HorizonError:
    """HorizonError for a call on the C stream ``s`` that would produce
    ``pushing`` outputs past the horizon; ``what`` names the argument."""
    horizon = _get(lib.fc_stream_horizon, s, "double *")
    count = int(_get(lib.fc_stream_count, s, "uint64_t *"))
    left = int(_get(lib.fc_stream_remaining, s, "uint64_t *"))
    last = int(math.floor(horizon))
    asked = (
        f"{pushing} time steps asked for, {left} left"
        if pushing != 1
        else f"{count} samples pushed, none left"
    )
    return HorizonError(
        f"{what}: past the horizon (horizon={horizon:g}: outputs 0 .. {last} "
        f"are within tol; {asked}); the stream is unchanged. Create the "
        "stream with horizon_policy='continue' (or set "
        "stream.horizon_policy = 'continue') to go on without the promise"
    )


def _scalar_error(name: str, x: Any) -> FracconvError:
    """The exception for a scalar that cffi refused as a double."""
    if not isinstance(x, (bool, np.bool_)) and isinstance(x, numbers.Real):
        try:
            float(x)
        except OverflowError:  # 10**400, Fraction(10**400), ...
            return SampleError(
                f"{name}={show(x)}: beyond the range of a double (samples must "
                "be finite); the stream is unchanged"
            )
    if is_masked(x):
        return InputTypeError(f"{name}: masked arrays are not accepted (the mask would be ignored)")
    if isinstance(x, (np.ndarray, list, tuple)):
        a = np.asarray(x)
        if a.dtype.kind in "biuf":
            return ArgumentError(f"{name}: expected a scalar (channels=None), got shape {a.shape}")
    return InputTypeError(f"{name}={show(x)}: expected a real number, got {type(x).__name__}")


def _scalar_push_error(s: Any, st: Optional[int], name: str, x: Any) -> FracconvError:
    """The exception for a scalar push or preview of ``x`` on the C stream
    ``s`` that returned status ``st`` (None: cffi refused x)."""
    if st is None:
        return _scalar_error(name, x)
    if st == lib.FC_ERR_NONFINITE and is_masked(x):  # np.ma.masked converts to nan
        return InputTypeError(
            f"{name}=masked: masked values are not accepted (the mask would "
            "be ignored); the stream is unchanged"
        )
    if st == lib.FC_ERR_HORIZON:
        return _horizon_error(s, f"{name}={show(x)}")
    if st == lib.FC_ERR_RANGE:
        return RangeError(
            f"{name}={show(x)}: the output would be beyond the double range; the stream is unchanged"
        )
    return status_error(st, name, samples=(name, x), after="the stream is unchanged")


class _Guard:
    """The busy guard of one Stream: a non-blocking lock built on a
    one-element list. ``list.pop`` and ``list.append`` are single calls into
    C, atomic under the GIL (and locked per object in free-threaded builds),
    so exactly one thread at a time can take the token; a thread that finds
    none is refused at once (BusyError), never blocked. It costs a fraction
    of ``threading.Lock().acquire(False)`` + ``release()`` on the scalar push
    path (``bench/push_cost.py``). The C library keeps its own busy flag
    underneath (fc_stream_*: FC_ERR_BUSY)."""

    __slots__ = ("take", "give")

    def __init__(self) -> None:
        token: list[bool] = [True]
        self.take = token.pop  # raises IndexError when the stream is busy
        self.give = token.append  # give(True) after every successful take()

    def acquire(self, blocking: bool = False) -> bool:
        """Take the guard if it is free (never waits): True if taken."""
        if blocking:
            raise ValueError("the stream guard never blocks")
        try:
            self.take()
        except IndexError:
            return False
        return True

    def release(self) -> None:
        self.give(True)


def _make_push1(s: Any, guard: _Guard) -> Callable[[float], float]:
    """push() of a one-channel scalar stream, with every lookup bound.

    The closure holds the C stream, a status cell and the guard, never the
    Stream itself: a Stream must not be part of a reference cycle, so that
    ``del stream`` frees the C object at once.

    Where the time goes (``bench/push_cost.py``): the Python call of push,
    the cffi call and the C work. fc_stream_push1_value returns the output
    itself (NaN only on a refusal, whose status it writes to the cell), so
    that no output buffer is read; the guard is two C-level list calls."""
    take = guard.take
    give = guard.give
    push1 = lib.fc_stream_push1_value
    cell = ffi.new("int[1]")

    def push(x: float) -> float:
        try:
            take()
        except IndexError:
            raise BusyError("this stream is being used by another thread") from None
        try:
            y = push1(s, x, cell)
            if y == y:
                return y  # type: ignore[no-any-return]
            st = cell[0]
            cell[0] = 0
        except (TypeError, OverflowError):
            st = None
        finally:
            give(True)
        if st == 0:  # not a refusal (the C library returns no NaN output)
            return y  # type: ignore[no-any-return]
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

    Time axis: the batch functions take time along ``axis=-1`` (the last
    axis) by default; :meth:`push_many` takes time along ``axis=0`` by
    default (one row per time step, ``(T, channels)``), and both accept any
    axis through their ``axis`` argument, returning the outputs in the
    layout of the input.

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
    and trapezoid integrals; memory and work per sample are constant.

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

    See Also
    --------
    pyfracconv.integral, pyfracconv.derivative, pyfracconv.lagged_sum :
        the batch functions a stream agrees with.

    Examples
    --------
    I^a 1 = t^a / Gamma(a+1) (Podlubny 1999); the rectangle rule gives it
    exactly on a constant, h^a n^a / Gamma(a+1) at t_n (common practice).
    With a = 0.5 and h = 0.25 that is 2 sqrt(t_n / pi):

    >>> import numpy as np
    >>> import pyfracconv
    >>> s = pyfracconv.Stream.integral(0.5, 0.25)
    >>> y = [s.push(1.0) for _ in range(5)]
    >>> bool(np.allclose(y, 2 * np.sqrt(0.25 * np.arange(5) / np.pi), rtol=1e-14))
    True

    Two channels, time along axis 0 (the default) or along axis 1:

    >>> d = pyfracconv.Stream.derivative(1.0, 0.5, channels=2)
    >>> d.push_many([[0.0, 1.0], [1.0, 1.0], [4.0, 1.0]])   # (x_n - x_{n-1}) / h
    array([[0., 2.],
           [2., 0.],
           [6., 0.]])
    >>> d.reset()
    >>> d.push_many([[0.0, 1.0, 4.0], [1.0, 1.0, 1.0]], axis=1)
    array([[0., 2., 6.],
           [2., 0., 0.]])
    """

    # set by _wrap (object.__new__ bypasses __init__)
    _s: Any
    _C: int
    _scalar: bool
    _mode: str
    _compressed: bool
    _kind: str
    _rule: Optional[str]
    _order: Optional[float]
    _step: Optional[float]
    _tol: Optional[float]
    _horizon: Optional[float]
    _lock: _Guard
    _y1: Any
    _x1: Any
    _yarr: FloatArray
    _yptr: Any

    def __init__(self, *args: object, **kwargs: object) -> None:
        raise TypeError(
            "use Stream.integral(), Stream.derivative(), Stream.from_kernel() "
            "or Stream.load() to create a stream"
        )

    # ------------------------------------------------------- construction

    @classmethod
    def _wrap(cls, ptr: Any, scalar: bool) -> Stream:
        """A Stream around the C stream ``ptr`` (owned from now on: freed if
        this raises). Every parameter is read from the C object."""
        self = object.__new__(cls)
        self._s = s = ffi.gc(ptr, lib.fc_stream_free)
        C = int(_get(lib.fc_stream_channels, s, "size_t *"))
        if scalar and C != 1:
            raise StateError(f"the envelope says channels=None but the state holds {C} channels")
        mode = int(_get(lib.fc_stream_mode, s, "int *"))
        rule = int(_get(lib.fc_stream_rule, s, "int *"))
        if int(_get(lib.fc_stream_is_timed, s, "int *")):
            raise StateError("a stream with a time per sample: load it with TimedStream.load")
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
        self._lock = _Guard()
        self._y1 = ffi.new("double[1]")
        self._x1 = ffi.new("double[1]")
        self._yarr = np.empty(C)
        self._yptr = ffi.from_buffer("double[]", self._yarr)
        if self._scalar:
            # the hot path: a closure over prebuilt buffers (shadows the
            # documented method Stream.push on this instance); it does not
            # refer to self, so a Stream is never part of a reference cycle
            self.push = _make_push1(s, self._lock)  # type: ignore[method-assign, assignment]
        return self

    @classmethod
    def _create_rule(
        cls,
        rule: object,
        allowed: tuple[str, ...],
        order: object,
        step: object,
        channels: object,
        mode: object,
        tol: object,
        horizon: object,
        horizon_policy: object,
    ) -> Stream:
        code = check_rule(rule, allowed)
        m = check_mode(mode)
        a = check_order(order, rule, m)
        h = check_step(step)
        C = check_channels(channels)
        pol = check_policy(horizon_policy)
        if m == lib.FC_MODE_COMPRESSED:
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
                    f"step={show(step)} (or order={show(order)}): the kernel is beyond the double range"
                )
            raise_for_status(
                st,
                f"Stream(rule={show(rule)}, order={show(order)}, "
                f"step={show(step)}, channels={show(channels)}, mode={show(mode)}"
                + (f", tol={show(tol)}, horizon={show(horizon)})" if comp else ")"),
            )
        self = cls._wrap(pp[0], channels is None)
        raise_for_status(
            lib.fc_stream_set_horizon_policy(self._s, pol), f"horizon_policy={show(horizon_policy)}"
        )
        return self

    @classmethod
    def integral(
        cls,
        order: float,
        step: float,
        rule: str = "rectangle",
        channels: Optional[int] = None,
        mode: str = "exact",
        tol: float = 1e-12,
        horizon: float = 1e9,
        horizon_policy: str = "refuse",
    ) -> Stream:
        """A stream of the Riemann-Liouville integral of order ``order``.

        Parameters
        ----------
        order : float
            Order a > 0 (at most 10; ``mode="compressed"`` needs a < 1, or
            a < 2 for the integral rules).
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

        Raises
        ------
        ArgumentError
            Unknown or derivative rule, order or step out of range, bad
            channels, mode, tol, horizon or horizon_policy, or an order
            compressed mode cannot serve.
        InputTypeError
            order, step, tol or horizon not a real number, channels not an
            integer.
        RangeError
            The kernel is beyond the double range (step or order too large;
            exact mode, rules other than L1: also orders below about
            1e-297, which the batch functions take).
        OutOfMemory
            The stream cannot be allocated.

        See Also
        --------
        pyfracconv.integral : the batch integral the outputs agree with.
        derivative, from_kernel, load : the other ways to make a stream.

        Examples
        --------
        At order 1 the rectangle rule is the left rectangle sum
        h (x_0 + ... + x_{n-1}) (common practice):

        >>> import numpy as np
        >>> import pyfracconv
        >>> s = pyfracconv.Stream.integral(1.0, 0.5)
        >>> [s.push(x) for x in (1.0, 2.0, 3.0, 4.0)]
        [0.0, 0.5, 1.5, 3.0]

        A compressed stream stays within its tolerance of the exact result:
        on a constant, h^a n^a / Gamma(a+1) (common practice; Diethelm,
        Ford and Freed 2004), here 2 sqrt(t_n / pi):

        >>> c = pyfracconv.Stream.integral(0.5, 0.01, mode="compressed",
        ...                                tol=1e-10, horizon=1000)
        >>> y = c.push_many(np.ones(1001))
        >>> exact = 2 * np.sqrt(0.01 * np.arange(1001) / np.pi)
        >>> bool(np.all(np.abs(y - exact) <= 1e-9 * exact))
        True
        """
        return cls._create_rule(
            rule, INTEGRAL_RULES, order, step, channels, mode, tol, horizon, horizon_policy
        )

    @classmethod
    def derivative(
        cls,
        order: float,
        step: float,
        rule: str = "grunwald",
        channels: Optional[int] = None,
        mode: str = "exact",
        tol: float = 1e-12,
        horizon: float = 1e9,
        horizon_policy: str = "refuse",
    ) -> Stream:
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

        Raises
        ------
        ArgumentError, InputTypeError, RangeError, OutOfMemory
            As for :meth:`integral` (the rule must be a derivative rule).

        See Also
        --------
        pyfracconv.derivative : the batch derivative the outputs agree with.
        integral, from_kernel, load : the other ways to make a stream.

        Examples
        --------
        At order 1 Grunwald-Letnikov is the backward difference quotient
        (x_n - x_{n-1}) / h (common practice):

        >>> import numpy as np
        >>> import pyfracconv
        >>> d = pyfracconv.Stream.derivative(1.0, 0.5)
        >>> [d.push(x) for x in (0.0, 1.0, 4.0, 9.0)]
        [0.0, 2.0, 6.0, 10.0]

        The L1 scheme is exact on linear f (Lin and Xu 2007): the Caputo
        derivative of t at order 0.5 is 2 sqrt(t / pi) (Diethelm 2010):

        >>> c = pyfracconv.Stream.derivative(0.5, 0.25, rule="l1")
        >>> t = 0.25 * np.arange(5)
        >>> y = [c.push(float(tk)) for tk in t]
        >>> bool(np.allclose(y, 2 * np.sqrt(t / np.pi), rtol=1e-13))
        True
        """
        return cls._create_rule(
            rule, DERIVATIVE_RULES, order, step, channels, mode, tol, horizon, horizon_policy
        )

    @classmethod
    def from_kernel(cls, kernel: ArrayLike, channels: Optional[int] = None) -> Stream:
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

        Raises
        ------
        ArgumentError
            kernel empty, not 1-D or not finite; bad channels.
        InputTypeError
            kernel not numeric or masked, channels not an integer.
        OutOfMemory
            The stream cannot be allocated.

        See Also
        --------
        pyfracconv.lagged_sum : the batch sum the outputs agree with.
        pyfracconv.weights : the kernels of the four rules.

        Examples
        --------
        A three-tap moving sum (the causal part of a discrete convolution,
        common practice):

        >>> import pyfracconv
        >>> s = pyfracconv.Stream.from_kernel([1.0, 1.0, 1.0])
        >>> [s.push(x) for x in (1.0, 2.0, 3.0, 4.0)]
        [1.0, 3.0, 6.0, 9.0]
        """
        k = as_float_array("kernel", kernel)
        if k.ndim != 1 or k.size == 0:
            raise ArgumentError(f"kernel: expected a non-empty 1-D array, got shape {k.shape}")
        if not np.all(np.isfinite(k)):
            i = int(np.flatnonzero(~np.isfinite(k))[0])
            raise ArgumentError(f"kernel[{i}]={show(k[i])}: must be finite")
        C = check_channels(channels)
        pp = ffi.new("fc_stream **")
        st = lib.fc_stream_create_kernel(ffi.from_buffer("double[]", k), k.size, C, pp)
        if st:
            raise_for_status(st, f"Stream.from_kernel(len(kernel)={k.size}, channels={show(channels)})")
        return cls._wrap(pp[0], channels is None)

    # ------------------------------------------------------------ helpers

    def _busy(self) -> BusyError:
        return BusyError("this stream is being used by another thread")

    def _sample_vector(self, name: str, x: object) -> FloatArray:
        a = as_float_array(name, x)
        if a.shape != (self._C,):
            raise ArgumentError(f"{name}: expected shape ({self._C},), got {a.shape}")
        return a

    def _vector_error(
        self, st: int, name: str, a: FloatArray, what: str = "the stream is unchanged"
    ) -> FracconvError:
        """The exception for a push or preview of the vector ``a``."""
        if st == lib.FC_ERR_HORIZON:
            return _horizon_error(self._s, name)
        if st == lib.FC_ERR_RANGE:
            return RangeError(f"{name}: an output would be beyond the double range; {what}")
        return status_error(st, name, samples=(name, a), after=what)

    def _refuse_past_horizon(self, name: str) -> None:
        """HorizonError if the next output would pass the horizon of a
        compressed stream that refuses it (preview and history)."""
        if (
            self._compressed
            and _get(lib.fc_stream_horizon_policy, self._s, "int *") == lib.FC_HORIZON_REFUSE
            and _get(lib.fc_stream_remaining, self._s, "uint64_t *") == 0
        ):
            raise _horizon_error(self._s, name)

    def _output(self) -> Output:
        return float(self._yarr[0]) if self._scalar else self._yarr.copy()

    # ---------------------------------------------------------- streaming

    def push(self, x: ArrayLike) -> Output:
        """Push one time step; return the output at this time step.

        Parameters
        ----------
        x : float or array_like of shape (channels,)
            Finite samples (masked arrays are refused).

        Returns
        -------
        float or ndarray of shape (channels,)
            A float for a scalar stream (``channels=None``).

        Raises
        ------
        SampleError
            A sample is NaN or infinite (or beyond the double range):
            nothing is pushed.
        ArgumentError
            Wrong shape: nothing is pushed.
        InputTypeError
            Not numeric, or masked.
        RangeError
            The output would be beyond the double range: nothing is pushed.
        HorizonError
            Compressed stream with ``horizon_policy='refuse'`` at its
            horizon: nothing is pushed.
        BusyError
            Another thread is using the stream.

        See Also
        --------
        push_many : many time steps at once.
        preview : what push would return, without pushing.

        Examples
        --------
        >>> import pyfracconv
        >>> s = pyfracconv.Stream.derivative(1.0, 0.5)   # (x_n - x_{n-1}) / h
        >>> s.push(3.0), s.push(4.0)
        (6.0, 2.0)
        >>> v = pyfracconv.Stream.derivative(1.0, 0.5, channels=2)
        >>> v.push([3.0, 1.0])
        array([6., 2.])
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
                return float(self._y1[0])
            a = self._sample_vector("x", x)
            st = lib.fc_stream_push(self._s, ffi.from_buffer("double[]", a), self._yptr)
            if st:
                raise self._vector_error(st, "x", a)
            return self._yarr.copy()
        finally:
            self._lock.release()

    def _block_layout(self, a: FloatArray, axis: object) -> tuple[int, int]:
        """(time axis, T) of a block for push_many, or ArgumentError."""
        if self._scalar:
            if a.ndim != 1:
                raise ArgumentError(f"xs: expected shape (T,), got {a.shape}")
            ax = check_axis(axis, 1)
            return ax, a.shape[0]
        if a.ndim != 2:
            raise ArgumentError(f"xs: expected shape (T, {self._C}), got {a.shape}")
        ax = check_axis(axis, 2)
        if a.shape[1 - ax] != self._C:
            want = f"(T, {self._C})" if ax == 0 else f"({self._C}, T) (time along axis={show(axis)})"
            raise ArgumentError(f"xs: expected shape {want}, got {a.shape}")
        return ax, a.shape[ax]

    def push_many(self, xs: ArrayLike, axis: int = 0, *, workers: Optional[int] = None) -> FloatArray:
        """Push a block of time steps; return the outputs.

        Parameters
        ----------
        xs : array_like of shape (T,) (channels=None) or (T, channels)
            Finite samples (masked arrays are refused); with ``axis=1``,
            shape (channels, T).
        axis : int, optional
            The axis of time in ``xs``: 0 (the default, one row per time
            step) or, for a stream with channels, 1 (one row per channel);
            negative values count from the end. The batch functions'
            default is the last axis; pass ``axis=-1`` to use the same
            layout here.
        workers : int, optional (keyword)
            Threads to share the channels, SciPy's convention (None or 1:
            the calling thread; -1 every CPU, -2 all but one; 0 refused);
            see :func:`pyfracconv.integral`. A compressed stream with
            channels splits them over the threads (blocks of about 4096
            values or more); an exact stream with channels shares the
            channels of its large FFT frames (512 samples or more, times
            the channels at least 2**14) over the threads, the rest of a
            step staying on the calling thread, and keeps each extra
            thread's FFT plans (counted in ``nbytes``, not saved). The
            outputs and the state are the same, bit for bit, for every
            value. The GIL is released during the C call.

        Returns
        -------
        ndarray
            float64, of the shape (and layout) of ``xs``: the outputs for
            time step t are where the samples of time step t were, what
            push(sample t) would have returned.

        Raises
        ------
        SampleError
            A sample is NaN or infinite: nothing is pushed (the message
            names the first one, indexed as in ``xs``).
        ArgumentError
            Wrong shape, axis out of range, or workers 0 or below
            -os.cpu_count(): nothing is pushed.
        InputTypeError
            Not numeric, or masked; axis or workers not an integer.
        RangeError
            An output would be beyond the double range: nothing is pushed.
        HorizonError
            The block would pass the horizon of a compressed stream with
            ``horizon_policy='refuse'``: nothing is pushed.
        BusyError
            Another thread is using the stream.

        See Also
        --------
        push : one time step.
        pyfracconv.integral, pyfracconv.derivative : the batch functions
            (time along ``axis=-1``).

        Examples
        --------
        At order 1 the rectangle rule is the left rectangle sum (common
        practice):

        >>> import numpy as np
        >>> import pyfracconv
        >>> s = pyfracconv.Stream.integral(1.0, 0.5)
        >>> s.push_many([1.0, 2.0, 3.0, 4.0])
        array([0. , 0.5, 1.5, 3. ])

        Blocks continue where the last push left off:

        >>> s.push_many([5.0])
        array([5.])

        Channels along axis 1, or time along axis 1 (one row per channel):

        >>> v = pyfracconv.Stream.integral(1.0, 0.5, channels=2)
        >>> v.push_many([[1.0, 10.0], [2.0, 20.0], [3.0, 30.0]])
        array([[ 0. ,  0. ],
               [ 0.5,  5. ],
               [ 1.5, 15. ]])
        >>> v.reset()
        >>> v.push_many([[1.0, 2.0, 3.0], [10.0, 20.0, 30.0]], axis=1)
        array([[ 0. ,  0.5,  1.5],
               [ 0. ,  5. , 15. ]])
        """
        nthreads = check_workers(workers)
        if not self._lock.acquire(False):
            raise self._busy()
        try:
            a = as_float_array("xs", xs)
            ax, T = self._block_layout(a, axis)
            # the C engine takes time along axis 0, row-major
            block = a if ax == 0 else np.ascontiguousarray(a.T)
            y = np.empty(block.shape)
            if a.size == 0:
                return y if ax == 0 else y.T
            st = lib.fc_stream_push_block_threads(
                self._s, ffi.from_buffer("double[]", block), T, ffi.from_buffer("double[]", y), nthreads
            )
            if st:
                if st == lib.FC_ERR_HORIZON:
                    raise _horizon_error(self._s, f"xs (shape {a.shape})", T)
                if st == lib.FC_ERR_RANGE:
                    raise RangeError(
                        f"xs (shape {a.shape}): an output would be beyond the "
                        "double range; nothing was pushed"
                    )
                raise_for_status(st, f"xs (shape {a.shape})", samples=("xs", a), after="nothing was pushed")
            return y if ax == 0 else y.T
        finally:
            self._lock.release()

    def preview(self, x: ArrayLike) -> Output:
        """What push(x) would return, bit for bit, without pushing x.

        Parameters
        ----------
        x : float or array_like of shape (channels,)
            Finite samples (masked arrays are refused).

        Returns
        -------
        float or ndarray of shape (channels,)
            The output push(x) would return; the stream is unchanged.

        Raises
        ------
        SampleError, ArgumentError, InputTypeError, RangeError, BusyError
            As for :meth:`push`.
        HorizonError
            Where push(x) would raise it.

        See Also
        --------
        push, history

        Examples
        --------
        >>> import pyfracconv
        >>> s = pyfracconv.Stream.derivative(1.0, 0.5)   # (x_n - x_{n-1}) / h
        >>> s.push(3.0)
        6.0
        >>> s.preview(4.0), s.count
        (2.0, 1)
        >>> s.preview(4.0) == s.push(4.0)
        True
        """
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
                return float(self._y1[0])
            a = self._sample_vector("x", x)
            if np.all(np.isfinite(a)):
                self._refuse_past_horizon("x")
            st = lib.fc_stream_preview(self._s, ffi.from_buffer("double[]", a), self._yptr)
            if st:
                raise self._vector_error(st, "x", a)
            return self._yarr.copy()
        finally:
            self._lock.release()

    def history(self) -> Output:
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
        BusyError
            Another thread is using the stream.

        See Also
        --------
        preview : the whole next output for a given sample.

        Examples
        --------
        Grunwald-Letnikov at order 1 is (x_n - x_{n-1}) / h (common
        practice): the history is -x_{n-1} / h and w0 = 1 / h:

        >>> import pyfracconv
        >>> s = pyfracconv.Stream.derivative(1.0, 0.5)
        >>> s.push(3.0)
        6.0
        >>> past = s.history()
        >>> past
        -6.0
        >>> s.push(4.0) == past + 2.0 * 4.0
        True
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
            return self._output()
        finally:
            self._lock.release()

    def reset(self) -> None:
        """Forget every sample (the kernel, reserved memory and the horizon
        policy are kept).

        Returns
        -------
        None

        Raises
        ------
        BusyError
            Another thread is using the stream.

        See Also
        --------
        count, remaining

        Examples
        --------
        >>> import pyfracconv
        >>> s = pyfracconv.Stream.integral(1.0, 0.5)
        >>> s.push_many([1.0, 2.0]).tolist(), s.count
        ([0.0, 0.5], 2)
        >>> s.reset()
        >>> s.count, s.push_many([1.0, 2.0]).tolist()
        (0, [0.0, 0.5])
        """
        if not self._lock.acquire(False):
            raise self._busy()
        try:
            raise_for_status(lib.fc_stream_reset(self._s), "reset()")
        finally:
            self._lock.release()

    def reserve(self, n: int) -> None:
        """Make room so that pushing up to ``n`` samples in all allocates
        nothing (exact mode; a no-op in compressed mode).

        Parameters
        ----------
        n : int
            Samples per channel, counted from creation or the last reset,
            in [0, 2**64 - 1].

        Returns
        -------
        None

        Raises
        ------
        InputTypeError
            n is not an integer.
        ArgumentError
            n is negative or beyond 2**64 - 1.
        OutOfMemory
            The room cannot be allocated (the stream is unchanged).
        BusyError
            Another thread is using the stream.

        See Also
        --------
        nbytes

        Examples
        --------
        >>> import pyfracconv
        >>> s = pyfracconv.Stream.integral(0.5, 0.1)
        >>> before = s.nbytes
        >>> s.reserve(10000)
        >>> s.nbytes > before, s.count
        (True, 0)
        """
        value: Any = n  # any object may come in: checked here
        if isinstance(value, (bool, np.bool_)) or not isinstance(value, numbers.Integral):
            raise InputTypeError(f"n={show(n)}: expected an integer, got {type(n).__name__}")
        if not 0 <= int(value) < 2**64:
            raise ArgumentError(f"n={show(n)}: must be in [0, 2**64 - 1]")
        if not self._lock.acquire(False):
            raise self._busy()
        try:
            raise_for_status(lib.fc_stream_reserve(self._s, int(n)), f"n={show(n)}")
        finally:
            self._lock.release()

    # ------------------------------------------------------------ state

    def save(self) -> bytes:
        """The state as bytes (a versioned, checksummed, little-endian
        format; not pickle). :meth:`load` resumes bit for bit. The horizon
        policy is a setting, not state: it is not saved.

        Returns
        -------
        bytes

        Raises
        ------
        BusyError
            Another thread is using the stream.
        OutOfMemory
            The bytes cannot be allocated.

        See Also
        --------
        load

        Examples
        --------
        >>> import numpy as np
        >>> import pyfracconv
        >>> x = np.sin(0.1 * np.arange(20))        # an invented test signal
        >>> s = pyfracconv.Stream.integral(0.5, 0.1)
        >>> _ = s.push_many(x[:10])
        >>> blob = s.save()
        >>> r = pyfracconv.Stream.load(blob)
        >>> bool(np.array_equal(r.push_many(x[10:]), s.push_many(x[10:])))
        True
        """
        if not self._lock.acquire(False):
            raise self._busy()
        try:
            return _save_stream(self._s, self._scalar, _ENV_MAGIC)
        finally:
            self._lock.release()

    @classmethod
    def load(cls, data: Union[bytes, bytearray, memoryview]) -> Stream:
        """Rebuild a stream from :meth:`save` output.

        The loaded stream has ``horizon_policy='refuse'`` whatever the saved
        stream had (the policy is not part of the state); set
        :attr:`horizon_policy` to go on past the horizon. Its parameters
        (rule, order, step, tol, horizon, channels) are read from the C
        object once the C library has accepted the data.

        Parameters
        ----------
        data : bytes-like
            What :meth:`save` returned.

        Returns
        -------
        Stream

        Raises
        ------
        InputTypeError
            data is not bytes-like.
        StateError
            data is truncated, corrupted, of another format or version.
        OutOfMemory
            The stream cannot be allocated.

        See Also
        --------
        save

        Examples
        --------
        >>> import pyfracconv
        >>> s = pyfracconv.Stream.derivative(0.5, 0.01, rule="l1", channels=3)
        >>> r = pyfracconv.Stream.load(s.save())
        >>> r.rule, r.order, r.step, r.channels
        ('l1', 0.5, 0.01, 3)
        >>> pyfracconv.Stream.load(s.save()[:-1])
        Traceback (most recent call last):
        ...
        pyfracconv._errors.StateError: data (... bytes): ...
        """
        if not isinstance(data, (bytes, bytearray, memoryview)):
            raise InputTypeError(f"data: expected bytes, got {type(data).__name__}")
        b = bytes(data)
        if (
            len(b) < _ENV_LEN + _C_MIN_LEN
            or b[:6] != _ENV_MAGIC
            or b[6] not in (_ENV_SCALAR, _ENV_ARRAY)
            or b[7] != 0
        ):
            raise StateError(
                f"data ({len(b)} bytes): not a saved pyfracconv stream (wrong magic or truncated)"
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

    def save_file(self, path: Union[str, bytes, os.PathLike]) -> None:  # type: ignore[type-arg]
        """Write :meth:`save` to the file ``path``, atomically: a temporary
        file in the same directory, written in full, flushed to disk
        (fsync), renamed over ``path``, then the directory synced
        (``fc_file_write``, csrc/fracconv.h). ``path`` holds the complete
        old file or the complete new one at every moment, also when the
        process is killed. A new file has mode 0600 (a replaced one keeps
        its permission bits). A process killed during
        the write may leave a ``path.tmp-XXXXXX`` file behind (never under
        ``path`` itself).

        Parameters
        ----------
        path : str, bytes or os.PathLike
            The checkpoint file (relative paths against the current
            directory); its directory must exist.

        Returns
        -------
        None
            The stream is unchanged; ``path`` holds its :meth:`save` bytes.

        Raises
        ------
        FileError
            The file could not be written (missing directory, permission,
            disk full ...): the message names the path and the reason; the
            old file (if any) and the stream are unchanged.
        ArgumentError, InputTypeError
            path is empty, ends in '/', contains NUL or is not a path.
        BusyError
            Another thread is using the stream.

        See Also
        --------
        load_file, save

        Examples
        --------
        >>> import os, tempfile
        >>> import numpy as np
        >>> import pyfracconv
        >>> x = np.cos(0.2 * np.arange(30))        # an invented test signal
        >>> s = pyfracconv.Stream.integral(0.5, 0.1, mode="compressed", horizon=100)
        >>> _ = s.push_many(x[:20])
        >>> with tempfile.TemporaryDirectory() as d:
        ...     path = os.path.join(d, "stream.ckpt")
        ...     s.save_file(path)
        ...     r = pyfracconv.Stream.load_file(path)
        >>> bool(np.array_equal(r.push_many(x[20:]), s.push_many(x[20:])))
        True
        """
        p = check_write_path(path)
        write_file("save_file", p, self.save(), "the stream")

    @classmethod
    def load_file(
        cls,
        path: Union[str, bytes, os.PathLike],  # type: ignore[type-arg]
        *,
        max_size: int = DEFAULT_MAX_SIZE,
    ) -> Stream:
        """A stream from a file written by :meth:`save_file` (or by the C
        library's ``fc_stream_save_file``: such a stream comes back with an
        explicit channel count). The file is untrusted input: at most
        ``max_size`` bytes are read and they go through :meth:`load`.

        Parameters
        ----------
        path : str, bytes or os.PathLike
            The checkpoint file (relative paths against the current
            directory).
        max_size : int, optional
            Longest file accepted, in bytes (default 2**30).

        Returns
        -------
        Stream
            The saved stream, resuming bit for bit (with
            ``horizon_policy='refuse'``, as :meth:`load`).

        Raises
        ------
        FileError
            The file could not be read (missing, permission, a directory
            ...); the message names the path and the reason.
        StateError
            The file is truncated, corrupted, of another format or longer
            than max_size; the message names the path.

        See Also
        --------
        save_file, load

        Examples
        --------
        The order-1 rectangle rule is the left rectangle sum (common
        practice): with step 1 on the samples 1, 2, 3, 4 the outputs are
        0, 1, 3, 6, also across a checkpoint file:

        >>> import os, tempfile
        >>> import pyfracconv
        >>> s = pyfracconv.Stream.integral(1.0, 1.0)
        >>> [s.push(x) for x in (1.0, 2.0)]
        [0.0, 1.0]
        >>> with tempfile.TemporaryDirectory() as d:
        ...     path = os.path.join(d, "stream.ckpt")
        ...     s.save_file(path)
        ...     r = pyfracconv.Stream.load_file(path)
        ...     too_small = os.path.getsize(path) - 1
        ...     try:
        ...         pyfracconv.Stream.load_file(path, max_size=too_small)
        ...     except pyfracconv.StateError:
        ...         print("refused: longer than max_size")
        refused: longer than max_size
        >>> [r.push(x) for x in (3.0, 4.0)]
        [3.0, 6.0]
        """
        return cast("Stream", _load_stream_file(cls, path, max_size, _ENV_MAGIC))

    @classmethod
    def _unpickle(cls, data: bytes, horizon_policy: str) -> Stream:
        self = cls.load(data)
        self.horizon_policy = horizon_policy
        return self

    def __reduce__(self) -> tuple[Any, tuple[bytes, str]]:
        # pickle and copy keep the horizon policy (load() alone does not)
        return (Stream._unpickle, (self.save(), self.horizon_policy))

    # ------------------------------------------------------- properties

    def _query(self, fn: Any, ctype: str) -> Any:
        if not self._lock.acquire(False):
            raise self._busy()
        try:
            return _get(fn, self._s, ctype)
        finally:
            self._lock.release()

    @property
    def count(self) -> int:
        """Samples pushed (per channel) since creation or the last reset.

        Raises
        ------
        BusyError
            Another thread is using the stream.

        See Also
        --------
        reset, remaining

        Examples
        --------
        >>> import pyfracconv
        >>> s = pyfracconv.Stream.integral(0.5, 0.1, channels=2)
        >>> _ = s.push_many([[1.0, 2.0], [3.0, 4.0], [5.0, 6.0]])
        >>> s.count
        3
        """
        return int(self._query(lib.fc_stream_count, "uint64_t *"))

    @property
    def nbytes(self) -> int:
        """Bytes of memory the C stream holds.

        Raises
        ------
        BusyError
            Another thread is using the stream.

        See Also
        --------
        reserve, terms

        Examples
        --------
        Exact mode keeps the whole history, so memory grows with the count:

        >>> import pyfracconv
        >>> s = pyfracconv.Stream.integral(0.5, 0.1)
        >>> before = s.nbytes
        >>> _ = s.push_many([1.0] * 5000)
        >>> s.nbytes > before
        True
        """
        return int(self._query(lib.fc_stream_nbytes, "size_t *"))

    @property
    def terms(self) -> int:
        """Number of exponential terms (compressed mode); 0 in exact mode.

        Raises
        ------
        BusyError
            Another thread is using the stream.

        See Also
        --------
        mode, tol, horizon

        Examples
        --------
        >>> import pyfracconv
        >>> pyfracconv.Stream.integral(0.5, 0.1).terms
        0
        >>> pyfracconv.Stream.integral(0.5, 0.1, mode="compressed").terms > 0
        True
        """
        return int(self._query(lib.fc_stream_terms, "size_t *"))

    @property
    def remaining(self) -> int:
        """Samples (per channel) that can still be pushed under the promise:
        compressed mode floor(horizon) + 1 - count (0 once at or past the
        horizon); exact mode the samples the stream can still take.

        Raises
        ------
        BusyError
            Another thread is using the stream.

        See Also
        --------
        horizon, horizon_policy, past_horizon

        Examples
        --------
        >>> import pyfracconv
        >>> s = pyfracconv.Stream.integral(0.5, 0.1, mode="compressed", horizon=10)
        >>> s.remaining
        11
        >>> _ = s.push_many([1.0] * 4)
        >>> s.remaining
        7
        """
        return int(self._query(lib.fc_stream_remaining, "uint64_t *"))

    @property
    def past_horizon(self) -> bool:
        """True once an output beyond the horizon has been produced (only
        possible with ``horizon_policy='continue'``); always False in exact
        mode. reset() clears it.

        Raises
        ------
        BusyError
            Another thread is using the stream.

        See Also
        --------
        horizon_policy, remaining

        Examples
        --------
        >>> import pyfracconv
        >>> s = pyfracconv.Stream.integral(0.5, 0.1, mode="compressed", horizon=2,
        ...                                horizon_policy="continue")
        >>> _ = s.push_many([1.0] * 3)
        >>> s.past_horizon
        False
        >>> _ = s.push(1.0)                 # output 3: past the horizon
        >>> s.past_horizon
        True
        """
        return bool(self._query(lib.fc_stream_past_horizon, "int *"))

    @property
    def horizon_policy(self) -> str:
        """'refuse' or 'continue': what a push past the horizon does (see
        :meth:`integral`). Settable; a loaded stream starts with 'refuse'.

        Raises
        ------
        ArgumentError
            Setting a name other than 'refuse' or 'continue' (the policy is
            unchanged).
        BusyError
            Another thread is using the stream.

        See Also
        --------
        past_horizon, remaining

        Examples
        --------
        >>> import pyfracconv
        >>> s = pyfracconv.Stream.integral(0.5, 0.1, mode="compressed")
        >>> s.horizon_policy
        'refuse'
        >>> s.horizon_policy = "continue"
        >>> pyfracconv.Stream.load(s.save()).horizon_policy
        'refuse'
        """
        return _POLICY_NAMES[int(self._query(lib.fc_stream_horizon_policy, "int *"))]

    @horizon_policy.setter
    def horizon_policy(self, policy: str) -> None:
        code = check_policy(policy)
        if not self._lock.acquire(False):
            raise self._busy()
        try:
            raise_for_status(
                lib.fc_stream_set_horizon_policy(self._s, code), f"horizon_policy={show(policy)}"
            )
        finally:
            self._lock.release()

    @property
    def channels(self) -> Optional[int]:
        """None (scalar stream) or the number of channels.

        See Also
        --------
        push, push_many

        Examples
        --------
        >>> import pyfracconv
        >>> pyfracconv.Stream.integral(0.5, 0.1).channels is None
        True
        >>> pyfracconv.Stream.integral(0.5, 0.1, channels=4).channels
        4
        """
        return None if self._scalar else self._C

    @property
    def mode(self) -> str:
        """'exact' or 'compressed'.

        See Also
        --------
        terms, tol, horizon

        Examples
        --------
        >>> import pyfracconv
        >>> pyfracconv.Stream.integral(0.5, 0.1).mode
        'exact'
        """
        return self._mode

    @property
    def order(self) -> Optional[float]:
        """The order (None for a kernel stream).

        See Also
        --------
        rule, step

        Examples
        --------
        >>> import pyfracconv
        >>> pyfracconv.Stream.derivative(0.3, 0.1).order
        0.3
        >>> pyfracconv.Stream.from_kernel([1.0]).order is None
        True
        """
        return self._order

    @property
    def step(self) -> Optional[float]:
        """The step (None for a kernel stream).

        See Also
        --------
        rule, order

        Examples
        --------
        >>> import pyfracconv
        >>> pyfracconv.Stream.derivative(0.3, 0.125).step
        0.125
        """
        return self._step

    @property
    def rule(self) -> Optional[str]:
        """The rule name (None for a kernel stream).

        See Also
        --------
        order, step

        Examples
        --------
        >>> import pyfracconv
        >>> pyfracconv.Stream.integral(0.5, 0.1, rule="trapezoid").rule
        'trapezoid'
        """
        return self._rule

    @property
    def tol(self) -> Optional[float]:
        """Tolerance (compressed mode), else None.

        See Also
        --------
        horizon, mode

        Examples
        --------
        >>> import pyfracconv
        >>> pyfracconv.Stream.integral(0.5, 0.1, mode="compressed", tol=1e-8).tol
        1e-08
        >>> pyfracconv.Stream.integral(0.5, 0.1).tol is None
        True
        """
        return self._tol

    @property
    def horizon(self) -> Optional[float]:
        """Horizon (compressed mode), else None.

        See Also
        --------
        remaining, tol, mode

        Examples
        --------
        >>> import pyfracconv
        >>> pyfracconv.Stream.integral(0.5, 0.1, mode="compressed", horizon=500).horizon
        500.0
        """
        return self._horizon

    def __repr__(self) -> str:
        if self._kind == "kernel":
            what = "kernel"
        else:
            what = f"rule={self._rule!r}, order={show(self._order)}, step={show(self._step)}"
        return f"<pyfracconv.Stream {what}, channels={self.channels!r}, mode={self._mode!r}>"
