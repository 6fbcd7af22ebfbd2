"""The promises of exact streams, checked output by output.

1. Componentwise accuracy: the n-th output equals the rule's value to
   |error_n| <= 1e-13 * sum_k |c_{n-k} x_k| for EVERY n, for every rule at
   orders across the range the API accepts, on spikes (also just before a
   block boundary), positive and alternating data, and for user kernels
   whose size varies like a power of the lag. The reference is the direct
   sum in extended precision of tests/reference.py (weights checked against
   mpmath in test_weights.py); the bound is the one the README states.
2. Saved exact state is checked against its own samples on load: forged
   blobs with a valid checksum are refused (FC_ERR_FORMAT), and whatever a
   random mutation makes is either refused or a stream that saves back to the
   same bytes and continues as a fresh stream fed the same history.
3. In place: y == x gives the same results as separate buffers; any other
   overlap is refused with FC_ERR_ARG and changes nothing.
"""

from __future__ import annotations

import math
import struct
from fractions import Fraction

import numpy as np
import pytest
import scipy.special

from pyfracconv import Stream
from pyfracconv._fracconv import ffi, lib

from reference import check_indices, componentwise_error, lag_reference, rule_reference

BOUND = 1e-13  # the README's componentwise promise
ENV = 8  # Python envelope in front of the C state
N = 3000  # at least two FFT levels for every geometry

ORDERS = (1e-6, 0.3, 0.999, 1.5, 2.5, 5.0, 9.5, 9.99, 10.0)
RULE_CASES = (
    [("rectangle", a) for a in ORDERS]
    + [("trapezoid", a) for a in ORDERS]
    + [("grunwald", a) for a in ORDERS]
    + [("l1", a) for a in (1e-6, 0.3, 0.7, 0.999)]
)


def make_rule_stream(rule, a, h, channels):
    if rule in ("rectangle", "trapezoid"):
        return Stream.integral(a, h, rule=rule, channels=channels)
    return Stream.derivative(a, h, rule=rule, channels=channels)


def spike(n, k, v=1.0):
    x = np.zeros(n)
    x[k] = v
    return x


def signals(n, rng):
    """(channels, list of signals) groups: 3 spikes just before block
    boundaries of the 64-sample level-0 blocks and of larger levels; 2
    channels of positive and alternating data; 1 channel of a spike."""
    return [
        [spike(n, 63), spike(n, 127), spike(n, 575)],
        [0.1 + rng.random(n), (-1.0) ** np.arange(n) * (1.0 + rng.random(n))],
        [spike(n, 1023, -3.0)],
    ]


def run(stream, sigs):
    """Push the signals as channels, one block; outputs per channel."""
    if len(sigs) == 1 and stream.channels is None:
        return [np.asarray(stream.push_many(sigs[0]))]
    y = np.asarray(stream.push_many(np.stack(sigs, axis=1)))
    return [y[:, c] for c in range(len(sigs))]


@pytest.mark.parametrize("rule,a", RULE_CASES)
def test_rule_streams_are_componentwise_accurate(rule, a):
    rng = np.random.default_rng(int(a * 1000) + len(rule))
    h = 0.5
    idx = np.arange(N)
    for sigs in signals(N, rng):
        ch = None if len(sigs) == 1 else len(sigs)
        ys = run(make_rule_stream(rule, a, h, ch), sigs)
        for x, y in zip(sigs, ys):
            ref, scale = rule_reference(rule, a, h, x, idx)  # direct sum, extended precision
            err = componentwise_error(y, ref, scale)
            assert err <= BOUND, (rule, a, err)


def kernel_cases(n):
    m = np.arange(n, dtype=float)
    return {
        "(1+m)^8": (1.0 + m) ** 8,
        "(1+m)^-3": (1.0 + m) ** -3.0,
        "(1+m)^2.5": (1.0 + m) ** 2.5,
        "(1+m)^-0.4": (1.0 + m) ** -0.4,
    }


@pytest.mark.parametrize("name", list(kernel_cases(4)))
def test_power_law_kernels_are_componentwise_accurate(name):
    rng = np.random.default_rng(7)
    c = kernel_cases(N)[name]
    idx = np.arange(N)
    for sigs in signals(N, rng):
        ch = None if len(sigs) == 1 else len(sigs)
        ys = run(Stream.from_kernel(c, channels=ch), sigs)
        for x, y in zip(sigs, ys):
            ref, scale = lag_reference(x, c, idx)  # direct sum, extended precision
            assert componentwise_error(y, ref, scale) <= BOUND, name


