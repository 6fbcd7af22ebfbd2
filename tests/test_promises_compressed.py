"""The promises of the compressed stream (csrc/stream_compressed.c, fracconv.h
comment of fc_stream_create), checked through the C interface (cffi lib and
ffi) and pyfracconv.Stream:

  - the loader treats a saved blob as untrusted: forged, inconsistent or
    mutated blobs are refused with FC_ERR_FORMAT, or load as a stream that
    saves back to the same bytes and gives finite outputs;
  - the accuracy bound |err| <= (tol + 64 eps) * sum|terms| at the smallest
    and several larger tolerances, against the extended-precision direct sum
    of tests/reference.py (the rules straight from their formulas);
  - orders near the integers (and the smallest order offered);
  - finite input never gives NaN or inf: a push that would is refused with
    FC_ERR_RANGE and changes nothing;
  - the horizon policy (refuse by default, continue on request, remaining
    samples), also for a loaded stream.

Blob layout used to forge blobs (csrc/stream.c and csrc/stream_compressed.c, save
format comments): outer header of 80 bytes (magic, u32 version, u32 mode,
u32 kind, i32 rule, f64 order at 24, f64 step at 32, u64 channels at 40,
f64 tol at 48, f64 horizon at 56, u64 payload size at 64, u64 FNV-1a 64 of
bytes [0, 72) and the payload at 72), then the payload ("FCCS", u32
version, u32 rule at 8, u32 band at 12, u64 channels at 16, u64 terms at
24, u64 count at 32, f64 order, step, tol, horizon at 40..64, doubles from
72, its own FNV-1a 64 in its last 8 bytes). FNV-1a 64 (offset basis
0xcbf29ce484222325, prime 0x100000001b3) is computed here from its
published definition (Fowler, Noll, Vo; common practice).
"""

from __future__ import annotations

import math
import struct

import mpmath
import numpy as np
import pytest

import pyfracconv
from pyfracconv import Stream
from pyfracconv._fracconv import ffi, lib

from reference import check_indices, rule_reference

EPS = np.finfo(float).eps
COMP = lib.FC_MODE_COMPRESSED
RECT, TRAP, GRUN, L1 = (lib.FC_RULE_RECTANGLE, lib.FC_RULE_TRAPEZOID, lib.FC_RULE_GRUNWALD, lib.FC_RULE_L1)
RULE_NAMES = {RECT: "rectangle", TRAP: "trapezoid", GRUN: "grunwald", L1: "l1"}
HDR = 80  # outer header
PHDR = 72  # payload header
BAND = 64  # exact band of the compressed engine


# ------------------------------------------------------------ C helpers


def c_create(rule, order, step, channels, tol, horizon):
    pp = ffi.new("fc_stream **")
    st = lib.fc_stream_create(rule, order, step, channels, COMP, tol, horizon, pp)
    assert st == lib.FC_OK, st
    return ffi.gc(pp[0], lib.fc_stream_free)


def c_push(s, x):
    """Push x (count x channels); returns (status, y)."""
    x = np.ascontiguousarray(x, dtype=float)
    y = np.full_like(x, 12345.0)
    st = lib.fc_stream_push_block(
        s, ffi.from_buffer("double[]", x), x.shape[0], ffi.from_buffer("double[]", y)
    )
    return st, y


def c_count(s):
    n = ffi.new("uint64_t *")
    assert lib.fc_stream_count(s, n) == lib.FC_OK
    return int(n[0])


def c_channels(s):
    c = ffi.new("size_t *")
    assert lib.fc_stream_channels(s, c) == lib.FC_OK
    return int(c[0])


def c_remaining(s):
    r = ffi.new("uint64_t *")
    assert lib.fc_stream_remaining(s, r) == lib.FC_OK
    return int(r[0])


def c_past(s):
    f = ffi.new("int *")
    assert lib.fc_stream_past_horizon(s, f) == lib.FC_OK
    return int(f[0])


def c_policy(s):
    p = ffi.new("int *")
    assert lib.fc_stream_horizon_policy(s, p) == lib.FC_OK
    return int(p[0])


def c_save(s):
    sz = ffi.new("size_t *")
    assert lib.fc_stream_save_size(s, sz) == lib.FC_OK
    buf = ffi.new("unsigned char[]", sz[0])
    w = ffi.new("size_t *")
    assert lib.fc_stream_save(s, buf, sz[0], w) == lib.FC_OK
    return bytes(ffi.buffer(buf, w[0]))


