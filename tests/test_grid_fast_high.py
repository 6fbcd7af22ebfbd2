"""The fast engine on a grid of sample times at orders 1 <= a < 2
(fc_grid_apply, rectangle and trapezoid: the rule at order a as the rule
of order a - 1 on the running integral X, csrc/grid_soe.c, "ORDERS
1 < a < 2"), checked against references outside the engine:

- the direct engine (pyfracconv.grid.apply_on_grid; its weights agree
  with mpmath to 1e-14 relative at order 1.7 in tests/test_grid.py, so an
  allowance of 2e-14 S_n is added for them): the promise
  |y_n - y_n(direct)| <= (tol + (K + 64) 2**-52) S_n, S_n = sum_k
  |w_{n,k} x_k| (the weights are positive: the direct engine on |x| gives
  S_n), at a in {1, 1.0001, 1.3, 1.5, 1.9, 1.9999} on jittered, sorted
  random and graded grids and bursts of close times, with a spike of 1e300
  next to data of 1e-5, positive data, alternating signs, magnitudes near
  1e300, several channels at once;
- the weights of grid_weights summed exactly (math.fsum) at chosen
  outputs of a record of 2e5 samples (the running integral over many
  steps);
- closed forms I^a t^b = Gamma(b+1)/Gamma(a+b+1) t^(a+b) (Podlubny 1999,
  chapter 2; Samko, Kilbas and Marichev 1993, eq. (2.44)), evaluated in
  mpmath at 30 digits, on a graded mesh, and the published orders of
  convergence of the product rules (Diethelm, Ford and Freed 2004: 1 for
  the rectangle rule, 2 for the trapezoidal rule on smooth f);
- the uniform grid given as times against the uniform engines (step=,
  tests/test_batch.py);
- the range: samples near the double range give finite outputs, an
  output beyond it FC_ERR_RANGE with nothing written.
Random grids and samples use fixed seeds.
"""

import math

import mpmath
import numpy as np
import pytest

import pyfracconv as pf
from pyfracconv import grid
from pyfracconv._fracconv import lib
from pyfracconv.grid import grid_weights
from test_grid_fast import run_c  # fc_grid_apply through cffi, one copy

EPS = 2.0**-52
DIRECT = 2e-14  # the direct engine's weights: relative error <= 1e-14
ORDERS = [1.0, 1.0001, 1.3, 1.5, 1.9, 1.9999]


def abs_terms(rule, a, t, x):
    """S_n: the direct engine on |x| (positive weights), each row scaled
    by a power of two first (down only, so that small samples next to
    large ones do not underflow) so that |x| near 1.8e308 does not
    overflow."""
    x = np.atleast_2d(x)
    out = np.empty(x.shape)
    for i, row in enumerate(x):
        s = min(1.0, 2.0 ** (1000 - math.frexp(max(np.max(np.abs(row)), 1e-300))[1]))
        out[i] = grid.apply_on_grid(rule, a, np.abs(row * s)[None], t)[0] / s
    return out


def check_against_direct(rule, a, t, x, tols):
    yd = grid.apply_on_grid(rule, a, np.atleast_2d(x), t)
    S = abs_terms(rule, a, t, x)
    for tol in tols:
        y, K, st = run_c(rule, a, t, x, tol)
        assert st == lib.FC_OK
        assert 0 < K <= 300
        assert np.all(np.isfinite(y))
        bound = (tol + (K + 64) * EPS + DIRECT) * S + 1e-300
        err = np.abs(y - yd)
        assert np.all(err <= bound), (rule, a, tol, K, np.max(err / bound))
        assert np.all(y[:, 0] == 0.0)
        # the Python wrapper gives the same bits, and so does each channel alone
        yp = pf.integral(np.atleast_2d(x), a, t=t, rule=rule, engine="fast", tol=tol)
        np.testing.assert_array_equal(yp, y)
        y1, _, _ = run_c(rule, a, t, np.atleast_2d(x)[-1], tol)
        np.testing.assert_array_equal(y1[0], y[-1])


def jittered(rng, n, T=1.0, amp=0.45):
    t = (T / n) * (np.arange(n) + rng.uniform(-amp, amp, n))
    return np.sort(t) - t.min()


def graded(n, r, T=1.0):
    # the usual graded mesh t_k = T (k/N)^r (Stynes, O'Riordan and Gracia 2017)
    return T * (np.arange(n + 1) / n) ** r