def test_sign_changing_kernel_is_normwise_accurate():
    # zeros and sign changes: the README promises no componentwise accuracy;
    # the error stays small against the largest output scale (normwise)
    rng = np.random.default_rng(8)
    m = np.arange(N, dtype=float)
    c = np.cos(m / 7.0) / (1.0 + m)
    idx = np.arange(N)
    for sigs in signals(N, rng):
        ch = None if len(sigs) == 1 else len(sigs)
        ys = run(Stream.from_kernel(c, channels=ch), sigs)
        for x, y in zip(sigs, ys):
            ref, scale = lag_reference(x, c, idx)  # direct sum, extended precision
            assert np.max(np.abs(y - ref)) <= BOUND * np.max(scale)


def test_closed_values_after_a_spike():
    x = spike(128, 63)
    # rectangle weight b_0 = h^a / Gamma(a+1) (common practice: the product
    # rectangle rule); it is the only term of output 64
    y = Stream.integral(9.5, 1.0).push_many(x)
    assert abs(y[64] - 1.0 / math.gamma(10.5)) <= BOUND * (1.0 / scipy.special.gamma(10.5))
    assert np.all(y[:64] == 0.0)
    # a growing kernel: output 63 + m is c_m = (1+m)^8 (3^8 = 6561 at m = 2),
    # against exact integer sums in Python ints
    c = (1.0 + np.arange(128)) ** 8
    xi = [int(v) for v in rng_ints(128)]
    xi[63] += 1
    y = Stream.from_kernel(c).push_many(np.array(xi, dtype=float))
    ci = [int(v) for v in c]  # the doubles, exactly
    for n in range(128):
        exact = sum(ci[n - k] * xi[k] for k in range(n + 1))
        scale = sum(abs(ci[n - k] * xi[k]) for k in range(n + 1))
        assert abs(Fraction(float(y[n])) - exact) <= BOUND * scale, n
    y = Stream.from_kernel(c).push_many(x)
    assert y[65] == 6561.0 and 3**8 == 6561  # from memory: 3^8


def rng_ints(n):
    # small integers, zero at most places (a few isolated values)
    r = np.random.default_rng(5)
    v = np.zeros(n, dtype=int)
    v[r.integers(0, n, size=6)] = r.integers(-3, 4, size=6)
    return v


@pytest.mark.slow
def test_high_orders_at_2_to_16():
    n = 1 << 16
    rng = np.random.default_rng(11)
    idx = check_indices(n, rng)
    sigs = [spike(n, 63), spike(n, 4095), spike(n, 40000)]
    for rule, a in (
        ("rectangle", 9.5),
        ("trapezoid", 9.99),
        ("grunwald", 9.99),
        ("l1", 0.999),
        ("rectangle", 2.5),
    ):
        ys = run(make_rule_stream(rule, a, 1.0, 3), sigs)
        for x, y in zip(sigs, ys):
            ref, scale = rule_reference(rule, a, 1.0, x, idx)  # direct sum, extended precision
            assert componentwise_error(y[idx], ref, scale) <= BOUND, (rule, a)
    c = (1.0 + np.arange(n)) ** 8
    ys = run(Stream.from_kernel(c, channels=3), sigs)
    for x, y in zip(sigs, ys):
        ref, scale = lag_reference(x, c, idx)
        assert componentwise_error(y[idx], ref, scale) <= BOUND


# ---------------------------------------------------------------- saved state
# The C blob (csrc/stream.c, csrc/stream_exact.c): 80-byte header (magic, version u32, mode u32,
# kind u32, rule i32, order, step, channels u64, tol, horizon, payload size
# u64, FNV-1a 64 at 72 over bytes [0, 72) then the payload); exact payload:
# leaf u64, segments u64, n u64, klen u64, A u64, kernel[klen], xprev[C],
# x0[C], u[C][n], acc[C][A].


def fnv(data):
    # FNV-1a 64 (common practice: offset basis 0xcbf29ce484222325, prime 2^40+2^8+0xb3)
    h = 0xCBF29CE484222325
    for b in data:
        h = ((h ^ b) * 0x100000001B3) & 0xFFFFFFFFFFFFFFFF
    return h