def c_load(blob):
    """(status, stream or None); the out-parameter must stay NULL on error."""
    pp = ffi.new("fc_stream **")
    data = ffi.new("unsigned char[]", bytes(blob) or b"\0")
    st = lib.fc_stream_load(data, len(blob), pp)
    if st != lib.FC_OK:
        assert pp[0] == ffi.NULL
        return st, None
    return st, ffi.gc(pp[0], lib.fc_stream_free)


# ------------------------------------------------------------ blob surgery


def fnv1a(data, h=0xCBF29CE484222325):
    for b in data:
        h = ((h ^ b) * 0x100000001B3) & 0xFFFFFFFFFFFFFFFF
    return h


def reseal(blob):
    """Recompute both checksums: the payload's own (its last 8 bytes), then
    the outer one over bytes [0, 72) and the payload."""
    b = bytearray(blob)
    if len(b) >= HDR + 8:
        b[-8:] = struct.pack("<Q", fnv1a(b[HDR:-8]))
    if len(b) >= HDR:
        b[72:80] = struct.pack("<Q", fnv1a(b[HDR:], fnv1a(b[:72])))
    return bytes(b)


def put(blob, off, fmt, value):
    b = bytearray(blob)
    struct.pack_into("<" + fmt, b, off, value)
    return bytes(b)


def get(blob, off, fmt):
    return struct.unpack_from("<" + fmt, blob, off)[0]


def payload_layout(blob):
    """Offsets (in the whole blob) of the payload arrays."""
    C = get(blob, HDR + 16, "Q")
    L = get(blob, HDR + 24, "Q")
    o = HDR + PHDR
    lay = {"q": o, "beta": o + 8 * L, "inj": o + 16 * L, "cb": o + 24 * L}
    lay["c0"] = lay["cb"] + 8 * BAND
    lay["ctab"] = lay["c0"] + 8
    lay["chan"] = lay["ctab"] + 8 * BAND  # channel 0 starts here
    per = 8 * (BAND + 2 * L + 2)
    for c in range(C):
        base = lay["chan"] + c * per
        lay[c] = {
            "ring": base,
            "S": base + 8 * BAND,
            "Sc": base + 8 * BAND + 8 * L,
            "xprev": base + 8 * BAND + 16 * L,
            "x0": base + 8 * BAND + 16 * L + 8,
        }
    lay["C"], lay["L"] = C, L
    return lay


def saved(rule, order, C, n, tol=1e-12, horizon=3000.0, step=0.25, seed=1, scale=1.0):
    s = c_create(rule, order, step, C, tol, horizon)
    x = np.random.default_rng(seed).standard_normal((n, C)) * scale
    if n:
        st, _ = c_push(s, x)
        assert st == lib.FC_OK
    return s, c_save(s)


# Real blobs: every rule, orders below and above 1 (rectangle), one to three
# channels, counts before, at and after the exact band (64), with and without
# exponential terms (horizon < 64 or order 1: none).
BLOB_CASES = [
    (RECT, 0.4, 1, 0),
    (RECT, 0.4, 1, 10),
    (RECT, 0.4, 2, 64),
    (RECT, 0.4, 1, 65),
    (TRAP, 0.7, 2, 63),
    (TRAP, 0.7, 1, 64),
    (TRAP, 0.7, 2, 130),
    (GRUN, 0.5, 3, 1),
    (GRUN, 0.5, 1, 300),
    (L1, 0.3, 1, 1),
    (L1, 0.3, 2, 64),
    (L1, 0.3, 1, 65),
    (L1, 0.3, 1, 66),
    (RECT, 1.5, 2, 5),
    (RECT, 1.5, 1, 100),
    (RECT, 1.0, 1, 70),
]


@pytest.fixture(scope="module")
def blobs():
    out = [saved(*case, seed=i)[1] for i, case in enumerate(BLOB_CASES)]
    # band only (horizon below the band): no terms
    out.append(saved(GRUN, 0.5, 1, 20, horizon=40.0)[1])
    return out


# ------------------------------------------------------------ genuine blobs


@pytest.mark.parametrize("case", BLOB_CASES)
def test_genuine_blobs_round_trip_and_resume(case):
    # A loaded stream behaves exactly like the one that saved it: the same
    # bytes when saved again, the same outputs bit for bit afterwards (the
    # saving stream is the reference).
    s, blob = saved(*case)
    st, t = c_load(blob)
    assert st == lib.FC_OK
    assert c_save(t) == blob
    assert c_count(t) == case[3] and c_channels(t) == case[2]
    x = np.random.default_rng(99).standard_normal((200, case[2]))
    sa, ya = c_push(s, x)
    sb, yb = c_push(t, x)
    assert sa == sb == lib.FC_OK
    assert np.array_equal(ya, yb)


