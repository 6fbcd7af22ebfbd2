"""The batch promises of fracconv.h at their edges.

1. The direct engine keeps the componentwise bound
   |y_n - exact_n| <= 1e-13 sum_k |c_{n-k} x_k| on long kernels (tails of
   terms below half an ulp of the running sum, power-law tails, Grunwald
   kernels of every order), checked against exact sums in Python integers
   or the long double reference of tests/reference.py.
2. Finite samples never give NaN or inf: every rule at orders 1e-6 .. 10,
   samples up to 1.7e308 and down to subnormal, steps 1e-300 .. 1e300; each
   output is compared with the rule's formula evaluated in mpmath at high
   precision, or the call is refused with FC_ERR_RANGE (nothing written)
   exactly when an exact output is beyond the double range.
3. fc_apply and fc_lagged_sum refuse an output that overlaps the input
   (FC_ERR_ARG, nothing written).
"""

from fractions import Fraction
from itertools import accumulate

import mpmath
import numpy as np
import pytest

import pyfracconv
from pyfracconv import RangeError, Stream
from pyfracconv._core import trapezoid_start
from pyfracconv._fracconv import ffi, lib
from reference import componentwise_error, lag_reference

TOL = 1e-13  # the componentwise promise of fracconv.h
DBL_MAX = float(np.finfo(float).max)
MP_DBL_MAX = mpmath.mpf(DBL_MAX)
RULE_CODE = {
    "rectangle": lib.FC_RULE_RECTANGLE,
    "trapezoid": lib.FC_RULE_TRAPEZOID,
    "grunwald": lib.FC_RULE_GRUNWALD,
    "l1": lib.FC_RULE_L1,
}
ENGINE_CODE = {
    "auto": lib.FC_ENGINE_AUTO,
    "direct": lib.FC_ENGINE_DIRECT,
    "blocked": lib.FC_ENGINE_BLOCKED,
    "fft": lib.FC_ENGINE_FFT,
}


def dbuf(a):
    return ffi.from_buffer("double[]", a)


# ---------------------------------------------------------------- exact sums

_SHIFT = 1 << 1100  # every double is an integer multiple of 2^-1074


