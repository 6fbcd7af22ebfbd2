"""The compressed stream with a time per sample (csrc/stream_timed.c,
pyfracconv.TimedStream), checked against references outside the stream:

- the direct engine on the same grid (pyfracconv.grid.apply_on_grid, its
  weights checked against mpmath in tests/test_grid.py): the promise
  |y_n - y_n(direct)| <= (tol + (K + 64) 2**-52) S_n plus the allowance
  2e-14 S_n of the direct engine's own weights, on spikes, positive and
  large data, jittered and graded grids (ratio of steps above 1e6);
- the batch fast engine (fc_grid_apply) on the same times;
- closed forms I^a t^b = Gamma(b+1)/Gamma(b+1+a) t^(b+a) (Podlubny 1999,
  chapter 2) on a graded mesh;
- the uniform compressed stream (pyfracconv.Stream) on uniform times;
- refusals (times not finite, not increasing, steps below min_step, past
  the horizon, samples beyond the range bound) leave the stream exactly as
  before: it then gives bit for bit what a twin that never saw the call
  gives, and saves the same bytes;
- save/load resumes bit for bit; truncated, corrupted and tampered bytes
  (checksums recomputed: FNV-1a 64, Fowler, Noll and Vo, offset basis
  14695981039346656037, prime 1099511628211) are refused.
Random grids and samples use fixed seeds.
"""

import math
import struct

import numpy as np
import pytest

import pyfracconv as pf
from pyfracconv import ArgumentError, HorizonError, RangeError, SampleError, StateError, grid
from pyfracconv._fracconv import ffi, lib

EPS = 2.0**-52
DIRECT = 2e-14
CODES = {"rectangle": lib.FC_RULE_RECTANGLE, "trapezoid": lib.FC_RULE_TRAPEZOID, "l1": lib.FC_RULE_L1}


def jittered(rng, n, h=1e-3, amp=0.45):
    return np.concatenate([[0.0], np.cumsum(h * (1 + rng.uniform(-amp, amp, n - 1)))])


def graded(n, r, T=1.0):
    # the usual graded mesh t_k = T (k/N)^r (Stynes, O'Riordan and Gracia 2017)
    return T * (np.arange(n + 1) / n) ** r


def abs_terms(rule, a, t, x):
    """S_n by the direct engine on |x| (positive weights for 0 < a <= 1) or,
    for L1, on the running sum of |dx|."""
    if rule == "l1":
        u = np.concatenate([[0.0], np.cumsum(np.abs(np.diff(x)))])
        return grid.apply_on_grid(rule, a, u[None], t)[0]
    return grid.apply_on_grid(rule, a, np.abs(x)[None], t)[0]


def push_in_pieces(s, t, x, rng):
    out = np.empty_like(x)
    i = 0
    while i < t.size:
        k = min(t.size - i, int(rng.integers(1, 40)))
        out[i : i + k] = s.push_many(t[i : i + k], x[i : i + k])
        i += k
    return out


CASES = [
    ("rectangle", 0.3),
    ("rectangle", 1.0),
    ("trapezoid", 0.6),
    ("trapezoid", 0.99),
    ("l1", 0.2),
    ("l1", 0.9),
]


