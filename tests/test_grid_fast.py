"""The fast engine on a grid of sample times (fc_grid_apply; integral and
derivative with ``t=`` and ``engine='fast'``), checked against references
outside the engine:

- the direct engine (pyfracconv.grid.apply_on_grid, whose weights are
  checked against mpmath in tests/test_grid.py) and, for long records, the
  weights of grid_weights at chosen outputs: the promise
  |y_n - y_n(direct)| <= (tol + (K + 64) 2**-52) S_n, S_n the sum of the
  absolute terms, on adversarial inputs (a spike of 1e300 next to data of
  size 1e-5, positive data, alternating signs, magnitudes near 1e300) and
  grids (jittered, sorted random, graded with a ratio of steps above 1e6,
  bursts of close times); the allowance 2e-14 S_n added for the direct
  engine's own weights (relative error <= 1e-14, tests/test_grid.py);
- closed forms I^a t^b = Gamma(b+1)/Gamma(b+1+a) t^(b+a) (Podlubny 1999,
  chapter 2; Oldham and Spanier 1974) and the Caputo derivative
  D^a t^b = Gamma(b+1)/Gamma(b+1-a) t^(b-a) (Diethelm 2010), with the
  published orders of convergence (Diethelm, Ford and Freed 2004; Lin and
  Xu 2007; Stynes, O'Riordan and Gracia 2017) at sizes the direct engine
  cannot reach;
- the uniform grid given as times against the uniform engines (step=);
- bad input refused with the statuses and messages the header and the
  docstrings state, nothing written.
Random grids and samples use fixed seeds.
"""

import math

import numpy as np
import pytest

import pyfracconv as pf
from pyfracconv import ArgumentError, grid
from pyfracconv._fracconv import ffi, lib
from pyfracconv.grid import grid_weights

EPS = 2.0**-52
DIRECT = 2e-14  # the direct engine's weights: relative error <= 1e-14
CODES = {"rectangle": lib.FC_RULE_RECTANGLE, "trapezoid": lib.FC_RULE_TRAPEZOID, "l1": lib.FC_RULE_L1}


def run_c(rule, a, t, x, tol):
    """fc_grid_apply on rows x (nsig, n): (y, K, status)."""
    x = np.ascontiguousarray(np.atleast_2d(x), dtype=float)
    t = np.ascontiguousarray(t, dtype=float)
    y = np.full_like(x, -7.0)
    K = ffi.new("size_t *")
    st = lib.fc_grid_apply(
        CODES[rule],
        a,
        ffi.from_buffer("double[]", t),
        ffi.from_buffer("double[]", x),
        x.shape[0],
        t.size,
        tol,
        ffi.from_buffer("double[]", y),
        K,
    )
    return y, K[0], st


def abs_terms(rule, a, t, x):
    """S_n of every output, by the direct engine on |x| (the weights are
    positive for 0 < a <= 1) or, for L1, on the running sum of |dx| (whose
    increments are |x_{k+1} - x_k|); x scaled by a power of two first."""
    x = np.atleast_2d(x)
    s = 2.0 ** -math.frexp(max(np.max(np.abs(x)), 1e-300))[1]
    if rule == "l1":
        inc = np.abs(np.diff(x * s, axis=1))
        u = np.concatenate([np.zeros((x.shape[0], 1)), np.cumsum(inc, axis=1)], axis=1)
        return grid.apply_on_grid(rule, a, u, t) / s
    return grid.apply_on_grid(rule, a, np.abs(x * s), t) / s


def check_against_direct(rule, a, t, x, tols):
    yd = grid.apply_on_grid(rule, a, np.atleast_2d(x), t)
    S = abs_terms(rule, a, t, x)
    worst = 0.0
    for tol in tols:
        y, K, st = run_c(rule, a, t, x, tol)
        assert st == lib.FC_OK
        assert 0 < K <= 300
        bound = (tol + (K + 64) * EPS + DIRECT) * S + 1e-300
        err = np.abs(y - yd)
        assert np.all(err <= bound), (rule, a, tol, K, np.max(err / bound))
        assert np.all(y[:, 0] == 0.0)
        # the Python wrapper gives the same bits
        func = pf.derivative if rule == "l1" else pf.integral
        yp = func(np.atleast_2d(x), a, t=t, rule=rule, engine="fast", tol=tol)
        np.testing.assert_array_equal(yp, y)
        worst = max(worst, float(np.max(err / (tol * S + 1e-300))))
    return worst


# ------------------------------------------------------------ grids, inputs


