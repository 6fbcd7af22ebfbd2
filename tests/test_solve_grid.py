"""The solver on a given grid (``solve(..., t=grid)``, issue 11 item 4)
against outside references: the Mittag-Leffler closed form of the
relaxation problem (SciPy's erfcx, the mpmath series), a plain O(N^2) loop
whose weights are integrated by mpmath at 40 digits, the published orders
of convergence on uniform and graded meshes, and the uniform solver."""

import math
import sys
import types

import mpmath
import numpy as np
import pytest
import scipy.special

import pyfracconv
from pyfracconv import ArgumentError, InputTypeError, RhsError, solve
from pyfracconv.grid import graded_mesh
from solver_reference import mittag_leffler

GRID_METHODS = ["rectangle", "predictor-corrector"]


def relaxation_exact(a, t):
    """E_a(-t^a), the solution of D^a y = -y, y(0) = 1 (Gorenflo, Kilbas,
    Mainardi and Rogosin, Mittag-Leffler Functions, Springer 2014): for
    a = 1/2 it is erfcx(sqrt t) (same source, chapter 3; SciPy), else the
    defining series summed by mpmath (tests/solver_reference.py)."""
    t = np.asarray(t, dtype=float)
    if a == 0.5:
        return scipy.special.erfcx(np.sqrt(t))
    return np.array([mittag_leffler(a, 1, -(x**a), dps=25) for x in t])


# ------------------------------------------------------------ graded mesh


def test_graded_mesh_is_the_formula():
    # t_k = t0 + T (k/N)^r (Stynes, O'Riordan and Gracia 2017, eq. (1.4)
    # with t0 = 0), checked against mpmath at 30 digits
    t = graded_mesh(2.5, 7, 3.0, t0=-1.0)
    with mpmath.workdps(30):
        ref = [float(-1 + mpmath.mpf(2.5) * (mpmath.mpf(k) / 7) ** 3) for k in range(8)]
    assert t.shape == (8,)
    assert t[0] == -1.0 and t[-1] == 1.5
    assert np.allclose(t, ref, rtol=1e-15, atol=1e-15)
    assert np.array_equal(graded_mesh(1.0, 4, 1.0), np.arange(5) / 4)  # r = 1: uniform


@pytest.mark.parametrize(
    "kw, match",
    [
        (dict(T=0.0, n=4, r=2.0), r"T=0\.0: must be finite and > 0"),
        (dict(T=float("inf"), n=4, r=2.0), r"T=inf"),
        (dict(T=1.0, n=0, r=2.0), r"n=0: must be >= 1"),
        (dict(T=1.0, n=4, r=0.5), r"r=0\.5: must be in \[1, 100\]"),
        (dict(T=1.0, n=4, r=2.0, t0=float("nan")), r"t0=nan: must be finite"),
        (dict(T=1.0, n=10**6, r=100.0), r"n=1000000, r=100\.0: t\[1\] = t\[0\]"),
        (dict(T=1e-300, n=10, r=100.0, t0=1.0), r"t\[1\] = t\[0\] = 1\.0"),
    ],
)
def test_graded_mesh_refusals(kw, match):
    with pytest.raises(ArgumentError, match=match):
        graded_mesh(**kw)
    with pytest.raises(InputTypeError, match="n=2.0: expected an integer"):
        graded_mesh(1.0, 2.0, 2.0)


# ------------------------------------------------------------ relaxation

# Error budgets for D^a y = -y on [0, 1] on the graded mesh of 400 steps
# with r = 2/a (rectangle) and (1 + a)/a (predictor-corrector): about three
# times the errors measured when the test was written.
BUDGET = {"rectangle": 1.5e-3, "predictor-corrector": 1.5e-4}


