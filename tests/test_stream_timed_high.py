"""The compressed stream with a time per sample at orders 1 < a < 2
(csrc/stream_timed.c, "ORDERS 1 < a < 2"; pyfracconv.TimedStream),
checked against references outside the stream:

- the batch fast engine (fc_grid_apply) on the same times, bit for bit
  (the same recursion in the same order of operations when both use the
  same smallest step and span);
- the direct engine on the same grid (pyfracconv.grid.apply_on_grid, its
  weights checked against mpmath at order 1.7 in tests/test_grid.py): the
  promise |y_n - y_n(direct)| <= (tol + (K + 64) 2**-52) S_n plus the
  allowance 2e-14 S_n for the direct engine's weights, on a spike,
  positive and large data, jittered and graded grids;
- closed forms I^a t^b = Gamma(b+1)/Gamma(a+b+1) t^(a+b) (Podlubny 1999,
  chapter 2; Samko, Kilbas and Marichev 1993, eq. (2.44)) in mpmath on a
  graded mesh;
- refusals leave the stream exactly as before (a twin that never saw the
  call gives the same bits and saves the same bytes);
- save/load resumes bit for bit; the running integral saved with the
  state (format version 2) is checked as untrusted input: forged values,
  checksums recomputed (FNV-1a 64, Fowler, Noll and Vo), are refused.
Random grids and samples use fixed seeds.
"""

import math
import struct

import mpmath
import numpy as np
import pytest

import pyfracconv as pf
from pyfracconv import ArgumentError, HorizonError, RangeError, StateError, grid
from pyfracconv._fracconv import ffi, lib

EPS = 2.0**-52
DIRECT = 2e-14
CODES = {"rectangle": lib.FC_RULE_RECTANGLE, "trapezoid": lib.FC_RULE_TRAPEZOID}
P = 8 + 80  # the engine's payload in a TimedStream envelope (csrc/stream.c)


def jittered(rng, n, h=1e-3, amp=0.45):
    return np.concatenate([[0.0], np.cumsum(h * (1 + rng.uniform(-amp, amp, n - 1)))])


def graded(n, r, T=1.0):
    # the usual graded mesh t_k = T (k/N)^r (Stynes, O'Riordan and Gracia 2017)
    return T * (np.arange(n + 1) / n) ** r


def push_in_pieces(s, t, x, rng):
    out = np.empty_like(x)
    i = 0
    while i < t.size:
        k = min(t.size - i, int(rng.integers(1, 40)))
        out[i : i + k] = s.push_many(t[i : i + k], x[i : i + k])
        i += k
    return out


def grid_apply(rule, a, t, X, tol):
    X = np.ascontiguousarray(X, dtype=float)
    Y = np.empty_like(X)
    st = lib.fc_grid_apply(
        CODES[rule],
        a,
        ffi.from_buffer("double[]", np.ascontiguousarray(t)),
        ffi.from_buffer("double[]", X),
        X.shape[0],
        X.shape[1],
        tol,
        ffi.from_buffer("double[]", Y),
        ffi.NULL,
    )
    assert st == lib.FC_OK
    return Y


@pytest.mark.parametrize("a", [1.0001, 1.5, 1.9999])
@pytest.mark.parametrize("rule", ["rectangle", "trapezoid"])
def test_pushes_equal_the_batch_fast_engine_bit_for_bit(rule, a):
    rng = np.random.default_rng(81)
    n = 3000
    t = 2.0 + jittered(rng, n)
    X = rng.standard_normal((3, n))
    X[1] = 1.0 + rng.uniform(size=n)
    X[2, 100] = 1e6
    hmin = float(np.min(np.diff(t)))
    s = pf.TimedStream(a, min_step=hmin, horizon=float(t[-1] - t[0]), rule=rule, tol=1e-12, channels=3)
    Y = push_in_pieces(s, t, np.ascontiguousarray(X.T), rng).T
    np.testing.assert_array_equal(Y, grid_apply(rule, a, t, X, 1e-12))


