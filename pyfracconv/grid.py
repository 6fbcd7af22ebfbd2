"""The product rules and the L1 scheme on any strictly increasing grid
t_0 < t_1 < ... < t_N (time-stamped samples; first step of issue 11).

On a non-uniform grid the weight of sample k at t_n depends on n and k
separately, so the Toeplitz structure (and the FFT engines of the uniform
path, ``step=``) is lost; this module has the weights and a direct
O(N^2) engine, vectorised with NumPy and processed in blocks of rows n so
that the memory stays bounded. ``integral(x, a, t=times)`` and
``derivative(x, a, t=times, rule="l1")`` call it.

Notation: d = t_n - t_k, e = t_n - t_{k+1}, h_k = t_{k+1} - t_k (the
increment, computed from the grid), s = h_k / d, r = e / d.

Rounding: every difference d, e, h_k is one floating-point subtraction of
two grid values (exact when the two are within a factor 2 of each other,
Sterbenz's lemma; otherwise rounded, relative error <= 2**-53). Taken those
as given, each weight is computed with a few roundings and no cancellation
larger than a small constant (see :func:`grid_weights`), so it has a small
relative error (a few units of 2**-53; measured <= 1e-14 against mpmath in
tests/test_grid.py). The grid values themselves are taken as exact.
"""

from __future__ import annotations

import math
from typing import Tuple

import numpy as np
from numpy.typing import ArrayLike, NDArray

from ._checks import (
    DERIVATIVE_RULES,
    INTEGRAL_RULES,
    as_float_array,
    check_count,
    check_order,
    check_real,
    check_rule,
    show,
)
from ._errors import ArgumentError, RangeError

__all__ = ["grid_weights", "check_times", "graded_mesh", "GRID_RULES"]

FloatArray = NDArray[np.float64]

#: The rules defined on any grid (Grunwald-Letnikov is not among them).
GRID_RULES = ("rectangle", "trapezoid", "l1")

# Gauss-Legendre nodes and weights on [0, 1] for the integrals
# J(s) = int_0^1 (1 - s tau)^(a-1) w(tau) d tau at s < 1/2: the integrand is
# analytic on [0, 1] with its only singularity at tau = 1/s >= 2, so the
# rule converges geometrically, like rho^(-2m) for m nodes with
# rho = x + sqrt(x^2 - 1), x = 2/s - 1 (Gautschi 2004; Trefethen,
# Approximation Theory and Approximation Practice, 2013, ch. 19): 4 nodes
# for s < 1/256, 8 for s < 1/16 and 20 for s < 1/2 leave errors far below
# 2**-53 (checked against mpmath in tests/test_grid.py).


def _gauss(n: int) -> Tuple[FloatArray, FloatArray]:
    x, w = np.polynomial.legendre.leggauss(n)
    return 0.5 * (x + 1.0), 0.5 * w


_BUCKETS = (
    (-1.0, 1.0 / 256.0, _gauss(4)),
    (1.0 / 256.0, 1.0 / 16.0, _gauss(8)),
    (1.0 / 16.0, 0.5, _gauss(20)),
)


def _refuse_grunwald(rule: object) -> None:
    if rule == "grunwald":
        raise ArgumentError(
            "rule='grunwald': the Grunwald-Letnikov rule has no standard form "
            "on a non-uniform grid; with t= use rule='l1' (Caputo, "
            "0 < order < 1) or an integral rule, or give a uniform grid as step="
        )


