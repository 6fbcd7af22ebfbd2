"""Compressed memory on a given grid (``solve(..., t=grid,
memory='compressed')``) and the preview of a stream with a time per
sample that it is built on (``TimedStream.preview``,
``fc_stream_preview_timed``): against the exact-memory solver on the same
grid (its history sums checked against mpmath weights in
tests/test_solve_grid.py), and against the Mittag-Leffler closed form of
the relaxation problem (SciPy's erfcx)."""

import math

import numpy as np
import pytest
import scipy.special

import pyfracconv
from pyfracconv import ArgumentError, HorizonError, SampleError, TimedStream, solve
from pyfracconv.grid import graded_mesh

EXPLICIT_AND_TRAP = ["rectangle", "predictor-corrector", "trapezoid"]


def jittered(n, seed=3):
    rng = np.random.default_rng(seed)  # invented sampling jitter
    return np.concatenate([[0.0], np.cumsum(0.01 * (1.0 + 0.6 * rng.uniform(-1, 1, n)))])


# ------------------------------------------------------------ preview


@pytest.mark.parametrize("rule", ["rectangle", "trapezoid", "l1"])
@pytest.mark.parametrize("channels", [None, 3])
def test_preview_is_the_push_bit_for_bit_and_changes_nothing(rule, channels):
    t = jittered(60)
    rng = np.random.default_rng(5)
    shape = (t.size,) if channels is None else (t.size, channels)
    x = rng.standard_normal(shape)
    s = TimedStream(0.6, min_step=0.003, horizon=2.0, rule=rule, channels=channels)
    s.push_many(t[:30], x[:30])
    for k in range(30, t.size):
        before = s.save()
        p = s.preview(float(t[k]), x[k])
        q = s.preview(float(t[k]), x[k])
        assert s.save() == before and s.count == k
        y = s.push(float(t[k]), x[k])
        assert np.array_equal(np.asarray(p), np.asarray(y)) and np.array_equal(np.asarray(q), np.asarray(y))


def test_preview_with_zero_is_the_history():
    # rectangle: the sample at t does not enter the output at t; trapezoid:
    # the output is the preview with 0 plus h^a / Gamma(a+2) x (the exact
    # last interval, csrc/stream_timed.c; common practice for the product
    # trapezoidal rule's newest weight on a uniform grid, Diethelm, Ford
    # and Freed 2002)
    a = 0.7
    t = jittered(40)
    x = np.cos(t)
    r = TimedStream(a, min_step=0.003, horizon=1.0, rule="rectangle")
    tr = TimedStream(a, min_step=0.003, horizon=1.0, rule="trapezoid")
    r.push_many(t[:-1], x[:-1])
    tr.push_many(t[:-1], x[:-1])
    tn, h = float(t[-1]), float(t[-1] - t[-2])
    assert r.preview(tn, 0.0) == r.preview(tn, 123.0) == r.push(tn, float(x[-1]))
    w = h**a / math.gamma(a + 2.0)
    hist = tr.preview(tn, 0.0)
    assert math.isclose(hist + w * x[-1], tr.push(tn, float(x[-1])), rel_tol=1e-14, abs_tol=1e-15)


def test_preview_refusals_are_the_push_refusals_and_change_nothing():
    s = TimedStream(0.5, min_step=0.01, horizon=1.0)
    s.push_many([0.0, 0.5], [1.0, 2.0])
    before = s.save()
    with pytest.raises(ArgumentError, match=r"time=0\.505: the step from the previous time 0\.5"):
        s.preview(0.505, 1.0)
    with pytest.raises(ArgumentError, match="time=nan"):
        s.preview(float("nan"), 1.0)
    with pytest.raises(SampleError):
        s.preview(0.7, float("inf"))
    with pytest.raises(HorizonError, match=r"time=1\.5: past the horizon"):
        s.preview(1.5, 1.0)
    v = TimedStream(0.5, min_step=0.01, horizon=1.0, channels=2)
    with pytest.raises(ArgumentError, match=r"x: expected shape \(2,\)"):
        v.preview(0.0, [1.0, 2.0, 3.0])
    assert s.save() == before and s.count == 2
    s.horizon_policy = "continue"
    assert s.preview(1.5, 1.0) == s.push(1.5, 1.0)


