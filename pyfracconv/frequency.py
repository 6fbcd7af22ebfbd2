"""Frequency responses of the discrete operators and of a controller.

A rule applied to samples is a linear time-invariant filter (apart from the
trapezoid rule's starting term, a transient that involves x_0 only): its
output is y_n = sum_j h_j x_{n-j}, and its frequency response at angular
frequency w is H = sum_j h_j z^j with z = exp(-i w h). Beside it, the ideal
operator's response (i w)^a (a < 0 for integrals), so that the band where
the discretisation holds can be read off.

How H is computed:
  - Grunwald-Letnikov, exact memory: the generating function
    ((1 - z) / h)^a (Lubich, SIAM J. Math. Anal. 17, 1986), no truncation;
  - every other case: the series over the first M lags, after k summations
    by parts, sum_j h_j z^j = (1 - z)^-k sum_j (D^k h)_j z^j with
    (D h)_j = h_j - h_{j-1}, k = floor(a) + 1 for integrals of order a
    (so that D^k h decreases to 0 in magnitude), k = 1 for derivatives. The
    tail beyond M is bounded by Dirichlet's test: when |D^k h_j| decreases
    monotonically to 0 for j >= M (checked on the last computed terms, up
    to rounding), |tail| <= 2 |D^k h_M| / |1 - z|^(k+1); the rounding of
    the differences adds M 2^(k+1) eps max|h| / |1 - z|^k. Their sum is
    returned as ``bound``. L1: H = h^-a/Gamma(2-a) (1 - z) sum_k d_k z^k.
  - compressed memory: the impulse response of a compressed stream over the
    first M lags (the difference to the exact weights summed exactly) plus
    the exact tail; the compressed kernel's deviation beyond M lags (within
    tol per lag up to the horizon) is not summed, and ``bound`` adds the
    estimate tol * sum_{M <= j <= min(horizon, 100 M)} |h_j| for it.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from ._errors import ArgumentError, InputTypeError
from ._core import check_real, check_rule, show, weights

__all__ = ["FrequencyResponse", "operator_response", "controller_response"]

_INTEGRALS = ("rectangle", "trapezoid")


@dataclass
class FrequencyResponse:
    """omega: angular frequencies; response: complex values of the discrete
    operator; ideal: the continuous operator's values; bound: an upper bound
    of |response - the untruncated series| (0 where closed forms are used)."""

    omega: np.ndarray
    response: np.ndarray
    ideal: np.ndarray
    bound: np.ndarray

    @property
    def magnitude(self):
        """|response|.

        See Also
        --------
        phase, ideal_magnitude

        Examples
        --------
        At order 1 the rectangle rule is the left rectangle sum, with the
        response h z / (1 - z), z = exp(-i w h) (common practice); the ideal
        integrator 1 / (i w) has magnitude 1/w and phase -pi/2:

        >>> import numpy as np
        >>> import pyfracconv
        >>> h, w = 0.1, np.array([0.5, 2.0])
        >>> r = pyfracconv.operator_response("rectangle", 1.0, h, w)
        >>> z = np.exp(-1j * w * h)
        >>> bool(np.allclose(r.magnitude, np.abs(h * z / (1 - z)), rtol=1e-9))
        True
        """
        return np.abs(self.response)

    @property
    def phase(self):
        """Phase in radians.

        See Also
        --------
        magnitude, ideal_phase

        Examples
        --------
        At order 1 the rectangle rule is the left rectangle sum, with the
        response h z / (1 - z), z = exp(-i w h) (common practice); the ideal
        integrator 1 / (i w) has magnitude 1/w and phase -pi/2:

        >>> import numpy as np
        >>> import pyfracconv
        >>> h, w = 0.1, np.array([0.5, 2.0])
        >>> r = pyfracconv.operator_response("rectangle", 1.0, h, w)
        >>> z = np.exp(-1j * w * h)
        >>> bool(np.allclose(r.phase, np.angle(h * z / (1 - z)), atol=1e-9))
        True
        """
        return np.angle(self.response)

    @property
    def ideal_magnitude(self):
        """|ideal|.

        See Also
        --------
        ideal_phase, magnitude

        Examples
        --------
        At order 1 the rectangle rule is the left rectangle sum, with the
        response h z / (1 - z), z = exp(-i w h) (common practice); the ideal
        integrator 1 / (i w) has magnitude 1/w and phase -pi/2:

        >>> import numpy as np
        >>> import pyfracconv
        >>> h, w = 0.1, np.array([0.5, 2.0])
        >>> r = pyfracconv.operator_response("rectangle", 1.0, h, w)
        >>> z = np.exp(-1j * w * h)
        >>> bool(np.allclose(r.ideal_magnitude, 1 / w))
        True
        """
        return np.abs(self.ideal)

    @property
    def ideal_phase(self):
        """Phase of the ideal operator in radians.

        See Also
        --------
        ideal_magnitude, phase

        Examples
        --------
        At order 1 the rectangle rule is the left rectangle sum, with the
        response h z / (1 - z), z = exp(-i w h) (common practice); the ideal
        integrator 1 / (i w) has magnitude 1/w and phase -pi/2:

        >>> import numpy as np
        >>> import pyfracconv
        >>> h, w = 0.1, np.array([0.5, 2.0])
        >>> r = pyfracconv.operator_response("rectangle", 1.0, h, w)
        >>> z = np.exp(-1j * w * h)
        >>> bool(np.allclose(r.ideal_phase, -np.pi / 2))
        True
        """
        return np.angle(self.ideal)

    @property
    def relative_error(self):
        """|response - ideal| / |ideal|: where it is small, the
        discretisation holds.

        See Also
        --------
        operator_response

        Examples
        --------
        At order 1 the rectangle rule is the left rectangle sum, with the
        response h z / (1 - z), z = exp(-i w h) (common practice); the ideal
        integrator 1 / (i w) has magnitude 1/w and phase -pi/2:

        >>> import numpy as np
        >>> import pyfracconv
        >>> h, w = 0.1, np.array([0.5, 2.0])
        >>> r = pyfracconv.operator_response("rectangle", 1.0, h, w)
        >>> z = np.exp(-1j * w * h)
        >>> exact = np.abs(h * z / (1 - z) - 1 / (1j * w)) * w
        >>> bool(np.allclose(r.relative_error, exact, rtol=1e-6))
        True
        >>> bool(r.relative_error[0] < r.relative_error[1])  # worse towards Nyquist
        True
        """
        return np.abs(self.response - self.ideal) / np.abs(self.ideal)


def _omega(omega, step):
    w = np.atleast_1d(np.asarray(omega, dtype=float))
    if w.ndim != 1 or w.size == 0:
        raise ArgumentError("omega: expected a non-empty 1-d array of frequencies")
    nyq = math.pi / step
    if not np.all(np.isfinite(w)) or np.any(w <= 0) or np.any(w > nyq * (1 + 1e-12)):
        raise ArgumentError(
            f"omega: every frequency must satisfy 0 < omega <= pi/step = {nyq:g} (the Nyquist frequency)"
        )
    return w


def _impulse(rule, order, step, m, memory, tol, horizon):
    """h_j, j < m: the impulse response (L1: the step response)."""
    if memory == "exact":
        if rule == "rectangle":
            return np.r_[0.0, weights(rule, order, m - 1, step)]
        return weights(rule, order, m, step)
    from .stream import Stream

    s = (Stream.integral if rule in _INTEGRALS else Stream.derivative)(
        order, step, rule=rule, mode="compressed", tol=tol, horizon=horizon
    )
    x = np.zeros(m + 1)
    if rule == "l1":
        x[1:] = 1.0
    else:
        x[1] = 1.0
    return np.asarray(s.push_many(x))[1:]


def _series(h, z, k):
    """sum_j h_j z^j by k summations by parts, and a bound of the error:
    the Dirichlet tail bound plus the rounding of the differences."""
    h = np.asarray(h, dtype=float)
    d = h.copy()
    for _ in range(k):
        d = np.diff(np.r_[0.0, d])
    m = d.size
    tail = np.abs(d[-max(8, m // 10) :])
    # monotone up to the rounding of the differences: each difference of
    # k-fold differences is off by at most 2^k * 2 eps * max |h|
    noise = 2.0 ** (k + 1) * np.finfo(float).eps * float(np.max(np.abs(h)))
    if not np.all(np.diff(tail) <= 2 * noise):
        raise ArgumentError(
            "the weights' tail is not monotone: no stated bound for the truncated series (use more terms)"
        )
    j = np.arange(m)
    s = np.array([np.dot(d, zz**j) for zz in z])
    one = np.abs(1 - z)
    bound = (2 * (abs(d[-1]) + noise)) / one ** (k + 1) + m * noise / one**k
    return s / (1 - z) ** k, bound


def operator_response(rule, order, step, omega, *, memory="exact", terms=65536, tol=1e-10, horizon=1e9):
    """The complex frequency response of a rule at angular frequencies
    ``omega`` (0 < omega <= pi/step), beside the ideal (i omega)^(+-order).

    rule: 'rectangle' or 'trapezoid' (integrals, ideal (i w)^-order),
    'grunwald' or 'l1' (derivatives, ideal (i w)^order); memory 'exact' or
    'compressed' (tol, horizon as for Stream); terms: the lags M summed
    where no closed form is used. Returns a :class:`FrequencyResponse`.

    Parameters
    ----------
    rule : {'rectangle', 'trapezoid', 'grunwald', 'l1'}
        The rule, as for :class:`pyfracconv.Stream`.
    order : float
        The order a, 0 < a <= 10 (within the rule's range).
    step : float
        The sampling step h, finite and > 0.
    omega : array_like
        Angular frequencies, a non-empty 1-d array, 0 < omega <= pi/step.
    memory : {'exact', 'compressed'}, optional
        Exact weights (default) or a compressed stream's impulse response.
    terms : int, optional
        The lags M summed where no closed form is used (>= 16).
    tol, horizon : float, optional
        Compressed memory only (as for :class:`pyfracconv.Stream`).

    Returns
    -------
    FrequencyResponse
        ``omega``, ``response``, ``ideal`` and ``bound`` (see the module
        notes), with ``magnitude``, ``phase`` and ``relative_error``.

    Raises
    ------
    ArgumentError
        rule, order, step, memory, terms or omega out of range.
    InputTypeError
        order or step not a real number.

    See Also
    --------
    controller_response : a controller's linear part.
    pyfracconv.weights : the weights h_j whose series this is.

    Examples
    --------
    The Grunwald-Letnikov response ((1 - z)/h)^a approaches the ideal
    (i w)^a with the relative error a w h / 2 to first order (Lubich,
    SIAM J. Math. Anal. 17, 1986); the ideal phase is a pi / 2:

    >>> import numpy as np
    >>> import pyfracconv
    >>> r = pyfracconv.operator_response("grunwald", 0.5, 1e-3, [1.0, 10.0])
    >>> np.round(r.relative_error / (0.5 * r.omega * 1e-3 / 2), 2)
    array([1., 1.])
    >>> bool(np.allclose(r.ideal_phase, 0.5 * np.pi / 2))
    True

    At order 1 the product trapezoidal rule is the trapezoidal rule, with
    the response (h/2) (1 + z) / (1 - z) (common practice), z = exp(-i w h):

    >>> h, w = 0.1, np.array([0.5, 2.0])
    >>> z = np.exp(-1j * w * h)
    >>> r = pyfracconv.operator_response("trapezoid", 1.0, h, w)
    >>> bool(np.all(np.abs(r.response - h / 2 * (1 + z) / (1 - z)) <= r.bound + 1e-12))
    True
    >>> pyfracconv.operator_response("grunwald", 0.5, 0.1, [100.0])
    Traceback (most recent call last):
    ...
    pyfracconv._errors.ArgumentError: omega: every frequency must satisfy 0 < omega <= pi/step ...
    """
    check_rule(rule)
    order = check_real("order", order)
    h = check_real("step", step)
    if not (math.isfinite(h) and h > 0):
        raise ArgumentError(f"step={show(step)}: must be finite and > 0")
    if not (math.isfinite(order) and 0 < order <= 10):
        raise ArgumentError(f"order={show(order)}: must be in (0, 10]")
    if memory not in ("exact", "compressed"):
        raise ArgumentError(f"memory={show(memory)}: expected 'exact' or 'compressed'")
    w = _omega(omega, h)
    z = np.exp(-1j * w * h)
    integral = rule in _INTEGRALS
    ideal = (1j * w) ** (-order if integral else order)
    if rule == "grunwald" and memory == "exact":
        return FrequencyResponse(w, ((1 - z) / h) ** order, ideal, np.zeros_like(w))
    m = int(terms)
    if memory == "compressed":
        m = int(min(m, math.floor(horizon) + 1))
    if m < 16:
        raise ArgumentError(f"terms={show(terms)}: need at least 16")
    k = (math.floor(order) + 1) if integral else 1
    # he: the impulse response; L1: the weights c d_j, H = (1 - z) sum c d_j z^j
    he = _impulse(rule, order, h, m, "exact", tol, horizon)
    s, b = _series(he, z, k)
    if memory == "compressed":
        hc = _impulse(rule, order, h, m, "compressed", tol, horizon)
        j = np.arange(m)
        s = s + np.array([np.dot(hc - he, zz**j) for zz in z])
        # deviation of lags beyond M: tol * sum |h_j|, estimated from the
        # power law fitted to the last exact terms
        p = math.log(abs(he[-1]) / abs(he[m // 2])) / math.log((m - 1) / (m // 2))
        last = min(float(horizon), 100.0 * m)
        if last > m:
            if abs(p + 1) < 1e-9:
                est = abs(he[-1]) * (m - 1) * math.log(last / (m - 1))
            else:
                est = abs(he[-1]) * (m - 1) * ((last / (m - 1)) ** (p + 1) - 1) / (p + 1)
            b = b + tol * abs(est)
    if rule == "l1":
        s, b = (1 - z) * s, np.abs(1 - z) * b
    return FrequencyResponse(w, s, ideal, b)


def controller_response(controller, omega, *, terms=65536):
    """The frequency response C(e^{i w h}) from the error to the output of a
    :class:`pyfracconv.Controller` (linear part: limits, rate limit and
    manual mode are not linear and are left out; the setpoint weights affect
    only the setpoint path, not this one), beside the ideal
    Kp + Ki (i w)^-lambda + Kd (i w)^mu / (1 + i w Tf).

    The derivative filter D_f[n] = (Tf D_f[n-1] + h D[n]) / (Tf + h) has the
    response h / (Tf + h - Tf z), z = exp(-i w h).

    Parameters
    ----------
    controller : pyfracconv.Controller
        The controller (its ``params``; the samples it has seen do not
        matter).
    omega : array_like
        Angular frequencies, a non-empty 1-d array, 0 < omega <= pi/step.
    terms : int, optional
        The lags summed for each fractional action (>= 16), as for
        :func:`operator_response`.

    Returns
    -------
    FrequencyResponse
        ``response`` the discrete controller's, ``ideal`` the continuous
        one's, ``bound`` the summed bounds of its actions.

    Raises
    ------
    InputTypeError
        controller is not a :class:`pyfracconv.Controller`.
    ArgumentError
        omega or terms out of range.

    See Also
    --------
    operator_response : one rule.
    Controller : the controller.

    Notes
    -----
    SAFETY: a frequency response is a design aid, not a validation:
    validate the controller in simulation and on the plant, keep actuator
    and rate limits in the hardware too, keep an independent safe stop, and
    follow local codes and licensed engineering practice.

    Examples
    --------
    A PI controller with integral order 1 under the trapezoidal rule has
    C = Kp + Ki (h/2) (1 + z) / (1 - z) (common practice), beside the
    ideal Kp + Ki / (i w):

    >>> import numpy as np
    >>> import pyfracconv
    >>> h, w = 0.1, np.array([0.5, 2.0])
    >>> c = pyfracconv.Controller(2.0, 1.0, integral_order=1.0, derivative_order=0.5,
    ...                           step=h, integral_rule="trapezoid", memory="exact")
    >>> r = pyfracconv.controller_response(c, w)
    >>> z = np.exp(-1j * w * h)
    >>> bool(np.all(np.abs(r.response - (2 + h / 2 * (1 + z) / (1 - z))) <= r.bound + 1e-12))
    True
    >>> bool(np.allclose(r.ideal, 2 + 1 / (1j * w)))
    True
    >>> pyfracconv.controller_response(None, w)
    Traceback (most recent call last):
    ...
    pyfracconv._errors.InputTypeError: controller=None: expected a pyfracconv.Controller
    """
    from .control import Controller

    if not isinstance(controller, Controller):
        raise InputTypeError(f"controller={show(controller)}: expected a pyfracconv.Controller")
    p = controller.params
    h = p["step"]
    w = _omega(omega, h)
    z = np.exp(-1j * w * h)
    mem = p["memory"]
    kw = dict(memory=mem, terms=terms)
    if mem == "compressed":
        kw.update(tol=p["tol"], horizon=p["horizon"])
    resp = np.full(w.shape, p["kp"], dtype=complex)
    ideal = np.full(w.shape, p["kp"], dtype=complex)
    bound = np.zeros_like(w)
    if p["ki"] != 0:
        r = operator_response(p["integral_rule"], p["integral_order"], h, w, **kw)
        resp += p["ki"] * r.response
        ideal += p["ki"] * r.ideal
        bound += abs(p["ki"]) * r.bound
    if p["kd"] != 0:
        r = operator_response(p["derivative_rule"], p["derivative_order"], h, w, **kw)
        tf = p["derivative_filter"]
        f = h / (tf + h - tf * z)
        resp += p["kd"] * f * r.response
        ideal += p["kd"] * r.ideal / (1 + 1j * w * tf)
        bound += abs(p["kd"]) * np.abs(f) * r.bound
    return FrequencyResponse(w, resp, ideal, bound)
