"""Records larger than memory: pyfracconv.records.apply_npy and the
``chunked`` command.

Exact mode is held bit for bit to an exact Stream fed the same chunks, and
to the batch functions within rounding; compressed mode to the batch
functions (exact to rounding) and to the extended-precision reference of
tests/reference.py within the compressed stream's stated bound
|y_n - exact_n| <= (tol + 64 eps) sum_k |c_{n-k} u_k| (README "Streaming",
docs/design.md section on compressed mode). For the integral rules every
weight is positive (docs/design.md section 1: b_m = (m+1)^a - m^a, a_m
a second difference of the convex m^(a+1), A_n the trapezoid's positive
starting weight; common practice: each is the integral of the positive
kernel against a nonnegative box or hat function), so sum_k |c_{n-k} x_k|
is the batch integral of |x|, which gives the bound at every index.
"""

import os
import sys
import types

import numpy as np
import pytest

import pyfracconv
from pyfracconv import Stream, cli, records
from pyfracconv._errors import ArgumentError, InputTypeError, SampleError

from reference import check_indices, rule_reference

EPS = 2.0**-52


def signal(shape, seed=0):
    """An invented test record: a slow sine plus noise (seeded)."""
    rng = np.random.default_rng(seed)
    t = np.arange(shape[0]) * 0.01
    base = np.sin(2.0 * t) + 0.3 * rng.standard_normal(shape[0])
    if len(shape) == 1:
        return base
    return base[:, None] * (1.0 + np.arange(shape[1]))[None, :] + rng.standard_normal(shape)


def save(tmp_path, name, arr):
    p = tmp_path / name
    np.save(p, arr)
    return str(p)


def stream_chunks(make, x, chunk, **kw):
    """An exact Stream fed x[i:i+chunk] in turn (what apply_npy should do)."""
    s = make(channels=None if x.ndim == 1 else x.shape[1], **kw)
    return np.concatenate(
        [s.push_many(np.ascontiguousarray(x[i : i + chunk])) for i in range(0, x.shape[0], chunk)]
    )


# ------------------------------------------------------------ exact mode


@pytest.mark.parametrize("shape", [(5000,), (4000, 3)])
@pytest.mark.parametrize("chunk", [1, 777, 4096, 10**6])
def test_exact_equals_stream_fed_same_chunks(tmp_path, shape, chunk):
    if chunk == 1 and len(shape) == 2:
        shape = (600, 3)  # one row per chunk: keep the loop short
    x = signal(shape)
    inp = save(tmp_path, "in.npy", x)
    out = str(tmp_path / "out.npy")
    summary = records.apply_npy(inp, out, "integral", 0.6, 0.01, mode="exact", chunk=chunk)
    y = np.load(out)
    want = stream_chunks(lambda **k: Stream.integral(0.6, 0.01, **k), x, chunk)
    assert y.dtype == np.float64 and y.shape == x.shape
    assert np.array_equal(y, want)  # bit for bit
    assert summary.shape == shape and summary.mode == "exact"
    assert summary.chunk == min(chunk, shape[0])
    # and the batch integral (exact to rounding): the componentwise scale is
    # the integral of |x| (positive weights, see the module docstring)
    batch = pyfracconv.integral(x, 0.6, 0.01, axis=0)
    scale = pyfracconv.integral(np.abs(x), 0.6, 0.01, axis=0)
    assert np.all(np.abs(y - batch) <= 256 * EPS * scale)


@pytest.mark.parametrize(
    "op,rule,order",
    [
        ("integral", "trapezoid", 1.3),
        ("derivative", "grunwald", 1.5),
        ("derivative", "l1", 0.4),
    ],
)
def test_exact_every_rule_unaligned_chunks(tmp_path, op, rule, order):
    x = signal((3001, 2), seed=3)
    inp = save(tmp_path, "in.npy", x)
    out = str(tmp_path / "o.npy")
    records.apply_npy(inp, out, op, order, 0.02, rule=rule, mode="exact", chunk=1000)
    make = Stream.integral if op == "integral" else Stream.derivative
    want = stream_chunks(lambda **k: make(order, 0.02, rule=rule, **k), x, 1000)
    assert np.array_equal(np.load(out), want)