# ------------------------------------------------------------ forged blobs


def assert_refused(blob):
    st, t = c_load(blob)
    assert st == lib.FC_ERR_FORMAT, st


def test_forged_channel_mismatch_outer_more():
    # Outer header says 3 channels, payload 1: pushes would read and write
    # 3 channels in a 1-channel engine (the review's heap overflow).
    _, blob = saved(RECT, 0.5, 1, 100)
    assert_refused(reseal(put(blob, 40, "Q", 3)))


def test_forged_channel_mismatch_outer_less():
    _, blob = saved(RECT, 0.5, 3, 100)
    assert_refused(reseal(put(blob, 40, "Q", 1)))


def test_forged_huge_channel_count_in_small_blob():
    # 1e9 channels claimed by a blob of about 3 KB: in the outer header only,
    # in the payload only, and in both.
    _, blob = saved(GRUN, 0.5, 1, 80)
    assert len(blob) < 4096
    assert_refused(reseal(put(blob, 40, "Q", 10**9)))
    assert_refused(reseal(put(blob, HDR + 16, "Q", 10**9)))
    assert_refused(reseal(put(put(blob, 40, "Q", 10**9), HDR + 16, "Q", 10**9)))
    assert_refused(reseal(put(put(blob, 40, "Q", 2**64 - 1), HDR + 16, "Q", 2**64 - 1)))


@pytest.mark.parametrize("field", ["rule", "order", "step", "tol", "horizon"])
def test_forged_parameter_disagreement(field):
    # A defining parameter changed in the outer header only, in the payload
    # only, and in both (then the stored coefficients no longer match what
    # the parameters define).
    _, blob = saved(TRAP, 0.5, 1, 100, tol=1e-10, horizon=5000.0)
    outer = {
        "rule": (20, "i", GRUN),
        "order": (24, "d", 0.5000001),
        "step": (32, "d", 0.5),
        "tol": (48, "d", 1e-9),
        "horizon": (56, "d", 6000.0),
    }[field]
    inner = {
        "rule": (HDR + 8, "I", GRUN),
        "order": (HDR + 40, "d", 0.5000001),
        "step": (HDR + 48, "d", 0.5),
        "tol": (HDR + 56, "d", 1e-9),
        "horizon": (HDR + 64, "d", 6000.0),
    }[field]
    assert_refused(reseal(put(blob, *outer)))
    assert_refused(reseal(put(blob, *inner)))
    assert_refused(reseal(put(put(blob, *outer), *inner)))


@pytest.mark.parametrize("name", ["q", "beta", "inj", "cb", "c0", "ctab"])
def test_forged_coefficients(name):
    # Every derived array is recomputed on load and must match bit for bit:
    # scaled by 1e6 (the review's case: 0.389 -> 191.4) and moved by one ulp.
    _, blob = saved(TRAP, 0.6, 2, 100, horizon=5000.0)
    lay = payload_layout(blob)
    off = lay[name] + (8 * 3 if name in ("cb", "ctab") else 0)
    v = get(blob, off, "d")
    if v == 0.0:
        off = lay[name] + 8 * 5
        v = get(blob, off, "d")
    assert v != 0.0
    for w in (v * 1e6, float(np.nextafter(v, np.inf))):
        assert_refused(reseal(put(blob, off, "d", w)))


@pytest.mark.parametrize("count", [2**64 - 1, 2**63, 2**53])
def test_forged_sample_count(count):
    _, blob = saved(GRUN, 0.5, 1, 100)
    assert_refused(reseal(put(blob, HDR + 32, "Q", count)))