def grids():
    rng = np.random.default_rng(71)
    n = 600
    base = np.repeat(np.arange(n // 10, dtype=float), 10)
    out = {
        "jittered": jittered(rng, n),
        "random": np.concatenate([[0.0], np.sort(rng.uniform(0.0, 1.0, n - 1))]),
        "graded": graded(n - 1, 3.0),
        # clusters of 10 times 1e-9 apart, clusters 1 apart
        "bursts": base + np.tile(np.arange(10) * 1e-9, n // 10),
    }
    for name, t in out.items():
        assert np.all(np.diff(t) > 0), name
    h = np.diff(out["graded"])
    assert h.max() / h.min() > 1e6
    return out


GRIDS = grids()


def inputs(n):
    rng = np.random.default_rng(72)
    spike = 1e-5 * rng.standard_normal(n)
    spike[n // 3] = 1e300
    spike[n // 3 + 1] = -1e300
    silence = np.zeros(n)
    silence[2] = 1.0  # a spike, then silence
    positive = 1.0 + rng.uniform(size=n)
    alternating = (-1.0) ** np.arange(n) * (1.0 + 0.1 * rng.uniform(size=n))
    huge = 1e300 * rng.standard_normal(n)
    return np.vstack([spike, silence, positive, alternating, huge])


@pytest.mark.parametrize("grid_name", list(GRIDS))
@pytest.mark.parametrize("rule", ["rectangle", "trapezoid"])
def test_within_tolerance_of_direct_on_adversarial_inputs(rule, grid_name):
    t = GRIDS[grid_name]
    x = inputs(t.size)
    for a in ORDERS:
        check_against_direct(rule, a, t, x, (1e-6, 1e-10, 1e-13))


def test_tolerance_is_used_not_wasted():
    # the error is of the size of tol at 1.5 (the check can fail both ways)
    t = GRIDS["jittered"]
    x = 1.0 + np.random.default_rng(73).uniform(size=t.size)
    yd = grid.apply_on_grid("rectangle", 1.5, x[None], t)
    S = abs_terms("rectangle", 1.5, t, x)
    for tol in (1e-6, 1e-9):
        y, K, st = run_c("rectangle", 1.5, t, x, tol)
        worst = float(np.max(np.abs(y - yd) / (tol * S + 1e-300)))
        assert 1e-4 <= worst <= 1.0, (tol, worst)


@pytest.mark.parametrize("rule,a", [("rectangle", 1.5), ("trapezoid", 1.9)])
def test_long_record_against_grid_weights(rule, a):
    # 2e5 jittered samples with a burst of close times and a spike; chosen
    # outputs against grid_weights(rule, a, t, n) summed exactly
    rng = np.random.default_rng(74)
    n = 200_000
    t = jittered(rng, n, T=100.0, amp=0.4)
    t[1000:1010] = t[1000] + np.arange(10) * 1e-9
    assert np.all(np.diff(t) > 0)
    x = np.cos(t) + 0.5 * rng.standard_normal(n)
    x[5000] = 1e6
    tol = 1e-11
    y, K, st = run_c(rule, a, t, x, tol)
    assert st == lib.FC_OK
    for m in [1, 2, 999, 1005, 1011, 5000, 5001, 5002, 77777, n - 2, n - 1]:
        terms = grid_weights(rule, a, t[: m + 1]) * x[: m + 1]
        want = math.fsum(terms)
        S = math.fsum(np.abs(terms))
        assert abs(y[0, m] - want) <= (tol + (K + 64) * EPS + DIRECT) * S, (m, K)


# ------------------------------------------------------------ closed forms


def I_power_mp(t, a, b):
    # Podlubny 1999, chapter 2; Samko, Kilbas and Marichev 1993, eq. (2.44)
    with mpmath.workdps(30):
        c = mpmath.gamma(b + 1) / mpmath.gamma(a + b + 1)
        return np.array([float(c * mpmath.mpf(float(v)) ** (a + b)) for v in t])


@pytest.mark.parametrize("a", [1.3, 1.5, 1.9])
@pytest.mark.parametrize("rule", ["rectangle", "trapezoid"])
def test_closed_form_on_graded_mesh(rule, a):
    # graded mesh, steps from about 1e-9 to 1e-2: the fast result's distance
    # to I^a t^b is the direct one's plus at most the promise, and both are
    # small (the rule converges; checks that can fail)
    t = GRIDS["graded"]
    b = 0.5
    x = t**b
    exact = I_power_mp(t, a, b)
    yd = grid.apply_on_grid(rule, a, x[None], t)[0]
    y, K, st = run_c(rule, a, t, x, 1e-12)
    assert st == lib.FC_OK
    S = abs_terms(rule, a, t, x)[0]
    assert np.all(np.abs(y[0] - exact) <= np.abs(yd - exact) + (1e-12 + (K + 64) * EPS + DIRECT) * S + 1e-300)
    assert np.max(np.abs(y[0] - exact)) <= (1e-2 if rule == "rectangle" else 1e-4)


BIG = [5_000, 20_000, 80_000]


@pytest.mark.parametrize("rule,lo,hi", [("rectangle", 0.9, 1.1), ("trapezoid", 1.85, 2.15)])
def test_orders_of_convergence_at_large_sizes(rule, lo, hi):
    # product rectangle rule: order 1; product trapezoidal rule: order 2 for
    # smooth f (Diethelm, Ford and Freed 2004); f = t^2 on jittered grids,
    # a = 1.5, against the closed form (Podlubny 1999)
    rng = np.random.default_rng(75)
    a, b = 1.5, 2.0
    errs = []
    for n in BIG:
        t = jittered(rng, n)
        y = pf.integral(t**b, a, t=t, rule=rule, engine="fast", tol=1e-14)
        exact = math.gamma(b + 1) / math.gamma(a + b + 1) * t ** (a + b)
        errs.append(np.max(np.abs(y - exact)))
    p = [math.log(errs[i] / errs[i + 1]) / math.log(BIG[i + 1] / BIG[i]) for i in range(2)]
    assert lo <= np.mean(p) <= hi and min(p) >= lo - 0.1, (errs, p)


@pytest.mark.parametrize("rule,a", [("rectangle", 1.5), ("trapezoid", 1.2)])
def test_uniform_times_match_step_within_tolerance(rule, a):
    # h = 2**-7: every k*h exact; the uniform engines are accurate to
    # rounding (tests/test_batch.py)
    rng = np.random.default_rng(76)
    h = 2.0**-7
    n = 4000
    t = h * np.arange(n)
    x = rng.standard_normal(n)
    tol = 1e-12
    got = pf.integral(x, a, t=t, rule=rule, engine="fast", tol=tol)
    want = pf.integral(x, a, h, rule=rule)
    _, K, _ = run_c(rule, a, t, x, tol)
    S = abs_terms(rule, a, t, x)[0]
    assert np.all(np.abs(got - want) <= (tol + (K + 64) * EPS + DIRECT) * S)


# ------------------------------------------------------------ engine choice, range


def test_auto_takes_the_fast_engine_at_the_new_orders():
    rng = np.random.default_rng(77)
    n = pf._core.GRID_FAST_FROM
    t = jittered(rng, n)
    x = rng.standard_normal(n)
    for a in (1.0001, 1.5, 1.9999):
        fast = pf.integral(x, a, t=t, engine="fast")
        np.testing.assert_array_equal(pf.integral(x, a, t=t), fast)
        assert not np.array_equal(fast, pf.integral(x, a, t=t, engine="direct"))
    short = jittered(rng, n - 1)
    xs = x[: n - 1]
    np.testing.assert_array_equal(
        pf.integral(xs, 1.5, t=short), pf.integral(xs, 1.5, t=short, engine="direct")
    )


def test_last_interval_closed_form():
    # two samples: only the last interval, exact; I^a of the constant x_0 on
    # [t_0, t_1] (rectangle) and of the line through (t_0, x_0), (t_1, x_1)
    # (trapezoid): x_0 h^a/Gamma(a+1) and h^a (a x_0 + x_1)/Gamma(a+2)
    # (Podlubny 1999, I^a of 1 and of t)
    t = np.array([1.0, 1.75])
    x = np.array([2.0, 5.0])
    h, a = 0.75, 1.5
    y, _, st = run_c("rectangle", a, t, x, 1e-10)
    assert st == lib.FC_OK and math.isclose(y[0, 1], 2.0 * h**a / math.gamma(a + 1), rel_tol=1e-15)
    y, _, st = run_c("trapezoid", a, t, x, 1e-10)
    assert st == lib.FC_OK
    assert math.isclose(y[0, 1], h**a * (a * 2.0 + 5.0) / math.gamma(a + 2), rel_tol=1e-15)


@pytest.mark.parametrize("rule", ["rectangle", "trapezoid"])
def test_range(rule):
    # finite input near the double range: finite outputs (no inf or NaN on
    # the way) within the promise; an output beyond it: FC_ERR_RANGE, y
    # untouched, and the Python message
    t = GRIDS["jittered"]
    x = np.full(t.size, 1.7e308)
    x[1::2] = -1.7e308
    check_against_direct(rule, 1.5, t, x, (1e-10,))
    tt = t * 1e6
    y, _, st = run_c(rule, 1.5, tt, np.full(t.size, 1e308), 1e-10)
    assert st == lib.FC_ERR_RANGE and np.all(y == -7.0)
    with pytest.raises(pf.RangeError, match="beyond the double range"):
        pf.integral(np.full(t.size, 1e308), 1.5, t=tt, rule=rule, engine="fast")
    # subnormal samples (a signal scaled up by more than 2^1000 gave inf
    # and NaN before the scale was bounded): finite, within an absolute
    # 1e-300 of the direct engine
    for a in (0.5, 1.5):
        xs = np.full(t.size, 5e-324)
        xs[::3] = -1e-310
        y, _, st = run_c(rule, a, t, xs, 1e-10)
        assert st == lib.FC_OK and np.all(np.isfinite(y))
        assert np.all(np.abs(y - grid.apply_on_grid(rule, a, xs[None], t)) <= 1e-300)
