"""A compressed stream with a time per sample (:class:`TimedStream`).

The rules of ``integral(..., t=)`` and ``derivative(..., t=, rule='l1')``
one sample at a time, on times that arrive with the samples (data loggers,
event-driven loops): bounded memory and O(K) work per sample (K
exponential terms, C: ``csrc/stream_timed.c``), within a stated tolerance
of the exact rule on the times pushed, over a horizon stated in time.
"""

from __future__ import annotations

import math
import os
from typing import Any, Optional, Union, cast

import numpy as np
from numpy.typing import ArrayLike, NDArray

from ._checks import (
    COMPRESSED_TOL_RANGE,
    as_float_array,
    check_channels,
    check_order,
    check_policy,
    check_real,
    check_rule,
    show,
)
from ._errors import (
    ArgumentError,
    BusyError,
    HorizonError,
    InputTypeError,
    RangeError,
    StateError,
    nonfinite_error,
    raise_for_status,
)
from ._files import (
    DEFAULT_MAX_SIZE,
    check_write_path,
    write_file,
)
from ._fracconv import ffi, lib
from .stream import _Guard, _load_stream_file, _save_stream

__all__ = ["TimedStream"]

FloatArray = NDArray[np.float64]

_RULES = {"rectangle": lib.FC_RULE_RECTANGLE, "trapezoid": lib.FC_RULE_TRAPEZOID, "l1": lib.FC_RULE_L1}
_NAMES = {v: k for k, v in _RULES.items()}
_POLICY = {"refuse": lib.FC_HORIZON_REFUSE, "continue": lib.FC_HORIZON_CONTINUE}

# Envelope: magic, scalar (0x5A) or channels (0xA5), a zero byte, then the
# C bytes of fc_stream_save (csrc/stream.c, kind 2; csrc/stream_timed.c).
_ENV_MAGIC = b"pyfcT1"
_ENV_SCALAR = 0x5A
_ENV_ARRAY = 0xA5
_ENV_LEN = 8


def _get(fn: Any, s: Any, ctype: str) -> Any:
    p = ffi.new(ctype)
    raise_for_status(fn(s, p), fn.__name__)
    return p[0]