@pytest.mark.parametrize("a", [1.0001, 1.3, 1.5, 1.9, 1.9999])
@pytest.mark.parametrize("rule", ["rectangle", "trapezoid"])
@pytest.mark.parametrize("kind", ["jittered", "graded"])
def test_within_tolerance_of_direct(rule, a, kind):
    rng = np.random.default_rng(82)
    n = 800
    t = jittered(rng, n) if kind == "jittered" else graded(n - 1, 3.0)
    h = np.diff(t)
    inputs = [
        np.where(np.arange(n) == n // 3, 1e6, 1e-6 * rng.standard_normal(n)),  # spike
        np.where(np.arange(n) == 2, 1.0, 0.0),  # a spike, then silence
        1.0 + rng.uniform(size=n),  # positive
        (-1.0) ** np.arange(n),  # alternating
        1e280 * rng.standard_normal(n),  # large
    ]
    for x in inputs:
        yd = grid.apply_on_grid(rule, a, x[None], t)[0]
        S = grid.apply_on_grid(rule, a, np.abs(x)[None], t)[0]  # positive weights
        for tol in (1e-6, 1e-12):
            s = pf.TimedStream(a, min_step=h.min(), horizon=t[-1] - t[0], rule=rule, tol=tol)
            y = push_in_pieces(s, t, x, rng)
            bound = (tol + (s.terms + 64) * EPS + DIRECT) * S
            assert np.all(np.abs(y - yd) <= bound), (rule, a, kind, tol)
            assert y[0] == 0.0


@pytest.mark.parametrize("rule", ["rectangle", "trapezoid"])
def test_closed_form_on_a_graded_mesh(rule):
    # I^1.5 t^0.5 = Gamma(1.5)/Gamma(3) t^2 (Podlubny 1999), in mpmath; the
    # rules converge (order 1 rectangle, 2 trapezoid on smooth f: Diethelm,
    # Ford and Freed 2004; here t^0.5 on a graded mesh, r = 2)
    a, b = 1.5, 0.5
    t = graded(2000, 2.0)
    s = pf.TimedStream(a, min_step=float(np.min(np.diff(t))), horizon=1.0, rule=rule, tol=1e-13)
    y = s.push_many(t, t**b)
    with mpmath.workdps(30):
        c = mpmath.gamma(b + 1) / mpmath.gamma(a + b + 1)
        exact = np.array([float(c * mpmath.mpf(float(v)) ** (a + b)) for v in t])
    err = np.max(np.abs(y - exact))
    assert err <= (1e-3 if rule == "rectangle" else 1e-5), err
    yd = grid.apply_on_grid(rule, a, (t**b)[None], t)[0]
    assert err <= np.max(np.abs(yd - exact)) + 1e-12


@pytest.mark.parametrize("rule,a", [("rectangle", 1.5), ("trapezoid", 1.3), ("trapezoid", 1.9)])
def test_uniform_times_match_the_uniform_compressed_stream(rule, a):
    # the uniform compressed stream (csrc/stream_compressed.c, its own
    # construction at 1 <= a < 2) on h = 2**-8 (every k h exact): both within
    # their promises of the exact rule (tests/test_compressed*.py), so of
    # each other within twice the larger one
    rng = np.random.default_rng(86)
    h = 2.0**-8
    n = 3000
    t = h * np.arange(n)
    x = rng.standard_normal(n)
    tol = 1e-12
    s = pf.TimedStream(a, min_step=h, horizon=t[-1], rule=rule, tol=tol)
    y = s.push_many(t, x)
    yu = pf.Stream.integral(a, h, rule=rule, mode="compressed", tol=tol, horizon=n).push_many(x)
    S = grid.apply_on_grid(rule, a, np.abs(x)[None], t)[0]
    assert np.all(np.abs(y - yu) <= 2 * (tol + (max(s.terms, 80) + 64) * EPS) * S + DIRECT * S)


def _twins(**kw):
    return pf.TimedStream(**kw), pf.TimedStream(**kw)


@pytest.mark.parametrize("rule", ["rectangle", "trapezoid"])
def test_refused_pushes_change_nothing(rule):
    rng = np.random.default_rng(83)
    s, twin = _twins(order=1.5, min_step=0.01, horizon=1.0, rule=rule, channels=2)
    t = np.arange(10) * 0.02
    X = rng.standard_normal((10, 2))
    s.push_many(t, X)
    twin.push_many(t, X)
    before = s.save()
    last = t[-1]
    bad = [
        (ArgumentError, r"time=0\.18: the step from the previous time", lambda: s.push(last, [1.0, 1.0])),
        (ArgumentError, r"time=0\.185: the step", lambda: s.push(last + 0.005, [1.0, 1.0])),
        (ArgumentError, r"time=nan: sample times must be finite", lambda: s.push(float("nan"), [1.0, 1.0])),
        (
            ArgumentError,
            r"time=0\.225: the step",
            lambda: s.push_many([0.2, 0.22, 0.225, 0.3], np.ones((4, 2))),
        ),
        (HorizonError, r"past the horizon", lambda: s.push_many([0.2, 0.5, 1.01], np.ones((3, 2)))),
        (RangeError, r"beyond the range bound", lambda: s.push(0.2, [1e307, 0.0])),
    ]
    for exc, msg, call in bad:
        with pytest.raises(exc, match=msg):
            call()
        assert s.save() == before
        assert s.count == 10
    t2 = 0.2 + np.arange(20) * 0.013
    X2 = rng.standard_normal((20, 2))
    np.testing.assert_array_equal(s.push_many(t2, X2), twin.push_many(t2, X2))


def test_horizon_continue_past_the_range_refuses_and_changes_nothing():
    # past the horizon a block runs first on a copy: an output beyond the
    # double range is refused (FC_ERR_RANGE) and the stream is unchanged
    s, twin = _twins(order=1.9, min_step=1.0, horizon=2.0, horizon_policy="continue")
    for z in (s, twin):
        z.push_many([0.0, 1.0], [1e290, 1e290])
    before = s.save()
    with pytest.raises(RangeError):
        s.push(1e18, 1e290)
    assert s.save() == before
    np.testing.assert_array_equal(s.push_many([3.0, 5.0], [1.0, 2.0]), twin.push_many([3.0, 5.0], [1.0, 2.0]))


@pytest.mark.parametrize("min_step", [1e-9, 1.0, 1e3])
@pytest.mark.parametrize("rule,a", [("rectangle", 1.0001), ("rectangle", 1.5), ("trapezoid", 1.9999)])
def test_range_bound_accepts_1e280(rule, a, min_step):
    # the RANGE statement (csrc/stream_timed.c): samples up to U are
    # accepted, U about 1e280-1e295 at a horizon of 1e6 smallest steps, and
    # the outputs stay finite within the horizon
    s = pf.TimedStream(a, min_step, 1e6 * min_step, rule=rule)
    x = np.array([1e280, -1e280, 1e280, 0.0, 1e280])
    y = s.push_many(min_step * np.array([0.0, 1.0, 2.5, 1e5, 1e6]), x)
    assert np.all(np.isfinite(y))


def fnv(data):
    h = 14695981039346656037
    for byte in data:
        h = ((h ^ byte) * 1099511628211) & 0xFFFFFFFFFFFFFFFF
    return h


def reseal(blob):
    """Recompute both checksums of a TimedStream envelope (as in
    tests/test_stream_timed.py)."""
    env, c = blob[:8], bytearray(blob[8:])
    c[-8:] = struct.pack("<Q", fnv(c[80:-8]))
    c[72:80] = struct.pack("<Q", fnv(bytes(c[:72]) + bytes(c[80:])))
    return env + bytes(c)


def test_save_load_resumes_bit_for_bit():
    rng = np.random.default_rng(84)
    t = jittered(rng, 400)
    x = rng.standard_normal(400)
    for rule, a in (("rectangle", 1.5), ("trapezoid", 1.0001), ("trapezoid", 1.9)):
        for cut in (0, 1, 2, 250):
            s = pf.TimedStream(a, 0.5e-3, 1.0, rule=rule)
            s.push_many(t[:cut], x[:cut])
            blob = s.save()
            assert struct.unpack_from("<I", blob, P + 4)[0] == 2  # format version 2: X saved
            r = pf.TimedStream.load(blob)
            assert (r.rule, r.order, r.count) == (rule, a, cut)
            np.testing.assert_array_equal(r.push_many(t[cut:], x[cut:]), s.push_many(t[cut:], x[cut:]))
            assert r.save() == s.save()
    # several channels: each channel's X saved and restored
    X = rng.standard_normal((400, 3))
    s = pf.TimedStream(1.7, 0.5e-3, 1.0, rule="trapezoid", channels=3)
    s.push_many(t[:123], X[:123])
    r = pf.TimedStream.load(s.save())
    np.testing.assert_array_equal(r.push_many(t[123:], X[123:]), s.push_many(t[123:], X[123:]))
    # streams at orders up to 1 keep format version 1
    s = pf.TimedStream(1.0, 0.5e-3, 1.0)
    assert struct.unpack_from("<I", s.save(), P + 4)[0] == 1


def test_forged_running_integral_is_refused():
    rng = np.random.default_rng(85)
    s = pf.TimedStream(1.5, 0.5e-3, 1.0, rule="trapezoid")
    t = jittered(rng, 50)
    s.push_many(t, rng.standard_normal(50))
    blob = s.save()
    assert pf.TimedStream.load(reseal(blob)).save() == blob  # reseal is faithful
    L = s.terms
    xoff = 96 + 16 * L + 8 + 16 * L  # channel 0: xprev, S, Sc, then X hi, X lo

    def tamper(off, fmt, value, b0=blob):
        b = bytearray(b0)
        struct.pack_into(fmt, b, P + off, value)
        return reseal(bytes(b))

    xh = struct.unpack_from("<d", blob, P + xoff)[0]
    assert xh != 0.0
    for off, fmt, value in (
        (xoff, "<d", float("nan")),
        (xoff, "<d", float("inf")),
        (xoff, "<d", 1.7e308),  # beyond U times the span
        (xoff + 8, "<d", xh),  # (hi, lo) not a double-double
        (4, "<I", 1),  # version 1 for an order above 1
        (96 + 16 * L + 8, "<d", 1.7e308),  # a state beyond its bound
    ):
        with pytest.raises(StateError):
            pf.TimedStream.load(tamper(off, fmt, value))
    # a consistent small change of X within the bounds is a state pushes
    # could have produced: it loads (the check is on range, not history)
    half = bytearray(blob)
    struct.pack_into("<dd", half, P + xoff, xh * 0.5, 0.0)
    pf.TimedStream.load(reseal(bytes(half)))
    # before the first interval X must be 0
    one = pf.TimedStream(1.5, 0.5e-3, 1.0, rule="trapezoid")
    one.push(0.0, 1.0)
    b1 = one.save()
    with pytest.raises(StateError):
        pf.TimedStream.load(tamper(xoff, "<d", 1e-3, b1))
    # truncated: refused
    for cut in (len(blob) - 16, len(blob) - 1):
        with pytest.raises(StateError):
            pf.TimedStream.load(blob[:cut])


def test_python_checks_at_the_new_orders():
    for a in (1.0001, 1.5, 1.9999):
        s = pf.TimedStream(a, 0.1, 1.0, rule="trapezoid")
        assert s.order == a
    with pytest.raises(ArgumentError, match=r"order=2(\.0)?: a TimedStream serves 0 < order < 2"):
        pf.TimedStream(2.0, 0.1, 1.0)
    with pytest.raises(ArgumentError, match=r"order=1\.5"):
        pf.TimedStream(1.5, 0.1, 1.0, rule="l1")
    # a time scale whose d2^a is beyond the double range: refused at
    # creation naming min_step and horizon
    with pytest.raises(RangeError, match=r"min_step=1e\+300, horizon=1e\+301: with order=1\.5"):
        pf.TimedStream(1.5, 1e300, 1e301)
    # exact on linear f at 1.5 (the trapezoid rule interpolates it exactly):
    # I^1.5 t = t^2.5 / Gamma(3.5) (Podlubny 1999)
    s = pf.TimedStream(1.5, 0.01, 10.0, rule="trapezoid", tol=1e-13)
    ys = [s.push(ti, ti) for ti in (0.0, 0.1, 0.15, 0.4, 0.9, 1.0)]
    assert math.isclose(ys[-1], 1.0 / math.gamma(3.5), rel_tol=1e-11)


@pytest.mark.parametrize("rule", ["rectangle", "trapezoid"])
def test_preview_is_the_push_bit_for_bit_and_changes_nothing(rule):
    # preview (fc_stream_preview_timed) runs the push's recursion, the
    # running integral included, on a copy: its output is the push's
    rng = np.random.default_rng(87)
    t = jittered(rng, 300)
    X = rng.standard_normal((300, 2))
    s = pf.TimedStream(1.5, 0.5e-3, 1.0, rule=rule, channels=2)
    for k in range(40):
        before = s.save()
        p = s.preview(t[k], X[k])
        assert s.save() == before
        np.testing.assert_array_equal(p, s.push(t[k], X[k]))
    # with x = 0: the history alone (the push of a zero sample)
    before = s.save()
    p0 = s.preview(t[40], np.zeros(2))
    assert s.save() == before
    np.testing.assert_array_equal(p0, s.push(t[40], np.zeros(2)))
