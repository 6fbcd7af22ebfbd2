"""pyfracconv.Controller: the fractional PID law (Podlubny, IEEE Trans.
Automatic Control 44, 1999) and the trade practice around it (Astrom and
Hagglund, Advanced PID Control, ISA 2006: setpoint weights, derivative
filter, conditional integration, bumpless transfer), checked against
hand-computed sequences with the weights written out from their closed
forms and against the batch functions (verified against mpmath in
tests/test_closed_forms.py and tests/test_weights.py)."""

import math
import struct
import warnings

import numpy as np
import pytest

import pyfracconv as pf


def make(**kw):
    args = dict(kp=1.0, ki=0.0, kd=0.0, integral_order=0.5, derivative_order=0.5, step=0.1)
    args.update(kw)
    return pf.Controller(args.pop("kp"), args.pop("ki"), args.pop("kd"), **args)


# ------------------------------------------------------------ the law


def test_hand_computed_sequence():
    # Rectangle rule I^a: y_n = h^a/Gamma(a+1) sum_{k<n} b_{n-1-k} e_k,
    # b_m = (m+1)^a - m^a; Grunwald D^mu: h^-mu sum g_{n-k} e_k, g_0 = 1,
    # g_m = g_{m-1} (1 - (mu+1)/m) (closed forms of csrc/fracconv.h's table).
    h, a, mu = 0.1, 0.5, 0.5
    kp, ki, kd = 2.0, 0.5, 0.25
    c = make(
        kp=kp,
        ki=ki,
        kd=kd,
        integral_order=a,
        derivative_order=mu,
        step=h,
        integral_rule="rectangle",
        memory="exact",
    )
    y = [0.0, 0.2, 0.5]
    e = [1.0, 0.8, 0.5]  # setpoint 1
    u = h**a / math.gamma(a + 1)
    b0, b1 = 1.0, math.sqrt(2) - 1
    g0, g1, g2 = 1.0, -0.5, -0.125  # -mu, -mu(1-mu)/2
    I = [0.0, u * b0 * e[0], u * (b1 * e[0] + b0 * e[1])]
    D = [h**-mu * g0 * e[0], h**-mu * (g1 * e[0] + g0 * e[1]), h**-mu * (g2 * e[0] + g1 * e[1] + g0 * e[2])]
    for n in range(3):
        want = kp * e[n] + ki * I[n] + kd * D[n]
        assert c.update(1.0, y[n]) == pytest.approx(want, rel=1e-14, abs=1e-15)


@pytest.mark.parametrize(
    "irule,drule,lam,mu",
    [
        ("trapezoid", "grunwald", 0.6, 0.4),
        ("rectangle", "l1", 1.3, 0.7),
        ("trapezoid", "grunwald", 1.5, 1.2),
    ],
)
def test_equals_batch_operators_exact(irule, drule, lam, mu):
    # u = Kp e + Ki I^lambda e + Kd D^mu e when no limit, filter or weight
    # is active; pf.integral/pf.derivative verified against mpmath elsewhere.
    rng = np.random.default_rng(1)
    h = 0.05
    r = rng.normal(size=400)
    y = rng.normal(size=400)
    c = make(
        kp=1.5,
        ki=0.7,
        kd=0.3,
        integral_order=lam,
        derivative_order=mu,
        step=h,
        integral_rule=irule,
        derivative_rule=drule,
        memory="exact",
    )
    u = c.update_block(r, y)
    e = r - y
    want = 1.5 * e + 0.7 * pf.integral(e, lam, h, rule=irule) + 0.3 * pf.derivative(e, mu, h, rule=drule)
    scale = np.abs(want).max()
    np.testing.assert_allclose(u, want, rtol=0, atol=1e-12 * scale)


def test_compressed_within_tolerance_of_exact():
    rng = np.random.default_rng(2)
    r, y = rng.normal(size=3000), rng.normal(size=3000)
    kw = dict(kp=1.0, ki=0.8, kd=0.2, integral_order=0.7, derivative_order=0.6, step=0.01)
    ue = make(memory="exact", **kw).update_block(r, y)
    uc = make(memory="compressed", tol=1e-9, **kw).update_block(r, y)
    # the stream promise: within tol times the sum of the term magnitudes;
    # a loose bound on those sums: 1e3 times the output scale here
    assert np.max(np.abs(uc - ue)) <= 1e-9 * 1e3 * np.abs(ue).max()