def test_default_rule_is_the_first_of_each_kind(tmp_path):
    x = signal((300,))
    inp = save(tmp_path, "in.npy", x)
    out = str(tmp_path / "o.npy")
    records.apply_npy(inp, out, "derivative", 0.5, 0.1, mode="exact")
    assert np.array_equal(np.load(out), Stream.derivative(0.5, 0.1, rule="grunwald").push_many(x))
    records.apply_npy(inp, out, "integral", 0.5, 0.1, mode="exact")
    assert np.array_equal(np.load(out), Stream.integral(0.5, 0.1, rule="rectangle").push_many(x))


# ------------------------------------------------------------ compressed mode


@pytest.mark.parametrize("rule,order", [("rectangle", 0.5), ("trapezoid", 0.3), ("rectangle", 1.4)])
@pytest.mark.parametrize("shape", [(20000,), (6000, 4)])
def test_compressed_integral_within_stated_bound_of_batch(tmp_path, rule, order, shape):
    tol = 1e-9
    x = signal(shape, seed=1)
    inp = save(tmp_path, "in.npy", x)
    out = str(tmp_path / "out.npy")
    s = records.apply_npy(inp, out, "integral", order, 0.01, rule=rule, tol=tol, chunk=1234)
    y = np.load(out)
    assert s.mode == "compressed" and s.tol == tol and s.horizon == shape[0] - 1
    batch = pyfracconv.integral(x, order, 0.01, rule=rule, axis=0)
    scale = pyfracconv.integral(np.abs(x), order, 0.01, rule=rule, axis=0)
    # stated bound of the compressed stream, plus the batch's own rounding
    err = np.abs(y - batch)
    assert np.all(err <= (tol + 64 * EPS) * scale + 64 * EPS * scale)
    # the approximation is really in use: not bit for bit the exact result
    assert np.max(err) > 0
    # chunking changes nothing in compressed mode (one recursion per sample)
    out2 = str(tmp_path / "out2.npy")
    records.apply_npy(inp, out2, "integral", order, 0.01, rule=rule, tol=tol, chunk=shape[0])
    assert np.array_equal(np.load(out2), y)


@pytest.mark.parametrize("rule,order", [("grunwald", 0.7), ("l1", 0.5)])
def test_compressed_derivative_within_stated_bound_of_reference(tmp_path, rule, order):
    tol = 1e-8
    N = 5000
    x = signal((N,), seed=2)
    inp = save(tmp_path, "in.npy", x)
    out = str(tmp_path / "out.npy")
    records.apply_npy(inp, out, "derivative", order, 0.01, rule=rule, tol=tol, chunk=999)
    y = np.load(out)
    idx = check_indices(N, np.random.default_rng(5), head=300, random=60)
    ref, scale = rule_reference(rule, order, 0.01, x, idx)  # extended precision
    assert np.all(np.abs(y[idx] - ref) <= (tol + 64 * EPS) * scale + 1e-300)
    batch = pyfracconv.derivative(x, order, 0.01, rule=rule)
    assert np.all(np.abs(y[idx] - batch[idx]) <= (tol + 128 * EPS) * scale + 1e-300)


def test_compressed_with_a_longer_horizon_and_another_tol(tmp_path):
    x = signal((3000,))
    inp = save(tmp_path, "in.npy", x)
    out = str(tmp_path / "out.npy")
    s = records.apply_npy(inp, out, "integral", 0.5, 0.01, tol=1e-6, horizon=1e6)
    assert s.horizon == 1e6 and s.tol == 1e-6
    batch = pyfracconv.integral(x, 0.5, 0.01)
    scale = pyfracconv.integral(np.abs(x), 0.5, 0.01)
    assert np.all(np.abs(np.load(out) - batch) <= (1e-6 + 128 * EPS) * scale)