def test_forged_running_state():
    # States a push cannot produce (invariants of cs_step, see cs_state_ok
    # in csrc/stream_compressed.c).
    _, early = saved(RECT, 0.5, 1, 10)  # n < band
    lay = payload_layout(early)
    assert_refused(reseal(put(early, lay[0]["ring"] + 8 * 20, "d", 1.0)))  # unwritten slot
    assert_refused(reseal(put(early, lay[0]["S"], "d", 1.0)))  # no sample entered
    assert_refused(reseal(put(early, lay[0]["xprev"], "d", 7.0)))  # not the last sample
    assert_refused(reseal(put(early, lay[0]["x0"], "d", 7.0)))  # not the first sample
    assert_refused(reseal(put(early, HDR + 32, "Q", 0)))  # n = 0 with samples
    _, late = saved(RECT, 0.5, 1, 300)
    lay = payload_layout(late)
    S = get(late, lay[0]["S"], "d")
    assert_refused(reseal(put(late, lay[0]["Sc"], "d", abs(S))))  # not a TwoSum pair
    q = [get(late, lay["q"] + 8 * l, "d") for l in range(lay["L"])]
    big = lay[0]["S"] + 8 * int(np.argmax(q))  # |S| q > DBL_MAX / 2
    assert_refused(reseal(put(put(late, big, "d", 1.7e308), big + 8 * lay["L"], "d", 0.0)))
    assert_refused(reseal(put(late, lay[0]["ring"], "d", float("inf"))))
    assert_refused(reseal(put(late, lay[0]["ring"], "d", float("nan"))))
    _, cum = saved(RECT, 1.5, 1, 100)  # running sum X
    lay = payload_layout(cum)
    hi = get(cum, lay[0]["xprev"], "d")
    assert_refused(reseal(put(cum, lay[0]["x0"], "d", hi * 1e-10)))  # |lo| > ulp(hi)/2
    _, l1 = saved(L1, 0.5, 1, 30)
    lay = payload_layout(l1)
    assert_refused(reseal(put(l1, lay[0]["ring"], "d", 0.5)))  # u_0 = 0 for L1


def test_truncated_and_extended_blobs():
    _, blob = saved(GRUN, 0.5, 2, 100)
    for cut in [0, 1, 79, 80, 81, 100, len(blob) - 8, len(blob) - 1]:
        b = bytearray(blob[:cut])
        if len(b) >= HDR:
            b[64:72] = struct.pack("<Q", len(b) - HDR)
        assert_refused(reseal(bytes(b)) if len(b) >= HDR + 8 else bytes(b))
    for extra in [8, 8 * 186, 4096]:
        b = bytearray(blob[:-8] + bytes(extra) + blob[-8:])
        b[64:72] = struct.pack("<Q", len(b) - HDR)
        assert_refused(reseal(bytes(b)))


# ------------------------------------------------------------ fuzz

INT_FIELDS = [
    (8, "I"),
    (12, "I"),
    (16, "I"),
    (20, "i"),
    (40, "Q"),
    (64, "Q"),
    (HDR + 4, "I"),
    (HDR + 8, "I"),
    (HDR + 12, "I"),
    (HDR + 16, "Q"),
    (HDR + 24, "Q"),
    (HDR + 32, "Q"),
]
DBL_FIELDS = [24, 32, 48, 56, HDR + 40, HDR + 48, HDR + 56, HDR + 64]
INT_EXTREMES = [
    0,
    1,
    2,
    3,
    63,
    64,
    65,
    199,
    200,
    201,
    2**31 - 1,
    2**31,
    2**32 - 1,
    2**53,
    2**63,
    2**64 - 1,
    10**9,
]
DBL_EXTREMES = [
    0.0,
    -0.0,
    5e-324,
    1e-300,
    1.0,
    -1.0,
    1e308,
    -1e308,
    float("inf"),
    float("-inf"),
    float("nan"),
    1e-15,
    1e-2,
    2.0,
]


def limit(fmt, v):
    if fmt == "I":
        return v & 0xFFFFFFFF
    if fmt == "i":
        return ((v + 2**31) % 2**32) - 2**31
    return v & 0xFFFFFFFFFFFFFFFF