def test_preview_of_a_first_sample_is_zero():
    s = TimedStream(0.5, min_step=0.01, horizon=1.0, rule="trapezoid")
    assert s.preview(3.0, 5.0) == 0.0 and s.count == 0


# ------------------------------------------------------------ the solver


@pytest.mark.parametrize("method", EXPLICIT_AND_TRAP)
@pytest.mark.parametrize("grid", ["graded", "jittered"])
def test_compressed_within_its_tolerance_of_exact(method, grid):
    t = graded_mesh(1.0, 300, 2.5) if grid == "graded" else jittered(300)

    def rhs(s, y):
        return -1.5 * y + 0.3 * math.sin(4 * s) - 0.2 * y**2

    ex = solve(rhs, 0.9, 0.6, t=t, method=method)
    for tol in (1e-12, 1e-7):
        co = solve(rhs, 0.9, 0.6, t=t, method=method, memory="compressed", tol=tol)
        assert co.memory == "compressed" and co.y.shape == ex.y.shape
        dev = np.max(np.abs(co.y - ex.y))
        # each history sum is within tol of the exact one relative to the
        # sum of its terms' magnitudes; the solution here deviates by
        # 0.012-0.021 tol max|y| (measured), asserted below tol max|y|
        assert dev <= tol * np.max(np.abs(ex.y)), (tol, dev)


def test_compressed_system_with_orders_per_component():
    t = graded_mesh(2.0, 200, 2.0)
    lam = np.array([-1.0, -3.0, -0.5])

    def rhs(s, y):
        return lam * y + np.array([0.0, np.cos(s), 0.1 * y[0]])

    for method in EXPLICIT_AND_TRAP:
        ex = solve(rhs, [1.0, 0.0, 2.0], [0.5, 0.8, 0.5], t=t, method=method)
        co = solve(rhs, [1.0, 0.0, 2.0], [0.5, 0.8, 0.5], t=t, method=method, memory="compressed")
        assert np.max(np.abs(co.y - ex.y)) <= 1e-10, method


@pytest.mark.parametrize("method", EXPLICIT_AND_TRAP)
def test_relaxation_against_erfcx(method):
    # D^(1/2) y = -y, y(0) = 1: y = erfcx(sqrt t) (Gorenflo, Kilbas,
    # Mainardi and Rogosin, Mittag-Leffler Functions, Springer 2014, ch. 3;
    # SciPy); on a graded mesh of 2000 steps (r = 4), a long grid for the
    # exact-memory solver
    t = graded_mesh(1.0, 2000, 4.0)
    res = solve(lambda s, y: -y, 1.0, 0.5, t=t, method=method, memory="compressed")
    err = np.max(np.abs(res.y - scipy.special.erfcx(np.sqrt(t))))
    # about three times the errors measured (rectangle 8.6e-5, PC 3.2e-6,
    # trapezoid 3.2e-8)
    assert err < {"rectangle": 3e-4, "predictor-corrector": 1e-5, "trapezoid": 1e-7}[method], err


@pytest.mark.parametrize(
    "kw, match",
    [
        (
            dict(method="implicit-rectangle"),
            r"memory='compressed', method='implicit-rectangle': not available with t=",
        ),
        (dict(tol=1e-1), r"tol=0\.1: must be in"),
        (dict(horizon=5.0), r"horizon=5\.0: not used with t="),
    ],
)
def test_refusals_name_the_argument(kw, match):
    calls = []

    def rhs(s, y):
        calls.append(s)
        return -y

    with pytest.raises(ArgumentError, match=match):
        solve(rhs, 1.0, 0.5, t=[0.0, 0.1, 0.3], memory="compressed", **kw)
    assert not calls


