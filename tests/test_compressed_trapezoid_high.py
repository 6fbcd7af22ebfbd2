"""The compressed product trapezoidal rule at 1 <= a < 2 (csrc/soe_build.c,
"CONSTRUCTION, 1 <= a < 2"; csrc/stream_compressed.c, flag tcum).

The guarantee under test is the one of every compressed stream
(csrc/stream_compressed.c, GUARANTEE), for n up to the horizon:

    |y_n(compressed) - y_n(exact)| <= (tol + 64 eps) (sum_k |c_{n-k} x_k| + |corr_n x_0|)

with c_m = h^a/Gamma(a+2) a_m and corr_n = h^a/Gamma(a+2) (A_n - a_n) the
trapezoid rule's lagged-sum form (internal.h; docs/design.md section 1).
References:
  - the lagged sum in extended precision at selected n (numpy longdouble,
    kernel from pyfracconv.weights and pyfracconv._core.trapezoid_start),
    the helpers of tests/test_compressed.py;
  - every index against the batch engine (pyfracconv.integral);
  - closed forms with mpmath at 40 digits: the impulse responses
    h^a/Gamma(a+2) A_n and h^a/Gamma(a+2) a_{n-j} with
    a_m = (m+1)^(a+1) - 2 m^(a+1) + (m-1)^(a+1), A_n = (n-1)^(a+1) -
    (n-1-a) n^a (Diethelm, Ford and Freed, Nonlinear Dynamics 29 (2002));
    and the rule's exactness on linear data, I^a 1 = t^a/Gamma(a+1),
    I^a t = t^(a+1)/Gamma(a+2) (the product trapezoidal rule interpolates
    linearly; common practice);
  - the solver against the Mittag-Leffler solution of D^a y = -y,
    y(0) = 1, y'(0) = 0, y = E_a(-t^a) (Gorenflo, Kilbas, Mainardi and
    Rogosin, Mittag-Leffler Functions, Springer 2014; series with mpmath,
    tests/solver_reference.py) and against memory='exact'.
"""

import mpmath
import numpy as np
import pytest

import pyfracconv
from pyfracconv import Stream, solve
from solver_reference import mittag_leffler
from test_compressed import EPS, check_state_behaviour, lag_form, make, reference_at

ORDERS = [1.0, 1.0000001, 1.3, 1.5, 1.9, 1.9999999]
KINDS = ["random", "positive", "alternating", "spikes"]
N = 200_000
STEP = 0.01
TOLS = (1e-10, 1e-13, 1e-15)