def mutate(blob, others, rng):
    b = bytearray(blob)
    kind = rng.integers(0, 7)
    if kind == 0:  # random bytes
        for _ in range(rng.integers(1, 5)):
            b[rng.integers(0, len(b))] ^= int(rng.integers(1, 256))
    elif kind == 1:  # header integers
        off, fmt = INT_FIELDS[rng.integers(0, len(INT_FIELDS))]
        old = get(b, off, fmt)
        v = (
            INT_EXTREMES[rng.integers(0, len(INT_EXTREMES))]
            if rng.random() < 0.7
            else old + int(rng.integers(-2, 3))
        )
        struct.pack_into("<" + fmt, b, off, limit(fmt, v))
    elif kind == 2:  # header doubles
        off = DBL_FIELDS[rng.integers(0, len(DBL_FIELDS))]
        old = get(b, off, "d")
        cands = DBL_EXTREMES + [old * 1e6, -old, float(np.nextafter(old, np.inf))]
        struct.pack_into("<d", b, off, cands[rng.integers(0, len(cands))])
    elif kind == 3:  # any payload double
        nd = (len(b) - HDR - PHDR - 8) // 8
        off = HDR + PHDR + 8 * int(rng.integers(0, nd))
        old = get(b, off, "d")
        cands = DBL_EXTREMES + [old * 1e6, -old, float(np.nextafter(old, np.inf)), old + 1.0, 0.0]
        struct.pack_into("<d", b, off, cands[rng.integers(0, len(cands))])
    elif kind == 4:  # truncate or extend
        k = 8 * int(rng.integers(1, 40))
        if rng.random() < 0.5 and len(b) - k > HDR:
            b = b[: len(b) - k - 8] + b[-8:]
        else:
            b = b[:-8] + bytearray(rng.integers(0, 256, k, dtype=np.uint8).tobytes()) + b[-8:]
        if rng.random() < 0.8:
            struct.pack_into("<Q", b, 64, len(b) - HDR)
    elif kind == 5:  # another blob's payload
        o = others[rng.integers(0, len(others))]
        b = b[:HDR] + bytearray(o[HDR:])
        if rng.random() < 0.8:
            struct.pack_into("<Q", b, 64, len(b) - HDR)
    else:  # the count
        n = get(b, HDR + 32, "Q")
        struct.pack_into("<Q", b, HDR + 32, limit("Q", n + int(rng.integers(-70, 70))))
    return reseal(bytes(b)) if rng.random() < 0.95 else bytes(b)


def test_fuzz_loader(blobs):
    # Mutated real blobs with both checksums recomputed: either refused with
    # FC_ERR_FORMAT, or a stream that saves back to the same bytes, reports
    # the channel count of both headers and gives finite outputs. Fixed seed,
    # fixed number of cases (about 10 s here).
    rng = np.random.default_rng(20240611)
    accepted = refused = 0
    for i in range(6000):
        blob = blobs[i % len(blobs)]
        b = mutate(blob, blobs, rng)
        st, t = c_load(b)
        if st != lib.FC_OK:
            assert st == lib.FC_ERR_FORMAT, (i, st)
            refused += 1
            continue
        accepted += 1
        assert c_save(t) == b, i
        C = c_channels(t)
        assert C == get(b, 40, "Q") == get(b, HDR + 16, "Q")
        x = rng.standard_normal((5, C))
        st, y = c_push(t, x)
        assert st in (lib.FC_OK, lib.FC_ERR_HORIZON, lib.FC_ERR_RANGE), (i, st)
        if st == lib.FC_OK:
            assert np.all(np.isfinite(y)), i
    # both outcomes occur (some mutations touch only the running state)
    print(f"fuzz: {accepted} accepted, {refused} refused")
    assert accepted > 50 and refused > 1000, (accepted, refused)


# ------------------------------------------------------------ accuracy

N_ACC = 12000
ACC_CASES = [
    ("rectangle", 0.3),
    ("rectangle", 0.97),
    ("rectangle", 1.5),
    ("trapezoid", 0.7),
    ("grunwald", 0.4),
    ("l1", 0.6),
]
ACC_TOLS = [1e-15, 1e-14, 1e-13, 1e-10, 1e-6]


def acc_data(kind, n, seed=17):
    rng = np.random.default_rng(seed)
    if kind == "spikes":
        x = np.zeros(n)
        k = rng.integers(0, n, 60)
        x[k] = rng.standard_normal(60) * 10.0 ** rng.integers(-3, 4, 60)
        x[0] = 1.0
        return x
    if kind == "positive":
        return 1.0 + rng.random(n)
    return (-1.0) ** np.arange(n) * (1.0 + 0.5 * rng.random(n))


def make(rule, order, step, tol, horizon, channels=None):
    f = Stream.integral if rule in ("rectangle", "trapezoid") else Stream.derivative
    return f(order, step, rule=rule, channels=channels, mode="compressed", tol=tol, horizon=horizon)