def _as_int(v):
    """The double v times 2^1100, exactly, as a Python integer."""
    p, q = float(v).as_integer_ratio()
    return p * (_SHIFT // q)


def exact_prefix(c):
    """Exact y_n = sum_{m<=n} c_m (the lagged sum of x = ones) and
    sum_{m<=n} |c_m|, in Python's exact integers, for every n."""
    ints = [_as_int(v) for v in np.asarray(c, dtype=float).tolist()]
    return list(accumulate(ints)), list(accumulate(abs(i) for i in ints))


def worst_exact(y, sums, scales):
    """max_n |y_n - sums_n| / scales_n, exactly (Python fractions)."""
    worst = Fraction(0)
    for yn, s, a in zip(np.asarray(y).tolist(), sums, scales):
        e = abs(_as_int(yn) - s)
        if a == 0:
            assert e == 0
            continue
        if e * 10**13 > a:  # cheap filter: only large errors need a Fraction
            worst = max(worst, Fraction(e, a))
    return float(worst)


# ------------------------------------------------- 1. direct engine, long


def test_direct_tiny_constant_tail_2_16():
    # The review's case: a tail of 1e-17 after c_0 = 1 is below half an ulp
    # of the running sum, so plain summation in increasing lag order returns
    # exactly 1.0 for the last output (error 6.6e-13 of the scale).
    # Reference: the exact sum in Python integers.
    N = 2**16
    c = np.full(N, 1e-17)
    c[0] = 1.0
    y = pyfracconv.lagged_sum(np.ones(N), c, engine="direct")
    sums, scales = exact_prefix(c)
    assert worst_exact(y, sums, scales) <= TOL
    assert y[-1] > 1.0


@pytest.mark.parametrize("tail", [1.1e-16, 5e-17, -1.1e-16, 3e-20])
def test_direct_tail_just_below_half_ulp(tail):
    # A tail just below half an ulp of 1: the largest possible drop per lag.
    # Every output against exact integer sums.
    N = 4096
    c = np.full(N, tail)
    c[0] = 1.0
    y = pyfracconv.lagged_sum(np.ones(N), c, engine="direct")
    sums, scales = exact_prefix(c)
    assert worst_exact(y, sums, scales) <= TOL


def test_direct_power_tail_every_output():
    # c_m = 1e-5 m^-3 after c_0 = 1 (terms fall below half an ulp of the sum
    # from m ~ 4500 on). Every output against exact integer sums.
    N = 2**16
    m = np.arange(N, dtype=float)
    c = np.where(m > 0, 1e-5 / np.maximum(m, 1.0) ** 3, 1.0)
    y = pyfracconv.lagged_sum(np.ones(N), c, engine="direct")
    sums, scales = exact_prefix(c)
    assert worst_exact(y, sums, scales) <= TOL


@pytest.mark.slow
def test_direct_cubic_tail_2_18():
    # The review's c_m = m^-3 (c_0 = 1) at N = 2^18; every output against
    # exact integer sums.
    N = 2**18
    m = np.arange(N, dtype=float)
    c = np.where(m > 0, 1.0 / np.maximum(m, 1.0) ** 3, 1.0)
    y = pyfracconv.lagged_sum(np.ones(N), c, engine="direct")
    sums, scales = exact_prefix(c)
    assert worst_exact(y, sums, scales) <= TOL


@pytest.mark.parametrize("a", [1e-6, 0.3, 1.5, 2.5, 3.7, 5.5, 9.7, 10.0])
def test_direct_grunwald_kernel_2_16(a):
    # Grunwald kernels with random positive samples (order 2.5 reached
    # 4.3e-13 with plain summation). The kernel is only an input here; the
    # reference is the long double pairwise sum of tests/reference.py, whose
    # own error (about 16 * 2^-64 of the scale) is far below TOL.
    N = 2**16
    rng = np.random.default_rng(int(a * 1000))
    x = rng.random(N)
    c = pyfracconv.weights("grunwald", a, N)
    idx = np.unique(np.concatenate([rng.integers(0, N, 60), np.arange(N - 30, N)]))
    y = pyfracconv.lagged_sum(x, c, engine="direct")
    ref, scale = lag_reference(x, c, idx)
    assert componentwise_error(y[idx], ref, scale) <= TOL


@pytest.mark.parametrize("kind", ["grunwald", "cubic", "signed"])
def test_direct_every_output_long_double(kind):
    # Every output of a kernel as long as the record, against the long
    # double reference (tests/reference.py), with random signed samples.
    N = 5000
    rng = np.random.default_rng(7)
    x = rng.standard_normal(N) * np.exp(rng.uniform(-20, 20, N))
    if kind == "grunwald":
        c = pyfracconv.weights("grunwald", 1e-6, N)
    elif kind == "cubic":
        c = 1.0 / (1.0 + np.arange(N)) ** 3
    else:
        c = rng.standard_normal(N) * 1e-17
        c[0] = 1.0
    y = pyfracconv.lagged_sum(x, c, engine="direct")
    ref, scale = lag_reference(x, c, np.arange(N))
    assert componentwise_error(y, ref, scale) <= TOL


@pytest.mark.parametrize("rule,a", [("rectangle", 1e-6), ("trapezoid", 0.5), ("l1", 1e-6), ("grunwald", 2.5)])
def test_direct_rules_long(rule, a):
    # The rules through fc_apply with the direct engine on 2^14 samples:
    # sampled outputs against the rule's formula summed in long double with
    # the library's weights (tests/reference.py; the weights themselves are
    # checked against mpmath in test_weights.py).
    from reference import rule_reference

    N = 2**14
    rng = np.random.default_rng(3)
    x = rng.random(N) + 1.0
    f = pyfracconv.derivative if rule in ("grunwald", "l1") else pyfracconv.integral
    y = f(x, a, 1e-3, rule=rule, engine="direct")
    idx = np.unique(np.concatenate([rng.integers(0, N, 40), np.arange(N - 10, N)]))
    ref, scale = rule_reference(rule, a, 1e-3, x, idx)
    assert componentwise_error(y[idx], ref, scale) <= TOL


@pytest.mark.parametrize("K", [1, 2, 64, 127, 128])
def test_direct_short_kernels_are_plain_summation(K):
    # Kernels of at most 128 lags are summed plainly in increasing lag order,
    # an axpy per lag (the summation order fracconv's direct engine has
    # always used; plain recursive summation, common practice): same bits.
    N = 1000
    rng = np.random.default_rng(K)
    x = rng.standard_normal(N)
    c = rng.standard_normal(K)
    plain = np.zeros(N)
    for m in range(min(K, N)):
        plain[m:] += c[m] * x[: N - m]
    y = pyfracconv.lagged_sum(x, c, engine="direct")
    np.testing.assert_array_equal(y, plain)


# ------------------------------------------- 2. range: the mpmath reference

mpmath.mp.dps = 50


def mp_rule(rule, a, h, x):
    """Every output of the rule's formula (fracconv.h) and its error scale,
    the sum of |terms|, in mpmath at 50 digits (plus the digits a tiny
    order cancels), with the exact binary values of a, h and the samples."""
    N = len(x)
    with mpmath.workdps(50 + max(0, int(-np.log10(a)))):
        A, H = mpmath.mpf(a), mpmath.mpf(h)
        X = [mpmath.mpf(float(v)) for v in x]
        M = [mpmath.mpf(m) for m in range(N + 2)]
        if rule == "rectangle":
            u = H**A / mpmath.gamma(A + 1)
            w = [(M[m] + 1) ** A - M[m] ** A for m in range(N)]
        elif rule == "trapezoid":
            u = H**A / mpmath.gamma(A + 2)
            w = [mpmath.mpf(1)] + [
                (M[m] + 1) ** (A + 1) - 2 * M[m] ** (A + 1) + (M[m] - 1) ** (A + 1) for m in range(1, N)
            ]
            st = [mpmath.mpf(0)] + [(M[n] - 1) ** (A + 1) - (M[n] - 1 - A) * M[n] ** A for n in range(1, N)]
        elif rule == "grunwald":
            u = H ** (-A)
            w = [mpmath.mpf(1)]
            for m in range(1, N):
                w.append(w[-1] * (1 - (A + 1) / M[m]))
        else:
            u = H ** (-A) / mpmath.gamma(2 - A)
            w = [(M[k] + 1) ** (1 - A) - M[k] ** (1 - A) for k in range(N)]
        ys, ss = [], []
        for n in range(N):
            if rule == "rectangle":
                t = [w[n - 1 - k] * X[k] for k in range(n)]
            elif rule == "trapezoid":
                t = [st[n] * X[0]] + [w[n - k] * X[k] for k in range(1, n + 1)] if n > 0 else []
            elif rule == "grunwald":
                t = [w[n - k] * X[k] for k in range(n + 1)]
            else:
                t = [w[k] * (X[n - k] - X[n - k - 1]) for k in range(n)]
            ys.append(u * mpmath.fsum(t))
            ss.append(abs(u) * mpmath.fsum([abs(v) for v in t]))
    return ys, ss, abs(u)


def call_apply(rule, a, h, x, engine="auto"):
    """fc_apply through cffi on a buffer filled with a sentinel: the status
    and the buffer afterwards."""
    x = np.ascontiguousarray(x, dtype=float)
    y = np.full(len(x), 1234.5)
    st = lib.fc_apply(ffi.NULL, RULE_CODE[rule], a, h, dbuf(x), 1, len(x), ENGINE_CODE[engine], dbuf(y))
    return st, y


def check_against_mpmath(rule, a, h, x, engine="auto"):
    """Outputs within the componentwise bound of the mpmath reference, or
    FC_ERR_RANGE with nothing written exactly when an exact output is
    beyond DBL_MAX (both accepted within 1e-12 of DBL_MAX, where rounding
    decides). Returns the status."""
    ref, scale, u = mp_rule(rule, a, h, x)
    st, y = call_apply(rule, a, h, x, engine)
    big = max(abs(r) for r in ref)
    assert not np.any(np.isnan(y))
    if big > MP_DBL_MAX * (1 + mpmath.mpf(1e-12)):
        assert st == lib.FC_ERR_RANGE, (rule, a, h, float(big) if big < 1e308 else big)
        assert np.all(y == 1234.5)  # nothing written
        return st
    if big < MP_DBL_MAX * (1 - mpmath.mpf(1e-12)):
        assert st == lib.FC_OK, (rule, a, h, st)
    if st != lib.FC_OK:
        assert st == lib.FC_ERR_RANGE and np.all(y == 1234.5)
        return st
    assert np.all(np.isfinite(y))
    # Gradual underflow (fracconv.h): an absolute error of about N 2^-1074
    # times the largest possible term, beside the relative bound.
    xmax = max(abs(float(v)) for v in x)
    wmax = mpmath.mpf(len(x) + 2) ** (a + 1) * 2**12
    tiny = (len(x) + 2) * mpmath.mpf(2) ** -1074 * (u * xmax * wmax + 1)
    # the single-FFT engine is accurate only normwise (fracconv.h)
    norm = max(scale) if engine == "fft" else None
    for n in range(len(x)):
        err = abs(mpmath.mpf(float(y[n])) - ref[n])
        bound = TOL * scale[n] if norm is None else 1e-12 * norm
        assert err <= bound + tiny, (rule, a, h, n, float(y[n]), ref[n])
    return st


def big_signals(rng, N):
    """Samples near 1e300 .. 1.7e308 (positive, alternating, one spike) and
    near the bottom of the range (subnormal included)."""
    pos = 10.0 ** rng.uniform(300, 308.2, N)
    alt = pos * (-1.0) ** np.arange(N)
    alt[::3] = 1.7e308 * (-1.0) ** np.arange(0, N, 3)
    spike = np.zeros(N)
    spike[3] = 1.7e308
    low = 10.0 ** rng.uniform(-323, -300, N) * rng.choice([-1.0, 1.0], N)
    return {"positive": pos, "alternating": alt, "spike": spike, "low": low}


ORDERS = [1e-6, 0.5, 1.0, 2.0, 2.5, 7.3, 10.0]
L1_ORDERS = [1e-6, 0.3, 0.5, 0.999999]
STEPS = [1e-300, 1e-150, 1e-8, 1.0, 1e8, 1e150, 1e300]


@pytest.mark.parametrize("rule", ["rectangle", "trapezoid", "grunwald", "l1"])
def test_every_rule_extreme_samples_and_steps(rule):
    rng = np.random.default_rng(RULE_CODE[rule])
    seen = set()
    for a in L1_ORDERS if rule == "l1" else ORDERS:
        for h in STEPS:
            for name, x in big_signals(rng, 10).items():
                seen.add(check_against_mpmath(rule, a, h, x))
    # both outcomes occur over the sweep
    assert seen == {lib.FC_OK, lib.FC_ERR_RANGE}


@pytest.mark.parametrize("engine", ["blocked", "fft"])
@pytest.mark.parametrize(
    "rule,a,h",
    [("rectangle", 0.5, 1e-8), ("trapezoid", 2.5, 1e-100), ("grunwald", 0.5, 1e6), ("l1", 0.5, 1e6)],
)
def test_fft_engines_extreme_samples(engine, rule, a, h):
    # Records long enough for the FFT paths; samples up to 1.7e308.
    rng = np.random.default_rng(11)
    x = big_signals(rng, 300)
    assert check_against_mpmath(rule, a, h, x["alternating"], engine) == lib.FC_OK
    assert check_against_mpmath(rule, a, h, x["spike"], engine) == lib.FC_OK


def test_review_cases():
    # integral(full(2^16, 1e305), 0.5, 1e-8): the rectangle rule telescopes
    # for a constant, y_n = h^a n^a / Gamma(a+1) x (closed form, common
    # practice), at most 2.9e303; before, 61,440 outputs were NaN.
    N = 2**16
    y = pyfracconv.integral(np.full(N, 1e305), 0.5, 1e-8)
    assert np.all(np.isfinite(y))
    for n in list(range(0, N, 511)) + [N - 1]:
        exact = mpmath.mpf(1e-8) ** 0.5 * mpmath.mpf(n) ** 0.5 / mpmath.gamma(1.5) * mpmath.mpf(1e305)
        assert abs(mpmath.mpf(float(y[n])) - exact) <= TOL * exact
    # L1 of alternating +-1.5e308 (differences +-3e308 are beyond the range)
    x = [1.5e308, -1.5e308, 1.5e308, -1.5e308]
    assert check_against_mpmath("l1", 0.5, 1e6, x) == lib.FC_OK
    # h^10 = 1e400: RangeError for ordinary samples, values for tiny ones
    with pytest.raises(RangeError):
        pyfracconv.integral(np.ones(8), 10, 1e40)
    assert check_against_mpmath("rectangle", 10.0, 1e40, np.full(8, 1e-300)) == lib.FC_OK
    with pytest.raises(RangeError):
        pyfracconv.derivative(np.ones(8), 10, 5e-324)
    np.testing.assert_array_equal(pyfracconv.derivative(np.zeros(8), 10, 5e-324), 0.0)
    # Grunwald order 2, h = 1e-300 (h^-2 = 1e600): the second difference of
    # a linear sequence is exactly 0 (common practice); samples k 2^-1074.
    x = np.arange(20) * 5e-324
    y = pyfracconv.derivative(x, 2.0, 1e-300)
    assert np.all(y[2:] == 0.0)
    assert check_against_mpmath("grunwald", 2.0, 1e-300, x) == lib.FC_OK


def test_lagged_sum_extreme_values():
    # fc_lagged_sum with samples and kernels anywhere in the double range:
    # within the bound of the exact sum (Python fractions) or FC_ERR_RANGE
    # exactly when an exact output is beyond DBL_MAX.
    rng = np.random.default_rng(5)
    for trial in range(60):
        N = int(rng.integers(1, 40))
        K = int(rng.integers(1, 50))
        ex = rng.uniform(-320, 308, 2)
        x = 10.0 ** rng.uniform(ex[0] - 20, min(ex[0], 308.2), N) * rng.choice([-1.0, 1.0], N)
        c = 10.0 ** rng.uniform(ex[1] - 20, min(ex[1], 308.2), K) * rng.choice([-1.0, 1.0], K)
        ref, scale = [], []
        for n in range(N):
            t = [Fraction(float(c[n - k])) * Fraction(float(x[k])) for k in range(max(0, n - K + 1), n + 1)]
            ref.append(sum(t))
            scale.append(sum(abs(v) for v in t))
        y = np.full(N, 1234.5)
        st = lib.fc_lagged_sum(
            ffi.NULL,
            dbuf(x),
            1,
            N,
            dbuf(c),
            K,
            lib.FC_ENGINE_DIRECT if trial % 2 else lib.FC_ENGINE_BLOCKED,
            dbuf(y),
        )
        big = max(abs(r) for r in ref)
        fmax = Fraction(DBL_MAX)
        if big > fmax * (1 + Fraction(1, 10**12)):
            assert st == lib.FC_ERR_RANGE and np.all(y == 1234.5)
            continue
        if big < fmax * (1 - Fraction(1, 10**12)):
            assert st == lib.FC_OK
        if st != lib.FC_OK:
            continue
        tiny = (
            Fraction(N + K + 2)
            * Fraction(2) ** -1074
            * (Fraction(float(np.max(np.abs(x)))) * Fraction(float(np.max(np.abs(c)))) * 4 + 1)
        )
        for n in range(N):
            assert abs(Fraction(float(y[n])) - ref[n]) <= Fraction(TOL) * scale[n] + tiny


@pytest.mark.parametrize(
    "rule,a",
    [
        ("rectangle", 10.0),
        ("trapezoid", 10.0),
        ("grunwald", 10.0),
        ("l1", 0.999999),
        ("rectangle", 1e-6),
        ("grunwald", 0.5),
    ],
)
@pytest.mark.parametrize("h", [5e-324, 1e-300, 1e-30, 1e30, 1e300, 1.7e308])
def test_weights_extreme_steps(rule, a, h):
    # fc_weights and fc_trapezoid_start: the mpmath values of the formulas
    # of fracconv.h (Grunwald: g_m = (-1)^m binom(a, m), Podlubny, Fractional
    # Differential Equations, Academic Press 1999, sec. 2.2) to 1e-14
    # relative (gradual underflow below DBL_MIN: 2^-1074 absolute), or
    # RangeError exactly when one of them exceeds DBL_MAX.
    idx = [0, 1, 2, 5, 100, 10**6, 10**12]
    with mpmath.workdps(60):
        A, H = mpmath.mpf(a), mpmath.mpf(h)
        refs = []
        for m in idx:
            M = mpmath.mpf(m)
            if rule == "rectangle":
                r = H**A / mpmath.gamma(A + 1) * ((M + 1) ** A - M**A)
            elif rule == "trapezoid":
                r = (
                    H**A
                    / mpmath.gamma(A + 2)
                    * (1 if m == 0 else (M + 1) ** (A + 1) - 2 * M ** (A + 1) + (M - 1) ** (A + 1))
                )
            elif rule == "grunwald":
                r = H ** (-A) * (-1) ** m * mpmath.binomial(A, M)
            else:
                r = H ** (-A) / mpmath.gamma(2 - A) * ((M + 1) ** (1 - A) - M ** (1 - A))
            refs.append(r)
    for j, m in enumerate(idx):
        if abs(refs[j]) > MP_DBL_MAX:
            with pytest.raises(RangeError):
                pyfracconv.weights(rule, a, 1, step=h, start=m)
            continue
        w = pyfracconv.weights(rule, a, 1, step=h, start=m)[0]
        assert np.isfinite(w)
        assert abs(mpmath.mpf(float(w)) - refs[j]) <= 1e-14 * abs(refs[j]) + mpmath.mpf(2) ** -1074
    if rule == "trapezoid":
        with mpmath.workdps(60):
            A, H = mpmath.mpf(a), mpmath.mpf(h)
            for m in [1, 3, 1000]:
                M = mpmath.mpf(m)
                r = H**A / mpmath.gamma(A + 2) * ((M - 1) ** (A + 1) - (M - 1 - A) * M**A)
                if r > MP_DBL_MAX:
                    with pytest.raises(RangeError):
                        trapezoid_start(a, 1, step=h, start=m)
                else:
                    v = trapezoid_start(a, 1, step=h, start=m)[0]
                    assert abs(mpmath.mpf(float(v)) - r) <= 1e-14 * r + mpmath.mpf(2) ** -1074


def test_weights_range_leaves_output():
    # A refused call writes nothing (fracconv.h conventions).
    out = np.full(4, 7.0)
    st = lib.fc_weights(lib.FC_RULE_RECTANGLE, 10.0, 1e300, 0, 4, dbuf(out))
    assert st == lib.FC_ERR_RANGE and np.all(out == 7.0)
    st = lib.fc_trapezoid_start(10.0, 1e300, 0, 4, dbuf(out))
    assert st == lib.FC_ERR_RANGE and np.all(out == 7.0)
    # Only the later weights of a run beyond DBL_MAX (mpmath: the last one
    # is, the first one is not): refused as a whole, nothing written.
    h, a, n = 7.2e28, 10.0, 2000
    with mpmath.workdps(40):
        u = mpmath.mpf(h) ** a / mpmath.gamma(a + 1)
        last = u * ((mpmath.mpf(n - 1) + 1) ** a - mpmath.mpf(n - 1) ** a)
        first = u
    assert last > MP_DBL_MAX and first < MP_DBL_MAX
    out = np.full(n, 7.0)
    st = lib.fc_weights(lib.FC_RULE_RECTANGLE, a, h, 0, n, dbuf(out))
    assert st == lib.FC_ERR_RANGE and np.all(out == 7.0)
    w0 = pyfracconv.weights("rectangle", a, 1, step=h)[0]
    assert abs(mpmath.mpf(float(w0)) - first) <= 1e-14 * first


@pytest.mark.parametrize(
    "kind,rule,a,h",
    [
        ("derivative", "grunwald", 10.0, 1e300),
        ("integral", "rectangle", 10.0, 1e40),
        ("integral", "trapezoid", 10.0, 1e-300),
        ("derivative", "l1", 0.99, 1e-320),
    ],
)
def test_stream_refuses_out_of_range_kernels(kind, rule, a, h):
    # h^-10 = 1e-3000 would flush the stream's kernel to 0, h^10 = 1e400 or
    # (1e-320)^-0.99 = 1e316.8 would make it infinite (the step factors are
    # beyond [DBL_MIN, DBL_MAX]: from memory, DBL_MAX = 1.8e308, DBL_MIN =
    # 2.2e-308); exact streams refuse such parameters.
    make = Stream.derivative if kind == "derivative" else Stream.integral
    with pytest.raises(RangeError):
        make(a, h, rule=rule)


# ------------------------------------------------------------- 3. overlap


@pytest.mark.parametrize("shift", [0, 1, -1, 49, -49])
def test_overlapping_output_refused(shift):
    # y overlapping x would be cleared before x is read: refused with
    # FC_ERR_ARG, and the buffer is left as it was.
    n = 100
    rng = np.random.default_rng(1)
    buf = rng.standard_normal(2 * n + 2)
    before = buf.copy()
    x = buf[n // 2 + 1 :]
    y = buf[n // 2 + 1 + shift :]
    px, py = dbuf(x), dbuf(y)
    for rule in RULE_CODE:
        a = 0.5
        st = lib.fc_apply(ffi.NULL, RULE_CODE[rule], a, 0.1, px, 1, n // 2, 0, py)
        assert st == lib.FC_ERR_ARG
    k = np.ones(5)
    st = lib.fc_lagged_sum(ffi.NULL, px, 1, n // 2, dbuf(k), 5, 0, py)
    assert st == lib.FC_ERR_ARG
    # kernel overlapping the output
    st = lib.fc_lagged_sum(ffi.NULL, dbuf(before), 1, 10, py, 5, 0, py)
    assert st == lib.FC_ERR_ARG
    np.testing.assert_array_equal(buf, before)


def test_adjacent_buffers_accepted():
    # x and y side by side in one array do not overlap: accepted, and within
    # the bound of the long double reference (tests/reference.py).
    from reference import rule_reference

    n = 64
    rng = np.random.default_rng(2)
    buf = np.empty(2 * n)
    buf[:n] = rng.standard_normal(n)
    x, y = buf[:n], buf[n:]
    assert lib.fc_apply(ffi.NULL, lib.FC_RULE_GRUNWALD, 0.5, 0.1, dbuf(x), 1, n, 0, dbuf(y)) == lib.FC_OK
    ref, scale = rule_reference("grunwald", 0.5, 0.1, x.copy(), np.arange(n))
    assert componentwise_error(y, ref, scale) <= TOL
    buf2 = np.empty(2 * n)
    buf2[n:] = x
    assert (
        lib.fc_lagged_sum(ffi.NULL, dbuf(buf2[n:]), 1, n, dbuf(np.ones(3)), 3, 0, dbuf(buf2[:n])) == lib.FC_OK
    )
    ref, scale = lag_reference(x.copy(), np.ones(3), np.arange(n))
    assert componentwise_error(buf2[:n], ref, scale) <= TOL


@pytest.mark.parametrize(
    "kind,rule,a",
    [
        ("integral", "rectangle", 0.5),
        ("integral", "trapezoid", 2.5),
        ("derivative", "grunwald", 0.5),
        ("derivative", "l1", 0.5),
    ],
)
def test_signals_of_very_different_sizes(kind, rule, a):
    # Each signal of a call is scaled on its own: a signal near 1e300 beside
    # one near 1e-300 keeps every output of both within the bound (mpmath
    # reference of the rule's formula, as above).
    rng = np.random.default_rng(17)
    N = 40
    x = np.stack(
        [
            rng.uniform(0.5, 1.5, N) * 1e300,
            rng.standard_normal(N) * 1e-300,
            np.zeros(N),
            rng.standard_normal(N),
        ]
    )
    f = pyfracconv.derivative if kind == "derivative" else pyfracconv.integral
    y = f(x, a, 1e-3, rule=rule)
    for s in range(len(x)):
        ref, scale, u = mp_rule(rule, a, 1e-3, x[s])
        for n in range(N):
            assert abs(mpmath.mpf(float(y[s, n])) - ref[n]) <= TOL * scale[n], (s, n)
    # lagged sums, both engines, a kernel of ordinary size
    c = 1.0 / (1.0 + np.arange(N)) ** 1.5
    for engine in ("direct", "blocked"):
        y = pyfracconv.lagged_sum(x, c, engine=engine)
        for s in range(len(x)):
            for n in range(N):
                t = [Fraction(float(c[n - k])) * Fraction(float(x[s, k])) for k in range(n + 1)]
                err = abs(Fraction(float(y[s, n])) - sum(t))
                assert err <= Fraction(TOL) * sum(abs(v) for v in t), (engine, s, n)
