"""Plain O(N^2) NumPy references of the solver's methods and the outside
reference values the solver tests compare with.

The methods are written straight from their papers, with every history sum
recomputed from scratch at each step: the product rectangle rule and the
predictor-corrector of Diethelm, Ford and Freed, Nonlinear Dynamics 29
(2002) 3-22 (their weights b_{j,n+1} and a_{j,n+1}), and the implicit
product trapezoidal rule of Garrappa, Math. Comput. Simul. 110 (2015)
96-112 (solved here by Newton's method iterated to a fixed point), and the
implicit product rectangle rule (right end points, the weights b_{j,n+1}
of Diethelm, Ford and Freed taken at the newest point). The
weights are computed with mpmath at 40 digits from their closed forms, not
by the library.
"""

from __future__ import annotations

import math

import mpmath
import numpy as np


def _weights(a, N):
    """b_m = (m+1)^a - m^a, a_m (m >= 1) = (m+1)^(a+1) - 2 m^(a+1) +
    (m-1)^(a+1), A_n = (n-1)^(a+1) - (n-1-a) n^a, for m, n < N + 2
    (Diethelm, Ford and Freed 2002, eqs. for b_{j,n+1} and a_{j,n+1})."""
    with mpmath.workdps(40):
        A = mpmath.mpf(a)
        b = np.array([float((m + 1) ** A - m**A) for m in range(N + 2)])
        am = np.array(
            [1.0]
            + [float((m + 1) ** (A + 1) - 2 * m ** (A + 1) + (m - 1) ** (A + 1)) for m in range(1, N + 2)]
        )
        An = np.array([0.0] + [float((n - 1) ** (A + 1) - (n - 1 - A) * n**A) for n in range(1, N + 2)])
    return b, am, An


def reference_solve(
    f, y0, orders, h, N, dy0=None, method="predictor-corrector", corrections=1, jac=None, t0=0.0
):
    """y_n of the method for D^a y = f(t, y) (vector y0 of m components,
    orders of shape (m,)), n = 0..N, by direct O(N^2) sums; f(t, y) ->
    array (m,), jac(t, y) -> (m, m) for 'trapezoid'."""
    y0 = np.atleast_1d(np.asarray(y0, dtype=float))
    m = y0.size
    orders = np.broadcast_to(np.asarray(orders, dtype=float), (m,))
    d0 = np.zeros(m) if dy0 is None else np.broadcast_to(np.asarray(dy0, float), (m,))
    W = {a: _weights(a, N) for a in set(orders.tolist())}
    u = np.array([h**a / math.gamma(a + 1) for a in orders])
    v = np.array([h**a / math.gamma(a + 2) for a in orders])

    def T(n):
        t = n * h
        return y0 + np.where(orders > 1, d0 * t, 0.0)

    t = t0 + h * np.arange(N + 1)
    y = np.empty((N + 1, m))
    F = np.empty((N + 1, m))
    y[0] = y0
    F[0] = f(t[0], y[0])
    for n in range(N):  # step n -> n+1
        hr = np.empty(m)
        ht = np.empty(m)
        for i in range(m):
            b, am, An = W[orders[i]]
            k = np.arange(n + 1)
            hr[i] = u[i] * np.sum(b[n - k] * F[k, i])
            k = np.arange(1, n + 1)
            ht[i] = v[i] * (An[n + 1] * F[0, i] + np.sum(am[n + 1 - k] * F[k, i]))
        if method == "rectangle":
            yn = T(n + 1) + hr
        elif method == "predictor-corrector":
            yn = T(n + 1) + hr
            for _ in range(corrections):
                yn = T(n + 1) + ht + v * f(t[n + 1], yn)
        elif method == "trapezoid":
            c = T(n + 1) + ht
            yn = y[n].copy()
            for _ in range(100):
                g = yn - c - v * f(t[n + 1], yn)
                step = np.linalg.solve(np.eye(m) - v[:, None] * jac(t[n + 1], yn), g)
                yn = yn - step
                if np.all(np.abs(step) <= 1e-16 * (1 + np.abs(yn))):
                    break
        else:
            raise ValueError(method)
        y[n + 1] = yn
        F[n + 1] = f(t[n + 1], yn)
    return t, y


