"""Quadrature weights of every rule against outside references.

References (cited beside each check):
  - mpmath at 60 significant digits evaluating the defining formulas of the
    weights (docs/design.md section 1 / fracconv.h), with the order taken as the
    exact binary value of the float passed to the library. mpmath works in
    arbitrary precision, so the differences (m+1)^a - m^a etc. that cancel in
    double keep 60 - 2*12 >= 36 digits even at m = 1e12;
  - the Grunwald-Letnikov coefficients g_m = (-1)^m binom(a, m)
    (Podlubny, Fractional Differential Equations, Academic Press 1999,
    section 2.2), evaluated with mpmath.binomial;
  - identities with no discretisation error from docs/references.md: the
    rectangle weights telescope, sum_{j<=n} b_j = (n+1)^a; the
    Grunwald-Letnikov partial sums sum_{j<=n} (-1)^j binom(a, j) =
    (-1)^n binom(a-1, n); integer orders give (-1)^m binom(a, m) exactly
    (common practice).

The weights are documented to about 1e-14 relative accuracy for every index
(fracconv.h); the checks below hold them to RTOL = 1e-14.
"""

import math
import random

import mpmath
import numpy as np
import pytest

import pyfracconv
from pyfracconv import _core

mpmath.mp.dps = 60
RTOL = 1e-14
# The smallest normal double: reference values below it are compared in
# absolute terms (a subnormal result cannot carry 1e-14 relative accuracy).
TINY = mpmath.mpf(2) ** -1022

ORDERS = [1e-6, 1e-3, 0.05, 0.1, 0.5, 0.9, 0.999, 1.0, 1.5, 2.0, 2.5, 3.7, 10.0]
# Orders just beside integers, where some weights become tiny.
NEAR_INTEGER = [1 - 1e-9, 1 + 1e-9, 2 + 1e-12, 3 - 1e-7, 9.999999]
L1_ORDERS = [1e-6, 1e-3, 0.05, 0.1, 0.5, 0.9, 0.999, 1 - 1e-9]
STEPS = [1.0, 1e-3, 0.37, 7.5]

_rng = random.Random(20240611)
INDICES = sorted(
    {
        0,
        1,
        2,
        3,
        4,
        5,
        7,
        10,
        11,
        16,
        17,
        31,
        100,
        255,
        256,
        257,
        1000,
        10**4,
        10**5,
        10**6,
        10**7,
        10**8,
        10**9,
        10**10,
        10**11,
        10**12,
        2**53 - 1,
    }
    | {int(10 ** _rng.uniform(0.5, 12)) for _ in range(10)}
)


# ------------------------------------------------------------- references


def _mp_weight(rule, a, m, h):
    """Scaled weight of `rule` at index m, from the defining formula
    (fracconv.h, docs/design.md section 1) in mpmath arithmetic."""
    # A few extra digits for tiny orders, where (m+1)^a - m^a ~ a/m.
    with mpmath.workdps(60 + max(0, int(-math.log10(a))) + 10):
        A, H, M = mpmath.mpf(a), mpmath.mpf(h), mpmath.mpf(m)
        if rule == "rectangle":
            return H**A / mpmath.gamma(A + 1) * ((M + 1) ** A - M**A)
        if rule == "trapezoid":
            w = 1 if m == 0 else (M + 1) ** (A + 1) - 2 * M ** (A + 1) + (M - 1) ** (A + 1)
            return H**A / mpmath.gamma(A + 2) * w
        if rule == "start":
            if m == 0:
                return mpmath.mpf(0)
            return H**A / mpmath.gamma(A + 2) * ((M - 1) ** (A + 1) - (M - 1 - A) * M**A)
        if rule == "grunwald":
            # g_m = (-1)^m binom(a, m) (Podlubny 1999, section 2.2)
            return H ** (-A) * (-1) ** m * mpmath.binomial(A, M)
        if rule == "l1":
            q = 1 - A
            return H ** (-A) / mpmath.gamma(2 - A) * ((M + 1) ** q - M**q)
    raise AssertionError(rule)


