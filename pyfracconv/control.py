"""A fractional PID controller on sampled signals.

The law is the fractional PID of Podlubny (IEEE Trans. Automatic Control
44, 1999),

    u = Kp (b r - y) + Ki I^lambda (r - y) + D_f,
    D_f = Kd D^mu (c r - y) through a first-order filter of time constant Tf,

with r the setpoint, y the measurement, b and c the setpoint weights of the
proportional and derivative actions (c = 0: derivative on the measurement),
output limits with conditional integration against windup, an output rate
limit, and bumpless transfer between manual and automatic by output
tracking (Astrom and Hagglund, Advanced PID Control, ISA 2006). The
integral and derivative are the library's streams, so each update costs
bounded work in ``memory="compressed"`` (the default) and the exact lagged
sum in ``memory="exact"``. The computation is in C (``fc_controller_*`` in
``csrc/fracconv.h``, ``csrc/controller.c``).

SAFETY. A controller moves real machinery. This code has not been
validated for any particular plant. Validate every tuning in simulation
and then on the plant under supervision; keep the actuator limits and rate
limits in the hardware as well as here; keep an independent safe stop
(interlock, emergency stop) that does not depend on this software, its
host, or its inputs. Follow the local codes, standards and licensed
engineering practice that apply to the installation; they take precedence
over anything said here.
"""

from __future__ import annotations

import math
import warnings

import numpy as np

from ._errors import ArgumentError, BusyError, InputTypeError, StateError, raise_for_status
from ._checks import DERIVATIVE_RULES, INTEGRAL_RULES, RULES, in_range, order_range, range_text
from ._core import as_float_array, check_compressed, check_real, show
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
from .stream import _Guard

__all__ = ["Controller", "HorizonWarning"]

_IRULES = {r: RULES[r] for r in INTEGRAL_RULES}
_DRULES = {r: RULES[r] for r in DERIVATIVE_RULES}
_IRULE_NAMES = {v: k for k, v in _IRULES.items()}
_DRULE_NAMES = {v: k for k, v in _DRULES.items()}
_MEMORY = {"exact": lib.FC_MODE_EXACT, "compressed": lib.FC_MODE_COMPRESSED}
_MEMORY_NAMES = {v: k for k, v in _MEMORY.items()}


class HorizonWarning(RuntimeWarning):
    """A compressed controller ran past the horizon of its streams: it keeps
    running, but the stated tolerance is no longer promised."""


def _choice(name, value, table):
    if not isinstance(value, str) or value not in table:
        raise ArgumentError(
            f"{name}={show(value)}: unknown; expected one of " + ", ".join(repr(k) for k in table)
        )
    return table[value]


def default_integral_rule(order, memory):
    """The integral rule used when none is given: the product trapezoidal
    rule (second order for smooth errors), except with compressed memory
    at orders >= 1 or outside its compressed range, where it is the
    product rectangle rule. (Compressed streams take both rules for
    1 <= order < 2; the rectangle rule stays the default there because
    it was the only one offered when controllers were first saved, so a
    controller made without a rule keeps its outputs.)"""
    if memory == "compressed" and (
        order >= 1.0 or not in_range(order_range("trapezoid", int(lib.FC_MODE_COMPRESSED)), order)
    ):
        return "rectangle"
    return "trapezoid"


