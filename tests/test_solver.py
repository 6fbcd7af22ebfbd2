"""The solver against outside references: Mittag-Leffler closed forms
(SciPy, mpmath series), the example of Diethelm, Ford and Freed 2002 with
its exact solution, the decoupled scalar problems behind systems, and the
plain O(N^2) NumPy loops of tests/solver_reference.py."""

import math

import mpmath
import numpy as np
import pytest
import scipy.special

import pyfracconv
from pyfracconv import solve
from solver_reference import (
    dff_example,
    implicit_rectangle_loop,
    mittag_leffler,
    ml_asymptotic,
    reference_solve,
)

METHODS = ["rectangle", "predictor-corrector", "trapezoid", "implicit-rectangle"]
# Error budgets at step 1e-3 on [0, 1] (order 1 methods, and the order 1+a
# or 2 methods), about three times the errors measured when the tests were
# written; their convergence orders are checked separately below.
BUDGET = {"rectangle": 1e-3, "implicit-rectangle": 1e-3, "predictor-corrector": 1e-5, "trapezoid": 1e-4}


def memories(method, order):
    out = ["exact"]
    if method in ("rectangle", "implicit-rectangle") or order < 1:
        out.append("compressed")
    return out


# ------------------------------------------------------------ references


def test_reference_ml_half_is_erfcx():
    # The mpmath series of the references against SciPy: E_{1/2}(-z) =
    # exp(z^2) erfc(z) (Gorenflo, Kilbas, Mainardi and Rogosin 2014,
    # chapter 3), so E_{1/2}(-sqrt t) = erfcx(sqrt t).
    for t in (0.01, 0.3, 1.0, 4.0):
        assert mittag_leffler(0.5, 1, -math.sqrt(t)) == pytest.approx(
            scipy.special.erfcx(math.sqrt(t)), rel=1e-14
        )
    # E_1(z) = exp(z), E_{2}(-t^2) = cos t (common practice)
    assert mittag_leffler(1.0, 1, -0.7) == pytest.approx(math.exp(-0.7), rel=1e-14)
    assert mittag_leffler(2.0, 1, -(1.3**2)) == pytest.approx(math.cos(1.3), rel=1e-13)
    # t E_{2,2}(-t^2) = sin t (common practice)
    assert 1.3 * mittag_leffler(2.0, 2, -(1.3**2)) == pytest.approx(math.sin(1.3), rel=1e-13)


def test_reference_asymptotic_expansion_agrees_with_series():
    # Podlubny 1999, Theorem 1.4, against the series at 160 digits where the
    # series can still be summed (its terms reach exp(x^(1/a)))
    for x in (30.0, 50.0):
        assert ml_asymptotic(0.7, x) == pytest.approx(mittag_leffler(0.7, 1, -x, dps=160), rel=1e-7)


@pytest.mark.parametrize("a", [0.3, 0.8])
def test_dff_example_rhs_is_the_caputo_derivative_of_its_solution(a):
    # Diethelm, Ford and Freed 2002, section 4: the right-hand side at the
    # exact solution equals D^a y, here computed by mpmath quadrature of the
    # Caputo definition D^a y = I^(1-a) y' (docs/references.md, Definitions)
    rhs, exact = dff_example(a)
    with mpmath.workdps(40):
        A = mpmath.mpf(a)

        def dy(s):
            return 8 * s**7 - 3 * (4 + A / 2) * s ** (3 + A / 2) + mpmath.mpf(9) / 4 * A * s ** (A - 1)

        for t in (0.25, 0.6, 1.0):
            T = mpmath.mpf(t)
            # s = t (1 - w^(1/(1-a))) takes (t-s)^(-a) ds to t^(1-a)/(1-a) dw
            caputo = (
                T ** (1 - A)
                / (1 - A)
                / mpmath.gamma(1 - A)
                * mpmath.quad(lambda w, T=T: dy(T * (1 - w ** (1 / (1 - A)))), [0, 1])
            )
            assert rhs(t, float(exact(t))) == pytest.approx(float(caputo), rel=1e-11, abs=1e-12)


# ------------------------------------------------------------ relaxation