def test_remapping_the_files_changes_nothing(tmp_path, monkeypatch):
    """Mapped again every 4 KiB processed (the resident-memory bound)."""
    x = signal((20000, 2))
    inp = save(tmp_path, "in.npy", x)
    a, b = str(tmp_path / "a.npy"), str(tmp_path / "b.npy")
    records.apply_npy(inp, a, "integral", 0.5, 0.01, chunk=300)
    monkeypatch.setattr(records, "MAP_BUDGET", 4096)
    opened = []
    real = np.load
    monkeypatch.setattr(np, "load", lambda *a, **k: opened.append(a[0]) or real(*a, **k))
    records.apply_npy(inp, b, "integral", 0.5, 0.01, chunk=300)
    monkeypatch.undo()
    assert np.array_equal(np.load(a), np.load(b))
    assert len(opened) > 100  # the files were mapped again and again


# ------------------------------------------------------------ layouts


def test_fortran_order_integer_and_big_endian_inputs(tmp_path):
    x = np.asfortranarray((signal((2500, 3)) * 1000).astype(np.int32))
    inp = save(tmp_path, "f.npy", x)
    out = str(tmp_path / "o.npy")
    records.apply_npy(inp, out, "integral", 0.5, 0.1, mode="exact", chunk=700)
    xf = x.astype(np.float64)
    want = stream_chunks(lambda **k: Stream.integral(0.5, 0.1, **k), xf, 700)
    assert np.array_equal(np.load(out), want)
    be = save(tmp_path, "be.npy", xf.astype(">f8"))
    records.apply_npy(be, out, "integral", 0.5, 0.1, mode="exact", chunk=700)
    assert np.array_equal(np.load(out), want)


def test_one_column_2d_and_one_sample(tmp_path):
    x = signal((500, 1))
    inp = save(tmp_path, "in.npy", x)
    out = str(tmp_path / "o.npy")
    records.apply_npy(inp, out, "derivative", 0.5, 0.1, mode="exact", chunk=64)
    assert np.load(out).shape == (500, 1)
    assert np.array_equal(
        np.load(out)[:, 0], stream_chunks(lambda **k: Stream.derivative(0.5, 0.1, **k), x[:, 0], 64)
    )
    one = save(tmp_path, "one.npy", np.array([3.0]))
    # Grunwald-Letnikov at order 1: (x_0 - 0) / h (common practice)
    records.apply_npy(one, out, "derivative", 1.0, 0.5, mode="exact")
    assert np.load(out).tolist() == [6.0]


def test_pathlike_arguments(tmp_path):
    x = signal((100,))
    np.save(tmp_path / "in.npy", x)
    records.apply_npy(tmp_path / "in.npy", tmp_path / "o.npy", "integral", 0.5, 0.1, mode="exact")
    assert np.array_equal(np.load(tmp_path / "o.npy"), Stream.integral(0.5, 0.1).push_many(x))


# ------------------------------------------------------------ errors


def _files(d):
    return sorted(os.listdir(d))


BAD = [
    (dict(op="sum"), ArgumentError, "op='sum'"),
    (dict(op=None), ArgumentError, "op=None"),
    (dict(rule="grunwald"), ArgumentError, "rule='grunwald'"),
    (dict(order=-0.5), ArgumentError, "order=-0.5"),
    (dict(order="half"), InputTypeError, "order='half'"),
    (dict(step=0.0), ArgumentError, "step=0.0"),
    (dict(mode="fast"), ArgumentError, "mode='fast'"),
    (dict(tol=1.0), ArgumentError, "tol=1.0"),
    (dict(horizon=10), ArgumentError, "horizon=10"),
    (dict(horizon=0.5), ArgumentError, "horizon=0.5"),
    (dict(chunk=0), ArgumentError, "chunk=0"),
    (dict(chunk=2.5), InputTypeError, "chunk=2.5"),
    (dict(progress="yes"), InputTypeError, "progress='yes'"),
    (dict(order=2.5), ArgumentError, "order=2.5"),  # compressed trapezoid >= 2
]