def fix(blob):
    b = bytearray(blob)
    b[72:80] = struct.pack("<Q", fnv(bytes(b[:72]) + bytes(b[80:])))
    return bytes(b)


def c_blob(stream):
    return stream.save()[ENV:]


def c_load(blob):
    pp = ffi.new("fc_stream **")
    st = lib.fc_stream_load(ffi.from_buffer("unsigned char[]", blob), len(blob), pp)
    return st, (ffi.gc(pp[0], lib.fc_stream_free) if st == lib.FC_OK else None)


def c_save(ptr):
    sp = ffi.new("size_t *")
    assert lib.fc_stream_save_size(ptr, sp) == lib.FC_OK
    buf = ffi.new("unsigned char[]", sp[0])
    assert lib.fc_stream_save(ptr, buf, sp[0], sp) == lib.FC_OK
    return bytes(ffi.buffer(buf, sp[0]))


def c_push(ptr, x):
    x = np.ascontiguousarray(x, dtype=float)
    y = np.empty_like(x)
    cp = ffi.new("size_t *")
    lib.fc_stream_channels(ptr, cp)
    st = lib.fc_stream_push_block(
        ptr,
        ffi.from_buffer("double[]", x),
        x.size // cp[0],
        ffi.from_buffer("double[]", y, require_writable=True),
    )
    return st, y


class Layout:
    def __init__(self, blob):
        self.C = struct.unpack_from("<Q", blob, 40)[0]
        (self.leaf, self.segs, self.n, self.klen, self.A) = struct.unpack_from("<5Q", blob, 80)
        self.kernel = 120
        self.xprev = self.kernel + 8 * self.klen
        self.x0 = self.xprev + 8 * self.C
        self.u = self.x0 + 8 * self.C
        self.acc = self.u + 8 * self.C * self.n


def put(blob, off, fmt, val):
    b = bytearray(blob)
    struct.pack_into(fmt, b, off, val)
    return fix(bytes(b))


def saved(rule, a, n, channels=2, h=0.5, seed=0):
    rng = np.random.default_rng(seed)
    s = make_rule_stream(rule, a, h, channels)
    s.push_many(rng.standard_normal((n, channels)))
    return c_blob(s)


def test_genuine_blobs_load_and_resave_identically():
    for rule, a in (
        ("rectangle", 0.5),
        ("rectangle", 9.5),
        ("trapezoid", 2.5),
        ("grunwald", 9.99),
        ("l1", 0.3),
    ):
        for n in (0, 1, 63, 64, 700, 1500):
            b = saved(rule, a, n)
            st, p = c_load(b)
            assert st == lib.FC_OK and c_save(p) == b, (rule, a, n)


def refused(blob):
    return c_load(blob)[0] == lib.FC_ERR_FORMAT