def test_block_equals_updates_and_scalar_broadcast():
    kw = dict(kp=1.0, ki=0.5, kd=0.1, output_limits=(-1, 1), rate_limit=5.0, derivative_filter=0.05)
    a, b = make(**kw), make(**kw)
    y = np.sin(np.arange(200) * 0.1)
    ub = a.update_block(0.7, y)
    us = np.array([b.update(0.7, v) for v in y])
    assert np.array_equal(ub, us)


def test_setpoint_weights_and_derivative_on_measurement():
    # b = 0.3: the proportional action sees 0.3 r - y; c = 0: derivative on
    # the measurement, so a setpoint step gives no derivative term.
    c = make(kp=2.0, kd=1.0, setpoint_weight=0.3, derivative_weight=0.0, memory="exact")
    c.update(0.0, 0.0)
    c.update(1.0, 0.0)
    t = c.terms
    assert t["proportional"] == pytest.approx(2.0 * 0.3)
    assert t["derivative"] == 0.0


def test_derivative_filter_first_order():
    # Backward Euler first-order filter, Tf = 0.2, h = 0.1 (common practice):
    # D_f[n] = (Tf D_f[n-1] + h D[n]) / (Tf + h), D Grunwald of e.
    h, tf, mu = 0.1, 0.2, 0.5
    c = make(kp=0.0, kd=1.0, derivative_filter=tf, step=h, derivative_order=mu, memory="exact")
    e = np.array([1.0, 1.0, 0.0, 2.0, 2.0])
    raw = pf.derivative(e, mu, h, rule="grunwald")
    df, want = 0.0, []
    for d in raw:
        df = (tf * df + h * d) / (tf + h)
        want.append(df)
    got = c.update_block(e, np.zeros(5))
    np.testing.assert_allclose(got, want, rtol=1e-14)


# ------------------------------------------------- limits and anti-windup


def _leave_time(anti_windup):
    c = make(kp=0.5, ki=1.0, integral_order=0.8, step=0.1, output_limits=(-1.0, 1.0), anti_windup=anti_windup)
    u = c.update_block(np.ones(300), np.zeros(300))  # e = +1
    # at or just below the limit (with anti-windup and lambda < 1 the
    # integral relaxes while 0 is pushed, so the output dips below the
    # limit and integration resumes: it hovers within 10% of it)
    assert 0.9 <= u[-1] <= 1.0 and u.max() == 1.0
    u2 = c.update_block(np.zeros(2000), np.ones(2000))  # e = -1
    below = np.flatnonzero(u2 < 0.5)
    return int(below[0]) if below.size else 10**9


def test_anti_windup_leaves_saturation_quickly():
    fast = _leave_time(True)
    slow = _leave_time(False)
    # Conditional integration: the output falls below half the limit within
    # 2 samples of the sign change; without it the wound-up integral keeps
    # it above for more than 100 samples.
    assert fast <= 2, fast
    assert slow > 100, slow  # measured: 0 and 199


def test_output_limits_hold():
    c = make(kp=10.0, ki=3.0, output_limits=(-0.5, 2.0))
    u = c.update_block(np.r_[np.ones(100), -np.ones(100)], np.zeros(200))
    assert u.max() == 2.0 and u.min() == -0.5


def test_rate_limit():
    # rate 2 per unit time, h = 0.1: at most 0.2 per sample after the first
    c = make(kp=10.0, rate_limit=2.0, step=0.1)
    c.manual(0.0)
    c.update(0.0, 0.0)
    c.automatic()
    u = c.update_block(np.ones(60), np.zeros(60))  # 10 reached at sample 50
    np.testing.assert_allclose(u[:10], 0.2 * np.arange(1, 11), rtol=1e-12)
    assert np.all(np.abs(np.diff(u)) <= 0.2 + 1e-12)
    assert u[-1] == 10.0


# ----------------------------------------------------- manual/automatic


def test_bumpless_transfer():
    c = make(kp=1.2, ki=0.8, kd=0.05, integral_order=0.7, derivative_weight=0.0, output_limits=(-5, 5))
    c.manual(0.3)
    for _ in range(100):
        assert c.update(1.0, 0.4) == 0.3
    assert c.mode == "manual"
    c.automatic()
    first = c.update(1.0, 0.4)
    # no jump at the switch: only the one-sample change of the integral
    # (Ki h^lambda/Gamma(lambda+2) e ~ 0.06 here) separates the two
    assert abs(first - 0.3) < 0.1
    # a controller without the manual period starts from Kp e = 0.72
    fresh = make(
        kp=1.2, ki=0.8, kd=0.05, integral_order=0.7, derivative_weight=0.0, output_limits=(-5, 5)
    ).update(1.0, 0.4)
    assert abs(fresh - 0.3) > 0.3