def implicit_rectangle_loop(f, jac, y0, orders, h, N, dy0):
    """The implicit product rectangle rule (right end points), direct sums:
    y_{n+1} = T_{n+1} + h^a/Gamma(a+1) sum_{k<=n} b_{n-k} f_{k+1},
    b_m = (m+1)^a - m^a (Diethelm, Ford and Freed 2002, weights b_{j,n+1}
    at the right end points); weights with mpmath; Newton's method with
    the Jacobian jac iterated to a fixed point. Returns y, shape (N+1, m)."""
    m = len(y0)
    orders = np.asarray(orders, float)
    d0 = np.zeros(m) if dy0 is None else np.asarray(dy0, float)
    with mpmath.workdps(40):
        B = {
            a: np.array([float((k + 1) ** mpmath.mpf(a) - k ** mpmath.mpf(a)) for k in range(N + 1)])
            for a in set(orders.tolist())
        }
    u = np.array([h**a / math.gamma(a + 1) for a in orders])
    y = np.empty((N + 1, m))
    F = np.empty((N + 1, m))
    y[0] = y0
    for n in range(N):
        tn = (n + 1) * h
        c = np.asarray(y0, float) + np.where(orders > 1, d0 * tn, 0.0)
        for i in range(m):
            k = np.arange(1, n + 1)
            c[i] += u[i] * np.sum(B[orders[i]][n + 1 - k] * F[k, i])
        yn = y[n].copy()
        for _ in range(100):
            g = yn - c - u * f(tn, yn)
            d = np.linalg.solve(np.eye(m) - u[:, None] * jac(tn, yn), g)
            yn = yn - d
            if np.all(np.abs(d) <= 1e-16 * (1 + np.abs(yn))):
                break
        y[n + 1] = yn
        F[n + 1] = f(tn, yn)
    return y


# ------------------------------------------------------------ closed forms


def mittag_leffler(a, b, z, dps=60):
    """E_{a,b}(z) = sum_k z^k / Gamma(a k + b), summed with mpmath at dps
    digits until the terms fall below 10^-(dps-5) of the sum (the defining
    series: Gorenflo, Kilbas, Mainardi and Rogosin, Mittag-Leffler
    Functions, Springer 2014, chapters 3 and 4)."""
    with mpmath.workdps(dps):
        z = mpmath.mpf(z)
        A = mpmath.mpf(a)
        B = mpmath.mpf(b)
        s = mpmath.mpf(0)
        k = 0
        while True:
            term = z**k / mpmath.gamma(A * k + B)
            s += term
            if k > 10 and abs(term) < mpmath.mpf(10) ** (-(dps - 5)) * max(abs(s), 1e-300):
                break
            k += 1
            if k > 20000:
                raise RuntimeError("Mittag-Leffler series did not converge")
        return float(s)


def ml_asymptotic(a, x, terms=6):
    """E_a(-x) for large x > 0: sum_{k=1}^{terms} (-1)^(k+1) x^-k /
    Gamma(1 - a k), 0 < a < 1 (the asymptotic expansion of Podlubny,
    Fractional Differential Equations, 1999, Theorem 1.4; also Gorenflo,
    Kilbas, Mainardi and Rogosin 2014). The tests check it against the
    series where both can be evaluated."""
    with mpmath.workdps(30):
        s = mpmath.mpf(0)
        for k in range(1, terms + 1):
            s += (-1) ** (k + 1) * mpmath.mpf(x) ** (-k) / mpmath.gamma(1 - a * k)
        return float(s)


def dff_example(a):
    """The example of Diethelm, Ford and Freed 2002 (section 4): D^a y =
    40320/Gamma(9-a) t^(8-a) - 3 Gamma(5+a/2)/Gamma(5-a/2) t^(4-a/2)
    + 9/4 Gamma(a+1) + (3/2 t^(a/2) - t^4)^3 - y^(3/2), y(0) = 0, exact
    y = t^8 - 3 t^(4+a/2) + 9/4 t^a. Returns (rhs(t, y) for a scalar y,
    exact(t)). y^(3/2) is taken of max(y, 0): the exact solution is >= 0 on
    [0, 1] and the rhs is unchanged there."""
    c1 = 40320.0 / math.gamma(9 - a)
    c2 = 3.0 * math.gamma(5 + a / 2) / math.gamma(5 - a / 2)
    c3 = 2.25 * math.gamma(a + 1)

    def rhs(t, y):
        return (
            c1 * t ** (8 - a)
            - c2 * t ** (4 - a / 2)
            + c3
            + (1.5 * t ** (a / 2) - t**4) ** 3
            - max(y, 0.0) ** 1.5
        )

    def exact(t):
        t = np.asarray(t, dtype=float)
        return t**8 - 3 * t ** (4 + a / 2) + 2.25 * t**a

    return rhs, exact
