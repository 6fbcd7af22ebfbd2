"""The rules against closed forms and identities from outside the project,
and their measured orders of convergence."""

import numpy as np
import pytest
from scipy import integrate, special

import pyfracconv


def grid(T, N):
    h = T / N
    return h, h * np.arange(N + 1)


# ---------------------------------------------------------------- identities


@pytest.mark.parametrize("a", [0.1, 0.5, 1.0, 2.5])
def test_rectangle_exact_on_constants(a):
    # sum_{j<n} ((j+1)^a - j^a) = n^a, so the rule gives h^a n^a / Gamma(a+1)
    # at t_n for f = 1 (telescoping sum, common practice; docs/references.md, "Identities
    # with no discretisation error").
    h, t = grid(2.0, 5000)
    y = pyfracconv.integral(np.ones_like(t), a, h, rule="rectangle")
    exact = t**a / special.gamma(a + 1)  # RL integral of 1 (Podlubny 1999)
    np.testing.assert_allclose(y, exact, rtol=1e-13, atol=0)


@pytest.mark.parametrize("a", [0.2, 0.5, 0.9, 1.5, 3.0])
def test_trapezoid_exact_on_linear(a):
    # The product trapezoidal rule is exact on linear f (common practice;
    # docs/references.md). Closed form I^a (c0 + c1 t) = c0 t^a/Gamma(a+1)
    # + c1 t^(a+1)/Gamma(a+2) (Podlubny 1999; Kilbas, Srivastava, Trujillo
    # 2006).
    h, t = grid(3.0, 4000)
    f = 2.0 - 0.7 * t
    y = pyfracconv.integral(f, a, h, rule="trapezoid")
    exact = 2.0 * t**a / special.gamma(a + 1) - 0.7 * t ** (a + 1) / special.gamma(a + 2)
    np.testing.assert_allclose(y[1:], exact[1:], rtol=1e-12, atol=1e-14)
    assert y[0] == 0.0


@pytest.mark.parametrize("a", [0.1, 0.5, 0.95])
def test_l1_exact_on_linear(a):
    # Caputo D^a (c0 + c1 t) = c1 t^(1-a) / Gamma(2-a) (Diethelm 2010); the
    # L1 scheme is exact on linear functions (common practice; docs/references.md).
    h, t = grid(1.0, 3000)
    y = pyfracconv.derivative(5.0 + 3.0 * t, a, h, rule="l1")
    exact = 3.0 * t ** (1 - a) / special.gamma(2 - a)
    np.testing.assert_allclose(y[1:], exact[1:], rtol=1e-12)
    assert y[0] == 0.0


def test_order_one_is_classical_left_rectangle():
    # a = 1: the rectangle rule is the classical left rectangle rule, h times
    # a cumulative sum (common practice).
    rng = np.random.default_rng(0)
    x = rng.standard_normal(3000)
    h = 0.01
    y = pyfracconv.integral(x, 1.0, h, rule="rectangle")
    ref = h * np.concatenate(([0.0], np.cumsum(x)[:-1]))
    np.testing.assert_allclose(y, ref, rtol=1e-12, atol=1e-12 * np.sum(np.abs(x)) * h)


def test_order_one_is_composite_trapezoid():
    # a = 1: the product trapezoidal rule is the composite trapezoidal rule;
    # reference: scipy.integrate.cumulative_trapezoid.
    rng = np.random.default_rng(1)
    x = rng.standard_normal(3000)
    h = 0.02
    y = pyfracconv.integral(x, 1.0, h, rule="trapezoid")
    ref = integrate.cumulative_trapezoid(x, dx=h, initial=0.0)
    np.testing.assert_allclose(y, ref, rtol=1e-11, atol=1e-12 * np.sum(np.abs(x)) * h)


@pytest.mark.parametrize("a", [1.0, 2.0, 3.0])
def test_grunwald_integer_orders_are_differences(a):
    # Integer orders: Grunwald-Letnikov is the backward difference quotient
    # of that order (common practice); reference numpy.diff.
    rng = np.random.default_rng(2)
    x = rng.standard_normal(500)
    h = 0.5
    y = pyfracconv.derivative(x, a, h, rule="grunwald")
    k = int(a)
    ref = np.diff(x, n=k) / h**k
    np.testing.assert_allclose(y[k:], ref, rtol=1e-11, atol=1e-12)


# ---------------------------------------------------------------- closed forms


@pytest.mark.parametrize("a", [0.3, 0.5, 1.4])
@pytest.mark.parametrize("b", [2.0, 3.0])
def test_integral_of_power(a, b):
    # I^a t^b = Gamma(b+1)/Gamma(b+1+a) t^(b+a) (Podlubny 1999; Kilbas,
    # Srivastava, Trujillo 2006).
    h, t = grid(1.0, 2000)
    exact = special.gamma(b + 1) / special.gamma(b + 1 + a) * t ** (b + a)
    yt = pyfracconv.integral(t**b, a, h, rule="trapezoid")
    yr = pyfracconv.integral(t**b, a, h, rule="rectangle")
    assert np.max(np.abs(yt - exact)) < 5 * h**2
    assert np.max(np.abs(yr - exact)) < 5 * h