@pytest.mark.parametrize("change,exc,text", BAD)
def test_bad_arguments_name_argument_and_value(tmp_path, change, exc, text):
    x = signal((1000,))
    inp = save(tmp_path, "in.npy", x)
    out = str(tmp_path / "out.npy")
    kw = dict(op="integral", order=0.5, step=0.01, rule="trapezoid")
    kw.update(change)
    op, order, step = kw.pop("op"), kw.pop("order"), kw.pop("step")
    before = _files(tmp_path)
    with pytest.raises(exc) as info:
        records.apply_npy(inp, out, op, order, step, **kw)
    assert text in str(info.value)
    assert _files(tmp_path) == before  # nothing written


def test_bad_inputs(tmp_path):
    out = str(tmp_path / "out.npy")
    cases = []
    cases.append((str(tmp_path / "missing.npy"), ArgumentError, "cannot read it"))
    (tmp_path / "empty.npy").write_bytes(b"")
    cases.append((str(tmp_path / "empty.npy"), ArgumentError, "the file is empty"))
    (tmp_path / "text.npy").write_text("1,2,3\n")
    cases.append((str(tmp_path / "text.npy"), ArgumentError, "not a readable .npy file"))
    np.savez(tmp_path / "arch.npz", a=np.ones(3))
    os.replace(tmp_path / "arch.npz", tmp_path / "arch.npy")
    cases.append((str(tmp_path / "arch.npy"), ArgumentError, "not a .npy array file"))
    cases.append((save(tmp_path, "c.npy", np.ones(4, complex)), InputTypeError, "complex128"))
    cases.append((save(tmp_path, "b.npy", np.ones(4, bool)), InputTypeError, "dtype bool"))
    cases.append(
        (save(tmp_path, "o.npy", np.array([1, "a"], dtype=object)), ArgumentError, "not a readable .npy file")
    )
    cases.append((save(tmp_path, "3d.npy", np.ones((2, 2, 2))), ArgumentError, "(2, 2, 2)"))
    cases.append((save(tmp_path, "z.npy", np.ones(0)), ArgumentError, "holds no samples"))
    cases.append((save(tmp_path, "z2.npy", np.ones((5, 0))), ArgumentError, "holds no samples"))
    cases.append((save(tmp_path, "s.npy", np.float64(1.0)), ArgumentError, "shape ()"))
    cases.append((123, InputTypeError, "in_path=123"))
    cases.append(("", ArgumentError, "in_path=''"))
    for inp, exc, text in cases:
        with pytest.raises(exc) as info:
            records.apply_npy(inp, out, "integral", 0.5, 0.01)
        msg = str(info.value)
        assert text in msg and "in_path=" in msg, (inp, msg)
        assert not os.path.exists(out)
        assert not [f for f in _files(tmp_path) if f.endswith(".tmp")]


def test_output_must_not_be_the_input(tmp_path):
    x = signal((100,))
    inp = save(tmp_path, "in.npy", x)
    raw = open(inp, "rb").read()
    others = [inp, os.path.join(str(tmp_path), ".", "in.npy")]
    os.symlink(inp, tmp_path / "link.npy")
    os.link(inp, tmp_path / "hard.npy")
    others += [str(tmp_path / "link.npy"), str(tmp_path / "hard.npy")]
    for out in others:
        with pytest.raises(ArgumentError, match="is the input file"):
            records.apply_npy(inp, out, "integral", 0.5, 0.01, mode="exact")
    assert open(inp, "rb").read() == raw


def test_output_folder_missing_or_a_folder(tmp_path):
    inp = save(tmp_path, "in.npy", signal((100,)))
    with pytest.raises(ArgumentError, match="does not exist"):
        records.apply_npy(inp, str(tmp_path / "no" / "o.npy"), "integral", 0.5, 0.01)
    (tmp_path / "dir.npy").mkdir()
    with pytest.raises(ArgumentError, match="is a folder"):
        records.apply_npy(inp, str(tmp_path / "dir.npy"), "integral", 0.5, 0.01)