@pytest.mark.parametrize("method", EXPLICIT_AND_TRAP)
def test_orders_between_one_and_two(method):
    # 1 < a < 2 (the streams with a time per sample on the running
    # integral, csrc/stream_timed.c): within tol max|y| of exact memory,
    # and D^1.5 y = -y, y(0) = 1, y'(0) = 0 is y = E_1.5(-t^1.5) (Gorenflo,
    # Kilbas, Mainardi and Rogosin 2014, ch. 3), here its power series in
    # mpmath at 30 digits
    import mpmath

    a = 1.5
    t = graded_mesh(1.0, 400, 2.0)
    ex = solve(lambda s, y: -y, 1.0, a, t=t, dy0=0.0, method=method)
    co = solve(lambda s, y: -y, 1.0, a, t=t, dy0=0.0, method=method, memory="compressed", tol=1e-10)
    assert np.max(np.abs(co.y - ex.y)) <= 1e-10 * np.max(np.abs(ex.y))
    with mpmath.workdps(30):
        ml = np.array(
            [
                float(
                    mpmath.nsum(
                        lambda k: (-(mpmath.mpf(float(v)) ** a)) ** k / mpmath.gamma(a * k + 1),
                        [0, mpmath.inf],
                    )
                )
                for v in t[::40]
            ]
        )
    err = np.max(np.abs(co.y[::40] - ml))
    # the rectangle rule converges at order 1, the others faster; about
    # three times the errors measured (rectangle 6.0e-4, PC 2.3e-7, trapezoid 1.7e-7)
    assert err < {"rectangle": 2e-3, "predictor-corrector": 7e-7, "trapezoid": 5e-7}[method], err


def test_order_two_is_refused_naming_the_order():
    # a = 2 is served by exact memory only (the streams with a time per
    # sample serve orders below 2)
    with pytest.raises(ArgumentError, match=r"memory='compressed' with t= \(order=2\.0,.*use memory='exact'"):
        solve(lambda s, y: -y, 1.0, 2.0, t=[0.0, 0.1, 0.3], dy0=0.0, memory="compressed")
    ok = solve(lambda s, y: -y, 1.0, 2.0, t=[0.0, 0.1, 0.3], dy0=0.0)
    assert ok.y.shape == (3,)


def test_failures_keep_the_solution_with_compressed_memory():
    t = np.linspace(0.0, 1.0, 21)

    def rhs(s, y):
        if s > 0.52:
            raise ValueError("model table ends")
        return -y

    with pytest.raises(
        pyfracconv.RhsError, match=r"rhs raised ValueError: model table ends at step 11"
    ) as info:
        solve(rhs, 1.0, 0.5, t=t, memory="compressed")
    part = info.value.partial
    ex = solve(lambda s, y: -y, 1.0, 0.5, t=t[:11])
    assert part.memory == "compressed" and np.max(np.abs(part.y - ex.y)) < 1e-12


def test_a_grid_of_one_time_and_an_extreme_grid():
    # one time: y(t0) only, no step (as with exact memory)
    for method in EXPLICIT_AND_TRAP:
        res = solve(lambda s, y: -y, 2.0, 0.5, t=[3.0], method=method, memory="compressed")
        assert np.array_equal(res.t, [3.0]) and np.array_equal(res.y, [2.0])
    # a span of 1e300 smallest steps: beyond the streams' range, refused
    # naming the grid (exact memory serves it)
    t = [0.0, 1e-300, 1.0]
    with pytest.raises(ArgumentError, match=r"smallest step 1e-300, span 1\.0.*use memory='exact'"):
        solve(lambda s, y: -y, 1.0, 0.5, t=t, memory="compressed")
    assert solve(lambda s, y: -y, 1.0, 0.5, t=t).y.shape == (3,)