def data(kind, n, seed=5):
    rng = np.random.default_rng(seed)
    if kind == "random":
        return rng.standard_normal(n)
    if kind == "positive":
        return 0.1 + np.abs(rng.standard_normal(n))
    if kind == "alternating":
        return (-1.0) ** np.arange(n) * (1.0 + 0.5 * rng.random(n))
    # spikes: small noise with 1% of the samples at +-1e6
    x = 1e-3 * rng.standard_normal(n)
    at = rng.choice(n, n // 100, replace=False)
    x[at] = 1e6 * rng.choice([-1.0, 1.0], len(at))
    x[0] = 1e6  # a spike on x_0: the correction column is exercised
    return x


def indices(n, rng):
    # dense over the band and the first correction blocks (256 wide), then
    # geometric and random, and block edges further out
    dense = np.arange(0, 800)
    geo = np.unique(np.geomspace(800, n - 1, 30).astype(np.int64))
    rnd = rng.integers(800, n, 6)
    edges = np.array([1023, 1024, 1025, 65535, 65536, 65537])
    edges = edges[edges < n]
    return np.unique(np.concatenate([dense, geo, rnd, edges, [n - 1]]))


@pytest.fixture(scope="module")
def cases():
    out = {}
    idx = indices(N, np.random.default_rng(17))
    for order in ORDERS:
        for kind in KINDS:
            x = data(kind, N)
            c, u, corr = lag_form("trapezoid", order, STEP, x)
            ref, bnd = reference_at(c, u, corr, x[0], idx)
            ys = {tol: make("trapezoid", order, STEP, tol, 1e8).push_many(x) for tol in TOLS}
            out[order, kind] = dict(x=x, c=c, corr=corr, idx=idx, ref=ref, bnd=bnd, ys=ys)
    return out


@pytest.mark.parametrize("order", ORDERS)
@pytest.mark.parametrize("kind", KINDS)
@pytest.mark.parametrize("tol", TOLS)
def test_guarantee_against_extended_precision(cases, order, kind, tol):
    d = cases[order, kind]
    err = np.abs(d["ys"][tol][d["idx"]] - d["ref"])
    allowed = (tol + 64 * EPS) * d["bnd"]
    assert np.all(allowed > 0)
    worst = np.max(err / allowed)
    assert worst <= 1.0, f"a={order} {kind} tol={tol}: error/bound = {worst:.3g}"


@pytest.mark.parametrize("order", ORDERS)
@pytest.mark.parametrize("kind", ["random", "spikes"])
def test_every_index_against_batch(cases, order, kind):
    # pyfracconv.integral (the batch engine, another code path), tol 1e-10
    # plus 1e-13 for the batch engine's own rounding
    d = cases[order, kind]
    tol = 1e-10
    x = d["x"]
    exact = pyfracconv.integral(x, order, step=STEP, rule="trapezoid")
    bound = pyfracconv.lagged_sum(np.abs(x), np.abs(d["c"])) + np.abs(d["corr"] * x[0])
    worst = np.max(np.abs(d["ys"][tol] - exact) / ((tol + 1e-13) * bound + 1e-300))
    assert worst <= 1.0, f"a={order} {kind}: error/bound = {worst:.3g}"


@pytest.mark.parametrize("order", [1.0, 1.5, 1.9999999])
def test_long_horizon(order):
    # 2 * 10^6 samples, horizon 1e12 (terms sized for it), tol 1e-12
    n, tol = 2_000_000, 1e-12
    x = data("random", n, seed=23)
    rng = np.random.default_rng(29)
    idx = np.unique(
        np.concatenate(
            [
                np.arange(0, 300),
                np.geomspace(300, n - 1, 12).astype(np.int64),
                rng.integers(300, n, 3),
                [n - 1],
            ]
        )
    )
    c, u, corr = lag_form("trapezoid", order, 0.001, x)
    ref, bnd = reference_at(c, u, corr, x[0], idx)
    y = make("trapezoid", order, 0.001, tol, 1e12).push_many(x)
    worst = np.max(np.abs(y[idx] - ref) / ((tol + 64 * EPS) * bnd))
    assert worst <= 1.0, f"a={order}: error/bound = {worst:.3g}"


def _mp_a(a, m):
    if m == 0:
        return mpmath.mpf(1)
    return (m + 1) ** (a + 1) - 2 * mpmath.mpf(m) ** (a + 1) + mpmath.mpf(m - 1) ** (a + 1)


def _mp_A(a, n):
    if n == 0:
        return mpmath.mpf(0)
    return mpmath.mpf(n - 1) ** (a + 1) - (n - 1 - a) * mpmath.mpf(n) ** a


@pytest.mark.parametrize("order", [1.0, 1.0000001, 1.5, 1.9])
def test_impulse_responses_closed_form(order):
    # x = delta_0: y_n = K A_n; x = delta_j: y_n = K a_{n-j}, K = h^a/Gamma(a+2)
    # (mpmath, 40 digits); bound: the terms |c_n| + |corr_n| (delta_0), c_{n-j}
    mpmath.mp.dps = 40
    tol, n, h = 1e-13, 300_000, 0.5
    a = mpmath.mpf(order)
    K = mpmath.mpf(h) ** a / mpmath.gamma(a + 2)
    ms = [0, 1, 2, 3, 63, 64, 65, 255, 256, 257, 1000, 12345, 200001, n - 1]
    x = np.zeros(n)
    x[0] = 1.0
    y = make("trapezoid", order, h, tol, 1e6).push_many(x)
    for m in ms:
        ref = K * _mp_A(a, m)
        size = K * (abs(_mp_a(a, m)) + abs(_mp_A(a, m) - _mp_a(a, m)))
        assert abs(y[m] - float(ref)) <= (tol + 64 * EPS) * float(size), (order, m)
    j = 7
    x = np.zeros(n)
    x[j] = 1.0
    y = make("trapezoid", order, h, tol, 1e6).push_many(x)
    assert np.all(y[:j] == 0.0)
    for m in ms:
        if m < j:
            continue
        ref = float(K * _mp_a(a, m - j))
        assert abs(y[m] - ref) <= (tol + 64 * EPS) * abs(ref), (order, m)


@pytest.mark.parametrize("order", [1.0, 1.3, 1.9])
def test_linear_data_exact_integrals(order):
    # I^a 1 = t^a/Gamma(a+1), I^a t = t^(a+1)/Gamma(a+2): the product
    # trapezoidal rule is exact on linear data (common practice); mpmath
    mpmath.mp.dps = 30
    tol, n, h = 1e-13, 300_000, 1e-3
    a = mpmath.mpf(order)
    y1 = make("trapezoid", order, h, tol, 1e6).push_many(np.ones(n))
    yt = make("trapezoid", order, h, tol, 1e6).push_many(np.arange(n) * h)
    for m in [1, 2, 63, 64, 65, 256, 1000, 54321, n - 1]:
        t = mpmath.mpf(m) * h
        r1 = float(t**a / mpmath.gamma(a + 1))
        rt = float(t ** (a + 1) / mpmath.gamma(a + 2))
        # positive data and weights of one sign per column: the bound is
        # about the result itself; 1e-12 for the rounding of m h and of the
        # library's weights, which sum to the result over m terms
        assert abs(y1[m] - r1) <= (tol + 1e-12) * r1, (order, m)
        assert abs(yt[m] - rt) <= (tol + 1e-12) * rt, (order, m)


@pytest.mark.parametrize("order", [1.0, 1.6])
def test_state_behaviour(order):
    # as for the rectangle rule (test_compressed.check_state_behaviour),
    # except that history() is not the output: c_0 != 0 for the trapezoid
    check_state_behaviour("trapezoid", order, data("random", 3000, seed=21), history_is_output=False)


@pytest.mark.parametrize("order", [1.0, 1.45, 1.9999999])
def test_save_load_bit_for_bit(order):
    x = data("random", 5000, seed=9) + 3.0  # running sum grows
    s = make("trapezoid", order, 0.05, 1e-13, 1e7, channels=2)
    X = np.stack([x, x[::-1]], axis=1)
    s.push_many(X[:3000])
    t = Stream.load(s.save())
    assert t.terms == s.terms and t.count == 3000 and t.nbytes == s.nbytes
    assert t.order == order
    assert np.array_equal(s.push_many(X[3000:]), t.push_many(X[3000:]))
    for k in [0, 1, 10, 63, 64, 65, 255, 256, 257]:
        u = make("trapezoid", order, 0.05, 1e-13, 1e7)
        u.push_many(x[:k])
        v = Stream.load(u.save())
        assert np.array_equal(u.push_many(x[k:600]), v.push_many(x[k:600]))


def test_load_refuses_changed_or_truncated_blobs():
    # the blob of a trapezoid stream at a >= 1 carries x_0 per channel after
    # the running sum; a changed x_0 or a cut blob is refused (StateError),
    # an intact one continues bit for bit
    x = data("random", 40, seed=3)
    s = make("trapezoid", 1.5, 0.1, 1e-12, 1e6)
    s.push_many(x)
    blob = s.save()
    whole = make("trapezoid", 1.5, 0.1, 1e-12, 1e6).push_many(np.concatenate([x, x[:5]]))
    assert np.array_equal(Stream.load(blob).push_many(x[:5]), whole[40:])
    with pytest.raises(pyfracconv.StateError):
        Stream.load(blob[:-9])
    forged = bytearray(blob)
    forged[-16 - 8 - 1] ^= 0x01
    with pytest.raises(pyfracconv.StateError):
        Stream.load(bytes(forged))


def test_payload_of_the_older_orders_unchanged():
    # a < 1 and the rectangle rule keep the payload without the x_0 field:
    # the size differs by one double per channel only for the trapezoid at
    # a >= 1
    lo = make("trapezoid", 0.9, 0.1, 1e-12, 1e6, channels=3)
    hi = make("trapezoid", 1.1, 0.1, 1e-12, 1e6, channels=3)
    rect = make("rectangle", 1.1, 0.1, 1e-12, 1e6, channels=3)
    per_term = 8 * (3 + 2 * 3)  # q, beta, inj; S, Sc per channel
    assert len(hi.save()) - len(rect.save()) == per_term * (hi.terms - rect.terms) + 8 * 3
    assert len(lo.save()) - len(rect.save()) == per_term * (lo.terms - rect.terms)


# ------------------------------------------------------------ solver

A = 1.5
T_END, NSTEPS = 3.0, 1500


@pytest.fixture(scope="module")
def ml_reference():
    idx = np.arange(0, NSTEPS + 1, 150)
    tr = idx * (T_END / NSTEPS)
    return idx, np.array([mittag_leffler(A, 1, -(t**A)) for t in tr])


@pytest.mark.parametrize("method", ["predictor-corrector", "trapezoid"])
@pytest.mark.parametrize("tol", [1e-12, 1e-8])
def test_solver_compressed_memory(ml_reference, method, tol):
    # D^1.5 y = -y, y(0) = 1, y'(0) = 0: y = E_1.5(-t^1.5) (see module
    # docstring); budget 2e-6 as for exact memory (tests/test_solver.py),
    # and within 10 tol of exact memory (measured: below 0.07 tol)
    idx, ref = ml_reference
    h = T_END / NSTEPS
    _, ye = solve(lambda t, y: -y, 1.0, A, h, NSTEPS, dy0=0.0, method=method, memory="exact")
    res = solve(
        lambda t, y: -y, 1.0, A, h, NSTEPS, dy0=0.0, method=method, memory="compressed", tol=tol, horizon=1e4
    )
    t, yc = res
    assert yc.shape == (NSTEPS + 1,)
    assert np.max(np.abs(yc[idx] - ref)) < 2e-6
    assert np.max(np.abs(yc - ye)) <= 10 * tol


@pytest.mark.parametrize("method", ["predictor-corrector", "trapezoid"])
def test_solver_compressed_long_run_and_multi_order(method):
    # 10^5 steps, within 10 tol of exact memory; a two-component system with
    # orders 0.6 and 1.5 equals the decoupled compressed scalar runs
    tol, n, h = 1e-12, 100_000, 1e-3
    _, ye = solve(lambda t, y: -y, 1.0, A, h, n, dy0=0.0, method=method, memory="exact")
    _, yc = solve(
        lambda t, y: -y, 1.0, A, h, n, dy0=0.0, method=method, memory="compressed", tol=tol, horizon=1e6
    )
    assert np.max(np.abs(yc - ye)) <= 10 * tol
    _, Y = solve(
        lambda t, y: -y,
        [1.0, 1.0],
        [0.6, A],
        1e-2,
        2000,
        dy0=[0.0, 0.0],
        method=method,
        memory="compressed",
        tol=tol,
        horizon=1e4,
    )
    _, y06 = solve(
        lambda t, y: -y, 1.0, 0.6, 1e-2, 2000, method=method, memory="compressed", tol=tol, horizon=1e4
    )
    _, y15 = solve(
        lambda t, y: -y, 1.0, A, 1e-2, 2000, dy0=0.0, method=method, memory="compressed", tol=tol, horizon=1e4
    )
    assert np.allclose(Y[:, 0], y06, rtol=0, atol=1e-14)
    assert np.allclose(Y[:, 1], y15, rtol=0, atol=1e-14)


@pytest.mark.parametrize("order", [1.0, 1.5])
def test_past_the_horizon_continues(order):
    # horizon_policy='continue': past the horizon nothing is promised, but
    # the outputs stay finite (the x_0 correction is computed for every
    # index a stream reaches); up to the horizon, the bound against the
    # batch engine as in test_every_index_against_batch
    h, hz, n = 0.5, 100.5, 5000
    s = Stream.integral(
        order, h, rule="trapezoid", mode="compressed", tol=1e-12, horizon=hz, horizon_policy="continue"
    )
    x = data("random", n, seed=31)
    y = s.push_many(x)
    assert np.all(np.isfinite(y))
    exact = pyfracconv.integral(x, order, step=h, rule="trapezoid")
    c, u, corr = lag_form("trapezoid", order, h, x)
    bound = pyfracconv.lagged_sum(np.abs(x), np.abs(c)) + np.abs(corr * x[0])
    within = int(np.floor(hz)) + 1
    assert np.all(np.abs(y[:within] - exact[:within]) <= (1e-12 + 1e-13) * bound[:within])


@pytest.mark.parametrize("method", ["predictor-corrector", "trapezoid"])
def test_stepper_checkpoint_compressed(method):
    # a checkpoint of the stepper at a = 1.5 with compressed memory resumes
    # bit for bit, and the whole run equals solve()
    from pyfracconv.solve import Stepper

    def rhs(t, y):
        return -y

    h, n = 2e-3, 1200
    _, ref = solve(rhs, 1.0, A, h, n, dy0=0.0, method=method, memory="compressed", tol=1e-12, horizon=1e4)
    s = Stepper(rhs, 1.0, A, h, dy0=0.0, method=method, memory="compressed", tol=1e-12, horizon=1e4)
    _, y1 = s.advance(500)
    blob = s.save()
    _, y2 = s.advance(n - 500)
    r = Stepper.load(blob, rhs)
    _, z2 = r.advance(n - 500)
    assert np.array_equal(y2, z2)
    assert np.array_equal(np.concatenate([y1, y2]), ref[1:])


@pytest.mark.parametrize("first", [-0.0, 0.0, -1.5])
def test_saved_state_with_negative_zero_first_sample_loads(first):
    """x_0 = -0 gives the running sum X_0 = +0 + x_0 = +0 (IEEE 754
    round to nearest: common practice); the loader's check of x_0 against
    X_0 once refused such a stream's own saved state."""
    s = Stream.integral(1.3, 0.01, rule="trapezoid", mode="compressed", horizon=1e5)
    out = [s.push(first)]
    blob = s.save()
    t = Stream.load(blob)
    out += [s.push(1.0), s.push(2.0)]
    again = [t.push(1.0), t.push(2.0)]
    assert np.array_equal(np.array(out[1:]).view(np.int64), np.array(again).view(np.int64))
    assert t.save() == s.save()
