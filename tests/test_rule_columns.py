"""The engines' general starting-correction path: a rule with two columns.

The rule table (csrc/rules.c, csrc/internal.h fc__corr_col) gives each
rule a list of starting-correction columns: column j adds corr_n x_j to
y_n for n >= j, with corr_n = S_n - c_{n-j} (S the column's start
weights). Today's published rules have at most one column (the trapezoid
rule's x_0), so the path for more columns is exercised here with a
test-only row compiled in by -DFC_TEST_RULES (never in a shipped library:
the installed one has exactly the public rules, checked below): the
trapezoid rule plus a column j = 1 whose start weights are the trapezoid
weights themselves, i.e. the weight of x_1 in y_n is a_n instead of
a_{n-1}. Not a published rule; what is checked is that every engine sums
exactly the weights the table describes:

    y_0 = 0,  y_n = A_n x_0 + a_n x_1 + sum_{2<=k<=n} a_{n-k} x_k  (n >= 1)

(trapezoid weights a_m and start weights A_n in the library's own scaling,
docs/design.md "Lagged-sum form"), against a direct O(N^2) NumPy sum of
those weights: the batch engines (direct and FFT), the exact stream (push,
blocks, preview, history, save/load bit for bit, a tampered x_1 refused),
and the compressed stream, whose construction carries x_0 and whose runtime
adds the x_1 column, within its documented error bound
(|y_n - y_n(exact)| <= (tol + 64 eps) times the sum of the terms'
magnitudes; csrc/stream_compressed.c, GUARANTEE).
"""

import importlib.util
import os
import shutil
import subprocess

import numpy as np
import pytest

ROOT = os.path.dirname(os.path.dirname(os.path.abspath(__file__)))
EPS = np.finfo(float).eps


@pytest.fixture(scope="module")
def tl(tmp_path_factory):
    """(ffi, lib, rule) of the library built with the test-only row."""
    if not os.path.exists(os.path.join(ROOT, "Makefile")):
        pytest.fail("this check needs the source checkout (Makefile)")
    if shutil.which("make") is None or (shutil.which("cc") or shutil.which("gcc")) is None:
        pytest.fail("this check builds the C library: it needs make and a C compiler")
    build = tmp_path_factory.mktemp("cbuild_test_rules")
    subprocess.run(
        ["make", "-C", ROOT, f"BUILD={build}", "CFLAGS=-O2 -DFC_TEST_RULES", "lib"],
        check=True,
        capture_output=True,
        text=True,
    )
    spec = importlib.util.spec_from_file_location("setup_build", os.path.join(ROOT, "setup_build.py"))
    sb = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(sb)
    from cffi import FFI

    ffi = FFI()
    ffi.cdef(sb.read_cdef())
    lib = ffi.dlopen(str(build / "libfracconv.so"))
    n = ffi.new("int *")
    assert lib.fc_rule_count(n) == lib.FC_OK
    rule = n[0] - 1
    name, der = ffi.new("const char **"), ffi.new("int *")
    assert lib.fc_rule_info(rule, name, der) == lib.FC_OK
    assert ffi.string(name[0]) == b"test_two_columns" and der[0] == 0
    return ffi, lib, rule


def test_the_shipped_library_has_no_test_rule():
    from pyfracconv._fracconv import ffi, lib

    n = ffi.new("int *")
    assert lib.fc_rule_count(n) == lib.FC_OK and n[0] == 4
    name, der = ffi.new("const char **"), ffi.new("int *")
    names = set()
    for r in range(n[0]):
        assert lib.fc_rule_info(r, name, der) == lib.FC_OK
        names.add(ffi.string(name[0]).decode())
    assert names == {"rectangle", "trapezoid", "grunwald", "l1"}


def weights_matrix(tl, a, h, N):
    """W with y = W x: the test rule's weights, from the library's trapezoid
    weights a_m and start weights A_n, placed by hand (the direct sum)."""
    ffi, lib, _ = tl
    am = np.zeros(N)
    An = np.zeros(N)
    assert lib.fc_weights(lib.FC_RULE_TRAPEZOID, a, h, 0, N, ffi.from_buffer("double[]", am)) == lib.FC_OK
    assert lib.fc_trapezoid_start(a, h, 0, N, ffi.from_buffer("double[]", An)) == lib.FC_OK
    W = np.zeros((N, N))
    for n in range(1, N):
        W[n, : n + 1] = am[n::-1]  # a_{n-k}
        W[n, 0] = An[n]
        W[n, 1] = am[n]  # column j = 1: S_n = a_n replaces a_{n-1}
    return W