def test_exact_mode_refused_when_the_history_exceeds_memory(tmp_path, monkeypatch):
    import pyfracconv._checks as checks

    inp = save(tmp_path, "in.npy", signal((10000,)))
    monkeypatch.setattr(checks, "_RAM", 100_000)  # a machine of 100 kB
    with pytest.raises(pyfracconv.OutOfMemory, match=r"mode='exact'.*compressed"):
        records.apply_npy(inp, str(tmp_path / "o.npy"), "integral", 0.5, 0.01, mode="exact")
    assert _files(tmp_path) == ["in.npy"]
    # compressed mode needs no such room
    records.apply_npy(inp, str(tmp_path / "o.npy"), "integral", 0.5, 0.01)


# ------------------------------------------------------------ atomicity


def test_nan_half_way_leaves_no_output_and_keeps_an_old_one(tmp_path):
    x = signal((5000, 2))
    x[3210, 1] = np.nan
    inp = save(tmp_path, "in.npy", x)
    out = tmp_path / "out.npy"
    out.write_bytes(b"an older result")
    with pytest.raises(SampleError, match=r"element \[3210, 1\] is nan") as info:
        records.apply_npy(inp, str(out), "integral", 0.5, 0.01, chunk=1000)
    assert "in_path=" in str(info.value) and "no output was written" in str(info.value)
    assert out.read_bytes() == b"an older result"
    assert _files(tmp_path) == ["in.npy", "out.npy"]


@pytest.mark.parametrize("fault", [OSError(28, "No space left on device"), KeyboardInterrupt()])
@pytest.mark.parametrize("mode", ["exact", "compressed"])
def test_fault_mid_run_leaves_no_output_file(tmp_path, monkeypatch, fault, mode):
    x = signal((4000,))
    inp = save(tmp_path, "in.npy", x)
    out = str(tmp_path / "out.npy")
    calls = []
    real = Stream.push_many

    def faulty(self, xs, axis=0):
        calls.append(len(xs))
        if len(calls) == 3:  # the third chunk: the temporary file is half written
            assert [f for f in _files(tmp_path) if f.endswith(".npy.tmp")]
            raise fault
        return real(self, xs, axis)

    monkeypatch.setattr(Stream, "push_many", faulty)
    with pytest.raises(type(fault)):
        records.apply_npy(inp, out, "integral", 0.5, 0.01, mode=mode, chunk=1000)
    assert len(calls) == 3
    assert not os.path.exists(out)
    assert _files(tmp_path) == ["in.npy"]  # the temporary file is gone too


def test_fault_in_rename_leaves_no_output(tmp_path, monkeypatch):
    inp = save(tmp_path, "in.npy", signal((300,)))
    out = str(tmp_path / "out.npy")

    def no_rename(a, b):
        raise OSError(5, "Input/output error")

    monkeypatch.setattr(os, "replace", no_rename)
    with pytest.raises(OSError, match="Input/output"):
        records.apply_npy(inp, out, "integral", 0.5, 0.01)
    monkeypatch.undo()
    assert _files(tmp_path) == ["in.npy"]


def test_no_room_on_the_disk_is_found_before_the_first_chunk(tmp_path, monkeypatch):
    """Writing through a mapping into a file the disk has no room for kills
    the process (SIGBUS, POSIX mmap semantics): the space is allocated
    first, so a full disk is an OSError before any chunk."""
    inp = save(tmp_path, "in.npy", signal((3000,)))
    out = str(tmp_path / "out.npy")
    pushed = []
    monkeypatch.setattr(Stream, "push_many", lambda self, xs, axis=0: pushed.append(1))

    def full(fd, offset, length):
        raise OSError(28, "No space left on device")

    monkeypatch.setattr(os, "posix_fallocate", full)
    with pytest.raises(OSError, match=r"out_path=.*out\.npy.*No space left") as info:
        records.apply_npy(inp, out, "integral", 0.5, 0.01)
    assert info.value.errno == 28
    assert pushed == []
    assert _files(tmp_path) == ["in.npy"]