class TimedStream:
    """A compressed stream whose samples come with their times.

    ``TimedStream(order, min_step, horizon)`` integrates (rule
    ``'rectangle'`` or ``'trapezoid'``, 0 < order < 2) or differentiates
    (``'l1'``, Caputo, 0 < order < 1) from the first time pushed. Each
    :meth:`push` takes a time and a sample; the output is the rule on the
    times pushed so far (the weights of
    :func:`pyfracconv.grid.grid_weights`), within

        |y_n - y_n(exact)| <= (tol + (K + 64) 2**-52) S_n

    for every output with t_n - t_0 <= horizon (S_n the sum of the absolute
    values of its terms, K = :attr:`terms`), the promise of
    ``integral(..., t=, engine='fast')`` on the same times.

    Parameters
    ----------
    order : float
        0 < order < 2 (``'l1'``: 0 < order < 1). At 1 < order < 2 the
        stream runs the rule of order ``order - 1`` on the running
        integral of the interpolated samples, kept per channel in
        double-double (csrc/stream_timed.c); same promise.
    min_step : float
        The smallest step t_n - t_{n-1} a push may make, finite, > 0.
    horizon : float
        The time span t_n - t_0 the promise covers, finite, >= min_step
        and at most about 2**98 min_step.
    rule : {'rectangle', 'trapezoid', 'l1'}, optional
        Default ``'rectangle'``. Grunwald-Letnikov has no standard form on
        a non-uniform grid and is refused.
    tol : float, optional
        In [1e-15, 1e-2], default 1e-10.
    channels : int, optional
        None (default): a scalar stream (push takes and returns floats);
        an integer >= 1: every push takes and returns arrays of that length
        (all channels share the times).
    horizon_policy : {'refuse', 'continue'}, optional
        A push past the horizon: refused (HorizonError, default) or taken
        without the promise (:attr:`past_horizon` then turns True).

    Raises
    ------
    ArgumentError
        Rule, order, min_step, horizon, tol, channels or policy out of
        range.
    InputTypeError
        A parameter of the wrong type.

    See Also
    --------
    pyfracconv.integral, pyfracconv.derivative : with ``t=``, the same
        rules on a whole record.
    Stream : the streams of a uniform grid.

    Notes
    -----
    A refused push (time not finite, a step below ``min_step``, a time not
    after the previous one, past the horizon under 'refuse', a sample
    beyond the range bound, of about 1e290 for a horizon of 1e6
    smallest steps; at 1 < order < 2 about 1e289 to 1e295) changes
    nothing. Saved state (:meth:`save`) is checked
    on :meth:`load` as untrusted input.

    Examples
    --------
    The product trapezoidal rule is exact on linear f on any grid:
    I^a t = t^(1+a) / Gamma(2+a) (Podlubny 1999), at a = 0.5 equal to
    4 t^1.5 / (3 sqrt(pi)):

    >>> import math
    >>> import pyfracconv
    >>> s = pyfracconv.TimedStream(0.5, min_step=0.01, horizon=10.0, rule="trapezoid")
    >>> ys = [s.push(t, t) for t in (0.0, 0.1, 0.15, 0.4, 0.9, 1.0)]
    >>> math.isclose(ys[-1], 4 / (3 * math.sqrt(math.pi)), rel_tol=1e-9)
    True

    A step below ``min_step`` is refused and changes nothing:

    >>> s.push(1.001, 1.0)
    Traceback (most recent call last):
    ...
    pyfracconv._errors.ArgumentError: time=1.001: the step from the previous time 1.0 is 0.000999...
    >>> s.count
    6
    """

    def __init__(
        self,
        order: float,
        min_step: float,
        horizon: float,
        rule: str = "rectangle",
        tol: float = 1e-10,
        channels: Optional[int] = None,
        horizon_policy: str = "refuse",
    ) -> None:
        if rule == "grunwald":
            raise ArgumentError(
                "rule='grunwald': the Grunwald-Letnikov rule has no standard form "
                "on a non-uniform grid; use rule='l1' (Caputo, 0 < order < 1) or "
                "an integral rule"
            )
        check_rule(rule, tuple(_RULES))
        a = check_order(order, rule)
        if not (a < 1.0 if rule == "l1" else a < 2.0):
            raise ArgumentError(
                f"order={show(order)}: a TimedStream serves 0 < order < 2 (rule='l1': 0 < order < 1)"
            )
        h = check_real("min_step", min_step)
        if not (math.isfinite(h) and h > 0.0):
            raise ArgumentError(f"min_step={show(min_step)}: must be finite and > 0")
        T = check_real("horizon", horizon)
        if not (math.isfinite(T) and T >= h):
            raise ArgumentError(f"horizon={show(horizon)}: must be finite and >= min_step={show(min_step)}")
        tl = check_real("tol", tol)
        lo, hi = COMPRESSED_TOL_RANGE
        if not lo <= tl <= hi:
            raise ArgumentError(f"tol={show(tol)}: must be in [{lo:g}, {hi:g}]")
        C = check_channels(channels)
        pol = check_policy(horizon_policy)
        pp = ffi.new("fc_stream **")
        st = lib.fc_stream_create_timed(_RULES[rule], a, h, C, tl, T, pp)
        if st == lib.FC_ERR_TOL:
            raise ArgumentError(
                f"horizon={show(horizon)}: more than about 2**98 times min_step={show(min_step)}"
            )
        if st == lib.FC_ERR_RANGE:
            raise RangeError(
                f"min_step={show(min_step)}, horizon={show(horizon)}: with order={show(order)} "
                "the outputs of a unit sample would be beyond the double range "
                "(the range bound on samples is below 1; csrc/stream_timed.c, RANGE); "
                "measure time in larger units"
            )
        raise_for_status(st, f"TimedStream(order={show(order)}, rule={show(rule)})")
        self._setup(pp[0], channels is None)
        raise_for_status(lib.fc_stream_set_horizon_policy(self._s, pol), "horizon_policy")

    def _setup(self, ptr: Any, scalar: bool) -> None:
        self._s = s = ffi.gc(ptr, lib.fc_stream_free)
        self._C = int(_get(lib.fc_stream_channels, s, "size_t *"))
        if scalar and self._C != 1:
            raise StateError(f"the envelope says channels=None but the state holds {self._C} channels")
        self._scalar = scalar
        self._rule = _NAMES[int(_get(lib.fc_stream_rule, s, "int *"))]
        self._order = float(_get(lib.fc_stream_order, s, "double *"))
        self._min_step = float(_get(lib.fc_stream_step, s, "double *"))
        self._tol = float(_get(lib.fc_stream_tol, s, "double *"))
        self._horizon = float(_get(lib.fc_stream_horizon, s, "double *"))
        self._lock = _Guard()
        self._t1 = ffi.new("double[1]")
        self._x1 = ffi.new("double[1]")
        self._y1 = ffi.new("double[1]")
        self._last: Optional[float] = None
        self._first: Optional[float] = None

    # ------------------------------------------------------------ pushing

    def _busy(self) -> BusyError:
        return BusyError("the stream is being used by another thread; nothing changed")

    def _times(self, times: object, count: int) -> FloatArray:
        t = as_float_array("time", times).reshape(-1)
        if t.size != count:
            raise ArgumentError(
                f"times: {t.size} times for {count} time steps of samples; give one time per time step"
            )
        bad = np.flatnonzero(~np.isfinite(t))
        if bad.size:
            raise ArgumentError(f"time={show(float(t[bad[0]]))}: sample times must be finite")
        prev = (
            np.concatenate([[self._last], t[:-1]])
            if self._last is not None
            else np.concatenate([[np.nan], t[:-1]])
        )
        steps = t - prev
        badstep = np.flatnonzero(~(steps >= self._min_step) & np.isfinite(prev))
        if badstep.size:
            i = int(badstep[0])
            raise ArgumentError(
                f"time={show(float(t[i]))}: the step from the previous time "
                f"{show(float(prev[i]))} is {show(float(steps[i]))}, below "
                f"min_step={show(self._min_step)} (or the time is not after it); "
                "the stream is unchanged"
            )
        return np.ascontiguousarray(t, dtype=np.float64)

    def _call(self, t: FloatArray, x: FloatArray, count: int) -> FloatArray:
        y = np.empty_like(x)
        if not self._lock.acquire(False):
            raise self._busy()
        try:
            st = lib.fc_stream_push_timed(
                self._s,
                ffi.from_buffer("double[]", t),
                ffi.from_buffer("double[]", x),
                count,
                ffi.from_buffer("double[]", y),
            )
        finally:
            self._lock.release()
        if st != lib.FC_OK:
            raise self._refusal(st, float(t[0]), float(t[-1]), float(np.max(np.abs(x))))
        if self._first is None:
            self._first = float(t[0])
        self._last = float(t[-1])
        return y

    def _refusal(self, st: int, t_first: float, t_last: float, xmax: float) -> Exception:
        if st == lib.FC_ERR_HORIZON:
            first = self._first if self._first is not None else t_first
            return HorizonError(
                f"time={show(t_last)}: past the horizon ({show(self._horizon)} "
                f"after the first time {show(first)}); the stream is unchanged. Set "
                "horizon_policy='continue' to go on without the promise"
            )
        if st == lib.FC_ERR_RANGE:
            return RangeError(
                f"samples (largest |sample| {show(xmax)}): beyond "
                "the range bound of this stream (csrc/stream_timed.c, RANGE); the "
                "stream is unchanged"
            )
        if st == lib.FC_ERR_ARG:
            return ArgumentError(
                f"time={show(t_first)}: a step below min_step="
                f"{show(self._min_step)} from the previous time (or a time not after "
                "it); the stream is unchanged"
            )
        if st == lib.FC_ERR_BUSY:
            return self._busy()
        try:
            raise_for_status(st, "push")
        except Exception as exc:  # every non-zero status raises
            return exc
        return AssertionError(f"status {st}")  # pragma: no cover

    def _push_scalar(self, time: object, x: object, preview: bool = False) -> float:
        t = check_real("time", time)
        if not math.isfinite(t):
            raise ArgumentError(f"time={show(t)}: sample times must be finite")
        last = self._last
        if last is not None and not t - last >= self._min_step:
            raise ArgumentError(
                f"time={show(t)}: the step from the previous time {show(last)} is "
                f"{show(t - last)}, below min_step={show(self._min_step)} (or the "
                "time is not after it); the stream is unchanged"
            )
        v = check_real("x", x)
        if not math.isfinite(v):
            raise nonfinite_error("x", np.array([v]))
        if not self._lock.acquire(False):
            raise self._busy()
        try:
            self._x1[0] = v
            if preview:
                st = lib.fc_stream_preview_timed(self._s, t, self._x1, self._y1)
            else:
                self._t1[0] = t
                st = lib.fc_stream_push_timed(self._s, self._t1, self._x1, 1, self._y1)
            y = float(self._y1[0])
        finally:
            self._lock.release()
        if st != lib.FC_OK:
            raise self._refusal(st, t, t, abs(v))
        if not preview:
            if self._first is None:
                self._first = t
            self._last = t
        return y

    def _samples(self, name: str, xs: object, shape: tuple[int, ...]) -> FloatArray:
        a = as_float_array(name, xs)
        if a.shape != shape and not (self._scalar and a.size == int(np.prod(shape)) and a.ndim <= 1):
            raise ArgumentError(f"{name}: expected shape {shape}, got {a.shape}")
        a = np.ascontiguousarray(a, dtype=np.float64).reshape(shape)
        if not np.all(np.isfinite(a)):
            raise nonfinite_error(name, a)
        return a

    def push(self, time: float, x: Union[float, ArrayLike]) -> Union[float, FloatArray]:
        """Push one sample (or one per channel) at ``time``; returns the
        output at that time (0 at the first time).

        Parameters
        ----------
        time : float
            The sample's time: finite, at least ``min_step`` after the
            previous time pushed (any finite time for the first push).
        x : float or array_like
            The sample: a float for a scalar stream, an array of length
            ``channels`` otherwise.

        Returns
        -------
        float or numpy.ndarray
            The output at ``time`` (a float for a scalar stream, an array of
            length ``channels`` otherwise).

        Raises
        ------
        ArgumentError
            time not finite, a step below min_step or a time not after the
            previous one; x of the wrong shape.
        SampleError
            A sample is NaN or infinite.
        HorizonError
            Past the horizon under ``horizon_policy='refuse'``.
        RangeError
            A sample (L1: an increment) beyond the stream's range bound.
        BusyError
            Another thread is using the stream.

        Every refusal leaves the stream unchanged.

        See Also
        --------
        push_many : a block of samples at once.
        Stream.push : the same on a uniform grid.

        Examples
        --------
        The product rectangle rule is exact on constants on any grid:
        I^a 1 = t^a / Gamma(a+1) (Podlubny 1999), at a = 0.5 equal to
        2 sqrt(t / pi), here at t = 1 after uneven steps:

        >>> import math
        >>> import pyfracconv
        >>> s = pyfracconv.TimedStream(0.5, min_step=0.01, horizon=10.0)
        >>> [s.push(t, 1.0) for t in (0.0, 0.3, 0.35)][0]
        0.0
        >>> math.isclose(s.push(1.0, 1.0), 2 / math.sqrt(math.pi), rel_tol=1e-9)
        True

        A time not after the previous one is refused and changes nothing:

        >>> s.push(0.5, 1.0)
        Traceback (most recent call last):
        ...
        pyfracconv._errors.ArgumentError: time=0.5: the step from the previous time 1.0 is ...
        >>> s.count
        4
        """
        if self._scalar:
            return self._push_scalar(time, x)
        t = self._times([time], 1)
        a = self._samples("x", x, (self._C,))
        return self._call(t, a, 1)

    def preview(self, time: float, x: Union[float, ArrayLike]) -> Union[float, FloatArray]:
        """What :meth:`push` of ``(time, x)`` would return, bit for bit;
        the stream is unchanged.

        With ``x = 0`` it is the part of the output at ``time`` that the
        samples already pushed make: the whole output for the rectangle
        rule (it does not use the sample at ``time``), and for the
        trapezoid rule all but ``h^a / Gamma(a+2) x`` (h = time - the
        previous time), the newest sample's weight. A time stepper needs
        this before the sample exists (``solve(..., t=grid,
        memory='compressed')`` uses it).

        Parameters
        ----------
        time : float
            As for :meth:`push`.
        x : float or array_like
            As for :meth:`push`.

        Returns
        -------
        float or numpy.ndarray
            The output push would give.

        Raises
        ------
        ArgumentError, SampleError, HorizonError, RangeError, BusyError
            As :meth:`push` would (nothing changes either way).

        See Also
        --------
        push : the same, and the sample is kept.
        Stream.preview : the same on a uniform grid.

        Examples
        --------
        >>> import pyfracconv
        >>> s = pyfracconv.TimedStream(0.5, min_step=0.01, horizon=10.0)
        >>> _ = s.push_many([0.0, 0.3], [1.0, 1.0])
        >>> p = s.preview(0.5, 7.0)
        >>> p == s.push(0.5, 7.0), s.count
        (True, 3)
        """
        if self._scalar:
            return self._push_scalar(time, x, preview=True)
        t = self._times([time], 1)
        a = self._samples("x", x, (self._C,))
        y = np.empty_like(a)
        if not self._lock.acquire(False):
            raise self._busy()
        try:
            st = lib.fc_stream_preview_timed(
                self._s, float(t[0]), ffi.from_buffer("double[]", a), ffi.from_buffer("double[]", y)
            )
        finally:
            self._lock.release()
        if st != lib.FC_OK:
            raise self._refusal(st, float(t[0]), float(t[0]), float(np.max(np.abs(a))))
        return y

    def push_many(self, times: ArrayLike, xs: ArrayLike) -> FloatArray:
        """Push T samples at T times: ``xs`` of shape (T,) for a scalar
        stream, (T, channels) otherwise; returns the outputs in that shape.
        All or nothing: a refused block (see :meth:`push`) pushes nothing.

        Parameters
        ----------
        times : array_like
            T finite times, increasing by at least ``min_step`` (the first
            also from the previous time pushed, if any).
        xs : array_like
            The samples: shape (T,) for a scalar stream, (T, channels)
            otherwise (time on axis 0).

        Returns
        -------
        numpy.ndarray
            The T outputs, shape (T,) or (T, channels).

        Raises
        ------
        ArgumentError
            A time not finite, a step below min_step or a time not after
            the previous one; xs of the wrong shape.
        InputTypeError
            times or xs not numeric.
        SampleError
            A sample is NaN or infinite.
        HorizonError
            Past the horizon under ``horizon_policy='refuse'``.
        RangeError
            A sample (L1: an increment) beyond the stream's range bound.
        BusyError
            Another thread is using the stream.

        See Also
        --------
        push : one sample.
        pyfracconv.integral : with ``t=``, the same rule on a whole record.

        Examples
        --------
        The product trapezoidal rule is exact on linear f on any grid:
        I^a t = t^(1+a) / Gamma(2+a) (Podlubny 1999); two channels, f = t
        and f = 2 t, at a = 0.5:

        >>> import math
        >>> import numpy as np
        >>> import pyfracconv
        >>> s = pyfracconv.TimedStream(0.5, min_step=0.01, horizon=10.0,
        ...                            rule="trapezoid", channels=2)
        >>> t = np.array([0.0, 0.2, 0.25, 0.7, 2.0])
        >>> y = s.push_many(t, np.column_stack([t, 2 * t]))
        >>> y.shape
        (5, 2)
        >>> exact = t**1.5 / math.gamma(2.5)
        >>> bool(np.allclose(y[:, 0], exact, rtol=1e-9, atol=0)
        ...      and np.allclose(y[:, 1], 2 * exact, rtol=1e-9, atol=0))
        True

        A block with a step below min_step pushes nothing:

        >>> s.push_many([2.5, 2.501], np.ones((2, 2)))
        Traceback (most recent call last):
        ...
        pyfracconv._errors.ArgumentError: ...
        >>> s.count
        5
        """
        tt = as_float_array("times", times).reshape(-1)
        T = tt.size
        a = self._samples("xs", xs, (T, self._C))
        if T == 0:
            return np.zeros((0,) if self._scalar else (0, self._C))
        t = self._times(tt, T)
        y = self._call(t, a, T)
        return y.reshape(T) if self._scalar else y

    def reset(self) -> None:
        """Forget every sample (the next push starts again at its own time).

        Returns
        -------
        None

        Raises
        ------
        BusyError
            Another thread is using the stream (nothing is forgotten).

        See Also
        --------
        push, save

        Examples
        --------
        After a reset the stream starts again: the product rectangle rule
        on a constant gives t^a / Gamma(a+1) from the new first time
        (Podlubny 1999), at a = 1 the elapsed time:

        >>> import pyfracconv
        >>> s = pyfracconv.TimedStream(1.0, min_step=0.5, horizon=10.0)
        >>> [s.push(t, 1.0) for t in (0.0, 1.0, 3.0)]
        [0.0, 1.0, 3.0]
        >>> s.reset()
        >>> s.count
        0
        >>> [s.push(t, 1.0) for t in (5.0, 7.0)]
        [0.0, 2.0]
        """
        if not self._lock.acquire(False):
            raise self._busy()
        try:
            raise_for_status(lib.fc_stream_reset(self._s), "reset()")
            self._last = self._first = None
        finally:
            self._lock.release()

    # ------------------------------------------------------------ state

    def save(self) -> bytes:
        """The state as bytes (versioned, checksummed, little-endian; not
        pickle); :meth:`load` resumes bit for bit. The horizon policy is a
        setting, not state: it is not saved.

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
        >>> t = np.cumsum(np.linspace(0.01, 0.02, 20))  # uneven invented times
        >>> x = np.sin(t)                               # an invented test signal
        >>> s = pyfracconv.TimedStream(0.5, min_step=0.01, horizon=10.0)
        >>> _ = s.push_many(t[:10], x[:10])
        >>> r = pyfracconv.TimedStream.load(s.save())
        >>> bool(np.array_equal(r.push_many(t[10:], x[10:]), s.push_many(t[10:], x[10:])))
        True
        """
        if not self._lock.acquire(False):
            raise self._busy()
        try:
            return _save_stream(self._s, self._scalar, _ENV_MAGIC)
        finally:
            self._lock.release()

    @classmethod
    def load(cls, data: Union[bytes, bytearray, memoryview]) -> TimedStream:
        """Rebuild a stream from :meth:`save` output (untrusted: the C loader
        checks the checksum, every parameter, the rebuilt terms bit for bit,
        the times, the count and the state; StateError otherwise). The
        loaded stream has ``horizon_policy='refuse'``. The step check of
        the first push after a load is made by the C library alone.

        Parameters
        ----------
        data : bytes-like
            What :meth:`save` returned.

        Returns
        -------
        TimedStream

        Raises
        ------
        InputTypeError
            data is not bytes-like.
        StateError
            data is truncated, corrupted, of another format or version, or
            a stream without times (load that with :meth:`Stream.load`).
        OutOfMemory
            The stream cannot be allocated.

        See Also
        --------
        save, Stream.load

        Examples
        --------
        >>> import pyfracconv
        >>> s = pyfracconv.TimedStream(0.25, min_step=0.1, horizon=5.0, rule="l1")
        >>> r = pyfracconv.TimedStream.load(s.save())
        >>> r.rule, r.order, r.min_step, r.horizon, r.horizon_policy
        ('l1', 0.25, 0.1, 5.0, 'refuse')
        >>> pyfracconv.TimedStream.load(pyfracconv.Stream.integral(0.5, 0.1).save())
        Traceback (most recent call last):
        ...
        pyfracconv._errors.StateError: data (... bytes): not a saved pyfracconv TimedStream ...
        """
        if not isinstance(data, (bytes, bytearray, memoryview)):
            raise InputTypeError(f"data: expected bytes, got {type(data).__name__}")
        b = bytes(data)
        if len(b) < _ENV_LEN + 8 or b[:6] != _ENV_MAGIC or b[6] not in (_ENV_SCALAR, _ENV_ARRAY) or b[7] != 0:
            raise StateError(
                f"data ({len(b)} bytes): not a saved pyfracconv TimedStream (wrong magic or truncated)"
            )
        blob = memoryview(b)[_ENV_LEN:]
        pp = ffi.new("fc_stream **")
        st = lib.fc_stream_load(ffi.from_buffer("unsigned char[]", blob), len(blob), pp)
        if st:
            raise_for_status(st, f"data ({len(b)} bytes)")
        flag = ffi.new("int *")
        if lib.fc_stream_is_timed(pp[0], flag) != lib.FC_OK or not flag[0]:
            lib.fc_stream_free(pp[0])
            raise StateError(f"data ({len(b)} bytes): a stream without times (load it with Stream.load)")
        self = object.__new__(cls)
        self._setup(pp[0], b[6] == _ENV_SCALAR)
        return self

    def save_file(self, path: Union[str, bytes, os.PathLike]) -> None:  # type: ignore[type-arg]
        """Write :meth:`save` to the file ``path`` atomically, as
        :meth:`Stream.save_file` does (a temporary file in the same
        directory, written in full, flushed to disk, renamed over ``path``,
        the directory synced: ``fc_file_write``, csrc/fracconv.h).

        Parameters
        ----------
        path : str, bytes or os.PathLike
            The checkpoint file; its directory must exist.

        Returns
        -------
        None
            The stream is unchanged; ``path`` holds its :meth:`save` bytes.

        Raises
        ------
        FileError
            The file could not be written: the message names the path and
            the reason; the old file (if any) and the stream are unchanged.
        ArgumentError, InputTypeError
            path is empty, ends in '/', contains NUL or is not a path.
        BusyError
            Another thread is using the stream.

        See Also
        --------
        load_file, save, Stream.save_file

        Examples
        --------
        The rectangle rule is exact on constants on any grid: I^a 1 =
        t^a / Gamma(a+1) (Podlubny 1999); the stream meets it within its
        tolerance (default 1e-10), also across a checkpoint file.

        >>> import math, os, tempfile
        >>> import pyfracconv
        >>> s = pyfracconv.TimedStream(0.5, min_step=0.01, horizon=10.0)
        >>> _ = s.push_many([0.0, 0.3, 0.5], [1.0, 1.0, 1.0])
        >>> with tempfile.TemporaryDirectory() as d:
        ...     path = os.path.join(d, "timed.ckpt")
        ...     s.save_file(path)
        ...     r = pyfracconv.TimedStream.load_file(path)
        >>> y = r.push(1.2, 1.0)
        >>> exact = 1.2 ** 0.5 / math.gamma(1.5)
        >>> abs(y - exact) <= 1e-10 * exact
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
    ) -> TimedStream:
        """A stream from a file written by :meth:`save_file`. The file is
        untrusted input: at most ``max_size`` bytes are read and they go
        through :meth:`load`.

        Parameters
        ----------
        path : str, bytes or os.PathLike
            The checkpoint file.
        max_size : int, optional
            Longest file accepted, in bytes (default 2**30).

        Returns
        -------
        TimedStream
            The saved stream, resuming bit for bit (``horizon_policy``
            'refuse', as :meth:`load`).

        Raises
        ------
        FileError
            The file could not be read; the message names the path.
        StateError
            The file is truncated, corrupted, of another format or longer
            than max_size; the message names the path.

        See Also
        --------
        save_file, load, Stream.load_file

        Examples
        --------
        >>> import os, tempfile
        >>> import pyfracconv
        >>> s = pyfracconv.TimedStream(0.5, min_step=0.01, horizon=10.0)
        >>> with tempfile.TemporaryDirectory() as d:
        ...     path = os.path.join(d, "timed.ckpt")
        ...     s.save_file(path)
        ...     try:
        ...         pyfracconv.TimedStream.load_file(path, max_size=8)
        ...     except pyfracconv.StateError:
        ...         print("refused: longer than max_size")
        refused: longer than max_size
        """
        return cast("TimedStream", _load_stream_file(cls, path, max_size, _ENV_MAGIC))

    # ------------------------------------------------------------ properties

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
        push, reset

        Examples
        --------
        >>> import pyfracconv
        >>> s = pyfracconv.TimedStream(0.5, min_step=0.01, horizon=1.0, rule="trapezoid")
        >>> _ = s.push_many([0.0, 0.1, 0.5], [1.0, 1.0, 1.0])
        >>> s.count
        3
        """
        return int(self._query(lib.fc_stream_count, "uint64_t *"))

    @property
    def terms(self) -> int:
        """The number K of exponential terms.

        Raises
        ------
        BusyError
            Another thread is using the stream.

        See Also
        --------
        tol, horizon, nbytes

        Examples
        --------
        >>> import pyfracconv
        >>> s = pyfracconv.TimedStream(0.5, min_step=0.01, horizon=1.0, rule="trapezoid")
        >>> s.terms > 0
        True
        """
        return int(self._query(lib.fc_stream_terms, "size_t *"))

    @property
    def nbytes(self) -> int:
        """Bytes of memory the C stream holds (fixed at creation).

        Raises
        ------
        BusyError
            Another thread is using the stream.

        See Also
        --------
        terms

        Examples
        --------
        The memory stays bounded (the point of compression, common practice):

        >>> import pyfracconv
        >>> s = pyfracconv.TimedStream(0.5, min_step=0.01, horizon=1.0, rule="trapezoid")
        >>> before = s.nbytes
        >>> _ = s.push_many([0.02 * k for k in range(50)], [1.0] * 50)
        >>> s.nbytes == before
        True
        """
        return int(self._query(lib.fc_stream_nbytes, "size_t *"))

    @property
    def past_horizon(self) -> bool:
        """True once an output past the horizon was produced.

        Raises
        ------
        BusyError
            Another thread is using the stream.

        See Also
        --------
        horizon, horizon_policy

        Examples
        --------
        >>> import pyfracconv
        >>> s = pyfracconv.TimedStream(0.5, min_step=0.01, horizon=1.0, rule="trapezoid")
        >>> s.horizon_policy = "continue"
        >>> _ = s.push_many([0.0, 1.0], [1.0, 1.0])
        >>> s.past_horizon
        False
        >>> _ = s.push(1.5, 1.0)           # 1.5 after the first time: past 1.0
        >>> s.past_horizon
        True
        """
        return bool(self._query(lib.fc_stream_past_horizon, "int *"))

    @property
    def horizon_policy(self) -> str:
        """'refuse' or 'continue' (a setting, not saved).

        Raises
        ------
        ArgumentError
            Setting a name other than 'refuse' or 'continue' (unchanged).
        BusyError
            Another thread is using the stream.

        See Also
        --------
        past_horizon, horizon

        Examples
        --------
        >>> import pyfracconv
        >>> s = pyfracconv.TimedStream(0.5, min_step=0.01, horizon=1.0, rule="trapezoid")
        >>> s.horizon_policy
        'refuse'
        >>> s.horizon_policy = "continue"
        >>> s.horizon_policy
        'continue'
        """
        p = int(self._query(lib.fc_stream_horizon_policy, "int *"))
        return "refuse" if p == lib.FC_HORIZON_REFUSE else "continue"

    @horizon_policy.setter
    def horizon_policy(self, policy: str) -> None:
        code = check_policy(policy)
        if not self._lock.acquire(False):
            raise self._busy()
        try:
            raise_for_status(lib.fc_stream_set_horizon_policy(self._s, code), "horizon_policy")
        finally:
            self._lock.release()

    @property
    def rule(self) -> str:
        """The rule: 'rectangle', 'trapezoid' or 'l1'.

        See Also
        --------
        order, min_step

        Examples
        --------
        >>> import pyfracconv
        >>> s = pyfracconv.TimedStream(0.5, min_step=0.01, horizon=1.0, rule="trapezoid")
        >>> s.rule
        'trapezoid'
        """
        return self._rule

    @property
    def order(self) -> float:
        """The order a.

        See Also
        --------
        rule

        Examples
        --------
        >>> import pyfracconv
        >>> s = pyfracconv.TimedStream(0.5, min_step=0.01, horizon=1.0, rule="trapezoid")
        >>> s.order
        0.5
        """
        return self._order

    @property
    def min_step(self) -> float:
        """The smallest step t_n - t_{n-1} a push may make.

        See Also
        --------
        push, horizon

        Examples
        --------
        >>> import pyfracconv
        >>> s = pyfracconv.TimedStream(0.5, min_step=0.01, horizon=1.0, rule="trapezoid")
        >>> s.min_step
        0.01
        """
        return self._min_step

    @property
    def tol(self) -> float:
        """The tolerance of the promise.

        See Also
        --------
        terms, horizon

        Examples
        --------
        >>> import pyfracconv
        >>> s = pyfracconv.TimedStream(0.5, min_step=0.01, horizon=1.0, rule="trapezoid")
        >>> s.tol
        1e-10
        """
        return self._tol

    @property
    def horizon(self) -> float:
        """The time span t_n - t_0 the promise covers.

        See Also
        --------
        past_horizon, horizon_policy, tol

        Examples
        --------
        >>> import pyfracconv
        >>> s = pyfracconv.TimedStream(0.5, min_step=0.01, horizon=1.0, rule="trapezoid")
        >>> s.horizon
        1.0
        """
        return self._horizon

    @property
    def channels(self) -> Optional[int]:
        """None for a scalar stream, else the number of channels.

        See Also
        --------
        push, push_many

        Examples
        --------
        >>> import pyfracconv
        >>> s = pyfracconv.TimedStream(0.5, min_step=0.01, horizon=1.0, rule="trapezoid")
        >>> s.channels is None
        True
        >>> pyfracconv.TimedStream(0.5, 0.01, 1.0, channels=3).channels
        3
        """
        return None if self._scalar else self._C

    def __repr__(self) -> str:
        return (
            f"TimedStream(order={self._order!r}, min_step={self._min_step!r}, "
            f"horizon={self._horizon!r}, rule={self._rule!r}, tol={self._tol!r}, "
            f"channels={self.channels!r})"
        )