def signal(N, seed):
    rng = np.random.default_rng(seed)
    return rng.standard_normal(N) + 0.5


def close(y, W, x, rel):
    ref = W @ x
    scale = np.abs(W) @ np.abs(x)
    err = np.abs(y - ref)
    assert np.all(err <= rel * scale + 1e-300), (err / np.maximum(scale, 1e-300)).max()


@pytest.mark.parametrize("a", [0.5, 1.5])
def test_batch_engines_sum_both_columns(tl, a):
    ffi, lib, rule = tl
    N, h = 600, 0.01
    W = weights_matrix(tl, a, h, N)
    X = np.stack([signal(N, 1), signal(N, 2)])
    # direct and blocked: componentwise accurate; one full FFT: normwise
    # only (fracconv.h, fc_lagged_sum)
    for engine in (lib.FC_ENGINE_DIRECT, lib.FC_ENGINE_BLOCKED, lib.FC_ENGINE_FFT):
        Y = np.zeros_like(X)
        st = lib.fc_apply(
            ffi.NULL, rule, a, h, ffi.from_buffer("double[]", X), 2, N, engine, ffi.from_buffer("double[]", Y)
        )
        assert st == lib.FC_OK
        for s in range(2):
            assert Y[s, 0] == 0.0
            if engine == lib.FC_ENGINE_FFT:
                scale = np.abs(W) @ np.abs(X[s])
                assert np.max(np.abs(Y[s] - W @ X[s])) <= 1e-12 * np.max(scale)
            else:
                close(Y[s], W, X[s], 1e-13)
    # the second column is really applied: the trapezoid rule differs by
    # (a_n - a_{n-1}) x_1, far above rounding
    T = np.zeros(N)
    assert (
        lib.fc_apply(
            ffi.NULL,
            lib.FC_RULE_TRAPEZOID,
            a,
            h,
            ffi.from_buffer("double[]", X[0]),
            1,
            N,
            lib.FC_ENGINE_DIRECT,
            ffi.from_buffer("double[]", T),
        )
        == lib.FC_OK
    )
    assert np.max(np.abs(Y[0] - T)) > 1e-6 * np.max(np.abs(T))


def make_stream(tl, a, h, mode, tol=0.0, horizon=0.0, channels=1):
    ffi, lib, rule = tl
    out = ffi.new("fc_stream **")
    st = lib.fc_stream_create(rule, a, h, channels, mode, tol, horizon, out)
    assert st == lib.FC_OK, st
    return ffi.gc(out[0], lib.fc_stream_free)


def push(tl, s, x):
    ffi, lib, _ = tl
    x = np.ascontiguousarray(x, dtype=float)
    y = np.zeros_like(x)
    if len(x) == 0:
        return y
    st = lib.fc_stream_push_block(s, ffi.from_buffer("double[]", x), len(x), ffi.from_buffer("double[]", y))
    assert st == lib.FC_OK, st
    return y


def save(tl, s):
    ffi, lib, _ = tl
    n = ffi.new("size_t *")
    assert lib.fc_stream_save_size(s, n) == lib.FC_OK
    buf = ffi.new("unsigned char[]", n[0])
    w = ffi.new("size_t *")
    assert lib.fc_stream_save(s, buf, n[0], w) == lib.FC_OK
    return bytes(ffi.buffer(buf, w[0]))


def load(tl, blob):
    ffi, lib, _ = tl
    out = ffi.new("fc_stream **")
    st = lib.fc_stream_load(blob, len(blob), out)
    return st, (ffi.gc(out[0], lib.fc_stream_free) if st == lib.FC_OK else None)