@pytest.mark.parametrize("rule,a", CASES)
@pytest.mark.parametrize("kind", ["jittered", "graded"])
def test_within_tolerance_of_direct(rule, a, kind):
    rng = np.random.default_rng(61)
    n = 1200
    t = jittered(rng, n) if kind == "jittered" else graded(n - 1, 3.0)
    h = np.diff(t)
    if kind == "graded":
        assert h.max() / h.min() > 1e6
    inputs = [
        np.where(np.arange(n) == n // 3, 1e6, 1e-6 * rng.standard_normal(n)),  # spike
        1.0 + rng.uniform(size=n),  # positive
        1e280 * rng.standard_normal(n),  # large
    ]
    for x in inputs:
        yd = grid.apply_on_grid(rule, a, x[None], t)[0]
        S = abs_terms(rule, a, t, x)
        for tol in (1e-6, 1e-12):
            s = pf.TimedStream(a, min_step=h.min(), horizon=t[-1] - t[0], rule=rule, tol=tol)
            y = push_in_pieces(s, t, x, rng)
            K = s.terms
            err = np.abs(y - yd)
            bound = (tol + (K + 64) * EPS + DIRECT) * S
            assert np.all(err <= bound), (rule, a, kind, tol, np.max(err / (bound + 1e-300)))
            assert y[0] == 0.0


def test_against_the_batch_fast_engine_on_the_same_times():
    rng = np.random.default_rng(62)
    n = 20_000
    t = 5.0 + jittered(rng, n)
    X = rng.standard_normal((2, n))
    for rule, a in (("rectangle", 0.5), ("trapezoid", 0.5), ("l1", 0.5)):
        s = pf.TimedStream(a, min_step=0.5e-3, horizon=30.0, rule=rule, tol=1e-12, channels=2)
        Y = push_in_pieces(s, t, np.ascontiguousarray(X.T), rng).T
        func = pf.derivative if rule == "l1" else pf.integral
        B = func(X, a, t=t, rule=rule, engine="fast", tol=1e-12)
        S = np.vstack([abs_terms(rule, a, t[:4000], X[i, :4000]) for i in range(2)])
        # both within their promise of the exact rule: of each other within
        # twice the promise (checked on the first 4000 outputs, where S is
        # computed directly)
        K = max(s.terms, 80)
        assert np.all(np.abs(Y[:, :4000] - B[:, :4000]) <= 2 * (1e-12 + (K + 64) * EPS) * S)
        # the later outputs: the same scale of agreement relative to the outputs' size
        assert np.max(np.abs(Y - B)) <= 1e-9 * np.max(np.abs(B))


def test_split_and_channels_do_not_change_results():
    rng = np.random.default_rng(63)
    n = 700
    t = jittered(rng, n)
    X = rng.standard_normal((n, 3))
    one = pf.TimedStream(0.4, 0.5e-3, 2.0, rule="trapezoid", channels=3)
    ya = one.push_many(t, X)
    two = pf.TimedStream(0.4, 0.5e-3, 2.0, rule="trapezoid", channels=3)
    yb = np.vstack([two.push(t[i], X[i]) for i in range(n)])
    np.testing.assert_array_equal(ya, yb)
    for c in range(3):
        sc = pf.TimedStream(0.4, 0.5e-3, 2.0, rule="trapezoid")
        np.testing.assert_array_equal(sc.push_many(t, X[:, c]), ya[:, c])


def test_closed_form_on_a_graded_mesh():
    # I^a t^b (Podlubny 1999, chapter 2): the stream's distance to it is the
    # direct engine's plus at most the promise
    t = graded(3000, 3.0)
    a, b = 0.5, 0.5
    x = t**b
    exact = math.gamma(b + 1) / math.gamma(a + b + 1) * t ** (a + b)
    for rule in ("rectangle", "trapezoid"):
        s = pf.TimedStream(a, min_step=np.diff(t).min(), horizon=1.0, rule=rule, tol=1e-12)
        y = s.push_many(t, x)
        yd = grid.apply_on_grid(rule, a, x[None], t)[0]
        S = abs_terms(rule, a, t, x)
        assert np.all(
            np.abs(y - exact) <= np.abs(yd - exact) + (1e-12 + (s.terms + 64) * EPS + DIRECT) * S + 1e-300
        )
    # and the trapezoid rule is within its published order 2 in the
    # largest step of the closed form at the end (Diethelm, Ford and Freed
    # 2004; here a loose constant 1)
    assert abs(y[-1] - exact[-1]) <= np.diff(t).max() ** 1.5


@pytest.mark.parametrize("rule,a", [("rectangle", 0.5), ("trapezoid", 0.7), ("l1", 0.3)])
def test_uniform_times_match_the_uniform_compressed_stream(rule, a):
    rng = np.random.default_rng(64)
    h = 2.0**-8
    n = 3000
    t = h * np.arange(n)
    x = rng.standard_normal(n)
    tol = 1e-12
    s = pf.TimedStream(a, min_step=h, horizon=t[-1], rule=rule, tol=tol)
    y = s.push_many(t, x)
    make = pf.Stream.derivative if rule == "l1" else pf.Stream.integral
    u = make(a, h, rule=rule, mode="compressed", tol=tol, horizon=n)
    yu = u.push_many(x)
    S = abs_terms(rule, a, t, x)
    assert np.all(np.abs(y - yu) <= 2 * (tol + (s.terms + 64) * EPS) * S + DIRECT * S)


# ------------------------------------------------------------ refusals


def _twins(**kw):
    return pf.TimedStream(**kw), pf.TimedStream(**kw)


@pytest.mark.parametrize("rule", ["rectangle", "trapezoid", "l1"])
def test_refused_pushes_change_nothing(rule):
    rng = np.random.default_rng(65)
    kw = dict(order=0.5, min_step=0.01, horizon=1.0, rule=rule, channels=2)
    s, twin = _twins(**kw)
    t = np.arange(10) * 0.02
    X = rng.standard_normal((10, 2))
    s.push_many(t, X)
    twin.push_many(t, X)
    before = s.save()
    last = t[-1]
    bad = [
        (
            ArgumentError,
            r"time=0\.18: the step from the previous time 0\.18 is 0",
            lambda: s.push(last, [1.0, 1.0]),
        ),
        (ArgumentError, r"time=0\.1: the step .* below min_step", lambda: s.push(0.1, [1.0, 1.0])),
        (ArgumentError, r"time=0\.185: the step", lambda: s.push(last + 0.005, [1.0, 1.0])),
        (ArgumentError, r"time=nan: sample times must be finite", lambda: s.push(float("nan"), [1.0, 1.0])),
        (ArgumentError, r"time=inf", lambda: s.push(float("inf"), [1.0, 1.0])),
        (SampleError, r"x", lambda: s.push(last + 0.02, [1.0, float("nan")])),
        (ArgumentError, r"x: expected shape \(2,\)", lambda: s.push(last + 0.02, [1.0])),
        # a block with one bad step in the middle pushes nothing of it
        (
            ArgumentError,
            r"time=0\.225: the step",
            lambda: s.push_many([0.2, 0.22, 0.225, 0.3], np.ones((4, 2))),
        ),
        (HorizonError, r"past the horizon", lambda: s.push(1.5, [1.0, 1.0])),
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


def test_c_refusals_leave_the_stream_and_outputs_untouched():
    pp = ffi.new("fc_stream **")
    assert lib.fc_stream_create_timed(lib.FC_RULE_RECTANGLE, 0.5, 0.01, 1, 1e-10, 1.0, pp) == 0
    s = ffi.gc(pp[0], lib.fc_stream_free)

    def push(ts, xs):
        t = np.ascontiguousarray(ts, dtype=float)
        x = np.ascontiguousarray(xs, dtype=float)
        y = np.full(x.size, -7.0)
        st = lib.fc_stream_push_timed(
            s,
            ffi.from_buffer("double[]", t),
            ffi.from_buffer("double[]", x),
            t.size,
            ffi.from_buffer("double[]", y),
        )
        return st, y

    assert push([0.0, 0.5], [1.0, 2.0])[0] == lib.FC_OK
    for ts, st_want in (
        ([0.5], lib.FC_ERR_ARG),
        ([0.505], lib.FC_ERR_ARG),
        ([0.4], lib.FC_ERR_ARG),
        ([np.nan], lib.FC_ERR_NONFINITE),
        ([0.6, 0.6], lib.FC_ERR_ARG),
        ([0.6, 1.2], lib.FC_ERR_HORIZON),
    ):
        st, y = push(ts, np.ones(len(ts)))
        assert st == st_want and np.all(y == -7.0), (ts, st)
    c = ffi.new("uint64_t *")
    lib.fc_stream_count(s, c)
    assert c[0] == 2
    # the untimed calls refuse a timed stream, the timed push any other
    x1 = ffi.new("double[1]", [1.0])
    y1 = ffi.new("double[1]")
    assert lib.fc_stream_push(s, x1, y1) == lib.FC_ERR_ARG
    assert lib.fc_stream_push1(s, 1.0, y1) == lib.FC_ERR_ARG
    assert lib.fc_stream_preview(s, x1, y1) == lib.FC_ERR_ARG
    assert lib.fc_stream_history(s, y1) == lib.FC_ERR_ARG
    assert (
        lib.fc_stream_create(lib.FC_RULE_RECTANGLE, 0.5, 1.0, 1, lib.FC_MODE_COMPRESSED, 1e-10, 100.0, pp)
        == 0
    )
    u = ffi.gc(pp[0], lib.fc_stream_free)
    t1 = ffi.new("double[1]", [0.0])
    assert lib.fc_stream_push_timed(u, t1, x1, 1, y1) == lib.FC_ERR_ARG
    flag = ffi.new("int *")
    assert lib.fc_stream_is_timed(u, flag) == 0 and flag[0] == 0
    assert lib.fc_stream_is_timed(s, flag) == 0 and flag[0] == 1
    # y overlapping t is refused
    tt = np.array([0.6, 0.7])
    assert (
        lib.fc_stream_push_timed(
            s,
            ffi.from_buffer("double[]", tt),
            ffi.from_buffer("double[]", np.ones(2)),
            2,
            ffi.from_buffer("double[]", tt),
        )
        == lib.FC_ERR_ARG
    )
    # creation
    for args, st_want in (
        ((lib.FC_RULE_GRUNWALD, 0.5, 0.01, 1, 1e-10, 1.0), lib.FC_ERR_RULE),
        ((lib.FC_RULE_RECTANGLE, 2.0, 0.01, 1, 1e-10, 1.0), lib.FC_ERR_ORDER),
        ((lib.FC_RULE_TRAPEZOID, 2.0, 0.01, 1, 1e-10, 1.0), lib.FC_ERR_ORDER),
        ((lib.FC_RULE_L1, 1.5, 0.01, 1, 1e-10, 1.0), lib.FC_ERR_ORDER),
        ((lib.FC_RULE_L1, 1.0, 0.01, 1, 1e-10, 1.0), lib.FC_ERR_ORDER),
        ((lib.FC_RULE_RECTANGLE, 0.5, 0.0, 1, 1e-10, 1.0), lib.FC_ERR_STEP),
        ((lib.FC_RULE_RECTANGLE, 0.5, np.inf, 1, 1e-10, 1.0), lib.FC_ERR_STEP),
        ((lib.FC_RULE_RECTANGLE, 0.5, 0.01, 0, 1e-10, 1.0), lib.FC_ERR_ARG),
        ((lib.FC_RULE_RECTANGLE, 0.5, 0.01, 1, 1e-16, 1.0), lib.FC_ERR_TOL),
        ((lib.FC_RULE_RECTANGLE, 0.5, 0.01, 1, 1e-10, 0.005), lib.FC_ERR_TOL),
        ((lib.FC_RULE_RECTANGLE, 0.5, 1e-30, 1, 1e-10, 1.0), lib.FC_ERR_TOL),
        ((lib.FC_RULE_RECTANGLE, 0.5, 0.01, 1, 1e-10, np.inf), lib.FC_ERR_TOL),
    ):
        assert lib.fc_stream_create_timed(*args, pp) == st_want, args


def test_horizon_policy_continue():
    s = pf.TimedStream(0.5, 0.1, 1.0, horizon_policy="continue")
    s.push_many([0.0, 0.5, 1.0], [1.0, 1.0, 1.0])
    assert not s.past_horizon
    y = s.push(3.0, 1.0)
    assert s.past_horizon and math.isfinite(y)
    # a constant: the rectangle rule gives (t - t0)^a / Gamma(a+1) on any
    # grid (the weights telescope; Podlubny 1999), here within tol at 3.0
    # although past the horizon the promise no longer holds formally
    assert math.isclose(y, 3.0**0.5 / math.gamma(1.5), rel_tol=1e-6)
    r = pf.TimedStream.load(s.save())
    assert r.past_horizon and r.horizon_policy == "refuse"


def test_python_parameter_checks():
    with pytest.raises(ArgumentError, match="Grunwald-Letnikov rule has no standard form"):
        pf.TimedStream(0.5, 0.1, 1.0, rule="grunwald")
    with pytest.raises(ArgumentError, match=r"order=2\.5: a TimedStream serves 0 < order < 2"):
        pf.TimedStream(2.5, 0.1, 1.0)
    with pytest.raises(ArgumentError, match=r"min_step=0(\.0)?: must be finite and > 0"):
        pf.TimedStream(0.5, 0.0, 1.0)
    with pytest.raises(ArgumentError, match=r"horizon=0\.01: must be finite and >= min_step"):
        pf.TimedStream(0.5, 0.1, 0.01)
    with pytest.raises(ArgumentError, match=r"horizon=1e\+40: more than about 2\*\*98"):
        pf.TimedStream(0.5, 1e-10, 1e40)
    with pytest.raises(ArgumentError, match=r"tol=0\.5"):
        pf.TimedStream(0.5, 0.1, 1.0, tol=0.5)


# ------------------------------------------------------------ save/load


def fnv(data):
    h = 14695981039346656037
    for byte in data:
        h = ((h ^ byte) * 1099511628211) & 0xFFFFFFFFFFFFFFFF
    return h


def reseal(blob):
    """Recompute both checksums of a TimedStream envelope: the payload's
    (last 8 bytes, csrc/stream_timed.c) and the common header's (at 72,
    over bytes [0, 72) and the payload; csrc/stream.c)."""
    env, c = blob[:8], bytearray(blob[8:])
    c[-8:] = struct.pack("<Q", fnv(c[80:-8]))
    c[72:80] = struct.pack("<Q", fnv(bytes(c[:72]) + bytes(c[80:])))
    return env + bytes(c)


def test_save_load_resumes_bit_for_bit():
    rng = np.random.default_rng(66)
    t = jittered(rng, 400)
    x = rng.standard_normal(400)
    for rule, a in (("rectangle", 0.5), ("trapezoid", 1.0), ("l1", 0.7)):
        for cut in (0, 1, 2, 250):
            s = pf.TimedStream(a, 0.5e-3, 1.0, rule=rule)
            s.push_many(t[:cut], x[:cut])
            r = pf.TimedStream.load(s.save())
            assert (r.rule, r.order, r.min_step, r.tol, r.horizon, r.channels, r.count) == (
                rule,
                a,
                0.5e-3,
                1e-10,
                1.0,
                None,
                cut,
            )
            np.testing.assert_array_equal(r.push_many(t[cut:], x[cut:]), s.push_many(t[cut:], x[cut:]))
            assert r.save() == s.save()


def test_bad_bytes_are_refused():
    rng = np.random.default_rng(67)
    s = pf.TimedStream(0.5, 0.5e-3, 1.0, rule="trapezoid", channels=2)
    t = jittered(rng, 50)
    s.push_many(t, rng.standard_normal((50, 2)))
    blob = s.save()
    assert pf.TimedStream.load(reseal(blob)).save() == blob  # reseal is faithful
    for cut in (0, 7, 8, 40, 88, len(blob) - 1):
        with pytest.raises(StateError):
            pf.TimedStream.load(blob[:cut])
    for pos in range(8, len(blob), 37):
        b = bytearray(blob)
        b[pos] ^= 0x10
        with pytest.raises(StateError):
            pf.TimedStream.load(bytes(b))
    # tampered fields, checksums recomputed: still refused
    P = 8 + 80  # payload start in the envelope

    def tamper(off, fmt, value):
        b = bytearray(blob)
        struct.pack_into(fmt, b, P + off, value)
        return reseal(bytes(b))

    for off, fmt, value in (
        (32, "<Q", 0),  # count 0 with a state
        (32, "<Q", 10**6),  # more samples than the span allows
        (80, "<d", float(t[0])),  # tprev = t0
        (72, "<d", float(t[-1]) + 1.0),  # t0 after tprev
        (88, "<I", 1),  # past flag without being past
        (96, "<d", 1.0),  # a term's exponent
        (96 + 8 * s.terms, "<d", 2.0),
    ):  # a term's weight
        with pytest.raises(StateError):
            pf.TimedStream.load(tamper(off, fmt, value))
    # a non-timed stream's bytes and a timed stream's bytes in the other
    # loader are refused
    u = pf.Stream.integral(0.5, 0.1, mode="compressed")
    with pytest.raises(StateError):
        pf.TimedStream.load(u.save())
    with pytest.raises(StateError):
        pf.Stream.load(blob)
    with pytest.raises(StateError, match="TimedStream.load"):
        pf.Stream.load(b"pyfcS1" + blob[6:])


def test_scalar_refusals_change_nothing():
    kw = dict(order=0.3, min_step=0.01, horizon=1.0, rule="l1")
    s, twin = _twins(**kw)
    for ti, xi in ((0.0, 1.0), (0.02, 2.0), (0.05, -1.0)):
        assert s.push(ti, xi) == twin.push(ti, xi)
    before = s.save()
    for exc, call in (
        (ArgumentError, lambda: s.push(0.05, 1.0)),
        (ArgumentError, lambda: s.push(0.055, 1.0)),
        (ArgumentError, lambda: s.push(float("nan"), 1.0)),
        (SampleError, lambda: s.push(0.1, float("inf"))),
        (HorizonError, lambda: s.push(2.0, 1.0)),
        (RangeError, lambda: s.push(0.1, 1e308)),
    ):
        with pytest.raises(exc):
            call()
        assert s.save() == before
    for ti, xi in ((0.07, 0.5), (0.5, 3.0), (1.0, 0.0)):
        assert s.push(ti, xi) == twin.push(ti, xi)


@pytest.mark.parametrize("min_step", [1e-9, 1.0, 1e3])
@pytest.mark.parametrize(
    "rule,a", [("rectangle", 0.5), ("rectangle", 1.0), ("trapezoid", 0.9), ("l1", 0.01), ("l1", 0.99)]
)
def test_range_bound_accepts_1e290(rule, a, min_step):
    # the header's statement: samples (L1: increments) up to about 1e290
    # are accepted with a horizon of 1e6 smallest steps, and the outputs
    # stay finite
    s = pf.TimedStream(a, min_step, 1e6 * min_step, rule=rule)
    x = np.array([1e290, -1e290, 1e290, 0.0, 1e290])
    y = s.push_many(min_step * np.array([0.0, 1.0, 2.5, 1e5, 1e6]), x)
    assert np.all(np.isfinite(y))


def test_in_place_push_gives_the_same_outputs():
    # y == x is allowed (fracconv.h): the same outputs as separate buffers
    rng = np.random.default_rng(68)
    t = jittered(rng, 300)
    X = rng.standard_normal((300, 2))
    for code in (lib.FC_RULE_RECTANGLE, lib.FC_RULE_TRAPEZOID, lib.FC_RULE_L1):
        outs = []
        for in_place in (False, True):
            pp = ffi.new("fc_stream **")
            assert lib.fc_stream_create_timed(code, 0.5, 0.5e-3, 2, 1e-10, 1.0, pp) == 0
            s = ffi.gc(pp[0], lib.fc_stream_free)
            x = X.copy()
            y = x if in_place else np.empty_like(x)
            assert (
                lib.fc_stream_push_timed(
                    s,
                    ffi.from_buffer("double[]", t),
                    ffi.from_buffer("double[]", x),
                    300,
                    ffi.from_buffer("double[]", y),
                )
                == 0
            )
            outs.append(y.copy())
        np.testing.assert_array_equal(outs[0], outs[1])