# ------------------------------------------------------------ save/load


@pytest.mark.parametrize("memory", ["compressed", "exact"])
def test_save_load_resumes_bit_for_bit(memory):
    kw = dict(
        kp=1.0,
        ki=0.6,
        kd=0.2,
        integral_order=0.6,
        derivative_order=0.4,
        output_limits=(-2, 2),
        rate_limit=8.0,
        derivative_filter=0.1,
        memory=memory,
    )
    rng = np.random.default_rng(3)
    a = make(**kw)
    a.update_block(np.ones(500), rng.normal(size=500))
    b = pf.Controller.load(a.save())
    assert b.params == a.params and b.count == a.count
    y = rng.normal(size=500)
    assert np.array_equal(a.update_block(1.0, y), b.update_block(1.0, y))


# tests/data/controller_v1_{exact,compressed}.bin: controllers saved by the
# library before its save/load moved onto the shared serializer (made by
# Controller(2.0, 0.7, 0.3, integral_order=0.6, derivative_order=0.4,
# step=0.05, output_limits=(-5, 5), rate_limit=40, derivative_filter=0.1,
# memory=..., tol=1e-10, horizon=1e6) after update_block(sp, meas) with the
# 300 samples of _legacy_inputs()): they must still load and continue like a
# controller fed the same samples.
DATA = __import__("pathlib").Path(__file__).with_name("data")


def _legacy_inputs():
    k = np.arange(300.0)
    sp = np.where(k < 40, 0.0, 1.0)
    meas = 0.8 * (1 - np.exp(-k / 60.0)) + 0.01 * np.sin(0.3 * k)
    return sp, meas


@pytest.mark.parametrize("memory", ["compressed", "exact"])
def test_controllers_saved_by_earlier_versions_still_load(memory):
    blob = (DATA / f"controller_v1_{memory}.bin").read_bytes()
    b = pf.Controller.load(blob)
    assert b.save() == blob
    a = pf.Controller(
        2.0,
        0.7,
        0.3,
        integral_order=0.6,
        derivative_order=0.4,
        step=0.05,
        output_limits=(-5.0, 5.0),
        rate_limit=40.0,
        derivative_filter=0.1,
        memory=memory,
        tol=1e-10,
        horizon=1e6,
    )
    a.update_block(*_legacy_inputs())
    assert a.save() == blob
    y = np.random.default_rng(21).normal(size=400)
    assert np.array_equal(a.update_block(1.0, y), b.update_block(1.0, y))


def _fnv(data):
    h = 1469598103934665603
    for x in data:
        h = ((h ^ x) * 1099511628211) % 2**64
    return h


def _reseal(blob):
    return blob[:-8] + struct.pack("<Q", _fnv(blob[:-8]))


def test_forged_blobs_refused():
    a = make(kp=1.0, ki=0.5, kd=0.1, output_limits=(-1, 1))
    a.update_block(np.ones(50), np.zeros(50))
    blob = a.save()
    # truncation and every single-byte flip of the controller's own part
    for n in (0, 8, 100, len(blob) - 1):
        with pytest.raises(pf.StateError):
            pf.Controller.load(blob[:n])
    for i in range(0, 256):
        bad = bytearray(blob)
        bad[i] ^= 0x40
        with pytest.raises(pf.StateError):
            pf.Controller.load(bytes(bad))

    # forged fields with a valid checksum: u_prev (double 15) outside the
    # limits, count (offset 240) not the streams' count, kp (double 0) NaN,
    # rule (offset 208) unknown
    def forge(off, fmt, value):
        b = bytearray(blob)
        struct.pack_into(fmt, b, off, value)
        return _reseal(bytes(b))

    for off, fmt, value in [
        (16 + 8 * 15, "<d", 3.0),
        (240, "<Q", 49),
        (16, "<d", math.nan),
        (208, "<I", 7),
        (16 + 8 * 17, "<d", 0.125),
    ]:
        with pytest.raises(pf.StateError):
            pf.Controller.load(forge(off, fmt, value))
    assert pf.Controller.load(_reseal(blob)).count == 50


# ------------------------------------------------------- closed loop