def _library(rule, a, count, h, start):
    if rule == "start":
        return _core.trapezoid_start(a, count, step=h, start=start)
    return pyfracconv.weights(rule, a, count, step=h, start=start)


def _worst(rule, a, h, pairs):
    """Largest relative error over (index, library value) pairs."""
    worst, where = 0.0, None
    for m, x in pairs:
        ref = _mp_weight(rule, a, m, h)
        err = float(abs(mpmath.mpf(float(x)) - ref) / max(abs(ref), TINY))
        if err > worst:
            worst, where = err, m
    return worst, where


def _check_points(rule, a):
    h = STEPS[int(a * 1000) % len(STEPS)]
    pairs = []
    for m in INDICES:
        # one call per index (every start is its own restart) ...
        pairs.append((m, _library(rule, a, 1, h, m)[0]))
    # ... and samples from inside long runs, where the powers are carried
    # from index to index.
    run = _library(rule, a, 1 << 16, h, 0)
    for m in [_rng.randrange(1 << 16) for _ in range(12)] + [(1 << 16) - 1]:
        pairs.append((m, run[m]))
    s0 = 10**9 + 12345
    run = _library(rule, a, 20000, h, s0)
    for k in [_rng.randrange(20000) for _ in range(6)] + [19999]:
        pairs.append((s0 + k, run[k]))
    worst, where = _worst(rule, a, h, pairs)
    assert worst <= RTOL, f"{rule} order={a!r} step={h!r}: relative error {worst:.3g} at index {where}"


# ------------------------------------------------- weights against mpmath


@pytest.mark.parametrize("a", ORDERS + NEAR_INTEGER)
def test_rectangle_weights_against_mpmath(a):
    _check_points("rectangle", a)


@pytest.mark.parametrize("a", ORDERS + NEAR_INTEGER)
def test_trapezoid_weights_against_mpmath(a):
    _check_points("trapezoid", a)


@pytest.mark.parametrize("a", ORDERS + NEAR_INTEGER)
def test_trapezoid_start_weights_against_mpmath(a):
    _check_points("start", a)


@pytest.mark.parametrize("a", ORDERS + NEAR_INTEGER)
def test_grunwald_weights_against_mpmath(a):
    _check_points("grunwald", a)


@pytest.mark.parametrize("a", L1_ORDERS)
def test_l1_weights_against_mpmath(a):
    _check_points("l1", a)


RANDOM_SEEDS = {"rectangle": 101, "trapezoid": 102, "grunwald": 103, "l1": 104, "start": 105}


@pytest.mark.parametrize("rule", ["rectangle", "trapezoid", "grunwald", "l1", "start"])
def test_random_orders_steps_and_indices(rule):
    # Orders drawn at random over the whole allowed range, against mpmath
    # (a fixed seed per rule, so that every run draws the same cases).
    rng = random.Random(RANDOM_SEEDS[rule])
    worst = 0.0
    for _ in range(8):
        a = rng.uniform(1e-3, 0.999) if rule == "l1" else rng.uniform(1e-3, 10.0)
        h = 10 ** rng.uniform(-3, 1)
        start = int(10 ** rng.uniform(0, 12))
        vals = _library(rule, a, 300, h, start)
        pairs = [(start + k, vals[k]) for k in (0, 1, rng.randrange(300), 299)]
        worst = max(worst, _worst(rule, a, h, pairs)[0])
    assert worst <= RTOL, f"{rule}: relative error {worst:.3g}"


def test_steps_whose_scale_factor_leaves_the_double_range():
    # h^a / Gamma(a+1) below the smallest double while the weights
    # themselves are normal numbers (reference: mpmath, as above).
    cases = [
        ("rectangle", 10.0, 1e-40),
        ("trapezoid", 9.5, 1e-35),
        ("grunwald", 10.0, 1e40),
        ("l1", 0.7, 1e-300),
    ]
    for rule, a, h in cases:
        start = 10**12
        vals = _library(rule, a, 3, h, start)
        worst, where = _worst(rule, a, h, [(start + k, vals[k]) for k in range(3)])
        assert worst <= RTOL, f"{rule} a={a} h={h}: {worst:.3g} at {where}"