def check_times(t: object, length: int | None = None) -> FloatArray:
    """The sample times as a 1-D float64 array: finite, strictly increasing
    and, if ``length`` is given, of that length (errors name ``t``, the
    first offending index and the values there).

    Parameters
    ----------
    t : array_like
        The sample times.
    length : int, optional
        The number of samples along the time axis the times must match.

    Returns
    -------
    numpy.ndarray
        ``t`` as a 1-D float64 array.

    Raises
    ------
    ArgumentError
        t not 1-D, of another length, not finite or not strictly
        increasing.
    InputTypeError
        t not numeric.

    See Also
    --------
    graded_mesh : times made for solutions not smooth at t0.
    grid_weights : the weights on such times.

    Examples
    --------
    >>> from pyfracconv.grid import check_times
    >>> check_times([0, 0.5, 2]).tolist()
    [0.0, 0.5, 2.0]
    >>> check_times([0.0, 1.0, 1.0])
    Traceback (most recent call last):
    ...
    pyfracconv._errors.ArgumentError: t[2]=1.0 after t[1]=1.0: sample times must be strictly increasing
    >>> check_times([0.0, 1.0], length=3)
    Traceback (most recent call last):
    ...
    pyfracconv._errors.ArgumentError: t: has 2 times but the samples have 3 along the time axis; ...
    """
    arr = as_float_array("t", t)
    if arr.ndim != 1:
        raise ArgumentError(f"t: expected a 1-D array of sample times, got shape {arr.shape}")
    if length is not None and arr.size != length:
        raise ArgumentError(
            f"t: has {arr.size} times but the samples have {length} along the "
            "time axis; give one time per sample"
        )
    bad = np.flatnonzero(~np.isfinite(arr))
    if bad.size:
        i = int(bad[0])
        raise ArgumentError(f"t[{i}]={show(float(arr[i]))}: sample times must be finite")
    if arr.size > 1:
        dt = np.diff(arr)
        bad = np.flatnonzero(~(dt > 0.0))
        if bad.size:
            i = int(bad[0])
            raise ArgumentError(
                f"t[{i + 1}]={show(float(arr[i + 1]))} after t[{i}]={show(float(arr[i]))}: "
                "sample times must be strictly increasing"
            )
    return arr


def _check_rule(rule: object, kinds: Tuple[str, ...] = GRID_RULES) -> str:
    _refuse_grunwald(rule)
    check_rule(rule, tuple(r for r in kinds if r in GRID_RULES))
    return str(rule)


# ---------------------------------------------------------------- kernels


def _one_minus_pow(a: float, d: FloatArray, e: FloatArray, h: FloatArray) -> FloatArray:
    """1 - (e/d)^a for e = d - h >= 0, without cancellation:
    -expm1(a log1p(-h/d)) when h/d < 1/2, -expm1(a log(e/d)) otherwise
    (both arguments are then computed with a small relative error and
    x -> -expm1(x) is well conditioned for x <= 0)."""
    s = h / d
    with np.errstate(divide="ignore"):
        lg = np.where(s < 0.5, np.log1p(-np.minimum(s, 0.5)), np.log(e / d))
    return -np.expm1(a * lg)


def _pow_diff(a: float, d: FloatArray, e: FloatArray, h: FloatArray) -> FloatArray:
    """d^a - e^a = d^a (1 - (e/d)^a)."""
    return np.power(d, a) * _one_minus_pow(a, d, e, h)


def _trap_parts(a: float, d: FloatArray, e: FloatArray, h: FloatArray) -> Tuple[FloatArray, FloatArray]:
    """Gamma(a) times the weights of x_k (left hat) and x_{k+1} (right hat)
    that interval [t_k, t_{k+1}] contributes at t_n; see grid_weights."""
    s = h / d
    left = np.empty_like(d)
    right = np.empty_like(d)
    big = s >= 0.5
    if np.any(big):
        db, eb, sb = d[big], e[big], s[big]
        r = eb / db
        with np.errstate(divide="ignore"):
            ell = np.log(r)
        em = np.expm1(a * ell)  # r^a - 1, in [-1, 0]
        ra = np.exp(a * ell)  # r^a
        lt = a * sb + r * em  # a(a+1) int_r^1 v^(a-1) (v - r) dv
        rt = -em - a * sb * ra  # a(a+1) int_r^1 v^(a-1) (1 - v) dv
        scale = np.power(db, a) / (sb * a * (a + 1.0))
        left[big] = scale * lt
        right[big] = scale * rt
    for lo, hi, (x, w) in _BUCKETS:
        sel = (s >= lo) & (s < hi)
        if not np.any(sel):
            continue
        ss = s[sel]
        f = np.power(1.0 - ss[:, None] * x[None, :], a - 1.0)  # positive
        jl = f @ (w * (1.0 - x))
        jr = f @ (w * x)
        scale = np.power(d[sel], a) * ss
        left[sel] = scale * jl
        right[sel] = scale * jr
    return left, right