def test_output_file_mode_follows_the_umask(tmp_path):
    inp = save(tmp_path, "in.npy", signal((100,)))
    old = os.umask(0o027)
    try:
        records.apply_npy(inp, str(tmp_path / "o.npy"), "integral", 0.5, 0.01)
    finally:
        os.umask(old)
    assert os.stat(tmp_path / "o.npy").st_mode & 0o777 == 0o640


# ------------------------------------------------------------ progress


def test_progress_bar_is_fed_and_changes_nothing(tmp_path, monkeypatch):
    seen = []

    class Bar:  # a stand-in with the part of tqdm's interface used
        def __init__(self, total, **kw):
            seen.append(("total", total))

        def update(self, k):
            seen.append(("update", k))

        def close(self):
            seen.append(("close", 0))

    monkeypatch.setitem(sys.modules, "tqdm", types.SimpleNamespace(tqdm=Bar))
    x = signal((2500,))
    inp = save(tmp_path, "in.npy", x)
    a, b = str(tmp_path / "a.npy"), str(tmp_path / "b.npy")
    records.apply_npy(inp, a, "integral", 0.5, 0.01, chunk=1000, progress=True)
    records.apply_npy(inp, b, "integral", 0.5, 0.01, chunk=1000)
    assert np.array_equal(np.load(a), np.load(b))
    assert seen == [("total", 2500), ("update", 1000), ("update", 1000), ("update", 500), ("close", 0)]


def test_progress_without_tqdm_says_how_to_install(tmp_path, monkeypatch):
    monkeypatch.setitem(sys.modules, "tqdm", None)  # import tqdm fails
    inp = save(tmp_path, "in.npy", signal((100,)))
    with pytest.raises(ImportError, match=r"pyfracconv\[progress\]"):
        records.apply_npy(inp, str(tmp_path / "o.npy"), "integral", 0.5, 0.01, progress=True)
    assert _files(tmp_path) == ["in.npy"]


# ------------------------------------------------------------ command line


def run(capsys, *argv):
    code = cli.main([str(a) for a in argv])
    cap = capsys.readouterr()
    return code, cap.out, cap.err


def test_cli_chunked_equals_apply_npy(tmp_path, capsys):
    x = signal((3000, 2))
    inp = save(tmp_path, "in.npy", x)
    out = str(tmp_path / "cli.npy")
    code, _, err = run(
        capsys,
        "chunked",
        "derivative",
        inp,
        "-o",
        out,
        "--order",
        "0.4",
        "--step",
        "0.01",
        "--rule",
        "l1",
        "--tol",
        "1e-10",
        "--chunk",
        "500",
    )
    assert code == 0, err
    ref = str(tmp_path / "ref.npy")
    records.apply_npy(inp, ref, "derivative", 0.4, 0.01, rule="l1", tol=1e-10, chunk=500)
    assert np.array_equal(np.load(out), np.load(ref))
    code, _, err = run(
        capsys,
        "chunked",
        "integral",
        inp,
        "-o",
        out,
        "--order",
        "0.5",
        "--step",
        "0.01",
        "--mode",
        "exact",
        "--chunk",
        "700",
    )
    assert code == 0, err
    want = stream_chunks(lambda **k: Stream.integral(0.5, 0.01, **k), x, 700)
    assert np.array_equal(np.load(out), want)


@pytest.mark.parametrize(
    "argv,text",
    [
        (["--order", "-1"], "--order -1"),
        (["--order", "x"], "--order x: not a number"),
        (["--step", "0"], "--step 0"),
        (["--rule", "l1"], "rule='l1'"),
        (["--tol", "abc"], "--tol abc: not a number"),
        (["--tol", "1"], "tol=1.0"),
        (["--horizon", "5"], "horizon=5.0: shorter than the record"),
        (["--chunk", "0"], "chunk=0"),
    ],
)
def test_cli_chunked_bad_arguments(tmp_path, capsys, argv, text):
    inp = save(tmp_path, "in.npy", signal((100,)))
    base = {"--order": "0.5", "--step": "0.01"}
    args = ["chunked", "integral", inp, "-o", str(tmp_path / "o.npy")]
    opts = dict(base)
    for k, v in zip(argv[::2], argv[1::2]):
        opts[k] = v
    for k, v in opts.items():
        args += [k, v]
    code, _, err = run(capsys, *args)
    assert code == 2
    assert text in err and err.count("\n") == 1, err
    assert _files(tmp_path) == ["in.npy"]