@pytest.mark.parametrize("rule,order", ACC_CASES)
@pytest.mark.parametrize("kind", ["spikes", "positive", "alternating"])
def test_accuracy_bound_every_tolerance(rule, order, kind):
    # |y_n - ref_n| <= (tol + 64 eps) sum_k |terms| (the bound stated in
    # fracconv.h), ref the direct sum of the rule's formula in extended
    # precision (tests/reference.py). At tol 1e-15 the 64 eps rounding
    # allowance dominates; measured here: at most about 10.2 eps.
    x = acc_data(kind, N_ACC)
    idx = check_indices(N_ACC, np.random.default_rng(3), head=1500, random=150)
    ref, scale = rule_reference(rule, order, 0.5, x, idx)
    for tol in ACC_TOLS:
        y = make(rule, order, 0.5, tol, N_ACC).push_many(x)[idx]
        err = np.abs(y - ref)
        allowed = (tol + 64 * EPS) * scale
        assert np.all(err[allowed == 0] == 0)
        worst = float(np.max(err[allowed > 0] / allowed[allowed > 0]))
        assert worst <= 1.0, f"{rule} a={order} {kind} tol={tol}: {worst:.3g}"


# ------------------------------------------------------------ orders

NEAR = [
    ("rectangle", 0.999999),
    ("rectangle", 1 - 1e-12),
    ("trapezoid", 0.999999),
    ("trapezoid", 1 - 1e-12),
    ("grunwald", 0.999999),
    ("grunwald", 1 - 1e-12),
    ("l1", 1e-6),
    ("l1", 1e-12),
    ("l1", 0.999999),
    ("rectangle", float(np.nextafter(1.0, 2.0))),
    ("rectangle", float(np.nextafter(2.0, 0.0))),
]


@pytest.mark.parametrize("rule,order", NEAR)
def test_near_integer_orders_accepted_and_accurate(rule, order):
    # Created at every tolerance (the review: FC_ERR_TOL at 0.999999 with
    # tol 1e-13 and at 1 - 1e-12 with any tol), and accurate to the stated
    # bound against the extended-precision direct sum (tests/reference.py).
    for tol in [1e-15, 1e-13, 1e-10, 1e-6, 1e-2]:
        for horizon in [1e4, 1e12]:
            assert make(rule, order, 1.0, tol, horizon).terms >= 0
    n = 6000
    x = acc_data("spikes", n, seed=4) + acc_data("positive", n, seed=5)
    idx = check_indices(n, np.random.default_rng(1), head=800, random=80)
    ref, scale = rule_reference(rule, order, 1.0, x, idx)
    for tol in [1e-15, 1e-13, 1e-8]:
        y = make(rule, order, 1.0, tol, n).push_many(x)[idx]
        assert np.all(np.abs(y - ref) <= (tol + 64 * EPS) * scale), (tol,)


@pytest.mark.parametrize("order", [1 - 1e-12, 0.999999])
def test_near_one_impulse_response_mpmath(order):
    # The rectangle kernel c_m = h^a/Gamma(a+1) (m^a - (m-1)^a) (fracconv.h
    # table) at 40 digits (mpmath), from the impulse response.
    mpmath.mp.dps = 40
    n, h, tol = 200_000, 0.5, 1e-13
    x = np.zeros(n)
    x[0] = 1.0
    y = make("rectangle", order, h, tol, n).push_many(x)
    a = mpmath.mpf(order)
    for m in [1, 63, 64, 65, 1000, 12345, n - 1]:
        ref = float(mpmath.mpf(h) ** a / mpmath.gamma(a + 1) * (mpmath.mpf(m) ** a - mpmath.mpf(m - 1) ** a))
        assert abs(y[m] - ref) <= (tol + 64 * EPS) * ref, m


def test_order_range_boundary():
    # Documented range (fracconv.h): 1e-280 <= order < 1 for every rule,
    # also 1 <= order < 2 for the rectangle and trapezoid rules;
    # FC_ERR_ORDER outside.
    pp = ffi.new("fc_stream **")
    for rule in (RECT, TRAP, GRUN, L1):
        for order in (1e-280, float(np.nextafter(1.0, 0.0))):
            for tol, hz in ((1e-15, 1e12), (1e-13, 9e15), (1e-2, 1.0), (1e-13, 1e8)):
                st = lib.fc_stream_create(rule, order, 1.0, 1, COMP, tol, hz, pp)
                assert st == lib.FC_OK, (rule, order, tol, hz, st)
                lib.fc_stream_free(pp[0])
        for order in (float(np.nextafter(1e-280, 0.0)), 1e-300, 5e-324):
            pp[0] = ffi.NULL
            st = lib.fc_stream_create(rule, order, 1.0, 1, COMP, 1e-10, 1e6, pp)
            assert st == lib.FC_ERR_ORDER and pp[0] == ffi.NULL, (rule, order, st)
        st = lib.fc_stream_create(rule, 1.0, 1.0, 1, COMP, 1e-10, 1e6, pp)
        assert (st == lib.FC_OK) == (rule in (RECT, TRAP))
        if st == lib.FC_OK:
            lib.fc_stream_free(pp[0])
    for rule in (RECT, TRAP):
        st = lib.fc_stream_create(rule, 2.0, 1.0, 1, COMP, 1e-10, 1e6, pp)
        assert st == lib.FC_ERR_ORDER