class Controller:
    """Fractional PID controller ``u = Kp e_p + Ki I^lambda e + Kd D^mu e_d``.

    Parameters
    ----------
    kp, ki, kd : float
        Proportional, integral and derivative gains (finite; a zero gain
        keeps no stream for its action).
    integral_order, derivative_order : float
        lambda and mu. Compressed memory accepts 0 < order < 1 (and
        1 <= lambda < 2 with either integral rule); exact memory 0 < order <= 10
        (L1: below 1).
    step : float
        Sampling period h > 0 (the time unit of the gains and of
        ``rate_limit`` and ``derivative_filter``).
    output_limits : (low, high)
        Output limits, low < high; infinite for none.
    rate_limit : float
        Largest change of the output per unit time (> 0; inf for none): each
        sample moves by at most ``rate_limit * step``, from the second
        output on (the first has no predecessor): for a bumpless start,
        take the first output in :meth:`manual` mode at the actuator's
        present value, then switch to :meth:`automatic`.
    setpoint_weight, derivative_weight : float
        b and c: e_p = b r - y, e_d = c r - y. ``derivative_weight=0`` is
        derivative on the measurement (no derivative kick on setpoint steps).
    derivative_filter : float
        Time constant Tf >= 0 of the first-order filter on the derivative
        action, backward Euler: D_f[n] = (Tf D_f[n-1] + h D[n]) / (Tf + h).
        0: no filter.
    anti_windup : bool
        Conditional integration (default True): while the output is limited
        and the error would drive it further into the limit, only the part
        of the error that brings the unlimited output to the limit enters the
        integral's history (0 if it is beyond the limit without the error).
        The history keeps all
        earlier samples, so for lambda < 1 the integral action relaxes
        (I^lambda of past samples changes with time) rather than freezing.
    integral_rule : {"trapezoid", "rectangle"} or None
        None: :func:`default_integral_rule`.
    derivative_rule : {"grunwald", "l1"}
        Grunwald-Letnikov (Riemann-Liouville) or L1 (Caputo, mu < 1).
    memory : {"compressed", "exact"}
        Compressed (default): bounded memory, the same work per update,
        within ``tol`` of exact over ``horizon`` samples. Past the horizon
        the controller keeps running (stopping a controller mid-run is the
        greater hazard), :attr:`past_horizon` becomes True and one
        :class:`HorizonWarning` is issued.
    tol, horizon : float
        Compressed memory only (as for :class:`pyfracconv.Stream`).

    Threads: one controller must not be used by two threads at once; a
    call that finds it in use (an update, a block, a mode switch, a reset
    or a save) raises :class:`BusyError` and changes nothing. The guard is
    the one :class:`pyfracconv.Stream` uses, and the C library's own busy
    flag is underneath (fc_controller_*: FC_ERR_BUSY).

    SAFETY: a controller moves real machinery. Validate in simulation and
    on the plant; keep actuator and rate limits in the hardware too; keep an
    independent safe stop that does not depend on this software; follow
    local codes, standards and licensed engineering practice.
    """

    def __init__(
        self,
        kp,
        ki=0.0,
        kd=0.0,
        *,
        integral_order,
        derivative_order,
        step,
        output_limits=(-math.inf, math.inf),
        rate_limit=math.inf,
        setpoint_weight=1.0,
        derivative_weight=1.0,
        derivative_filter=0.0,
        anti_windup=True,
        integral_rule=None,
        derivative_rule="grunwald",
        memory="compressed",
        tol=1e-10,
        horizon=1e9,
    ):
        p = ffi.new("fc_controller_params *")
        lib.fc_controller_default_params(p)
        for name, val in (("kp", kp), ("ki", ki), ("kd", kd)):
            v = check_real(name, val)
            if not math.isfinite(v):
                raise ArgumentError(f"{name}={show(val)}: must be finite")
            setattr(p, name, v)
        lam = check_real("integral_order", integral_order)
        mu = check_real("derivative_order", derivative_order)
        h = check_real("step", step)
        if not (math.isfinite(h) and h > 0):
            raise ArgumentError(f"step={show(step)}: must be finite and > 0")
        for name, v in (("integral_order", lam), ("derivative_order", mu)):
            if not (math.isfinite(v) and v > 0):
                raise ArgumentError(f"{name}={show(v)}: must be finite and > 0")
        p.integral_order, p.derivative_order, p.step = lam, mu, h
        mem = _choice("memory", memory, _MEMORY)
        p.memory = mem
        if integral_rule is None:
            integral_rule = default_integral_rule(lam, memory)
        p.integral_rule = _choice("integral_rule", integral_rule, _IRULES)
        p.derivative_rule = _choice("derivative_rule", derivative_rule, _DRULES)
        try:
            lo, hi = output_limits
        except (TypeError, ValueError):
            raise InputTypeError(f"output_limits={show(output_limits)}: expected (low, high)") from None
        lo = check_real("output_limits[0]", lo)
        hi = check_real("output_limits[1]", hi)
        if math.isnan(lo) or math.isnan(hi) or not lo < hi:
            raise ArgumentError(
                f"output_limits={show(output_limits)}: need low < high (infinite for no limit)"
            )
        p.out_min, p.out_max = lo, hi
        r = check_real("rate_limit", rate_limit)
        if not r > 0:
            raise ArgumentError(f"rate_limit={show(rate_limit)}: must be > 0 (inf for none)")
        p.rate_limit = r
        for name, val, attr in (
            ("setpoint_weight", setpoint_weight, "setpoint_weight_p"),
            ("derivative_weight", derivative_weight, "setpoint_weight_d"),
        ):
            v = check_real(name, val)
            if not math.isfinite(v):
                raise ArgumentError(f"{name}={show(val)}: must be finite")
            setattr(p, attr, v)
        tf = check_real("derivative_filter", derivative_filter)
        if not (math.isfinite(tf) and tf >= 0):
            raise ArgumentError(
                f"derivative_filter={show(derivative_filter)}: must be finite and >= 0 (0: no filter)"
            )
        p.filter_time = tf
        if not isinstance(anti_windup, (bool, np.bool_)):
            raise InputTypeError(f"anti_windup={show(anti_windup)}: expected True or False")
        p.anti_windup = lib.FC_AW_CONDITIONAL if anti_windup else lib.FC_AW_NONE
        if mem == lib.FC_MODE_COMPRESSED:
            p.tol, p.horizon = check_compressed(tol, horizon)
        out = ffi.new("fc_controller **")
        st = lib.fc_controller_create(p, out)
        if st:
            raise_for_status(st, self._create_context(st, p))
        self._init(out[0])

    # --------------------------------------------------------- internals
    @staticmethod
    def _create_context(st, p):
        if st == lib.FC_ERR_ORDER:
            ir = _IRULE_NAMES.get(p.integral_rule)
            dr = _DRULE_NAMES.get(p.derivative_rule)
            ranges = "; ".join(
                f"{name}: {range_text(order_range(name, int(p.memory)))}"
                for name in (ir, dr)
                if name is not None
            )
            return (
                f"integral_order={p.integral_order!r} ({ir}) or derivative_order="
                f"{p.derivative_order!r} ({dr}) "
                f"with memory={_MEMORY_NAMES.get(p.memory)!r}: outside the "
                f"rule's range ({ranges})"
            )
        return "Controller"

    def _init(self, c):
        self._c = ffi.gc(c, lib.fc_controller_free)
        self._u = ffi.new("double *")
        self._warned = False
        self._lock = _Guard()

    def _busy(self, what):
        return BusyError(f"{what}: the controller is being used by another thread; it is unchanged")

    def _check(self, st, what):
        if st:
            raise_for_status(st, what + "; the controller is unchanged")

    def _horizon_check(self):
        if not self._warned and self.past_horizon:
            self._warned = True
            warnings.warn(
                "Controller: past the horizon of its compressed memory; it keeps "
                "running, but the tolerance is no longer promised (use a longer "
                "horizon or memory='exact')",
                HorizonWarning,
                stacklevel=3,
            )

    # ------------------------------------------------------------ public
    def update(self, setpoint, measurement):
        """One sample: the output for this setpoint and measurement.

        Parameters
        ----------
        setpoint : float
            The setpoint r of this sample (finite).
        measurement : float
            The measured output y of the plant at this sample (finite).

        Returns
        -------
        float
            The controller output u, within the output and rate limits (in
            manual mode the manual output).

        Raises
        ------
        SampleError
            setpoint or measurement NaN or infinite (the controller is
            unchanged).
        InputTypeError
            setpoint or measurement not a real number.
        BusyError
            Another thread is using the controller.

        Warns
        -----
        HorizonWarning
            Once, when compressed memory passes its horizon (the controller
            keeps running; the tolerance is no longer promised).

        See Also
        --------
        update_block : many samples at once.
        manual, automatic, reset

        Notes
        -----
        SAFETY: as for the class: validate in simulation and on the plant,
        keep actuator and rate limits in the hardware too, keep an
        independent safe stop, follow local codes and licensed practice.

        Examples
        --------
        With kp = 0, ki = 1 and integral order 1 under the rectangle rule
        the output is Ki times the left rectangle sum of the errors (common
        practice): h, 2h, ... after a first 0 for a constant error 1:

        >>> import pyfracconv
        >>> c = pyfracconv.Controller(0.0, 1.0, integral_order=1.0, derivative_order=0.5,
        ...                           step=0.5, integral_rule="rectangle", memory="exact")
        >>> [c.update(1.0, 0.0) for _ in range(4)]
        [0.0, 0.5, 1.0, 1.5]
        >>> c.update(float("nan"), 0.0)
        Traceback (most recent call last):
        ...
        pyfracconv._errors.SampleError: ...
        >>> c.count
        4
        """
        if not self._lock.acquire():
            raise self._busy("update")
        try:
            st = lib.fc_controller_update(self._c, setpoint, measurement, self._u)
            u = self._u[0]
        except TypeError:
            raise InputTypeError(
                f"update({show(setpoint)}, {show(measurement)}): expected real numbers"
            ) from None
        finally:
            self._lock.release()
        if st:
            self._check(st, f"update(setpoint={show(setpoint)}, measurement={show(measurement)})")
        if not self._warned:
            self._horizon_check()
        return u

    def update_block(self, setpoints, measurements):
        """Outputs for a block of samples (arrays of one length, or a scalar
        broadcast against an array); the same values as calling
        :meth:`update` for each sample in turn.

        Parameters
        ----------
        setpoints : array_like
            The setpoints, one per sample (or a scalar for all).
        measurements : array_like
            The measurements, one per sample (or a scalar for all).

        Returns
        -------
        numpy.ndarray
            The outputs, one per sample.

        Raises
        ------
        ArgumentError
            The shapes do not broadcast.
        SampleError
            A NaN or infinite sample (the message names it; the controller
            is unchanged).
        InputTypeError
            Not numeric.
        BusyError
            Another thread is using the controller.

        Warns
        -----
        HorizonWarning
            As for :meth:`update`.

        See Also
        --------
        update

        Notes
        -----
        SAFETY: as for the class: validate in simulation and on the plant,
        keep actuator and rate limits in the hardware too, keep an
        independent safe stop, follow local codes and licensed practice.

        Examples
        --------
        A proportional controller gives Kp (r - y), clamped to the output
        limits (common practice):

        >>> import pyfracconv
        >>> c = pyfracconv.Controller(2.0, integral_order=0.5, derivative_order=0.5,
        ...                           step=0.1, output_limits=(-1.0, 1.0))
        >>> c.update_block(1.0, [0.75, 0.5, 0.0, 2.0])
        array([ 0.5,  1. ,  1. , -1. ])
        >>> c.limited
        True
        """
        if not self._lock.acquire():
            raise self._busy("update_block")
        try:
            return self._update_block(setpoints, measurements)
        finally:
            self._lock.release()

    def _update_block(self, setpoints, measurements):
        r = as_float_array("setpoints", setpoints)
        y = as_float_array("measurements", measurements)
        try:
            r, y = np.broadcast_arrays(r, y)
        except ValueError:
            raise ArgumentError(f"setpoints {r.shape} and measurements {y.shape}: shapes differ") from None
        if r.ndim != 1:
            r, y = r.reshape(-1), y.reshape(-1)
        r = np.ascontiguousarray(r, dtype=np.float64)
        y = np.ascontiguousarray(y, dtype=np.float64)
        n = r.size
        u = np.empty(n)
        done = ffi.new("size_t *")
        st = lib.fc_controller_update_block(
            self._c,
            ffi.from_buffer("double[]", r),
            ffi.from_buffer("double[]", y),
            n,
            ffi.from_buffer("double[]", u),
            done,
        )
        if st:
            if st == lib.FC_ERR_NONFINITE:
                bad = int(np.flatnonzero(~(np.isfinite(r) & np.isfinite(y)))[0])
                raise_for_status(
                    st,
                    f"sample {bad} (setpoint {r[bad]!r}, "
                    f"measurement {y[bad]!r}); the controller is "
                    "unchanged",
                )
            raise_for_status(st, f"update_block: stopped after {done[0]} samples (those are applied)")
        self._horizon_check()
        return u

    def _guarded(self, what, fn, *args):
        if not self._lock.acquire():
            raise self._busy(what)
        try:
            return fn(self._c, *args)
        finally:
            self._lock.release()

    def manual(self, output):
        """Switch to manual mode with this output (updates then return it,
        clamped to the limits, while the controller tracks it for a bumpless
        return to automatic). Call again to change the manual output.

        Parameters
        ----------
        output : float
            The manual output (finite; clamped to the output limits).

        Returns
        -------
        None

        Raises
        ------
        SampleError
            output not finite (the controller is unchanged).
        InputTypeError
            output not a real number.
        BusyError
            Another thread is using the controller.

        See Also
        --------
        automatic, mode

        Notes
        -----
        SAFETY: as for the class: validate in simulation and on the plant,
        keep actuator and rate limits in the hardware too, keep an
        independent safe stop, follow local codes and licensed practice.

        Examples
        --------
        >>> import pyfracconv
        >>> c = pyfracconv.Controller(2.0, integral_order=0.5, derivative_order=0.5,
        ...                           step=0.1, output_limits=(-1.0, 1.0))
        >>> c.manual(5.0)
        >>> c.mode, c.update(1.0, 0.0)      # clamped to the upper limit
        ('manual', 1.0)
        """
        v = check_real("output", output)
        self._check(self._guarded("manual", lib.fc_controller_set_manual, v), f"manual({show(output)})")

    def automatic(self):
        """Switch to automatic mode (bumpless: the tracking bias is held).

        Returns
        -------
        None

        Raises
        ------
        BusyError
            Another thread is using the controller.

        See Also
        --------
        manual, mode

        Notes
        -----
        SAFETY: as for the class: validate in simulation and on the plant,
        keep actuator and rate limits in the hardware too, keep an
        independent safe stop, follow local codes and licensed practice.

        Examples
        --------
        Bumpless transfer (common practice): with the error unchanged, the
        first automatic output equals the last manual one; here a
        proportional controller, Kp = 2, tracked the manual output 1 at
        error 1 (bias -1), so error 0.5 then gives 0:

        >>> import pyfracconv
        >>> c = pyfracconv.Controller(2.0, integral_order=0.5, derivative_order=0.5,
        ...                           step=0.1)
        >>> c.manual(1.0)
        >>> c.update(1.0, 0.0)
        1.0
        >>> c.automatic()
        >>> c.mode, c.update(1.0, 0.0), c.update(1.0, 0.5)
        ('automatic', 1.0, 0.0)
        """
        self._check(self._guarded("automatic", lib.fc_controller_set_auto), "automatic()")

    def reset(self):
        """Forget every sample, bias 0, automatic mode.

        Returns
        -------
        None

        Raises
        ------
        BusyError
            Another thread is using the controller (nothing is forgotten).

        See Also
        --------
        count, automatic

        Notes
        -----
        SAFETY: as for the class: validate in simulation and on the plant,
        keep actuator and rate limits in the hardware too, keep an
        independent safe stop, follow local codes and licensed practice.

        Examples
        --------
        After a reset the integral starts again from 0 (the left rectangle
        sum at order 1, common practice):

        >>> import pyfracconv
        >>> c = pyfracconv.Controller(0.0, 1.0, integral_order=1.0, derivative_order=0.5,
        ...                           step=0.5, integral_rule="rectangle", memory="exact")
        >>> c.manual(3.0)
        >>> [c.update(1.0, 0.0) for _ in range(2)]
        [3.0, 3.0]
        >>> c.reset()
        >>> c.count, c.mode, [c.update(1.0, 0.0) for _ in range(3)]
        (0, 'automatic', [0.0, 0.5, 1.0])
        """
        self._check(self._guarded("reset", lib.fc_controller_reset), "reset()")
        self._warned = False

    def _status(self):
        s = ffi.new("int *")
        raise_for_status(lib.fc_controller_status(self._c, s), "status")
        return s[0]

    @property
    def limited(self):
        """True if the last output was limited (output or rate limit).

        See Also
        --------
        terms, update

        Examples
        --------
        A proportional controller gives Kp (r - y), clamped to the limits
        (common practice):

        >>> import pyfracconv
        >>> c = pyfracconv.Controller(2.0, integral_order=0.5, derivative_order=0.5,
        ...                           step=0.1, output_limits=(-1.0, 1.0))
        >>> c.update(1.0, 0.75), c.limited
        (0.5, False)
        >>> c.update(1.0, 0.0), c.limited
        (1.0, True)
        """
        return bool(self._status() & lib.FC_CTRL_LIMITED)

    @property
    def past_horizon(self):
        """True once a compressed stream has passed its horizon.

        See Also
        --------
        HorizonWarning, params

        Examples
        --------
        The controller keeps running past the horizon (stopping a controller
        mid-run is the greater hazard) and warns once:

        >>> import warnings
        >>> import pyfracconv
        >>> c = pyfracconv.Controller(0.0, 1.0, integral_order=0.5, derivative_order=0.5,
        ...                           step=1.0, horizon=3)
        >>> with warnings.catch_warnings(record=True) as caught:
        ...     warnings.simplefilter("always")
        ...     flags = [(c.update(1.0, 0.0), c.past_horizon)[1] for _ in range(5)]
        >>> flags, [w.category.__name__ for w in caught]
        ([False, False, False, False, True], ['HorizonWarning'])
        """
        return bool(self._status() & lib.FC_CTRL_PAST_HORIZON)

    @property
    def mode(self):
        """'manual' or 'automatic'.

        See Also
        --------
        manual, automatic

        Examples
        --------
        >>> import pyfracconv
        >>> c = pyfracconv.Controller(2.0, integral_order=0.5, derivative_order=0.5,
        ...                           step=0.1, output_limits=(-1.0, 1.0))
        >>> c.mode
        'automatic'
        >>> c.manual(0.0)
        >>> c.mode
        'manual'
        """
        return "manual" if self._status() & lib.FC_CTRL_MANUAL else "automatic"

    @property
    def count(self):
        """Samples taken since creation or the last reset.

        See Also
        --------
        reset, update

        Examples
        --------
        >>> import pyfracconv
        >>> c = pyfracconv.Controller(2.0, integral_order=0.5, derivative_order=0.5,
        ...                           step=0.1, output_limits=(-1.0, 1.0))
        >>> _ = c.update_block(1.0, [0.0, 0.5, 1.0])
        >>> c.count
        3
        """
        n = ffi.new("uint64_t *")
        raise_for_status(lib.fc_controller_count(self._c, n), "count")
        return int(n[0])

    @property
    def nbytes(self):
        """Bytes of memory held (streams included).

        See Also
        --------
        params

        Examples
        --------
        Compressed memory stays bounded (common practice):

        >>> import pyfracconv
        >>> c = pyfracconv.Controller(1.0, 0.5, 0.1, integral_order=0.5,
        ...                           derivative_order=0.5, step=0.01)
        >>> before = c.nbytes
        >>> _ = c.update_block(1.0, [0.0] * 100)
        >>> c.nbytes == before
        True
        """
        n = ffi.new("size_t *")
        raise_for_status(lib.fc_controller_nbytes(self._c, n), "nbytes")
        return int(n[0])

    @property
    def terms(self):
        """The last update's terms: proportional, integral (Ki times the
        integral), derivative (filtered), bias, unlimited sum, output.

        See Also
        --------
        limited, update

        Examples
        --------
        >>> import pyfracconv
        >>> c = pyfracconv.Controller(2.0, integral_order=0.5, derivative_order=0.5,
        ...                           step=0.1, output_limits=(-1.0, 1.0))
        >>> _ = c.update(1.0, 0.0)
        >>> t = c.terms
        >>> t["proportional"], t["unlimited"], t["output"]
        (2.0, 2.0, 1.0)
        """
        t = ffi.new("double[6]")
        raise_for_status(lib.fc_controller_terms(self._c, t), "terms")
        return dict(zip(("proportional", "integral", "derivative", "bias", "unlimited", "output"), list(t)))

    @property
    def params(self):
        """The parameters as keyword arguments of the constructor.

        See Also
        --------
        Controller, export_controller_c

        Examples
        --------
        >>> import pyfracconv
        >>> c = pyfracconv.Controller(2.0, integral_order=0.5, derivative_order=0.5,
        ...                           step=0.1, output_limits=(-1.0, 1.0))
        >>> p = c.params
        >>> p["kp"], p["output_limits"], p["memory"], p["integral_rule"]
        (2.0, (-1.0, 1.0), 'compressed', 'trapezoid')
        >>> pyfracconv.Controller(**p).params == p
        True
        """
        p = ffi.new("fc_controller_params *")
        raise_for_status(lib.fc_controller_get_params(self._c, p), "params")
        mem = _MEMORY_NAMES[p.memory]
        d = dict(
            kp=p.kp,
            ki=p.ki,
            kd=p.kd,
            integral_order=p.integral_order,
            derivative_order=p.derivative_order,
            step=p.step,
            output_limits=(p.out_min, p.out_max),
            rate_limit=p.rate_limit,
            setpoint_weight=p.setpoint_weight_p,
            derivative_weight=p.setpoint_weight_d,
            derivative_filter=p.filter_time,
            anti_windup=p.anti_windup == lib.FC_AW_CONDITIONAL,
            integral_rule=_IRULE_NAMES[p.integral_rule],
            derivative_rule=_DRULE_NAMES[p.derivative_rule],
            memory=mem,
        )
        if mem == "compressed":
            d.update(tol=p.tol, horizon=p.horizon)
        return d

    def save(self):
        """The whole state as bytes (versioned, checksummed); see
        :meth:`load`.

        Returns
        -------
        bytes

        Raises
        ------
        BusyError
            Another thread is using the controller.
        OutOfMemory
            The bytes cannot be allocated.

        See Also
        --------
        load, save_file

        Examples
        --------
        >>> import numpy as np
        >>> import pyfracconv
        >>> c = pyfracconv.Controller(1.0, 0.5, 0.1, integral_order=0.5,
        ...                           derivative_order=0.5, step=0.01)
        >>> y = np.sin(0.05 * np.arange(40))   # an invented test record
        >>> _ = c.update_block(1.0, y[:20])
        >>> r = pyfracconv.Controller.load(c.save())
        >>> bool(np.array_equal(r.update_block(1.0, y[20:]), c.update_block(1.0, y[20:])))
        True
        """
        if not self._lock.acquire():
            raise self._busy("save")
        try:
            n = ffi.new("size_t *")
            raise_for_status(lib.fc_controller_save_size(self._c, n), "save")
            buf = ffi.new("unsigned char[]", n[0])
            w = ffi.new("size_t *")
            raise_for_status(lib.fc_controller_save(self._c, buf, n[0], w), "save")
            return bytes(ffi.buffer(buf, w[0]))
        finally:
            self._lock.release()

    @classmethod
    def load(cls, data):
        """A controller from :meth:`save` bytes. The data are untrusted
        input: every field is bounded and cross-checked and the embedded
        streams are rebuilt and compared (StateError otherwise). The loaded
        controller continues exactly, bit for bit, as the saved one would.

        Parameters
        ----------
        data : bytes-like
            What :meth:`save` returned.

        Returns
        -------
        Controller

        Raises
        ------
        InputTypeError
            data is not bytes-like.
        StateError
            data truncated, corrupted, forged, or of another format.
        OutOfMemory
            The controller cannot be allocated.

        See Also
        --------
        save, load_file

        Notes
        -----
        SAFETY: as for the class: validate in simulation and on the plant,
        keep actuator and rate limits in the hardware too, keep an
        independent safe stop, follow local codes and licensed practice.

        Examples
        --------
        >>> import pyfracconv
        >>> c = pyfracconv.Controller(1.0, 0.5, integral_order=0.5,
        ...                           derivative_order=0.5, step=0.01)
        >>> r = pyfracconv.Controller.load(c.save())
        >>> r.params == c.params
        True
        >>> pyfracconv.Controller.load(c.save()[:-1])
        Traceback (most recent call last):
        ...
        pyfracconv._errors.StateError: ...
        """
        if not isinstance(data, (bytes, bytearray, memoryview)):
            raise InputTypeError(f"data: expected bytes, got {type(data).__name__}")
        b = bytes(data)
        out = ffi.new("fc_controller **")
        st = lib.fc_controller_load(b, len(b), out)
        if st:
            raise_for_status(st, "Controller.load")
        self = cls.__new__(cls)
        self._init(out[0])
        return self

    def save_file(self, path):
        """Write :meth:`save` to the file ``path`` atomically (temporary
        file in the same directory, fsync, rename over ``path``, directory
        sync; see :meth:`pyfracconv.Stream.save_file`). The bytes are those
        of the C library's ``fc_controller_save_file``: either side reads
        the other's files.

        Parameters
        ----------
        path : str, bytes or os.PathLike
            The checkpoint file; its directory must exist.

        Returns
        -------
        None

        Raises
        ------
        FileError
            The file could not be written; the old file (if any) and the
            controller are unchanged.
        ArgumentError, InputTypeError
            path is empty, ends in '/', contains NUL or is not a path.
        BusyError
            Another thread is using the controller.

        See Also
        --------
        load_file, save

        Examples
        --------
        At integral order 1 under the rectangle rule the integral action is
        the left rectangle sum (common practice), across a file:

        >>> import os, tempfile
        >>> import pyfracconv
        >>> c = pyfracconv.Controller(0.0, 1.0, integral_order=1.0, derivative_order=0.5,
        ...                           step=0.5, integral_rule="rectangle", memory="exact")
        >>> [c.update(1.0, 0.0) for _ in range(2)]
        [0.0, 0.5]
        >>> with tempfile.TemporaryDirectory() as d:
        ...     path = os.path.join(d, "pid.ckpt")
        ...     c.save_file(path)
        ...     r = pyfracconv.Controller.load_file(path)
        >>> [r.update(1.0, 0.0) for _ in range(2)]
        [1.0, 1.5]
        """
        p = check_write_path(path)
        write_file("save_file", p, self.save(), "the controller")

    @classmethod
    def load_file(cls, path, *, max_size=DEFAULT_MAX_SIZE):
        """A controller from a file written by :meth:`save_file` (or
        ``fc_controller_save_file``). The file is untrusted input: at most
        ``max_size`` bytes are read and they go through :meth:`load`.

        Parameters
        ----------
        path : str, bytes or os.PathLike
            The checkpoint file.
        max_size : int, optional
            Longest file accepted, in bytes (default 2**30).

        Returns
        -------
        Controller

        Raises
        ------
        FileError
            The file could not be read.
        StateError
            The file is truncated, corrupted, forged, of another format or
            longer than max_size.
        ArgumentError, InputTypeError
            path or max_size not valid.

        See Also
        --------
        save_file, load

        Notes
        -----
        SAFETY: as for the class: validate in simulation and on the plant,
        keep actuator and rate limits in the hardware too, keep an
        independent safe stop, follow local codes and licensed practice.

        Examples
        --------
        >>> import os, tempfile
        >>> import pyfracconv
        >>> c = pyfracconv.Controller(1.0, 0.5, integral_order=0.5,
        ...                           derivative_order=0.5, step=0.01)
        >>> with tempfile.TemporaryDirectory() as d:
        ...     path = os.path.join(d, "pid.ckpt")
        ...     c.save_file(path)
        ...     r = pyfracconv.Controller.load_file(path)
        ...     try:
        ...         pyfracconv.Controller.load_file(path, max_size=8)
        ...     except pyfracconv.StateError:
        ...         print("refused: longer than max_size")
        refused: longer than max_size
        >>> r.params == c.params
        True
        """
        p = check_path("path", path)
        data = read_file("load_file", p, check_max_size(max_size))
        try:
            return cls.load(data)
        except StateError as exc:
            raise state_error("load_file", p, exc) from None

    def __repr__(self):
        p = self.params
        return (
            f"Controller(kp={p['kp']!r}, ki={p['ki']!r}, kd={p['kd']!r}, "
            f"integral_order={p['integral_order']!r}, derivative_order="
            f"{p['derivative_order']!r}, step={p['step']!r}, memory="
            f"{p['memory']!r}, mode={self.mode!r}, count={self.count})"
        )