def test_named_forgeries_are_refused():
    b = saved("rectangle", 0.5, 700)
    L = Layout(b)
    assert L.A > 0 and L.n == 700
    # another order or step over the kept history (frames already summed)
    assert refused(put(b, 24, "<d", 0.6))
    assert refused(put(b, 32, "<d", 0.25))
    # another rule (same order) over the kept history
    assert refused(put(b, 20, "<i", lib.FC_RULE_GRUNWALD))
    # one accumulator value one ulp off; the accumulator's length changed
    v = struct.unpack_from("<d", b, L.acc)[0]
    assert refused(put(b, L.acc, "<d", np.nextafter(v, np.inf)))
    bb = bytearray(b)
    struct.pack_into("<Q", bb, 80 + 32, L.A - 1)
    del bb[L.acc + 8 * L.A - 8 : L.acc + 8 * L.A]  # channel 0 one shorter
    del bb[len(bb) - 8 :]  # channel 1 one shorter
    bb[64:72] = struct.pack("<Q", len(bb) - 80)
    assert refused(fix(bytes(bb)))
    # a sample of a block the engine has summed already
    assert refused(put(b, L.u + 8 * 5, "<d", 1.5))
    # fields the rule does not use must be 0
    assert refused(put(b, L.xprev, "<d", 1.0))
    assert refused(put(b, L.x0 + 8, "<d", -2.0))
    # the geometry fields: another geometry the code knows, and nonsense
    assert refused(put(b, 80, "<Q", 128))
    assert refused(put(put(b, 80, "<Q", 1024), 88, "<Q", 16))
    assert refused(put(b, 80, "<Q", 65))
    # a count beyond the payload (refused before anything is allocated)
    assert refused(put(b, 80 + 16, "<Q", 1 << 60))
    # exact streams have no tolerance or horizon
    assert refused(put(b, 48, "<d", 1e-10))

    # trapezoid: x0 is the first sample (u_0), and 0 before any sample
    t = saved("trapezoid", 0.7, 100)
    T = Layout(t)
    x0 = struct.unpack_from("<d", t, T.x0)[0]
    assert x0 == struct.unpack_from("<d", t, T.u)[0]
    assert refused(put(t, T.x0, "<d", x0 + 1.0))
    assert refused(put(t, T.xprev + 8, "<d", 3.0))
    t0 = saved("trapezoid", 0.7, 0)
    assert refused(put(t0, Layout(t0).x0, "<d", 1.0))
    # L1: u_0 = 0; the previous sample is 0 before any sample
    l = saved("l1", 0.4, 100)
    Ll = Layout(l)
    assert struct.unpack_from("<d", l, Ll.u)[0] == 0.0
    assert refused(put(l, Ll.u, "<d", 0.5))
    assert refused(put(l, Ll.x0, "<d", 0.5))
    l0 = saved("l1", 0.4, 0)
    assert refused(put(l0, Layout(l0).xprev, "<d", 0.5))
    # a kernel edited under kept frames; -0.0 for a kernel stream's order
    s = Stream.from_kernel(1.0 / (1.0 + np.arange(900.0)), channels=1)
    s.push_many(np.ones((800, 1)))
    k = c_blob(s)
    K = Layout(k)
    assert refused(put(k, K.kernel + 8 * 100, "<d", 0.5))
    assert refused(put(k, 24, "<d", -0.0))


def fresh_like(blob):
    """A fresh stream of the blob's definition (rule or kernel)."""
    kind, rule = struct.unpack_from("<Ii", blob, 16)
    order, step, C = struct.unpack_from("<ddQ", blob, 24)
    L = Layout(blob)
    if kind == 1:
        k = np.frombuffer(blob, dtype="<f8", count=L.klen, offset=L.kernel)
        pp = ffi.new("fc_stream **")
        kk = np.ascontiguousarray(k, dtype=float)
        st = lib.fc_stream_create_kernel(ffi.from_buffer("double[]", kk), L.klen, C, pp)
    else:
        pp = ffi.new("fc_stream **")
        st = lib.fc_stream_create(rule, order, step, C, lib.FC_MODE_EXACT, 0.0, 0.0, pp)
    assert st == lib.FC_OK
    return ffi.gc(pp[0], lib.fc_stream_free), rule, kind, C