# ------------------------------------------------------------ range

BIG = 2.0**964  # about 3.9e290; a power of two: scaling is exact


@pytest.mark.parametrize(
    "rule,order",
    [
        ("rectangle", 0.5),
        ("rectangle", 0.999),
        ("trapezoid", 0.7),
        ("grunwald", 0.6),
        ("l1", 0.4),
        ("rectangle", 1.5),
        ("trapezoid", 1.5),
    ],
)
@pytest.mark.parametrize("horizon", [1e5, 1e15])
def test_huge_samples_accepted_when_representable(rule, order, horizon):
    # Samples of magnitude 2^964 (> 1e290) with a unit step are accepted, and
    # the outputs are exactly 2^964 times those of the unit-size samples
    # (multiplying by a power of two is exact in binary floating point,
    # barring overflow and underflow: IEEE 754, common practice), hence
    # finite.
    rng = np.random.default_rng(8)
    x = (-1.0) ** np.arange(3000) * rng.uniform(0.1, 0.25, 3000)
    k = rng.integers(0, 3000, 20)
    x[k] = rng.choice([-1.0, 1.0], 20) * rng.uniform(0.5, 1.0, 20)
    y1 = make(rule, order, 1.0, 1e-12, horizon).push_many(x)
    yb = make(rule, order, 1.0, 1e-12, horizon).push_many(x * BIG)
    assert np.all(np.isfinite(yb))
    assert np.array_equal(yb, y1 * BIG)


@pytest.mark.parametrize(
    "rule,order", [("rectangle", 0.5), ("trapezoid", 0.7), ("grunwald", 0.6), ("l1", 0.4), ("rectangle", 1.5)]
)
def test_range_refused_and_nothing_changes(rule, order):
    # The review's case: 1e305-sized samples gave NaN/inf silently. Now the
    # push (and the preview) is refused with FC_ERR_RANGE and the stream is
    # unchanged: it goes on exactly like a fresh stream fed the same samples.
    x = acc_data("alternating", 500, seed=2)
    s = make(rule, order, 1.0, 1e-12, 1e6)
    s.push_many(x[:200])
    bad = x[200:300].copy()
    bad[50] = 1e305 if rule != "l1" else 1.7e308
    bad[51] = -bad[50]
    with pytest.raises(pyfracconv.RangeError):
        s.push_many(bad)
    with pytest.raises(pyfracconv.RangeError):
        s.push(bad[51] if rule != "l1" else -1.7e308)
    with pytest.raises(pyfracconv.RangeError):
        s.preview(1e305 if rule != "l1" else -1.7e308)
    assert s.count == 200
    assert np.array_equal(s.push_many(x[200:]), make(rule, order, 1.0, 1e-12, 1e6).push_many(x)[200:])


def test_range_running_sum_order_above_one():
    # Rectangle with 1 <= a < 2 runs on the running sum X: samples that are
    # each acceptable but whose sum leaves the range are refused at the block
    # that would take X there (all of the block refused, nothing changed);
    # every accepted output is finite.
    s = c_create(RECT, 1.5, 1.0, 1, 1e-10, 1e6)
    st, y = c_push(s, np.full((10, 1), 1e306))
    assert st == lib.FC_ERR_RANGE and c_count(s) == 0 and np.all(y == 12345.0)
    st, y = c_push(s, np.full((10, 1), BIG))
    assert st == lib.FC_OK and np.all(np.isfinite(y))


# ------------------------------------------------------------ horizon