def test_closed_loop_on_fractional_plant_settles():
    # Plant: fractional relaxation D^(1/2) y = -y + u (zero initial state),
    # as y_n = I^(1/2)(u - y)_n by the explicit product rectangle rule.
    h = 0.01
    plant = pf.Stream.integral(0.5, h, rule="rectangle")
    c = make(kp=2.0, ki=3.0, kd=0.0, integral_order=0.8, step=h, output_limits=(0, 10))
    y, u, ys = 0.0, 0.0, []
    for n in range(3000):
        y = plant.push(u - y) if n else plant.push(0.0)
        u = c.update(1.0, y)
        ys.append(y)
    ys = np.array(ys)
    assert abs(ys[-1] - 1.0) < 0.02
    assert np.all(np.abs(ys[-500:] - 1.0) < 0.03)


def test_past_horizon_keeps_running_and_flags():
    c = make(ki=1.0, horizon=50)
    with warnings.catch_warnings(record=True) as w:
        warnings.simplefilter("always")
        u = c.update_block(np.ones(100), np.zeros(100))
    assert np.all(np.isfinite(u)) and c.count == 100 and c.past_horizon
    assert any(issubclass(x.category, pf.HorizonWarning) for x in w)


def test_refusals_leave_controller_unchanged():
    c = make(ki=0.5, kd=0.1)
    c.update(1.0, 0.0)
    before = c.save()
    with pytest.raises(pf.SampleError):
        c.update(math.nan, 0.0)
    with pytest.raises(pf.SampleError):
        c.update_block([1.0, 1.0, math.inf], [0.0, 0.0, 0.0])
    assert c.save() == before
    for kw in [
        dict(step=0),
        dict(output_limits=(1, 1)),
        dict(rate_limit=0),
        dict(derivative_filter=-1),
        dict(memory="big"),
        dict(ki=1.0, integral_order=2.5, integral_rule="trapezoid"),
        dict(kd=1.0, derivative_order=1.5),
    ]:
        with pytest.raises(pf.ArgumentError):
            make(**kw)


def _parts(blob):
    """(fixed part, integral stream bytes, derivative stream bytes) of a
    controller blob (layout in csrc/controller.c)."""
    off = 248
    ni = struct.unpack_from("<Q", blob, off)[0]
    si = blob[off + 8 : off + 8 + ni]
    off += 8 + ni
    nd = struct.unpack_from("<Q", blob, off)[0]
    sd = blob[off + 8 : off + 8 + nd]
    return blob[:248], si, sd


def _assemble(fixed, si, sd):
    body = fixed + struct.pack("<Q", len(si)) + si + struct.pack("<Q", len(sd)) + sd
    return body + struct.pack("<Q", _fnv(body))


@pytest.mark.parametrize("memory", ["compressed", "exact"])
def test_forged_embedded_streams_refused(memory):
    kw = dict(kp=1.0, ki=0.5, kd=0.1, memory=memory)
    a = make(integral_order=0.5, **kw)
    b = make(integral_order=0.6, **kw)  # another order
    short = make(integral_order=0.5, **kw)  # another count
    for c in (a, b):
        c.update_block(np.ones(50), np.zeros(50))
    short.update_block(np.ones(49), np.zeros(49))
    fa, ia, da = _parts(a.save())
    assert pf.Controller.load(_assemble(fa, ia, da)).count == 50  # reassembly is right
    _, ib, _ = _parts(b.save())
    _, ishort, dshort = _parts(short.save())
    for forged in (
        _assemble(fa, ib, da),  # integral of order 0.6
        _assemble(fa, ishort, dshort),  # streams at 49 samples
        _assemble(fa, da, ia),  # streams swapped
        _assemble(fa, b"", da),
    ):  # integral stream missing
        with pytest.raises(pf.StateError):
            pf.Controller.load(forged)


def test_anti_windup_under_the_rate_limit():
    # Static plant y = u, setpoint 5, rate limit 1 per unit time (0.1 per
    # sample): the output ramps. Without anti-windup the integral winds
    # during the ramp and the output overshoots to about 7.4; with
    # conditional integration it approaches 5 from below (measured max
    # 4.98).
    def peak(aw):
        c = make(kp=1.0, ki=2.0, integral_order=0.8, step=0.1, rate_limit=1.0, anti_windup=aw)
        c.manual(0.0)
        c.update(0.0, 0.0)
        c.automatic()
        y, top = 0.0, 0.0
        for _ in range(600):
            y = c.update(5.0, y)
            top = max(top, y)
        return top, y

    top, last = peak(True)
    assert 4.9 < top <= 5.0 and abs(last - 5.0) < 0.2
    assert peak(False)[0] > 7.0