# ------------------------------------------------------------ identities


@pytest.mark.parametrize("a", [1e-3, 0.3, 0.999, 1.7, 4.2, 10.0])
def test_rectangle_weights_telescope(a):
    # sum_{j<=n} ((j+1)^a - j^a) = (n+1)^a (docs/references.md, "Rectangle rule
    # on a constant"): the scaled sum is h^a (n+1)^a / Gamma(a+1).
    h, n = 0.25, 1 << 17
    w = pyfracconv.weights("rectangle", a, n, step=h)
    total = math.fsum(w)  # correctly rounded sum of the doubles
    ref = mpmath.mpf(h) ** a * mpmath.mpf(n) ** a / mpmath.gamma(mpmath.mpf(a) + 1)
    # all terms positive: the sum is as accurate as its terms
    assert abs(total - ref) <= RTOL * ref
    # and from a late start: sum_{j=s}^{s+n-1} b_j = (s+n)^a - s^a
    s = 10**11
    w = pyfracconv.weights("rectangle", a, 1000, step=1.0, start=s)
    with mpmath.workdps(80):
        ref = ((mpmath.mpf(s) + 1000) ** a - mpmath.mpf(s) ** a) / mpmath.gamma(mpmath.mpf(a) + 1)
    assert abs(math.fsum(w) - ref) <= RTOL * ref


@pytest.mark.parametrize("a", [1e-3, 0.5, 0.999, 1 + 1e-9, 2.5, 6.3, 10.0])
def test_grunwald_partial_sums(a):
    # sum_{j<=n} (-1)^j binom(a, j) = (-1)^n binom(a-1, n) (Graham, Knuth and
    # Patashnik, Concrete Mathematics, 1994, sec. 5.1; docs/references.md,
    # "Grunwald-Letnikov partial sums"), reference by mpmath.binomial.
    n = 1 << 15
    g = pyfracconv.weights("grunwald", a, n)  # step 1: unscaled g_m
    for k in [0, 1, 2, 5, 10, 99, 1000, n - 1]:
        ref = (-1) ** k * mpmath.binomial(mpmath.mpf(a) - 1, k)
        part = math.fsum(g[: k + 1])  # correctly rounded sum of the doubles
        # each term to RTOL: the sum to RTOL * sum |g_j| (plus its rounding)
        bound = RTOL * math.fsum(np.abs(g[: k + 1])) + 1.2e-16 * abs(ref)
        assert abs(part - ref) <= bound, (a, k, float(part), float(ref))


@pytest.mark.parametrize("a", [1, 2, 3, 4, 7, 10])
def test_grunwald_integer_orders_are_binomials(a):
    # Integer order: g_m = (-1)^m binom(a, m), zero beyond m = a (common
    # practice; a = 1: 1, -1, 0, ...; a = 2: 1, -2, 1, 0, ...), and
    # h^-a g_m for the step h = 2 (exact powers of two).
    g = pyfracconv.weights("grunwald", float(a), 40)
    expected = [(-1) ** m * math.comb(a, m) for m in range(40)]
    assert g.tolist() == expected
    g = pyfracconv.weights("grunwald", float(a), 40, step=2.0)
    assert g.tolist() == [e / 2.0**a for e in expected]
    far = pyfracconv.weights("grunwald", float(a), 100, start=10**12)
    assert not far.any()