def _row_parts(
    rule: str, a: float, d: FloatArray, e: FloatArray, h: FloatArray
) -> Tuple[FloatArray, FloatArray | None]:
    """Per interval k: (coefficient, None) for rectangle (of x_k) and l1 (of
    x_{k+1} - x_k); (left, right) for the trapezoid."""
    if rule == "rectangle":
        return _pow_diff(a, d, e, h) / math.gamma(a + 1.0), None
    if rule == "l1":
        b = 1.0 - a
        return _pow_diff(b, d, e, h) / (h * math.gamma(2.0 - a)), None
    left, right = _trap_parts(a, d, e, h)
    g = math.gamma(a)
    return left / g, right / g


def _finite_or_raise(w: FloatArray, what: str) -> None:
    if not np.all(np.isfinite(w)):
        raise RangeError(f"{what}: a weight is beyond the double range (times or order too large)")


def grid_weights(rule: str, order: float, t: ArrayLike, n: int | None = None) -> FloatArray:
    """Weights of a rule at time t_n on a strictly increasing grid.

    Parameters
    ----------
    rule : {'rectangle', 'trapezoid', 'l1'}
        ``rectangle`` and ``trapezoid``: the product rules for the
        Riemann-Liouville integral I^a from t_0; ``l1``: the L1 scheme for
        the Caputo derivative D^a from t_0, 0 < a < 1. ``grunwald`` is
        refused: the Grunwald-Letnikov rule has no standard non-uniform form.
    order : float
        The order a (0 < a <= 10; ``l1``: 0 < a < 1).
    t : array_like, 1-D
        The times t_0 < t_1 < ... (finite, strictly increasing).
    n : int, optional
        Index of the output time t_n (default the last, len(t) - 1).

    Returns
    -------
    numpy.ndarray
        ``rectangle``: n+1 weights w_k of x_0 .. x_n,
        w_k = ((t_n - t_k)^a - (t_n - t_{k+1})^a) / Gamma(a+1) for k < n and
        w_n = 0 (on a uniform grid the weights b_{j,n+1} of Diethelm, Ford and
        Freed 2002). ``trapezoid``: n+1 weights of x_0 .. x_n,
        the integral of (t_n - s)^(a-1)/Gamma(a) times the hat function of
        node k, w_k = L_k + R_{k-1} (L_n = R_{-1} = 0), with, for interval k
        (d = t_n - t_k, e = t_n - t_{k+1}, h = t_{k+1} - t_k),
        L_k = (a h d^a - e (d^a - e^a)) / (h Gamma(a+2)) (weight of x_k) and
        R_k = ((a+1) d (d^a - e^a) - a (d^(a+1) - e^(a+1))) / (h Gamma(a+2))
        (weight of x_{k+1}); derived here by integrating the hat functions
        exactly; on a uniform grid they reduce to the weights a_{j,n+1} of
        Diethelm, Ford and Freed 2002. ``l1``: n weights c_k of the
        increments x_{k+1} - x_k, k < n,
        c_k = ((t_n - t_k)^(1-a) - (t_n - t_{k+1})^(1-a)) / (h_k Gamma(2-a))
        (the L1 scheme on a non-uniform mesh; Stynes, O'Riordan and Gracia
        2017).

    Raises
    ------
    ArgumentError
        Unknown rule, ``grunwald``, order out of range, t not 1-D, not
        finite or not strictly increasing (the message names the first
        offending index and its values), n out of range.
    InputTypeError
        Non-numeric t, order not a real number, n not an integer.
    RangeError
        A weight is beyond the range of double precision.

    See Also
    --------
    pyfracconv.integral, pyfracconv.derivative : with ``t=``, these rules
        applied to a record.
    pyfracconv.weights : the uniform-grid weights.

    Notes
    -----
    The differences of powers are computed without cancellation:
    d^a - e^a = d^a (-expm1(a log1p(-h/d))) when h/d < 1/2 and
    d^a (-expm1(a log(e/d))) otherwise. The trapezoid parts, with s = h/d
    and r = e/d: for s >= 1/2, L_k = d^a (a s + r expm1(a log r)) /
    (s a (a+1) Gamma(a)) and R_k = d^a (-expm1(a log r) - a s r^a) /
    (s a (a+1) Gamma(a)) (cancellation at most a factor of about 4);
    for s < 1/2, L_k = d^a s J_L / Gamma(a) and R_k = d^a s J_R / Gamma(a)
    with J_L = int_0^1 (1 - s u)^(a-1) (1 - u) du and
    J_R = int_0^1 (1 - s u)^(a-1) u du, positive integrands evaluated by
    Gauss-Legendre quadrature (no cancellation). Exact: nothing but the
    grid values; rounded: each difference of two times (one rounding, or
    exact by Sterbenz's lemma), and each weight to a few units of 2**-53.

    Examples
    --------
    On any grid the rectangle weights telescope: they sum to
    (t_n - t_0)^a / Gamma(a+1) = I^a 1 (Podlubny 1999), here
    t_n - t_0 = 4 and a = 0.5, i.e. 4 / sqrt(pi):

    >>> import numpy as np
    >>> from pyfracconv.grid import grid_weights
    >>> t = np.array([0.0, 0.1, 0.5, 1.7, 4.0])
    >>> w = grid_weights("rectangle", 0.5, t)
    >>> bool(np.isclose(w.sum(), 4 / np.sqrt(np.pi), rtol=1e-14))
    True

    The trapezoid weights integrate linear f exactly: I^a t =
    t^(1+a) / Gamma(2+a) (Podlubny 1999), at a = 0.5 and t = 4 equal to
    32 / (3 sqrt(pi)):

    >>> w = grid_weights("trapezoid", 0.5, t)
    >>> bool(np.isclose(w @ t, 32 / (3 * np.sqrt(np.pi)), rtol=1e-14))
    True

    Grunwald-Letnikov is refused:

    >>> grid_weights("grunwald", 0.5, t)
    Traceback (most recent call last):
    ...
    pyfracconv._errors.ArgumentError: rule='grunwald': the Grunwald-Letnikov rule has no standard ...
    """
    name = _check_rule(rule, INTEGRAL_RULES + DERIVATIVE_RULES)
    a = check_order(order, name)
    tt = check_times(t)
    if tt.size == 0:
        raise ArgumentError("t: expected at least one time, got an empty array")
    idx = tt.size - 1 if n is None else check_count("n", n, 0, tt.size - 1)
    tn = tt[idx]
    d = tn - tt[:idx]
    e = tn - tt[1 : idx + 1]
    h = np.diff(tt[: idx + 1])
    with np.errstate(over="ignore", invalid="ignore"):
        first, second = _row_parts(name, a, d, e, h)
    if name == "l1":
        out = first
    elif name == "rectangle":
        out = np.concatenate([first, [0.0]])
    else:
        assert second is not None
        out = np.zeros(idx + 1)
        out[:idx] += first
        out[1:] += second
    _finite_or_raise(out, f"grid_weights(rule={show(rule)}, order={show(order)})")
    return out