@pytest.mark.parametrize("method", METHODS)
@pytest.mark.parametrize("a", [0.3, 0.5, 0.8, 1.0])
def test_relaxation(method, a):
    # D^a y = -y, y(0) = 1: y = E_a(-t^a) (Gorenflo, Kilbas, Mainardi and
    # Rogosin 2014); a = 1/2 from scipy.special.erfcx(sqrt t), a = 1 is
    # exp(-t) (common practice), other orders from the mpmath series
    N = 1000
    idx = np.arange(0, N + 1, 50)
    t_ref = idx / N
    if a == 0.5:
        ref = scipy.special.erfcx(np.sqrt(t_ref))
    elif a == 1.0:
        ref = np.exp(-t_ref)
    else:
        ref = np.array([mittag_leffler(a, 1, -(t**a)) for t in t_ref])
    for memory in memories(method, a):
        t, y = solve(lambda t, y: -y, 1.0, a, 1.0 / N, N, method=method, memory=memory)
        assert t.shape == (N + 1,) and y.shape == (N + 1,)
        assert np.allclose(t[idx], t_ref, rtol=0, atol=1e-15)
        err = np.max(np.abs(y[idx] - ref))
        assert err < BUDGET[method], (memory, err)


@pytest.mark.parametrize("method", METHODS)
@pytest.mark.parametrize("a", [1.5, 1.9, 2.0])
def test_oscillator_with_initial_slope(method, a):
    # D^a y = -y, 1 < a <= 2: y(0) = 1, y'(0) = 0 gives E_a(-t^a); y(0) = 0,
    # y'(0) = 1 gives t E_{a,2}(-t^a) (Gorenflo, Kilbas, Mainardi and
    # Rogosin 2014; Podlubny 1999); mpmath series
    N, T = 1500, 3.0
    idx = np.arange(0, N + 1, 150)
    tr = idx * (T / N)
    r1 = np.array([mittag_leffler(a, 1, -(t**a)) for t in tr])
    r2 = np.array([t * mittag_leffler(a, 2, -(t**a)) for t in tr])
    budget = 3e-3 if "rectangle" in method else 2e-6
    mems = ["exact", "compressed"] if method in ("rectangle", "implicit-rectangle") and a < 2 else ["exact"]
    for memory in mems:
        _, y = solve(lambda t, y: -y, 1.0, a, T / N, N, dy0=0.0, method=method, memory=memory)
        _, z = solve(lambda t, y: -y, 0.0, a, T / N, N, dy0=1.0, method=method, memory=memory)
        assert np.max(np.abs(y[idx] - r1)) < budget
        assert np.max(np.abs(z[idx] - r2)) < budget


# ------------------------------------------------------------ orders


def _orders(method, a, Ns, norm="end", memory="exact"):
    rhs, exact = dff_example(a)
    kw = {"dy0": 0.0} if a > 1 else {}
    errs = []
    for N in Ns:
        t, y = solve(rhs, 0.0, a, 1.0 / N, N, method=method, memory=memory, **kw)
        e = np.abs(y - exact(t))
        errs.append(e[-1] if norm == "end" else np.max(e))
    errs = np.array(errs)
    return np.log2(errs[:-1] / errs[1:])


@pytest.mark.parametrize(
    "method,a,expected,lo,hi",
    [
        # product rectangle rules: order 1 (Diethelm, Ford and Freed 2004)
        ("rectangle", 0.5, 1.0, 0.93, 1.07),
        ("rectangle", 1.25, 1.0, 0.93, 1.07),
        ("implicit-rectangle", 0.5, 1.0, 0.93, 1.07),
        # implicit product trapezoidal rule: order 2 (Garrappa 2015)
        ("trapezoid", 0.5, 2.0, 1.85, 2.1),
        ("trapezoid", 1.25, 2.0, 1.9, 2.1),
        # predictor-corrector at a > 1: order 2 (Diethelm, Ford and Freed 2004)
        ("predictor-corrector", 1.25, 2.0, 1.85, 2.1),
        ("predictor-corrector", 1.7, 2.0, 1.85, 2.1),
    ],
)
def test_order_of_convergence(method, a, expected, lo, hi):
    # measured on the example of Diethelm, Ford and Freed 2002 (exact
    # solution known), halving the step four times
    p = _orders(method, a, [40, 80, 160, 320, 640])
    assert np.all((p[1:] > lo) & (p[1:] < hi)), p


def test_order_of_predictor_corrector_below_one():
    # a < 1: order 1 + a in the maximum norm (Diethelm, Ford and Freed 2004,
    # for f(t, y(t)) smooth as in the example of Diethelm, Ford and Freed
    # 2002); approached from above
    p = _orders("predictor-corrector", 0.5, [640, 1280, 2560, 5120], norm="max")
    assert np.all((p > 1.45) & (p < 1.6)), p