def test_cli_chunked_refuses_input_as_output_and_other_formats(tmp_path, capsys):
    inp = save(tmp_path, "in.npy", signal((100,)))
    raw = open(inp, "rb").read()
    code, _, err = run(capsys, "chunked", "integral", inp, "-o", inp, "--order", "0.5", "--step", "0.1")
    assert code == 2 and "is the input file" in err
    assert open(inp, "rb").read() == raw
    code, _, err = run(
        capsys, "chunked", "integral", inp, "-o", str(tmp_path / "o.csv"), "--order", "0.5", "--step", "0.1"
    )
    assert code == 2 and "o.csv" in err and ".npy files only" in err
    (tmp_path / "d.csv").write_text("1\n2\n")
    code, _, err = run(
        capsys,
        "chunked",
        "integral",
        str(tmp_path / "d.csv"),
        "-o",
        str(tmp_path / "o.npy"),
        "--order",
        "0.5",
        "--step",
        "0.1",
    )
    assert code == 2 and "d.csv" in err
    code, _, err = run(
        capsys,
        "chunked",
        "integral",
        str(tmp_path / "nope.npy"),
        "-o",
        str(tmp_path / "o.npy"),
        "--order",
        "0.5",
        "--step",
        "0.1",
    )
    assert code == 2 and "nope.npy" in err and "cannot read it" in err


def test_cli_chunked_nan_leaves_no_output(tmp_path, capsys):
    x = signal((2000,))
    x[1500] = np.inf
    inp = save(tmp_path, "in.npy", x)
    code, _, err = run(
        capsys,
        "chunked",
        "integral",
        inp,
        "-o",
        str(tmp_path / "o.npy"),
        "--order",
        "0.5",
        "--step",
        "0.1",
        "--chunk",
        "256",
    )
    assert code == 2 and "element [1500] is inf" in err
    assert _files(tmp_path) == ["in.npy"]


def test_cli_chunked_write_failures_exit_2(tmp_path, capsys, monkeypatch):
    inp = save(tmp_path, "in.npy", signal((100,)))

    def full(fd, offset, length):
        raise OSError(28, "No space left on device")

    monkeypatch.setattr(os, "posix_fallocate", full)
    code, _, err = run(
        capsys, "chunked", "integral", inp, "-o", str(tmp_path / "o.npy"), "--order", "0.5", "--step", "0.1"
    )
    assert code == 2 and "No space left on device" in err and "o.npy" in err
    monkeypatch.undo()

    def broken(a, b):
        raise OSError(5, "Input/output error")

    monkeypatch.setattr(os, "replace", broken)
    code, _, err = run(
        capsys, "chunked", "integral", inp, "-o", str(tmp_path / "o.npy"), "--order", "0.5", "--step", "0.1"
    )
    monkeypatch.undo()
    assert code == 2 and "cannot write output" in err and "Input/output error" in err
    assert _files(tmp_path) == ["in.npy"]


def test_cli_chunked_help_says_memory_and_cautions(capsys):
    code, out, _ = run(capsys, "chunked", "--help")
    assert code == 0
    text = " ".join(out.split())
    for phrase in [
        "bounded whatever the length",
        "70 bytes per sample and column",
        "no partial output",
        "must not be the input",
        "validated on the actual plant before use",
        "safe stop (emergency stop)",
    ]:
        assert phrase in text, phrase
    code, out, _ = run(capsys, "--help")
    assert "chunked" in out