@pytest.mark.parametrize("a", [0.5, 1.5])
def test_exact_stream_sums_both_columns(tl, a):
    ffi, lib, _ = tl
    N, h = 700, 0.01
    W = weights_matrix(tl, a, h, N)
    x = signal(N, 3)
    s = make_stream(tl, a, h, lib.FC_MODE_EXACT)
    # y_0, then x_1 arriving alone (its column's first output), then blocks
    y = np.concatenate([push(tl, s, x[:1]), push(tl, s, x[1:2]), push(tl, s, x[2:300]), push(tl, s, x[300:])])
    assert y[0] == 0.0
    close(y, W, x, 1e-13)
    # one block from the start gives the same bits
    t = make_stream(tl, a, h, lib.FC_MODE_EXACT)
    assert np.array_equal(push(tl, t, x), y)
    # preview and history at the step where x_1 arrives
    u = make_stream(tl, a, h, lib.FC_MODE_EXACT)
    push(tl, u, x[:1])
    pv, hist = np.zeros(1), np.zeros(1)
    st = lib.fc_stream_preview(u, ffi.from_buffer("double[]", x[1:2]), ffi.from_buffer("double[]", pv))
    assert st == lib.FC_OK
    assert lib.fc_stream_history(u, ffi.from_buffer("double[]", hist)) == lib.FC_OK
    assert pv[0] == y[1]
    # x_1 taken as 0: only the x_0 terms, (a_1 + (A_1 - a_1)) x_0 = A_1 x_0
    assert abs(hist[0] - W[1, 0] * x[0]) <= 4 * EPS * abs(W[1, 1] * x[0]) + 4 * EPS * abs(hist[0])


@pytest.mark.parametrize("mode_name", ["exact", "compressed"])
def test_saved_streams_keep_the_second_column(tl, mode_name):
    ffi, lib, _ = tl
    mode = lib.FC_MODE_EXACT if mode_name == "exact" else lib.FC_MODE_COMPRESSED
    a, h, N = 0.5, 0.01, 400
    x = signal(N, 4)
    ref = push(tl, make_stream(tl, a, h, mode, 1e-10, 1e4), x)
    for cut in (0, 1, 2, 150):
        s = make_stream(tl, a, h, mode, 1e-10, 1e4)
        push(tl, s, x[:cut])
        st, t = load(tl, save(tl, s))
        assert st == lib.FC_OK
        assert np.array_equal(push(tl, t, x[cut:]), ref[cut:]), cut
    # the stored x_1 is checked: a changed value is refused (the payload
    # ends with it in both engines; the common header's checksum is redone)
    s = make_stream(tl, a, h, mode, 1e-10, 1e4)
    push(tl, s, x[:150])
    blob = bytearray(save(tl, s))
    at = len(blob) - 8 - (8 if mode_name == "compressed" else 0)
    blob[at : at + 8] = np.float64(x[1] + 1.0).tobytes()
    if mode_name == "compressed":
        blob[-8:] = fnv1a(bytes(blob[80:-8])).to_bytes(8, "little")
    blob[72:80] = fnv1a(bytes(blob[:72]) + bytes(blob[80:])).to_bytes(8, "little")
    st, _ = load(tl, bytes(blob))
    if mode_name == "exact":
        assert st == lib.FC_ERR_FORMAT  # x_1 must be the stored u_1
    else:
        assert st == lib.FC_OK  # free once it has arrived (finite)
        bad = bytearray(blob)
        bad[at : at + 8] = np.float64(np.inf).tobytes()
        bad[-8:] = fnv1a(bytes(bad[80:-8])).to_bytes(8, "little")
        bad[72:80] = fnv1a(bytes(bad[:72]) + bytes(bad[80:])).to_bytes(8, "little")
        assert load(tl, bytes(bad))[0] == lib.FC_ERR_FORMAT


def fnv1a(data, h=0xCBF29CE484222325):
    """FNV-1a 64 (Fowler, Noll and Vo; the checksum of the save format,
    csrc/serial.h)."""
    for b in data:
        h = ((h ^ b) * 0x100000001B3) & 0xFFFFFFFFFFFFFFFF
    return h


@pytest.mark.parametrize("a", [0.5, 1.5])
def test_compressed_stream_sums_both_columns(tl, a):
    ffi, lib, _ = tl
    N, h, tol = 3000, 0.01, 1e-10
    W = weights_matrix(tl, a, h, N)
    x = signal(N, 5)
    s = make_stream(tl, a, h, lib.FC_MODE_COMPRESSED, tol, 1e4)
    y = np.concatenate([push(tl, s, x[:1]), push(tl, s, x[1:2]), push(tl, s, x[2:])])
    close(y, W, x, tol + 64 * EPS)
    # x_1's column is in the output (the trapezoid rule's stream differs)
    out = ffi.new("fc_stream **")
    assert (
        lib.fc_stream_create(lib.FC_RULE_TRAPEZOID, a, h, 1, lib.FC_MODE_COMPRESSED, tol, 1e4, out)
        == lib.FC_OK
    )
    t = ffi.gc(out[0], lib.fc_stream_free)
    yt = push(tl, t, x)
    assert np.max(np.abs(y - yt)) > 1e-6 * np.max(np.abs(yt))