def test_order_compressed_memory_is_the_same():
    # compressed history sums (tol 1e-12) do not change the measured order
    p = _orders("predictor-corrector", 0.5, [640, 1280, 2560], norm="max", memory="compressed")
    q = _orders("predictor-corrector", 0.5, [640, 1280, 2560], norm="max")
    assert np.allclose(p, q, atol=1e-3)


# ------------------------------------------------------------ stiff


def test_stiff_relaxation_explicit_blow_up_implicit_accurate():
    # D^a y = -1e4 y, a = 0.7, y(0) = 1, step 0.01: y = E_a(-1e4 t^a), from
    # its asymptotic expansion (Podlubny 1999, Theorem 1.4). The explicit
    # methods are unstable at this step; the implicit ones are stable, and
    # the implicit rectangle rule (strongly damped) is accurate to 2 %
    # from t = 0.5 on.
    lam, a, h, N = 1e4, 0.7, 0.01, 100
    for method in ("rectangle", "predictor-corrector"):
        try:
            _, y = solve(lambda t, y: -lam * y, 1.0, a, h, N, method=method)
        except pyfracconv.RhsError as exc:  # overflow to inf: stopped
            assert "NaN or infinite" in str(exc)
            y = exc.partial.y
        assert np.max(np.abs(y)) > 1e100, method
    t, y = solve(lambda t, y: -lam * y, 1.0, a, h, N, method="implicit-rectangle")
    ref = np.array([ml_asymptotic(a, lam * tt**a) for tt in t[50:]])
    assert np.max(np.abs(y[50:] / ref - 1)) < 0.02
    # the same with compressed memory: within the stated deviation of the
    # exact-memory run, and so as accurate against the reference
    _, yc = solve(
        lambda t, y: -lam * y, 1.0, a, h, N, method="implicit-rectangle", memory="compressed", tol=1e-10
    )
    assert np.max(np.abs(yc - y)) <= 1e-10 * (1 + np.max(np.abs(y)))
    assert np.max(np.abs(yc[50:] / ref - 1)) < 0.02
    t, y = solve(lambda t, y: -lam * y, 1.0, a, h, N, method="trapezoid")
    assert np.max(np.abs(y)) <= 1.0


# ------------------------------------------------------------ systems

LAMBDAS = np.array([1.0, 0.5, 3.0])
Y0 = np.array([1.0, 2.0, -0.5])


@pytest.mark.parametrize("method", METHODS)
def test_decoupled_system_equals_scalar_problems(method):
    # a diagonal linear system is m scalar problems (common practice)
    N, h = 400, 2.5e-3
    for memory in memories(method, 0.6):
        _, y = solve(lambda t, y: -LAMBDAS * y, Y0, 0.6, h, N, method=method, memory=memory)
        assert y.shape == (N + 1, 3)
        for i in range(3):
            _, yi = solve(lambda t, y, i=i: -LAMBDAS[i] * y, Y0[i], 0.6, h, N, method=method, memory=memory)
            assert np.allclose(y[:, i], yi, rtol=1e-13, atol=1e-15)
        # and each against E_a(-lambda t^a) (Gorenflo et al. 2014)
        ref = [Y0[i] * mittag_leffler(0.6, 1, -LAMBDAS[i] * 1.0**0.6) for i in range(3)]
        assert np.allclose(y[-1], ref, atol=20 * BUDGET[method])


@pytest.mark.parametrize("method", ["rectangle", "predictor-corrector", "trapezoid"])
def test_multi_order_system_equals_scalar_problems(method):
    # one order per component; components of order > 1 take y'(0)
    orders = np.array([0.5, 0.8, 0.5, 1.5])
    y0 = np.array([1.0, 2.0, 0.5, 1.0])
    dy0 = np.array([0.0, 0.0, 0.0, -1.0])
    lam = np.array([1.0, 2.0, 0.5, 1.0])
    N, h = 300, 1e-2
    _, y = solve(lambda t, y: -lam * y, y0, orders, h, N, dy0=dy0, method=method)
    for i in range(4):
        kw = {"dy0": dy0[i]} if orders[i] > 1 else {}
        _, yi = solve(lambda t, y, i=i: -lam[i] * y, y0[i], orders[i], h, N, method=method, **kw)
        assert np.allclose(y[:, i], yi, rtol=1e-13, atol=1e-15)


def test_multi_order_compressed_equals_scalar_compressed():
    orders = [0.3, 0.9]
    N, h = 500, 2e-3
    _, y = solve(lambda t, y: -y, [1.0, 1.0], orders, h, N, memory="compressed", tol=1e-10)
    for i in range(2):
        _, yi = solve(lambda t, y: -y, 1.0, orders[i], h, N, memory="compressed", tol=1e-10)
        assert np.allclose(y[:, i], yi, rtol=1e-13, atol=1e-15)