def test_horizon_refuse_remaining_continue():
    # Outputs 0 .. floor(horizon) are under the promise (fracconv.h); the
    # expected counts are floor(horizon) + 1 - count, by Python's math.floor.
    hz = 100.5
    lim = math.floor(hz) + 1
    s = c_create(GRUN, 0.5, 1.0, 2, 1e-10, hz)
    assert c_policy(s) == lib.FC_HORIZON_REFUSE
    assert c_remaining(s) == lim and c_past(s) == 0
    x = np.random.default_rng(5).standard_normal((lim + 20, 2))
    st, _ = c_push(s, x[:95])
    assert st == lib.FC_OK and c_remaining(s) == lim - 95
    st, y = c_push(s, x[95 : 95 + lim - 95 + 1])  # one past the horizon
    assert st == lib.FC_ERR_HORIZON and c_count(s) == 95 and np.all(y == 12345.0)
    st, _ = c_push(s, x[95:lim])  # exactly up to it
    assert st == lib.FC_OK and c_remaining(s) == 0 and c_past(s) == 0
    st, _ = c_push(s, x[lim : lim + 1])
    assert st == lib.FC_ERR_HORIZON and c_count(s) == lim
    assert lib.fc_stream_set_horizon_policy(s, 7) == lib.FC_ERR_ARG
    assert c_policy(s) == lib.FC_HORIZON_REFUSE
    assert lib.fc_stream_set_horizon_policy(s, lib.FC_HORIZON_CONTINUE) == lib.FC_OK
    st, y = c_push(s, x[lim : lim + 5])
    assert st == lib.FC_OK and np.all(np.isfinite(y))
    assert c_remaining(s) == 0 and c_past(s) == 1 and c_count(s) == lim + 5


def test_horizon_push1():
    s = c_create(RECT, 0.5, 1.0, 1, 1e-10, 3.0)
    y = ffi.new("double *", 12345.0)
    for _ in range(4):
        assert lib.fc_stream_push1(s, 1.0, y) == lib.FC_OK
    y[0] = 12345.0
    assert lib.fc_stream_push1(s, 1.0, y) == lib.FC_ERR_HORIZON
    assert y[0] == 12345.0 and c_count(s) == 4 and c_remaining(s) == 0


def test_loaded_stream_refuses_by_default():
    # The policy is not saved: a stream pushed past its horizon with
    # FC_HORIZON_CONTINUE loads (its count is beyond the horizon) and refuses
    # the next push until the policy is set again.
    s = c_create(L1, 0.5, 1.0, 1, 1e-10, 80.0)
    assert lib.fc_stream_set_horizon_policy(s, lib.FC_HORIZON_CONTINUE) == lib.FC_OK
    x = np.random.default_rng(6).standard_normal((120, 1))
    assert c_push(s, x[:100])[0] == lib.FC_OK
    st, t = c_load(c_save(s))
    assert st == lib.FC_OK and c_count(t) == 100
    assert c_policy(t) == lib.FC_HORIZON_REFUSE and c_remaining(t) == 0
    st, _ = c_push(t, x[100:101])
    assert st == lib.FC_ERR_HORIZON and c_count(t) == 100
    assert lib.fc_stream_set_horizon_policy(t, lib.FC_HORIZON_CONTINUE) == lib.FC_OK
    ya = c_push(s, x[100:])
    yb = c_push(t, x[100:])
    assert ya[0] == yb[0] == lib.FC_OK and np.array_equal(ya[1], yb[1])
    # saved before the horizon: the remaining count survives the round trip
    u = c_create(L1, 0.5, 1.0, 1, 1e-10, 80.0)
    assert c_push(u, x[:30])[0] == lib.FC_OK
    st, v = c_load(c_save(u))
    assert st == lib.FC_OK and c_remaining(v) == 81 - 30 and c_policy(v) == 0


def test_count_limit_two_to_the_53():
    # A consistent state with count 2^53 - 1 loads (the same ring slot holds
    # the last sample: count changed by a multiple of the band); the next
    # push would reach 2^53, the loader's bound, and is refused with
    # FC_ERR_SIZE even with FC_HORIZON_CONTINUE, changing nothing.
    _, blob = saved(GRUN, 0.5, 1, 2**53 % BAND + BAND - 1)
    forged = reseal(put(blob, HDR + 32, "Q", 2**53 - 1))
    st, t = c_load(forged)
    assert st == lib.FC_OK and c_count(t) == 2**53 - 1
    assert lib.fc_stream_set_horizon_policy(t, lib.FC_HORIZON_CONTINUE) == lib.FC_OK
    st, y = c_push(t, np.ones((1, 1)))
    assert st == lib.FC_ERR_SIZE and np.all(y == 12345.0)
    assert c_save(t) == forged