def test_order_one_gives_the_classical_rules():
    # a = 1: rectangle weights h (left rectangle rule), trapezoid a_0 = 1,
    # a_m = 2, scaled by h/2 (composite trapezoidal rule), A_n = 1 scaled
    # by h/2 for n >= 1 (docs/references.md, "Order a = 1"; common practice).
    h = 0.3
    for start in (0, 7, 10**12):
        r = pyfracconv.weights("rectangle", 1.0, 50, step=h, start=start)
        np.testing.assert_allclose(r, h, rtol=RTOL, atol=0)
        t = pyfracconv.weights("trapezoid", 1.0, 50, step=h, start=start)
        exp = np.full(50, h)
        if start == 0:
            exp[0] = h / 2
        np.testing.assert_allclose(t, exp, rtol=RTOL, atol=0)
        s = _core.trapezoid_start(1.0, 50, step=h, start=start)
        exp = np.full(50, h / 2)
        if start == 0:
            exp[0] = 0.0
        np.testing.assert_allclose(s, exp, rtol=RTOL, atol=0)


# -------------------------------------------------- shapes and the C call


def test_result_layout():
    for rule in ("rectangle", "trapezoid", "grunwald", "l1"):
        w = pyfracconv.weights(rule, 0.5, 10, start=3)
        assert w.dtype == np.float64 and w.shape == (10,)
        assert np.array_equal(w, pyfracconv.weights(rule, 0.5, 20)[3:13])
        assert pyfracconv.weights(rule, 0.5, 0).shape == (0,)
    # the last allowed index, start + count == 2**53
    w = pyfracconv.weights("rectangle", 0.5, 2, start=2**53 - 2)
    assert np.all(np.isfinite(w)) and np.all(w > 0)


def test_c_argument_checks_leave_output_untouched():
    # Status codes as documented in fracconv.h; a rejected call writes
    # nothing.
    from pyfracconv._fracconv import ffi, lib

    out = ffi.new("double[4]", [7.0] * 4)
    cases = [
        (lib.FC_ERR_RULE, (4, 0.5, 1.0, 0, 4)),
        (lib.FC_ERR_RULE, (-1, 0.5, 1.0, 0, 4)),
        (lib.FC_ERR_ORDER, (0, 0.0, 1.0, 0, 4)),
        (lib.FC_ERR_ORDER, (0, -1.0, 1.0, 0, 4)),
        (lib.FC_ERR_ORDER, (0, 10.000001, 1.0, 0, 4)),
        (lib.FC_ERR_ORDER, (0, math.nan, 1.0, 0, 4)),
        (lib.FC_ERR_ORDER, (2, math.inf, 1.0, 0, 4)),
        (lib.FC_ERR_ORDER, (lib.FC_RULE_L1, 1.0, 1.0, 0, 4)),
        (lib.FC_ERR_STEP, (0, 0.5, 0.0, 0, 4)),
        (lib.FC_ERR_STEP, (0, 0.5, -2.0, 0, 4)),
        (lib.FC_ERR_STEP, (0, 0.5, math.nan, 0, 4)),
        (lib.FC_ERR_STEP, (0, 0.5, math.inf, 0, 4)),
        (lib.FC_ERR_INDEX, (0, 0.5, 1.0, 2**53 - 3, 4)),
        (lib.FC_ERR_INDEX, (0, 0.5, 1.0, 2**64 - 1, 4)),
        (lib.FC_ERR_INDEX, (0, 0.5, 1.0, 5, 2**64 - 1)),
    ]
    for status, args in cases:
        assert lib.fc_weights(*args, out) == status, args
        if args[0] == lib.FC_RULE_TRAPEZOID or args[0] == 0:
            assert lib.fc_trapezoid_start(*args[1:], out) == status, args
    assert list(out) == [7.0] * 4
    assert lib.fc_weights(0, 0.5, 1.0, 0, 4, ffi.NULL) == lib.FC_ERR_NULL
    assert lib.fc_trapezoid_start(0.5, 1.0, 0, 4, ffi.NULL) == lib.FC_ERR_NULL
    assert lib.fc_weights(0, 0.5, 1.0, 0, 0, ffi.NULL) == lib.FC_OK
    assert lib.fc_weights(lib.FC_RULE_L1, 0.999, 1.0, 2**53 - 4, 4, out) == lib.FC_OK
    assert all(x > 0 for x in out)