# ------------------------------------------------------------ O(N^2) loops


def _coupled(t, y):
    # an invented nonlinear coupled pair
    return np.array(
        [-y[0] + 0.5 * np.sin(t) * y[1] ** 2 / (1 + y[1] ** 2), 0.3 * y[0] - y[1] * (1 + 0.1 * y[0] ** 2)]
    )


def _coupled_jac(t, y):
    return np.array(
        [[-1.0, np.sin(t) * y[1] / (1 + y[1] ** 2) ** 2], [0.3 - 0.2 * y[0] * y[1], -(1 + 0.1 * y[0] ** 2)]]
    )


@pytest.mark.parametrize("method", METHODS)
@pytest.mark.parametrize("orders,dy0", [([0.6, 0.6], None), ([0.4, 0.9], None), ([1.3, 0.7], [0.5, 0.0])])
def test_exact_memory_equals_plain_loop(method, orders, dy0):
    # the method written straight from its paper with every history sum
    # recomputed (tests/solver_reference.py)
    N, h = 250, 8e-3
    y0 = np.array([1.0, 0.5])
    kw = (
        dict(jacobian=_coupled_jac, newton_tol=1e-15) if method in ("trapezoid", "implicit-rectangle") else {}
    )
    _, y = solve(_coupled, y0, orders, h, N, dy0=dy0, method=method, **kw)
    if method == "implicit-rectangle":
        ref = implicit_rectangle_loop(_coupled, _coupled_jac, y0, orders, h, N, dy0)
    else:
        _, ref = reference_solve(_coupled, y0, orders, h, N, dy0=dy0, method=method, jac=_coupled_jac)
    assert np.max(np.abs(y - ref) / np.maximum(np.abs(ref), 1e-3)) < 1e-13


def test_corrector_passes_equal_plain_loop():
    N, h = 200, 1e-2
    rhs, _ = dff_example(0.6)
    for c in (1, 2, 4):
        res = solve(rhs, 0.0, 0.6, h, N, corrections=c)
        _, ref = reference_solve(
            lambda t, y: np.array([rhs(t, y[0])]),
            [0.0],
            [0.6],
            h,
            N,
            method="predictor-corrector",
            corrections=c,
        )
        assert np.max(np.abs(res.y - ref[:, 0])) <= 1e-13 * np.max(np.abs(ref))
        # one evaluation for f(t0, y0), then c + 1 per step (P(EC)^c E:
        # Diethelm, Ford and Freed 2002)
        assert res.rhs_evals == 1 + N * (c + 1)
        assert res.jac_evals == 0


# ------------------------------------------------------------ compressed


@pytest.mark.parametrize("method", METHODS)
@pytest.mark.parametrize("tol", [1e-6, 1e-10])
def test_compressed_within_stated_deviation_of_exact(method, tol):
    # the stated deviation (README, Solving): |y_compressed - y_exact| <=
    # tol * (1 + max|y|) for a stable problem, over the horizon
    for a in (0.3, 0.7):
        rhs, _ = dff_example(a)
        N = 4000
        _, ye = solve(rhs, 0.0, a, 1.0 / N, N, method=method)
        _, yc = solve(rhs, 0.0, a, 1.0 / N, N, method=method, memory="compressed", tol=tol)
        dev = np.max(np.abs(yc - ye))
        assert dev <= tol * (1 + np.max(np.abs(ye))), (a, dev)
        assert dev > 0 or tol < 1e-9  # the compressed path was taken


def test_rhs_evaluation_counts():
    # rectangle: one evaluation per step plus f(t0, y0); trapezoid with a
    # linear rhs and its Jacobian: Newton converges after one update, so two
    # evaluations and one Jacobian per step (Garrappa 2015)
    N = 100
    r = solve(lambda t, y: -y, 1.0, 0.5, 0.01, N, method="rectangle")
    assert r.rhs_evals == N + 1 and r.jac_evals == 0
    r = solve(lambda t, y: -y, 1.0, 0.5, 0.01, N, method="trapezoid", jacobian=lambda t, y: -1.0)
    assert r.rhs_evals == 1 + 2 * N and r.jac_evals == N
    r = solve(lambda t, y: -y, 1.0, 0.5, 0.01, N, method="trapezoid")
    assert r.jac_evals == 0 and r.rhs_evals == 1 + 3 * N  # + one difference per step