@pytest.mark.parametrize("method", GRID_METHODS)
@pytest.mark.parametrize("a", [0.3, 0.5, 0.8])
def test_relaxation_on_graded_mesh(method, a):
    # D^a y = -y, y(0) = 1: y = E_a(-t^a) (Gorenflo, Kilbas, Mainardi and
    # Rogosin 2014), at every grid point
    r = 2.0 / a if method == "rectangle" else (1.0 + a) / a
    t = graded_mesh(1.0, 400, r)
    res = solve(lambda t, y: -y, 1.0, a, t=t, method=method)
    assert np.array_equal(res.t, t) and res.y.shape == (401,)
    assert res.y[0] == 1.0
    err = np.max(np.abs(res.y - relaxation_exact(a, t)))
    assert err < BUDGET[method], err
    assert res.rhs_evals == (1 if method == "rectangle" else 2) * 400 + 1
    assert res.memory == "exact" and res.method == method


def test_relaxation_on_a_jittered_grid_and_a_vector_problem():
    # a logger's grid (steps uniform in [0.5, 1.5] ms, invented), two
    # decoupled components of orders 0.5 and 0.7, against E_a(-t^a)
    rng = np.random.default_rng(11)
    t = np.concatenate([[0.0], np.cumsum(rng.uniform(0.5e-3, 1.5e-3, 600))])
    res = solve(lambda t, y: -y, [1.0, 2.0], [0.5, 0.7], t=t)
    assert res.y.shape == (601, 2)
    e0 = np.max(np.abs(res.y[:, 0] - relaxation_exact(0.5, t)))
    e1 = np.max(np.abs(res.y[::20, 1] - 2.0 * relaxation_exact(0.7, t[::20])))
    assert e0 < 2e-3 and e1 < 2e-3, (e0, e1)
    # each component as its own scalar problem gives the same values
    s0 = solve(lambda t, y: -y, 1.0, 0.5, t=t)
    assert np.allclose(res.y[:, 0], s0.y, rtol=1e-15, atol=0)


# ------------------------------------------------------------ orders