# ---------------------------------------------------------------- batch

# Elements of one block of weights (rows of n times columns of k): bounds
# the engine's work space to a few tens of MiB whatever the record length.
_BLOCK = 1 << 18
# Elements of one block of products of weights and samples (signals are
# taken in groups that fit).
_PRODUCTS = 1 << 20


def apply_on_grid(rule: str, a: float, block: FloatArray, t: FloatArray) -> FloatArray:
    """The rule applied to every row of ``block`` (nsig, N) sampled at
    times ``t`` (N,), already checked: the direct O(N^2) engine.

    Rows n are processed in chunks; each output is one pairwise sum
    (NumPy's ``sum`` along a contiguous axis) of the products of weights
    and samples (rectangle, trapezoid) or sample increments (l1), so its
    error is at most about (c + log2 N) 2**-53 times the sum of the absolute
    terms (componentwise accurate)."""
    nsig, N = block.shape
    out = np.zeros((nsig, N))
    if N <= 1:
        return out
    dt = np.diff(t)
    src = np.diff(block, axis=1) if rule == "l1" else block
    n0 = 1
    while n0 < N:
        # rows * (n0 + rows) weights at most _BLOCK, at least one row; the
        # rows do not depend on the number of signals, so that each output
        # is the same sum of the same length whatever signals come with it
        # (a signal gives the same bits alone or in a batch)
        budget = _BLOCK
        rows = int((math.sqrt(n0 * n0 + 4.0 * budget) - n0) / 2.0)
        rows = max(1, min(N - n0, rows))
        n1 = n0 + rows  # rows n0 .. n1-1
        K = n1 - 1  # intervals 0 .. K-1
        tn = t[n0:n1, None]
        valid = np.arange(K)[None, :] < np.arange(n0, n1)[:, None]
        d = np.where(valid, tn - t[None, :K], 2.0)
        e = np.where(valid, tn - t[None, 1 : K + 1], 1.0)
        h = np.where(valid, np.broadcast_to(dt[None, :K], d.shape), 1.0)
        first, second = _row_parts(rule, a, d.ravel(), e.ravel(), h.ravel())
        first = np.where(valid, first.reshape(d.shape), 0.0)
        if rule == "trapezoid":
            assert second is not None
            second = np.where(valid, second.reshape(d.shape), 0.0)
            w = np.zeros((rows, K + 1))
            w[:, :K] += first
            w[:, 1:] += second
            x = src[:, : K + 1]
        else:
            w = first
            x = src[:, :K]
        if not np.all(np.isfinite(w)):
            raise RangeError(
                f"t (or order={show(a)}): a weight is beyond the double range "
                f"(times up to {show(float(t[-1]))})"
            )
        # the products of at most _PRODUCTS elements at a time
        group = max(1, _PRODUCTS // w.size)
        for s0 in range(0, nsig, group):
            prod = w[None, :, :] * x[s0 : s0 + group, None, :]
            out[s0 : s0 + group, n0:n1] = np.sum(prod, axis=-1)
        n0 = n1
    return out


# ---------------------------------------------------------------- meshes


def graded_mesh(T: float, n: int, r: float, t0: float = 0.0) -> FloatArray:
    """The graded mesh t_k = t0 + T (k/n)^r, k = 0 .. n.

    With r > 1 the steps are small near t0 and grow away from it, which
    restores the order of convergence of the product rules and the L1
    scheme for functions that behave like (t - t0)^a near t0 (Stynes,
    O'Riordan and Gracia, SIAM J. Numer. Anal. 55 (2017); Liu, Roberts and
    Yan, Int. J. Comput. Math. 95 (2018)); r = 1 is the uniform grid.

    Parameters
    ----------
    T : float
        Length of the interval, finite and > 0.
    n : int
        Number of steps, >= 1.
    r : float
        Grading exponent, 1 <= r <= 100.
    t0 : float, optional
        First time (default 0), finite.

    Returns
    -------
    numpy.ndarray
        The n+1 times; the first is t0 and the last t0 + T.

    Raises
    ------
    ArgumentError
        T, r or t0 out of range, or the times not strictly increasing in
        double precision (n and r too large for T and t0: the first steps
        vanish).
    InputTypeError
        A non-numeric argument, n not an integer.

    See Also
    --------
    pyfracconv.solve : with ``t=``, the solver on such a mesh.
    pyfracconv.integral, pyfracconv.derivative : with ``t=``.

    Examples
    --------
    The steps grow like k^(r-1) (here r = 2, T = 1, n = 4: (k/4)^2):

    >>> from pyfracconv.grid import graded_mesh
    >>> graded_mesh(1.0, 4, 2.0).tolist()
    [0.0, 0.0625, 0.25, 0.5625, 1.0]
    """
    Tf = check_real("T", T)
    if not (math.isfinite(Tf) and Tf > 0.0):
        raise ArgumentError(f"T={show(T)}: must be finite and > 0")
    N = check_count("n", n, 1)
    rf = check_real("r", r)
    if not (1.0 <= rf <= 100.0):
        raise ArgumentError(f"r={show(r)}: must be in [1, 100]")
    t0f = check_real("t0", t0)
    if not math.isfinite(t0f):
        raise ArgumentError(f"t0={show(t0)}: must be finite")
    with np.errstate(over="ignore", under="ignore"):
        t = t0f + Tf * np.power(np.arange(N + 1) / N, rf)
    if not np.all(np.isfinite(t)):
        raise ArgumentError(f"T={show(T)}, t0={show(t0)}: the last time is beyond the double range")
    bad = np.flatnonzero(~(np.diff(t) > 0.0))
    if bad.size:
        i = int(bad[0])
        raise ArgumentError(
            f"n={N}, r={show(r)}: t[{i + 1}] = t[{i}] = {show(float(t[i]))} in "
            f"double precision (T={show(T)}, t0={show(t0)}); use fewer steps or a "
            "smaller r"
        )
    return t