def jittered(rng, n, T=1.0, amp=0.45):
    t = (T / n) * (np.arange(n) + rng.uniform(-amp, amp, n))
    return np.sort(t) - t.min()


def graded(n, r, T=1.0):
    # the usual graded mesh t_k = T (k/N)^r (Stynes, O'Riordan and Gracia 2017)
    return T * (np.arange(n + 1) / n) ** r


def bursts(n):
    # clusters of 10 times 1e-9 apart, clusters 1 apart
    base = np.repeat(np.arange(n // 10, dtype=float), 10)
    off = np.tile(np.arange(10) * 1e-9, n // 10)
    return base + off


def grids():
    rng = np.random.default_rng(51)
    n = 700
    out = {
        "jittered": jittered(rng, n),
        "random": np.concatenate([[0.0], np.sort(rng.uniform(0.0, 1.0, n - 1))]),
        "graded": graded(n - 1, 3.0),
        "bursts": bursts(n),
    }
    for name, t in out.items():
        assert np.all(np.diff(t) > 0), name
    h = np.diff(out["graded"])
    assert h.max() / h.min() > 1e6
    return out


GRIDS = grids()


def inputs(t, rule):
    rng = np.random.default_rng(52)
    n = t.size
    # near 1e300, but for L1 not beyond the double range: its weights reach
    # h^-a / Gamma(2-a) on the smallest step h, and n terms add up
    big = 1e300 if rule != "l1" else 1e300 * min(1.0, np.diff(t).min()) / (10 * n)
    spike = 1e-5 * rng.standard_normal(n)
    spike[n // 3] = big
    spike[n // 3 + 1] = -big
    positive = 1.0 + rng.uniform(size=n)
    alternating = (-1.0) ** np.arange(n) * (1.0 + 0.1 * rng.uniform(size=n))
    huge = big * rng.standard_normal(n)
    return np.vstack([spike, positive, alternating, huge])


ORDERS = {"rectangle": [0.01, 0.5, 0.999, 1.0], "trapezoid": [0.3, 0.9, 1.0], "l1": [0.01, 0.5, 0.999]}


@pytest.mark.parametrize("grid_name", list(GRIDS))
@pytest.mark.parametrize("rule", ["rectangle", "trapezoid", "l1"])
def test_within_tolerance_of_direct_on_adversarial_inputs(rule, grid_name):
    t = GRIDS[grid_name]
    x = inputs(t, rule)
    for a in ORDERS[rule]:
        check_against_direct(rule, a, t, x, (1e-6, 1e-10, 1e-13))


def test_tolerance_is_used_not_wasted():
    # the error is of the size of tol (the check can fail both ways: a
    # construction far more accurate than asked would waste terms)
    t = GRIDS["jittered"]
    rng = np.random.default_rng(53)
    x = 1.0 + rng.uniform(size=t.size)
    for tol in (1e-6, 1e-9):
        worst = check_against_direct("rectangle", 0.5, t, x, (tol,))
        assert 1e-4 <= worst <= 1.0, (tol, worst)


@pytest.mark.parametrize("rule,a", [("rectangle", 0.4), ("trapezoid", 0.7), ("l1", 0.6)])
def test_long_record_against_grid_weights(rule, a):
    # 2e5 jittered samples with a burst of close times: chosen outputs
    # against grid_weights(rule, a, t, n) applied directly
    rng = np.random.default_rng(54)
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
        w = grid_weights(rule, a, t[: m + 1])
        if rule == "l1":
            terms = w * np.diff(x[: m + 1])
        else:
            terms = w * x[: m + 1]
        want = math.fsum(terms)
        S = math.fsum(np.abs(terms))
        assert abs(y[0, m] - want) <= (tol + (K + 64) * EPS + DIRECT) * S, (m, K)


# ------------------------------------------------------------ closed forms


def I_power(t, a, b):
    # Podlubny 1999, chapter 2; Oldham and Spanier 1974
    return math.gamma(b + 1) / math.gamma(b + 1 + a) * t ** (b + a)


def D_power(t, a, b):
    # Caputo derivative of t^b, b > 0 (Diethelm 2010; Podlubny 1999)
    return math.gamma(b + 1) / math.gamma(b + 1 - a) * t ** (b - a)


def slopes(ns, errs):
    return [math.log(errs[i] / errs[i + 1]) / math.log(ns[i + 1] / ns[i]) for i in range(len(ns) - 1)]


BIG = [5_000, 20_000, 80_000]


@pytest.mark.parametrize(
    "rule,b,lo,hi",
    [
        # product rectangle rule: order 1; product trapezoidal rule: order 2
        # for smooth f (Diethelm, Ford and Freed 2004), here on jittered grids
        ("rectangle", 2.0, 0.9, 1.1),
        ("trapezoid", 2.0, 1.85, 2.15),
    ],
)
def test_integral_orders_at_large_sizes(rule, b, lo, hi):
    rng = np.random.default_rng(55)
    a = 0.5
    errs = []
    for n in BIG:
        t = jittered(rng, n)
        y = pf.integral(t**b, a, t=t, rule=rule, engine="fast", tol=1e-14)
        errs.append(np.max(np.abs(y - I_power(t, a, b))))
    p = slopes(BIG, errs)
    assert lo <= np.mean(p) <= hi and min(p) >= lo - 0.1, (errs, p)


@pytest.mark.parametrize("a", [0.3, 0.7])
def test_l1_order_two_minus_a_at_large_sizes(a):
    # L1 scheme: order 2 - a for smooth f (Lin and Xu 2007; on quasi-uniform
    # meshes Stynes, O'Riordan and Gracia 2017); f = t^2
    rng = np.random.default_rng(56)
    errs = []
    for n in BIG:
        t = jittered(rng, n)
        y = pf.derivative(t**2, a, t=t, rule="l1", engine="fast", tol=1e-14)
        errs.append(np.max(np.abs(y - D_power(t, a, 2.0))))
    p = slopes(BIG, errs)
    assert abs(np.mean(p) - (2 - a)) <= 0.1, (errs, p)


@pytest.mark.parametrize("a", [0.4, 0.6])
def test_l1_truncation_error_on_graded_meshes_at_large_sizes(a):
    # The truncation error of the L1 scheme on the graded mesh
    # t_k = T (k/N)^r for u with |u^(k)(t)| <= C(1 + t^(a-k)), here u = t^a:
    # |tau_n| <= C n^(-min(2-a, r a)) with C independent of N (Stynes,
    # O'Riordan and Gracia 2017; this pointwise form stated from memory, the
    # published nodal-error rate min(r a, 2 - a) is checked in
    # tests/test_grid.py after Zhou and Stynes 2022),
    # so max_n n^p |tau_n| stays bounded as N grows, p = min(2-a, r a);
    # r = (2-a)/a restores p = 2 - a. A rate 0.3 beyond it is not met (the
    # check can fail).
    ns = [2_000, 8_000, 32_000]
    r = (2 - a) / a
    p = 2 - a
    weighted, faster = [], []
    for n in ns:
        t = graded(n, r)
        y = pf.derivative(t**a, a, t=t, rule="l1", engine="fast", tol=1e-14)
        tau = np.abs(y - D_power(t, a, a))[1:]
        idx = np.arange(1, n + 1)
        weighted.append(np.max(tau * idx**p))
        faster.append(np.max(tau * idx ** (p + 0.3)))
    assert max(weighted) <= 1.25 * weighted[0], weighted
    assert faster[-1] >= 1.5 * faster[0], faster


def test_closed_form_no_worse_than_direct_plus_promise():
    # on a graded mesh with steps from 1e-9 to 1e-3: the fast result's
    # distance to I^a t^b is the direct one's plus at most the promise
    t = GRIDS["graded"]
    a, b = 0.5, 0.5
    for rule in ("rectangle", "trapezoid"):
        x = t**b
        yd = grid.apply_on_grid(rule, a, x[None], t)[0]
        y, K, st = run_c(rule, a, t, x, 1e-12)
        exact = I_power(t, a, b)
        S = abs_terms(rule, a, t, x)[0]
        assert np.all(
            np.abs(y[0] - exact) <= np.abs(yd - exact) + (1e-12 + (K + 64) * EPS + DIRECT) * S + 1e-300
        )


# ------------------------------------------------------------ uniform grid


@pytest.mark.parametrize("rule,a", [("rectangle", 0.3), ("trapezoid", 0.8), ("l1", 0.4)])
def test_uniform_times_match_step_within_tolerance(rule, a):
    # h = 2**-7: every k*h exact, the grid exactly uniform; the uniform
    # engines are accurate to rounding (tests/test_batch.py)
    rng = np.random.default_rng(57)
    h = 2.0**-7
    n = 4000
    t = h * np.arange(n)
    x = rng.standard_normal(n)
    func = pf.derivative if rule == "l1" else pf.integral
    tol = 1e-12
    got = func(x, a, t=t, rule=rule, engine="fast", tol=tol)
    want = func(x, a, h, rule=rule)
    _, K, _ = run_c(rule, a, t, x, tol)
    S = abs_terms(rule, a, t, x)[0]
    assert np.all(np.abs(got - want) <= (tol + (K + 64) * EPS + DIRECT) * S)


# ------------------------------------------------------------ engine choice, shapes


def test_auto_takes_the_fast_engine_from_the_crossover():
    rng = np.random.default_rng(58)
    for n in (pf._core.GRID_FAST_FROM - 1, pf._core.GRID_FAST_FROM):
        t = jittered(rng, n)
        x = rng.standard_normal(n)
        auto = pf.integral(x, 0.5, t=t)
        fast = pf.integral(x, 0.5, t=t, engine="fast")
        direct = pf.integral(x, 0.5, t=t, engine="direct")
        same = fast if n >= pf._core.GRID_FAST_FROM else direct
        np.testing.assert_array_equal(auto, same)
        assert not np.array_equal(fast, direct)  # the two engines do differ
    # orders the fast engine does not serve: auto stays direct; at 1.5 it
    # serves them (tests/test_grid_fast_high.py)
    t = jittered(rng, 300)
    x = rng.standard_normal(300)
    np.testing.assert_array_equal(pf.integral(x, 2.5, t=t), pf.integral(x, 2.5, t=t, engine="direct"))
    np.testing.assert_array_equal(pf.integral(x, 1.5, t=t), pf.integral(x, 1.5, t=t, engine="fast"))


def test_many_signals_and_axis():
    rng = np.random.default_rng(59)
    t = jittered(rng, 500)
    x = rng.standard_normal((3, 500))
    both = pf.integral(x, 0.5, t=t, engine="fast", rule="trapezoid")
    for i in range(3):
        np.testing.assert_array_equal(both[i], pf.integral(x[i], 0.5, t=t, engine="fast", rule="trapezoid"))
    np.testing.assert_array_equal(pf.integral(x.T, 0.5, t=t, engine="fast", rule="trapezoid", axis=0), both.T)


def test_short_records():
    for n in (0, 1):
        y, K, st = run_c("rectangle", 0.5, np.arange(float(n)), np.ones(n), 1e-10)
        assert st == lib.FC_OK and K == 0 and np.all(y == 0.0)
    y, K, st = run_c("rectangle", 0.5, np.array([1.0, 1.25]), np.array([2.0, 5.0]), 1e-10)
    assert st == lib.FC_OK
    assert math.isclose(y[0, 1], 2.0 * 0.25**0.5 / math.gamma(1.5), rel_tol=1e-15)


# ------------------------------------------------------------ bad input


def _raises(exc, match, func, *args, **kw):
    with pytest.raises(exc, match=match):
        func(*args, **kw)


def test_c_statuses_and_nothing_written():
    t = np.array([0.0, 0.5, 1.0, 2.0])
    x = np.ones(4)

    def st_of(rule_code, a, tt, xx, tol):
        y = np.full(xx.size, -7.0)
        st = lib.fc_grid_apply(
            rule_code,
            a,
            ffi.from_buffer("double[]", tt),
            ffi.from_buffer("double[]", xx),
            1,
            tt.size,
            tol,
            ffi.from_buffer("double[]", y),
            ffi.NULL,
        )
        assert np.all(y == -7.0), st
        return st

    R, L1 = lib.FC_RULE_RECTANGLE, lib.FC_RULE_L1
    assert st_of(lib.FC_RULE_GRUNWALD, 0.5, t, x, 1e-10) == lib.FC_ERR_RULE
    assert st_of(R, 2.0, t, x, 1e-10) == lib.FC_ERR_ORDER
    assert st_of(lib.FC_RULE_TRAPEZOID, 2.0, t, x, 1e-10) == lib.FC_ERR_ORDER
    assert st_of(R, math.inf, t, x, 1e-10) == lib.FC_ERR_ORDER
    assert st_of(L1, 1.0, t, x, 1e-10) == lib.FC_ERR_ORDER
    assert st_of(R, 0.0, t, x, 1e-10) == lib.FC_ERR_ORDER
    assert st_of(R, math.nan, t, x, 1e-10) == lib.FC_ERR_ORDER
    assert st_of(R, 0.5, t, x, 1e-16) == lib.FC_ERR_TOL
    assert st_of(R, 0.5, t, x, 0.1) == lib.FC_ERR_TOL
    assert st_of(R, 0.5, np.array([0.0, 0.5, 0.5, 2.0]), x, 1e-10) == lib.FC_ERR_ARG
    assert st_of(R, 0.5, np.array([0.0, 0.5, 0.4, 2.0]), x, 1e-10) == lib.FC_ERR_ARG
    assert st_of(R, 0.5, np.array([0.0, 0.5, np.nan, 2.0]), x, 1e-10) == lib.FC_ERR_NONFINITE
    assert st_of(R, 0.5, t, np.array([0.0, np.inf, 1.0, 1.0]), 1e-10) == lib.FC_ERR_NONFINITE
    # span beyond 2^100 smallest steps
    assert st_of(R, 0.5, np.array([0.0, 1e-20, 1e20, 2e20]), x, 1e-10) == lib.FC_ERR_TOL
    # span beyond the double range
    assert st_of(R, 0.5, np.array([-1.5e308, 0.0, 1e308, 1.5e308]), x, 1e-10) == lib.FC_ERR_RANGE
    # an output beyond the double range
    assert st_of(R, 0.5, t * 1e6, np.full(4, 1e308), 1e-10) == lib.FC_ERR_RANGE
    # overlap of y with x
    y = np.ones(4)
    buf = ffi.from_buffer("double[]", y)
    assert (
        lib.fc_grid_apply(R, 0.5, ffi.from_buffer("double[]", t), buf, 1, 4, 1e-10, buf, ffi.NULL)
        == lib.FC_ERR_ARG
    )
    assert np.all(y == 1.0)
    assert lib.fc_grid_apply(R, 0.5, ffi.NULL, buf, 1, 4, 1e-10, buf, ffi.NULL) == lib.FC_ERR_NULL
    # a length whose byte size overflows is refused before t is read, also
    # with no signals (nsig = 0: it read n times past the buffer before)
    tb = ffi.from_buffer("double[]", t)
    yb = np.full(4, -7.0)
    for nsig, n in ((0, 2**63), (0, 2**64 - 1), (1, 2**61), (2**62, 4)):
        st = lib.fc_grid_apply(R, 0.5, tb, tb, nsig, n, 1e-10, ffi.from_buffer("double[]", yb), ffi.NULL)
        assert st == lib.FC_ERR_SIZE and np.all(yb == -7.0), (nsig, n, st)


def test_python_messages():
    t = np.array([0.0, 0.5, 1.0, 2.0])
    x = np.ones(4)
    _raises(
        ArgumentError,
        r"order=2\.5 with engine='fast': .*0 < order < 2",
        pf.integral,
        x,
        2.5,
        t=t,
        engine="fast",
    )
    _raises(
        ArgumentError, r"order=1(\.0)?: rule='l1' needs", pf.derivative, x, 1.0, t=t, rule="l1", engine="fast"
    )
    _raises(
        ArgumentError,
        r"tol=1e-16: must be in \[1e-15, 0\.01\]",
        pf.integral,
        x,
        0.5,
        t=t,
        engine="fast",
        tol=1e-16,
    )
    _raises(
        ArgumentError, r"tol=1e-10 with engine='direct'", pf.integral, x, 0.5, t=t, engine="direct", tol=1e-10
    )
    _raises(
        ArgumentError, r"tol=1e-10: a tolerance is taken only with t=", pf.integral, x, 0.5, 1.0, tol=1e-10
    )
    _raises(
        ArgumentError, r"engine='fast': the engine of sample times", pf.integral, x, 0.5, 1.0, engine="fast"
    )
    _raises(
        ArgumentError,
        r"t: the span .* more than 2\*\*100 times the smallest step",
        pf.integral,
        x,
        0.5,
        t=np.array([0.0, 1e-20, 1e20, 2e20]),
        engine="fast",
    )
    _raises(
        pf.RangeError,
        "beyond the double range",
        pf.integral,
        np.full(4, 1e308),
        0.5,
        t=t * 1e6,
        engine="fast",
    )


@pytest.mark.parametrize("rule", ["rectangle", "trapezoid", "l1"])
def test_subnormal_signals_give_finite_outputs(rule):
    # a signal of subnormal samples was scaled by 2^-ex beyond the double
    # range (inf, then NaN); the scale is now bounded by 2^1000. Reference:
    # the direct engine, to an absolute 1e-300 (outputs in or near the
    # subnormal range get an absolute error, csrc/grid_soe.c)
    t = GRIDS["jittered"]
    x = np.full(t.size, 5e-324)
    x[::3] = -1e-310
    y, _, st = run_c(rule, 0.5, t, x, 1e-10)
    assert st == lib.FC_OK and np.all(np.isfinite(y))
    src = x[None]
    assert np.all(np.abs(y - grid.apply_on_grid(rule, 0.5, src, t)) <= 1e-300)