def observed_orders(a, method, r, Ns):
    """log2 of the ratios of the max errors over the grid points of
    D^a y = -y on graded meshes with N and 2N steps (nested meshes: the
    exact solution is evaluated once on the finest)."""
    fine = graded_mesh(1.0, Ns[-1], r)
    ex = relaxation_exact(a, fine)
    errs = []
    for N in Ns:
        t = graded_mesh(1.0, N, r)
        sub = ex[:: Ns[-1] // N]
        assert np.allclose(fine[:: Ns[-1] // N], t, rtol=1e-15, atol=0)
        res = solve(lambda t, y: -y, 1.0, a, t=t, method=method)
        errs.append(np.max(np.abs(res.y - sub)))
    return [math.log2(errs[i] / errs[i + 1]) for i in range(len(errs) - 1)], errs


# The max-norm orders for a right-hand side f(t, y(t)) that behaves like
# t^s near 0 (s in (0, 1)) on the graded mesh t_k = T (k/N)^r, 0 < a < 1:
# the product rectangle rule min(r (a + s), 1) (Liu, Roberts and Yan, Int.
# J. Comput. Math. 95 (2018)) and the predictor-corrector min(r (a + s),
# 1 + a) (Liu, Roberts and Yan, Numer. Algorithms 78 (2018)). Stated from
# memory of their theorems: the published statements were looked for
# (abstracts, arXiv pages) and not found, so the rates, not the papers'
# theorem numbers, are what is checked; docs/references.md says so. The
# caps 1 and 1 + a are the uniform-mesh orders for smooth data (Diethelm,
# Ford and Freed 2004, also from memory). Here f = -E_a(-t^a) = -1 +
# t^a / Gamma(1 + a) - ... (Gorenflo, Kilbas, Mainardi and Rogosin 2014),
# so s = a. Measured when the test was written (last ratio): rectangle
# a = 0.3: 0.57 (uniform), 1.03 (r = 5); predictor-corrector a = 0.5: 0.94
# (uniform, 3200 steps), 1.21 (r = 1.25, the branch r (a + s) on a graded
# mesh), 1.52 (r = 2.5); a = 0.7: 1.37 (uniform), 1.69 (r = 2).
ORDER_MARGIN = 0.1


def stated_order(a, method, r, s):
    cap = 1.0 if method == "rectangle" else 1.0 + a
    return min(r * (a + s), cap)


ORDER_CASES = [
    # a, method, r, steps
    (0.3, "rectangle", 1.0, [200, 400, 800, 1600]),
    (0.3, "rectangle", 5.0, [200, 400, 800, 1600]),
    (0.5, "predictor-corrector", 1.0, [400, 800, 1600, 3200]),
    (0.5, "predictor-corrector", 1.25, [200, 400, 800, 1600]),
    (0.5, "predictor-corrector", 2.5, [200, 400, 800, 1600]),
    (0.7, "predictor-corrector", 1.0, [200, 400, 800, 1600]),
    (0.7, "predictor-corrector", 2.0, [200, 400, 800, 1600]),
]


@pytest.mark.parametrize("a, method, r, Ns", ORDER_CASES)
def test_published_orders_on_uniform_and_graded_meshes(a, method, r, Ns):
    expected = stated_order(a, method, r, s=a)
    orders, errs = observed_orders(a, method, r, Ns)
    assert all(e2 < e1 for e1, e2 in zip(errs, errs[1:])), errs
    # the last ratio within the margin of the stated order, none beyond it
    # by more than the margin (a method of higher order fails too)
    assert abs(orders[-1] - expected) < ORDER_MARGIN, (orders, expected)
    assert max(orders) < expected + ORDER_MARGIN, (orders, expected)


@pytest.mark.parametrize("a, method, r_graded", [(0.3, "rectangle", 5.0), (0.5, "predictor-corrector", 2.5)])
def test_graded_mesh_restores_the_order(a, method, r_graded):
    # the same steps, uniform against graded: the graded mesh converges
    # faster by at least 0.3 and is more accurate at every N
    Ns = [200, 400, 800]
    uo, ue = observed_orders(a, method, 1.0, Ns)
    go, ge = observed_orders(a, method, r_graded, Ns)
    assert go[-1] > uo[-1] + 0.3, (uo, go)
    assert all(g < u for g, u in zip(ge, ue)), (ue, ge)


# ------------------------------------------------------------ plain loop


def _mp_weights(a, t, n):
    """Rectangle weights of f_0..f_{n-1} and trapezoid weights of f_0..f_n at
    t_n, integrated in closed form at 40 digits: the integrals of
    (t_n - s)^(a-1)/Gamma(a) over [t_k, t_{k+1}] against 1 and against the
    two linear hat pieces (elementary antiderivatives, common practice)."""
    with mpmath.workdps(40):
        A = mpmath.mpf(a)
        T = [mpmath.mpf(float(x)) for x in t]
        g = mpmath.gamma(A)
        rect = []
        trap = [mpmath.mpf(0)] * (n + 1)
        for k in range(n):
            d, e = T[n] - T[k], T[n] - T[k + 1]
            h = T[k + 1] - T[k]
            i0 = (d**A - e**A) / A  # int_e^d u^(a-1) du
            i1 = (d ** (A + 1) - e ** (A + 1)) / (A + 1)  # int_e^d u^a du
            rect.append(i0 / g)
            trap[k] += (i1 - e * i0) / (h * g)  # hat of t_k: (u - e)/h
            trap[k + 1] += (d * i0 - i1) / (h * g)  # hat of t_{k+1}: (d - u)/h
        return np.array([float(x) for x in rect]), np.array([float(x) for x in trap])


@pytest.mark.parametrize("method", GRID_METHODS)
@pytest.mark.parametrize("a, dy0", [(0.4, None), (1.6, -0.5)])
def test_equals_plain_loop_with_mpmath_weights(method, a, dy0):
    # the methods of Liu, Roberts and Yan 2018 written out as a plain loop
    # on a random grid (steps spanning three decades), weights from mpmath
    rng = np.random.default_rng(5)
    t = np.concatenate([[0.2], 0.2 + np.cumsum(10.0 ** rng.uniform(-4, -1, 30))])
    # both ways of the solver's trapezoid weights are used: intervals with
    # h_k / (t_n - t_k) below 1/256 (binomial series) and above (grid.py)
    ratios = np.concatenate([np.diff(t[: n + 1]) / (t[n] - t[:n]) for n in range(1, t.size)])
    assert np.sum(ratios < 1 / 256) > 50 and np.sum(ratios >= 1 / 256) > 50

    def f(s, y):
        return math.cos(3 * s) - y * abs(y)

    N = t.size - 1
    y = np.empty(N + 1)
    F = np.empty(N + 1)
    y[0] = 0.7
    F[0] = f(t[0], y[0])
    for n in range(1, N + 1):
        rect, trap = _mp_weights(a, t, n)
        base = y[0] + (0.0 if dy0 is None else dy0 * (t[n] - t[0]))
        yn = base + rect @ F[:n]
        if method == "predictor-corrector":
            yn = base + trap[:n] @ F[:n] + trap[n] * f(t[n], yn)
        y[n] = yn
        F[n] = f(t[n], yn)
    res = solve(f, 0.7, a, t=t, method=method, dy0=dy0)
    assert np.allclose(res.y, y, rtol=1e-13, atol=1e-14), np.max(np.abs(res.y - y))


def test_corrections_are_repeated_corrector_passes():
    # P(EC)^2 E: the corrector applied twice (Diethelm, Ford and Freed 2002)
    t = graded_mesh(1.0, 50, 2.0)
    one = solve(lambda t, y: -(y**3), 1.0, 0.6, t=t)
    two = solve(lambda t, y: -(y**3), 1.0, 0.6, t=t, corrections=2)
    assert two.rhs_evals == 3 * 50 + 1
    assert not np.array_equal(one.y, two.y)
    assert np.max(np.abs(one.y - two.y)) < 1e-3


# ------------------------------------------------------------ uniform times


@pytest.mark.parametrize("method", GRID_METHODS)
@pytest.mark.parametrize("a, dy0", [(0.5, None), (0.85, None), (1.5, 0.3), (2.0, 1.0)])
def test_uniform_times_reproduce_the_uniform_solver(method, a, dy0):
    # the same method on the same grid: the C solver's uniform weights
    # (Diethelm, Ford and Freed 2002) and its FFT-based history sums against
    # the grid weights and direct sums, equal to rounding
    h, N, t0 = 0.01, 300, 0.5

    def f(t, y):
        return -y + math.sin(t)

    u = solve(f, 1.0, a, h, N, t0=t0, dy0=dy0, method=method)
    g = solve(f, 1.0, a, t=t0 + h * np.arange(N + 1), dy0=dy0, method=method)
    assert np.array_equal(u.t, g.t)
    assert np.max(np.abs(u.y - g.y) / (1.0 + np.abs(u.y))) < 1e-14
    assert u.rhs_evals == g.rhs_evals


def test_uniform_times_reproduce_a_uniform_system():
    h, N = 0.02, 200
    rhs = lambda t, y: np.array([-y[0] + 0.1 * y[1], np.cos(t) - y[1] ** 3])  # noqa: E731
    u = solve(rhs, [1.0, 0.0], [0.6, 0.9], h, N, corrections=2)
    g = solve(rhs, [1.0, 0.0], [0.6, 0.9], t=h * np.arange(N + 1), corrections=2)
    assert g.y.shape == (N + 1, 2)
    assert np.max(np.abs(u.y - g.y)) < 1e-14


def test_single_time_is_the_initial_value():
    res = solve(lambda t, y: -y, [1.0, 2.0], 0.5, t=[3.0])
    assert res.t.tolist() == [3.0] and res.y.tolist() == [[1.0, 2.0]]
    assert res.rhs_evals == 1


# ------------------------------------------------------------ refusals


class Counting:
    def __init__(self):
        self.calls = 0

    def __call__(self, t, y):
        self.calls += 1
        return -y


@pytest.mark.parametrize(
    "args, kw, match",
    [
        ((0.01, 10), dict(t=[0.0, 1.0]), r"t and step=0\.01, n_steps=10: give either"),
        ((0.01,), dict(t=[0.0, 1.0]), r"t and step=0\.01: give either"),
        ((), dict(), r"step and n_steps=None: give step and n_steps"),
        ((0.01,), dict(), r"n_steps=None: give step and n_steps"),
        ((), dict(t=[0.0, 1.0], t0=0.0), r"t0=0\.0: not used with t="),
        ((), dict(t=[0.0, 1.0], method="euler"), r"method='euler': unknown"),
        ((), dict(t=[0.0, 1.0], horizon=10), r"horizon=10: not used with t="),
        ((), dict(t=[0.0, 0.5, 0.5]), r"t\[2\]=0\.5 after t\[1\]=0\.5: .*strictly increasing"),
        ((), dict(t=[0.0, float("nan")]), r"t\[1\]=nan: sample times must be finite"),
        ((), dict(t=[[0.0, 1.0]]), r"t: expected a 1-D array"),
        ((), dict(t=[]), r"t: empty"),
        (
            (),
            dict(t=[0.0, 1.0], corrections=2, method="rectangle"),
            r"corrections=2: only used by method='predictor-corrector'",
        ),
    ],
)
def test_refusals_name_the_argument_and_call_nothing(args, kw, match):
    rhs = Counting()
    with pytest.raises(ArgumentError, match=match):
        solve(rhs, 1.0, 0.5, *args, **kw)
    assert rhs.calls == 0


def test_order_above_one_needs_dy0_on_a_grid_too():
    with pytest.raises(ArgumentError, match=r"dy0=None: required"):
        solve(lambda t, y: -y, 1.0, 1.5, t=[0.0, 0.1])


@pytest.mark.parametrize(
    "bad, kind",
    [
        (lambda t, y: 1 / 0 if t > 0.25 else -y, "raised ZeroDivisionError"),
        (lambda t, y: float("nan") if t > 0.25 else -y, "returned a NaN or infinite value"),
        (
            lambda t, y: [1.0, 2.0] if t > 0.25 else -y,
            r"returned a value of shape \(2,\), "
            "expected a number",
        ),
    ],
)
def test_rhs_faults_keep_the_partial_solution(bad, kind):
    t = np.linspace(0.0, 1.0, 11)
    with pytest.raises(RhsError, match=kind + r".* at step 3, t=0\.3") as info:
        solve(bad, 1.0, 0.5, t=t, method="rectangle")
    err = info.value
    assert err.step == 3 and err.time == pytest.approx(0.3)
    good = solve(lambda t, y: -y, 1.0, 0.5, t=t, method="rectangle")
    assert np.array_equal(err.partial.t, t[:3])
    assert np.array_equal(err.partial.y, good.y[:3])


def test_rhs_fault_at_the_start():
    with pytest.raises(RhsError, match=r"at step 0, t=0\.0; nothing was computed"):
        solve(lambda t, y: 1 / 0, 1.0, 0.5, t=[0.0, 1.0])


def test_keyboard_interrupt_passes_through():
    def rhs(t, y):
        raise KeyboardInterrupt

    with pytest.raises(KeyboardInterrupt):
        solve(rhs, 1.0, 0.5, t=[0.0, 1.0])


def test_vector_rhs_gets_a_read_only_array():
    seen = []

    def rhs(t, y):
        seen.append(y.flags.writeable)
        return -y

    solve(rhs, [1.0, 1.0], 0.5, t=[0.0, 0.1, 0.3])
    assert seen and not any(seen)


def test_progress_bar_on_a_grid(monkeypatch):
    seen = []

    class Bar:  # a stand-in with tqdm's context-manager interface
        def __init__(self, total, unit):
            seen.append(("total", total))

        def __enter__(self):
            return self

        def __exit__(self, *exc):
            return False

        def update(self, k):
            seen.append(("update", k))

    monkeypatch.setitem(sys.modules, "tqdm", types.SimpleNamespace(tqdm=Bar))
    t = graded_mesh(1.0, 40, 2.0)
    a = solve(lambda t, y: -y, 1.0, 0.5, t=t, progress=True)
    b = solve(lambda t, y: -y, 1.0, 0.5, t=t)
    assert np.array_equal(a.y, b.y)
    assert seen[0] == ("total", 40) and sum(k for _, k in seen[1:]) == 40


def test_positional_uniform_calls_still_work():
    t, y = pyfracconv.solve(lambda t, y: -y, 1.0, 1.0, 0.01, 2, method="rectangle")
    assert y.tolist() == pytest.approx([1.0, 0.99, 0.9801], rel=1e-15)  # explicit Euler