@pytest.mark.parametrize("a", [0.25, 0.5, 0.75, 2.0])
def test_integral_of_exponential(a):
    # I^a e^t = e^t P(a, t), P the regularised lower incomplete gamma
    # function (SciPy gammainc; Abramowitz and Stegun 6.5).
    h, t = grid(2.0, 4000)
    exact = np.exp(t) * special.gammainc(a, t)
    y = pyfracconv.integral(np.exp(t), a, h, rule="trapezoid")
    assert np.max(np.abs(y - exact)) < 1e-5


@pytest.mark.parametrize("a", [0.2, 0.5, 0.8])
def test_caputo_of_power_and_exponential(a):
    # Caputo D^a t^2 = Gamma(3)/Gamma(3-a) t^(2-a) (Diethelm 2010) and
    # D^a e^t = e^t P(1-a, t) (docs/references.md, "Exponential"; Abramowitz
    # and Stegun 6.5; SciPy gammainc).
    h, t = grid(1.0, 4000)
    y = pyfracconv.derivative(t**2, a, h, rule="l1")
    exact = 2.0 / special.gamma(3 - a) * t ** (2 - a)
    assert np.max(np.abs(y - exact)) < 2 * h ** (2 - a)
    y = pyfracconv.derivative(np.exp(t), a, h, rule="l1")
    exact = np.exp(t) * special.gammainc(1 - a, t)
    assert np.max(np.abs(y - exact)) < 5 * h ** (2 - a)


@pytest.mark.parametrize("a", [0.3, 0.7, 1.5])
def test_riemann_liouville_of_power_and_constant(a):
    # RL derivative of t^b: Gamma(b+1)/Gamma(b+1-a) t^(b-a); of a constant:
    # t^-a / Gamma(1-a) (Diethelm 2010; Podlubny 1999). Grunwald-Letnikov.
    h, t = grid(1.0, 8000)
    y = pyfracconv.derivative(t**3, a, h)
    exact = 6.0 / special.gamma(4 - a) * t ** (3 - a)
    assert np.max(np.abs(y - exact)) < 10 * h
    if a < 1:
        y = pyfracconv.derivative(np.ones_like(t), a, h)
        exact = t[1:] ** -a / special.gamma(1 - a)
        # first order away from t = 0
        sel = t[1:] >= 0.5
        assert np.max(np.abs(y[1:][sel] - exact[sel]) / exact[sel]) < 2 * h


# ---------------------------------------------------------------- orders


def observed_order(errors):
    e = np.asarray(errors)
    return np.log2(e[:-1] / e[1:])


def errors_at_one(fun, exact, Ns):
    out = []
    for N in Ns:
        h, t = grid(1.0, N)
        out.append(abs(fun(t, h)[-1] - exact))
    return out


def test_order_rectangle():
    # order 1 for f in C^1 (Diethelm, Ford, Freed, Numer. Algorithms 36 (2004))
    a = 0.5
    exact = special.gamma(3) / special.gamma(3 + a)  # I^a t^2 at t = 1
    e = errors_at_one(
        lambda t, h: pyfracconv.integral(t**2, a, h, rule="rectangle"), exact, [200, 400, 800, 1600, 3200]
    )
    p = observed_order(e)
    assert np.all(np.abs(p - 1.0) < 0.05), p


def test_order_trapezoid():
    # order 2 for f in C^2 (Diethelm, Ford, Freed 2004; Garrappa, Math.
    # Comput. Simul. 110 (2015)); f = e^t, exact via gammainc.
    a = 0.5
    exact = np.e * special.gammainc(a, 1.0)
    e = errors_at_one(
        lambda t, h: pyfracconv.integral(np.exp(t), a, h, rule="trapezoid"), exact, [100, 200, 400, 800, 1600]
    )
    p = observed_order(e)
    assert np.all(np.abs(p - 2.0) < 0.05), p


def test_order_grunwald():
    # order 1 (Lubich, SIAM J. Math. Anal. 17 (1986)); f = t^3, RL closed form
    a = 0.5
    exact = 6.0 / special.gamma(4 - a)
    e = errors_at_one(
        lambda t, h: pyfracconv.derivative(t**3, a, h, rule="grunwald"), exact, [200, 400, 800, 1600, 3200]
    )
    p = observed_order(e)
    assert np.all(np.abs(p - 1.0) < 0.05), p


@pytest.mark.parametrize("a", [0.3, 0.7])
def test_order_l1(a):
    # order 2 - a for smooth u (Lin and Xu, J. Comput. Phys. 225 (2007));
    # f = t^2, Caputo closed form (Diethelm 2010).
    exact = 2.0 / special.gamma(3 - a)
    e = errors_at_one(
        lambda t, h: pyfracconv.derivative(t**2, a, h, rule="l1"), exact, [200, 400, 800, 1600, 3200]
    )
    p = observed_order(e)
    assert np.all(np.abs(p - (2 - a)) < 0.05), p