def test_user_and_difference_jacobian_agree():
    N, h = 200, 1e-2
    y0 = np.array([1.0, 0.5])
    for method in ("trapezoid", "implicit-rectangle"):
        _, a = solve(_coupled, y0, 0.7, h, N, method=method, jacobian=_coupled_jac)
        _, b = solve(_coupled, y0, 0.7, h, N, method=method)
        assert np.max(np.abs(a - b)) < 1e-10


def test_result_unpacks_and_t0():
    res = solve(lambda t, y: -y, [1.0, 2.0], 0.5, 0.1, 10, t0=2.0)
    t, y = res
    assert t is res.t and y is res.y
    assert t[0] == 2.0 and t[-1] == pytest.approx(3.0, abs=1e-15)
    assert y.shape == (11, 2) and np.array_equal(y[0], [1.0, 2.0])
    # autonomous problem: shifting t0 changes nothing (common practice)
    _, y2 = solve(lambda t, y: -y, [1.0, 2.0], 0.5, 0.1, 10)
    assert np.array_equal(y, y2)


# ------------------------------------------------------------ implicit rectangle, compressed


@pytest.mark.parametrize("a", [0.05, 0.3, 0.5, 0.8, 1.0, 1.3, 1.5, 1.8])
def test_implicit_rectangle_compressed_relaxation_and_deviation(a):
    # D^a y = -y, y(0) = 1 (and y'(0) = 0 for a > 1): y = E_a(-t^a)
    # (Gorenflo, Kilbas, Mainardi and Rogosin 2014), the series summed with
    # mpmath (a = 1/2: scipy.special.erfcx(sqrt t)). Compressed memory keeps
    # the right-end-point history as a rectangle stream plus a stream of the
    # weight differences (L1 rule of order 1 - a below 1, trapezoid rule of
    # order a - 1 above 1; csrc/solver.c): against the exact-memory run
    # within tol (1 + max|y|) (README, Solving), and the same distance from
    # the Mittag-Leffler reference as the exact run has (first order).
    N, T = 2000, 2.0
    idx = np.arange(0, N + 1, 100)
    tr = idx * (T / N)
    ref = (
        scipy.special.erfcx(np.sqrt(tr))
        if a == 0.5
        else np.array([mittag_leffler(a, 1, -(t**a)) for t in tr])
    )
    kw = {"dy0": 0.0} if a > 1 else {}
    _, ye = solve(lambda t, y: -y, 1.0, a, T / N, N, method="implicit-rectangle", **kw)
    err_e = np.max(np.abs(ye[idx] - ref))
    assert err_e < 3e-3, err_e
    for tol in (1e-6, 1e-12):
        res = solve(
            lambda t, y: -y, 1.0, a, T / N, N, method="implicit-rectangle", memory="compressed", tol=tol, **kw
        )
        dev = np.max(np.abs(res.y - ye))
        assert dev <= tol * (1 + np.max(np.abs(ye))), (tol, dev)
        assert abs(np.max(np.abs(res.y[idx] - ref)) - err_e) <= 2 * tol
        if tol == 1e-6 and a != 1.0:
            assert dev > 0  # the compressed streams were used


def test_implicit_rectangle_compressed_order_of_convergence():
    # first order (the product rectangle rule), measured on the example of
    # Diethelm, Ford and Freed 2002 with its exact solution, the same with
    # compressed memory as with exact memory
    p = _orders("implicit-rectangle", 0.5, [320, 640, 1280], memory="compressed")
    q = _orders("implicit-rectangle", 0.5, [320, 640, 1280])
    assert np.allclose(p, q, atol=1e-3) and np.all((p > 0.9) & (p < 1.1)), (p, q)


def test_implicit_rectangle_compressed_multi_order_system():
    # a diagonal system with orders on both sides of 1 and one at 1 equals
    # the scalar problems (common practice); memory stays bounded
    orders = [0.4, 1.0, 1.6]
    lam = np.array([1.0, 2.0, 0.5])
    y0, dy0 = np.array([1.0, -1.0, 2.0]), np.array([0.0, 0.0, 0.3])
    N, h = 500, 2e-3
    kw = dict(method="implicit-rectangle", memory="compressed", tol=1e-11)
    res = solve(lambda t, y: -lam * y, y0, orders, h, N, dy0=dy0, **kw)
    for i, a in enumerate(orders):
        d = {"dy0": dy0[i]} if a > 1 else {}
        _, yi = solve(lambda t, y, c=lam[i]: -c * y, y0[i], a, h, N, **d, **kw)
        assert np.allclose(res.y[:, i], yi, rtol=0, atol=1e-13)