def test_random_mutations_are_refused_or_consistent():
    rng = np.random.default_rng(2024)
    bases = [
        saved("rectangle", 0.5, 300),
        saved("trapezoid", 2.5, 200, channels=1),
        saved("grunwald", 9.99, 600, channels=1),
        saved("l1", 0.6, 130),
        saved("rectangle", 9.5, 530, channels=1),
        saved("rectangle", 2.5, 150),
    ]
    s = Stream.from_kernel((1.0 + np.arange(150.0)) ** -1.5, channels=2)
    s.push_many(rng.standard_normal((260, 2)))
    bases.append(c_blob(s))
    accepted = refused_n = 0
    nxt = rng.standard_normal(64 * 3)
    for trial in range(6000):
        b = bytearray(bases[trial % len(bases)])
        L = Layout(bytes(b))
        how = rng.integers(0, 4)
        if how == 0:  # one random byte anywhere but the checksum
            i = int(rng.integers(0, len(b) - 8))
            i = i if i < 72 else i + 8
            b[i] = int(rng.integers(0, 256))
        elif how == 1:  # one field of the header or payload head
            off = int(rng.choice([12, 16, 20, 24, 32, 40, 48, 56, 80, 88, 96, 104, 112]))
            w = 4 if off in (12, 16, 20) else 8
            old = int.from_bytes(b[off : off + w], "little")
            new = (old + int(rng.choice([-1, 1, 2, 64, 1 << 20]))) % (1 << (8 * w))
            b[off : off + w] = new.to_bytes(w, "little")
        elif how == 2:  # one double of the state replaced
            i = int(rng.integers(120, len(b) - 7)) // 8 * 8
            struct.pack_into("<d", b, i, float(rng.choice([0.0, -0.0, 1.0, rng.standard_normal()])))
        else:  # one double nudged by an ulp
            i = int(rng.integers(120, len(b) - 7)) // 8 * 8
            v = struct.unpack_from("<d", b, i)[0]
            if math.isfinite(v):
                struct.pack_into("<d", b, i, float(np.nextafter(v, np.inf)))
        blob = fix(bytes(b))
        st, p = c_load(blob)
        if st != lib.FC_OK:
            assert st == lib.FC_ERR_FORMAT
            refused_n += 1
            continue
        accepted += 1
        assert c_save(p) == blob
        fresh, rule, kind, C = fresh_like(blob)
        if kind == 0 and rule == lib.FC_RULE_L1:
            continue  # u is not x: no history to replay
        L = Layout(blob)
        u = np.frombuffer(blob, dtype="<f8", count=C * L.n, offset=L.u).reshape(C, L.n)
        if L.n:
            assert c_push(fresh, u.T.copy())[0] == lib.FC_OK
        x = nxt[: (len(nxt) // C) * C]
        st1, y1 = c_push(p, x)
        st2, y2 = c_push(fresh, x)
        assert st1 == st2 == lib.FC_OK
        assert np.array_equal(y1, y2)
    assert accepted > 100 and refused_n > 2000


# ---------------------------------------------------------------- in place


@pytest.mark.parametrize("rule,a", [("trapezoid", 0.5), ("l1", 0.5), ("rectangle", 2.5), ("grunwald", 1.3)])
def test_push_in_place_equals_separate_buffers(rule, a):
    rng = np.random.default_rng(3)
    C, T = 3, 700
    x = rng.standard_normal((T, C))
    ref = np.asarray(make_rule_stream(rule, a, 0.5, C).push_many(x))
    s = make_rule_stream(rule, a, 0.5, C)
    buf = np.ascontiguousarray(x.copy())
    ptr = ffi.from_buffer("double[]", buf, require_writable=True)
    assert lib.fc_stream_push_block(s._s, ptr, 300, ptr) == lib.FC_OK
    one = ffi.cast("double *", ptr) + 300 * C
    for t in range(300, T):  # one step at a time, in place
        assert lib.fc_stream_push(s._s, one, one) == lib.FC_OK
        one += C
    assert np.array_equal(buf, ref)  # bit for bit
    # preview in place: what push would give, stream unchanged
    q = np.ascontiguousarray(rng.standard_normal(C))
    qq = q.copy()
    qp = ffi.from_buffer("double[]", qq, require_writable=True)
    assert lib.fc_stream_preview(s._s, qp, qp) == lib.FC_OK
    assert np.array_equal(qq, s.preview(q))


def test_partial_overlap_is_refused_and_changes_nothing():
    rng = np.random.default_rng(4)
    C = 2
    s = Stream.integral(0.5, 0.5, rule="trapezoid", channels=C)
    t = Stream.integral(0.5, 0.5, rule="trapezoid", channels=C)
    x = rng.standard_normal((50, C))
    s.push_many(x)
    t.push_many(x)
    buf = np.ascontiguousarray(rng.standard_normal(40))
    p = ffi.cast("double *", ffi.from_buffer("double[]", buf, require_writable=True))
    assert lib.fc_stream_push_block(s._s, p, 10, p + 1) == lib.FC_ERR_ARG
    assert lib.fc_stream_push_block(s._s, p + 3, 10, p) == lib.FC_ERR_ARG
    assert lib.fc_stream_push(s._s, p, p + 1) == lib.FC_ERR_ARG
    assert lib.fc_stream_preview(s._s, p + 1, p) == lib.FC_ERR_ARG
    assert s.count == 50
    # adjacent, not overlapping: fine
    assert lib.fc_stream_push_block(s._s, p, 10, p + 20) == lib.FC_OK
    ref = np.asarray(t.push_many(buf[:20].reshape(10, C)))
    assert np.array_equal(buf[20:40].reshape(10, C), ref)


# ---------------------------------------------------------------- huge samples


@pytest.mark.parametrize(
    "rule,a,h",
    [
        ("rectangle", 0.5, 1e-4),
        ("trapezoid", 0.3, 1e-4),
        ("grunwald", 0.5, 100.0),
        ("grunwald", 2.5, 100.0),
        ("l1", 0.5, 1e4),
        ("rectangle", 9.5, 1e-4),
    ],
)
def test_huge_samples_keep_the_bound(rule, a, h):
    # samples near 1e307 (a block of 64 of them sums beyond the double range)
    # whose outputs are representable (the steps keep the kernels' sums below
    # about 1): every output keeps the componentwise bound
    rng = np.random.default_rng(12)
    sign = (-1.0) ** np.arange(N) if rule == "grunwald" else 1.0
    sigs = [1e307 * (0.5 + rng.random(N)) * sign, spike(N, 127, 1.5e308), spike(N, 575, -1e307)]
    ys = run(make_rule_stream(rule, a, h, 3), sigs)
    idx = np.arange(N)
    for x, y in zip(sigs, ys):
        ref, scale = rule_reference(rule, a, h, x, idx)  # direct sum, extended precision
        assert np.all(np.isfinite(scale)) and np.max(scale) < 1.7e308
        assert componentwise_error(y, ref, scale) <= BOUND


def test_huge_kernel_values_keep_the_bound():
    rng = np.random.default_rng(13)
    c = 1e305 * (1.0 + np.arange(N)) ** -1.0  # sum ~ 9e305
    sigs = [0.5 + rng.random(N), spike(N, 63, 3.0)]
    ys = run(Stream.from_kernel(c, channels=2), sigs)
    for x, y in zip(sigs, ys):
        ref, scale = lag_reference(x, c, np.arange(N))  # direct sum, extended precision
        assert componentwise_error(y, ref, scale) <= BOUND


def c_state(ptr):
    return c_save(ptr)


@pytest.mark.parametrize("rule,a", [("rectangle", 0.5), ("grunwald", 9.99), ("trapezoid", 2.5)])
def test_output_beyond_the_double_range_refuses_the_whole_block(rule, a):
    # after x = 1.7e308 an output a step or two later overflows (common
    # practice, the rules' weights at h = 1: rectangle b_0 = 1/Gamma(1.5) > 1,
    # Grunwald g_1 = -a, trapezoid weights growing like k^(a-1))
    rng = np.random.default_rng(14)
    h = 1.0
    A = make_rule_stream(rule, a, h, 2)
    B = make_rule_stream(rule, a, h, 2)
    pre = rng.standard_normal((700, 2))
    A.push_many(pre)
    B.push_many(pre)
    blk = rng.standard_normal((600, 2))
    blk[500, 1] = 1.7e308  # y at the next step: b_0 * 1.7e308 > DBL_MAX
    x = np.ascontiguousarray(blk)
    y = np.full_like(x, 7.25)
    st = lib.fc_stream_push_block(
        A._s, ffi.from_buffer("double[]", x), 600, ffi.from_buffer("double[]", y, require_writable=True)
    )
    assert st == lib.FC_ERR_RANGE
    assert np.all(y == 7.25)  # outputs untouched
    assert A.count == 700 and c_state(A._s) == c_state(B._s)
    with pytest.raises(ValueError):
        A.push_many(blk)
    # the refused block undid its frames exactly: the streams go on alike
    nxt = rng.standard_normal((900, 2))
    assert np.array_equal(np.asarray(A.push_many(nxt)), np.asarray(B.push_many(nxt)))
    assert c_state(A._s) == c_state(B._s)


def test_history_and_preview_beyond_the_range_are_refused():
    s = Stream.integral(0.5, 4.0)  # b_0 = 4^0.5 / Gamma(1.5) ~ 2.26 (common practice)
    assert s.push(1e308) == 0.0  # y_0 of the rectangle rule is 0
    before = c_save(s._s)
    h = ffi.new("double[1]", [5.0])
    assert lib.fc_stream_history(s._s, h) == lib.FC_ERR_RANGE and h[0] == 5.0
    x = ffi.new("double[1]", [1.0])
    y = ffi.new("double[1]", [5.0])
    assert lib.fc_stream_preview(s._s, x, y) == lib.FC_ERR_RANGE and y[0] == 5.0
    assert lib.fc_stream_push(s._s, x, y) == lib.FC_ERR_RANGE and y[0] == 5.0
    assert lib.fc_stream_push1(s._s, 1.0, y) == lib.FC_ERR_RANGE and y[0] == 5.0
    assert c_save(s._s) == before


def test_state_with_overflowed_future_outputs_saves_and_loads():
    # a frame has summed an overflowing contribution for later outputs while
    # every output so far is representable: the state saves and loads (the
    # accumulator is checked bit for bit), and the next push is refused
    c = np.zeros(3000)
    c[0] = 1.0
    c[1024:] = 10.0  # 10 * 1e308 is beyond the double range
    s = Stream.from_kernel(c)
    y = s.push_many(np.r_[1e308, np.zeros(1023)])
    assert y[0] == 1e308 and np.all(y[1:] == 0.0)
    blob = c_save(s._s)
    acc = np.frombuffer(blob, dtype="<f8", offset=Layout(blob).acc)
    assert np.any(np.isinf(acc))
    st, p = c_load(blob)
    assert st == lib.FC_OK and c_save(p) == blob
    with pytest.raises(ValueError):
        s.push(0.0)
    assert s.count == 1024


# ------------------------------------------------- blobs of the fixed geometry
# tests/data/exact_v1_*.bin: exact streams saved by the library before the
# geometry was chosen per kernel (leaf 64, 8 segments for every kernel):
# rectangle rule, h = 0.5, 2 channels, 700 samples x_k = sin(0.37 k + c) +
# 0.1 (k mod 5).

DATA = __import__("pathlib").Path(__file__).with_name("data")


def legacy(order):
    return (DATA / f"exact_v1_rectangle_{order}.bin").read_bytes()


def test_blobs_of_the_fixed_geometry_still_load():
    k = np.arange(700.0)
    hist = np.stack([np.sin(0.37 * k + c) + 0.1 * (k % 5) for c in range(2)], axis=1)
    nxt = np.random.default_rng(15).standard_normal((900, 2))
    for order, geometry in ((0.5, (64, 8)), (2.5, (128, 8))):
        b = legacy(order)
        assert Layout(b).leaf == 64 and Layout(b).segs == 8
        u = np.frombuffer(b, dtype="<f8", count=1400, offset=Layout(b).u).reshape(2, 700).T
        assert np.array_equal(u, hist)
        st, p = c_load(b)
        assert st == lib.FC_OK
        again = c_save(p)
        L = Layout(again)
        assert (L.leaf, L.segs) == geometry  # the geometry the kernel implies
        if geometry == (64, 8):
            assert again == b
        st, y = c_push(p, nxt)
        assert st == lib.FC_OK
        x = np.concatenate([hist, nxt])
        idx = np.arange(700, 1600)
        for c in range(2):
            ref, scale = rule_reference("rectangle", order, 0.5, x[:, c], idx)  # direct sum
            assert componentwise_error(y.reshape(-1, 2)[:, c], ref, scale) <= BOUND
    # a blob of the fixed geometry is still checked against its samples
    b = legacy(2.5)
    L = Layout(b)
    v = struct.unpack_from("<d", b, L.acc + 8)[0]
    assert refused(put(b, L.acc + 8, "<d", np.nextafter(v, 0.0)))
    assert refused(put(b, 24, "<d", 2.4))


# ------------------------------------------- the other promises, every geometry


@pytest.mark.parametrize(
    "rule,a",
    [("rectangle", 0.5), ("rectangle", 2.5), ("trapezoid", 5.0), ("grunwald", 3.5), ("grunwald", 9.99)],
)
def test_every_geometry_is_path_independent(rule, a):
    # one block, many blocks, single pushes, and a save/load in the middle all
    # give the same outputs bit for bit (the engine depends on the samples only)
    rng = np.random.default_rng(16)
    x = rng.standard_normal((2500, 2))
    whole = np.asarray(make_rule_stream(rule, a, 0.5, 2).push_many(x))
    s = make_rule_stream(rule, a, 0.5, 2)
    parts, i = [], 0
    for n in (1, 62, 1, 700, 3, 1000):
        parts.append(np.asarray(s.push_many(x[i : i + n])))
        i += n
    t = Stream.load(s.save())
    for k in range(i, i + 40):
        p = t.preview(x[k])
        h = t.history()
        y = np.asarray(t.push(x[k]))
        assert np.array_equal(p, y)
        if rule == "grunwald":  # y = history + w0 x (fracconv.h)
            w0 = float(Stream.derivative(a, 0.5).push(1.0))
            assert np.array_equal(y, h + w0 * x[k])
        parts.append(y[None, :])
    parts.append(np.asarray(t.push_many(x[i + 40 :])))
    assert np.array_equal(np.concatenate(parts), whole)
