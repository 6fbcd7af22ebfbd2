"""The solver's refusals and failures: bad arguments named before any work,
a right-hand side that raises or misbehaves, Newton's method failing,
the horizon, progress bars, and checkpoints (save/load bit for bit, forged
data refused)."""

import pathlib
import struct
import subprocess
import sys
import types

import numpy as np
import pytest

import pyfracconv
from pyfracconv import (
    ArgumentError,
    HorizonError,
    InputTypeError,
    NewtonError,
    RhsError,
    StateError,
    Stepper,
    solve,
)
from solver_reference import implicit_rectangle_loop

DATA = pathlib.Path(__file__).with_name("data")


class Counting:
    def __init__(self, fn=lambda t, y: -y):
        self.fn = fn
        self.calls = 0

    def __call__(self, t, y):
        self.calls += 1
        return self.fn(t, y)


# ------------------------------------------------------------ arguments


@pytest.mark.parametrize(
    "kwargs,cls,words",
    [
        (dict(order=0.0), ArgumentError, ["order=0.0", "(0, 2]"]),
        (dict(order=-1), ArgumentError, ["order=-1.0"]),
        (dict(order=2.5), ArgumentError, ["order=2.5"]),
        (dict(order=float("nan")), ArgumentError, ["order=nan"]),
        (dict(order="half"), InputTypeError, ["order"]),
        (dict(order=[0.5, 0.5]), ArgumentError, ["order", "2 values for 1 components"]),
        (dict(step=0.0), ArgumentError, ["step=0.0"]),
        (dict(step=float("inf")), ArgumentError, ["step=inf"]),
        (dict(n_steps=-1), ArgumentError, ["n_steps=-1"]),
        (dict(n_steps=2.5), InputTypeError, ["n_steps=2.5"]),
        (dict(method="euler"), ArgumentError, ["method='euler'", "predictor-corrector"]),
        (dict(memory="small"), ArgumentError, ["memory='small'"]),
        (dict(y0=[[1.0]]), ArgumentError, ["y0", "shape (1, 1)"]),
        (dict(y0=[]), ArgumentError, ["y0", "empty"]),
        (dict(y0=float("nan")), ArgumentError, ["y0=nan"]),
        (dict(order=1.5), ArgumentError, ["dy0=None", "order=1.5"]),
        (dict(dy0=1.0), ArgumentError, ["dy0=1.0", "<= 1"]),
        (dict(corrections=0), ArgumentError, ["corrections=0"]),
        (dict(corrections=3, method="rectangle"), ArgumentError, ["corrections=3", "predictor-corrector"]),
        (dict(jacobian=lambda t, y: -1.0), ArgumentError, ["jacobian", "implicit"]),
        (dict(jacobian=3, method="trapezoid"), InputTypeError, ["jacobian=3"]),
        (
            dict(memory="compressed", order=2.0, dy0=0.0),
            ArgumentError,
            ["order=2.0", "method='predictor-corrector'", "compressed"],
        ),
        (
            dict(memory="compressed", order=2.0, dy0=0.0, method="trapezoid"),
            ArgumentError,
            ["order=2.0", "method='trapezoid'"],
        ),
        (
            dict(memory="compressed", order=2.0, dy0=0.0, method="rectangle"),
            ArgumentError,
            ["order=2.0", "< 2"],
        ),
        (
            dict(memory="compressed", method="implicit-rectangle", order=1e-17),
            ArgumentError,
            ["order=1e-17", "implicit-rectangle", "L1 rule of order 1 - a", "exact"],
        ),
        (
            dict(memory="compressed", method="implicit-rectangle", order=2.0, dy0=0.0),
            ArgumentError,
            ["order=2.0", "implicit-rectangle", "< 2"],
        ),
        (dict(memory="compressed", tol=1e-20), ArgumentError, ["tol=1e-20"]),
        (dict(memory="compressed", horizon=0.5), ArgumentError, ["horizon=0.5"]),
        (dict(progress="yes"), InputTypeError, ["progress='yes'"]),
        (dict(newton_tol=1.0, method="trapezoid"), ArgumentError, ["newton_tol=1.0"]),
        (dict(newton_maxiter=0, method="trapezoid"), ArgumentError, ["newton_maxiter=0"]),
        (dict(t0=float("inf")), ArgumentError, ["t0=inf"]),
    ],
)
def test_bad_arguments_named_before_any_work(kwargs, cls, words):
    rhs = Counting()
    args = dict(y0=1.0, order=0.5, step=0.1, n_steps=10)
    args.update(kwargs)
    y0, order, step, n = args.pop("y0"), args.pop("order"), args.pop("step"), args.pop("n_steps")
    with pytest.raises(cls) as info:
        solve(rhs, y0, order, step, n, **args)
    for w in words:
        assert w in str(info.value), str(info.value)
    assert rhs.calls == 0


def test_rhs_not_callable():
    with pytest.raises(InputTypeError, match="rhs"):
        solve(3.0, 1.0, 0.5, 0.1, 10)


def test_vector_shape_mismatches_named():
    with pytest.raises(ArgumentError, match=r"dy0: 3 values for 2 components"):
        solve(lambda t, y: -y, [1.0, 1.0], [0.5, 1.5], 0.1, 10, dy0=[0, 0, 0])
    with pytest.raises(ArgumentError, match=r"order\[1\]=3.0"):
        solve(lambda t, y: -y, [1.0, 1.0], [0.5, 3.0], 0.1, 10)
    with pytest.raises(ArgumentError, match=r"dy0\[0\]=1.0"):
        solve(lambda t, y: -y, [1.0, 1.0], [0.5, 1.5], 0.1, 10, dy0=[1.0, 0.0])


def test_stepper_needs_horizon_for_compressed_memory_only():
    with pytest.raises(ArgumentError, match="horizon=None"):
        Stepper(lambda t, y: -y, 1.0, 0.5, 0.1, memory="compressed")
    # exact memory has no horizon, the implicit rectangle rule's included
    st = Stepper(lambda t, y: -y, 1.0, 0.5, 0.1, method="implicit-rectangle")
    st.advance(300)
    assert st.steps == 300


# ------------------------------------------------------------ rhs faults


def _good_run(n):
    return solve(lambda t, y: -y, 1.0, 0.5, 0.01, n)


def test_rhs_raising_stops_with_partial_solution():
    def rhs(t, y):
        if t > 0.305:
            raise ZeroDivisionError("invented failure")
        return -y

    with pytest.raises(RhsError) as info:
        solve(rhs, 1.0, 0.5, 0.01, 100)
    e = info.value
    assert e.step == 31 and e.time == pytest.approx(0.31, abs=1e-15)
    assert "step 31" in str(e) and "ZeroDivisionError" in str(e) and "invented failure" in str(e)
    assert isinstance(e.__cause__, ZeroDivisionError)
    good = _good_run(30)
    # the partial solution is the solution up to step 30, bit for bit
    assert np.array_equal(e.partial.t, good.t) and np.array_equal(e.partial.y, good.y)


def test_rhs_raising_at_t0():
    def rhs(t, y):
        raise ValueError("no")

    with pytest.raises(RhsError) as info:
        solve(rhs, 1.0, 0.5, 0.01, 10)
    assert info.value.step == 0 and info.value.time == 0.0
    assert info.value.partial.t.shape == (1,) and info.value.partial.y[0] == 1.0


@pytest.mark.parametrize(
    "bad,words",
    [
        (lambda t, y: np.array([-y[0], 0.0, 1.0]), ["shape (3,)", "expected shape (2,)"]),
        (lambda t, y: -y[0], ["shape ()", "expected shape (2,)"]),
        (lambda t, y: "x", ["expected shape (2,)"]),
    ],
)
def test_vector_rhs_wrong_shape(bad, words):
    with pytest.raises(RhsError) as info:
        solve(bad, [1.0, 2.0], 0.5, 0.01, 10)
    for w in words:
        assert w in str(info.value)
    assert info.value.step == 0


def test_scalar_rhs_wrong_shape():
    with pytest.raises(RhsError, match="expected a number"):
        solve(lambda t, y: [y, y], 1.0, 0.5, 0.01, 10)


@pytest.mark.parametrize("value", [float("nan"), float("inf")])
def test_rhs_nonfinite(value):
    def rhs(t, y):
        return value if t > 0.05 else -y

    for method in ("rectangle", "predictor-corrector", "trapezoid", "implicit-rectangle"):
        with pytest.raises(RhsError, match="NaN or infinite") as info:
            solve(rhs, 1.0, 0.5, 0.01, 20, method=method)
        assert info.value.step == 6
        assert len(info.value.partial.t) == 6


def test_keyboard_interrupt_propagates():
    def rhs(t, y):
        if t > 0.05:
            raise KeyboardInterrupt
        return -y

    with pytest.raises(KeyboardInterrupt):
        solve(rhs, 1.0, 0.5, 0.01, 20)


def test_newton_failure_reported_with_partial():
    # an invented nonlinear rhs, with one Newton update allowed per step
    def rhs(t, y):
        return -(y**3) + np.sin(5 * y)

    with pytest.raises(NewtonError) as info:
        solve(rhs, 2.0, 0.8, 0.1, 50, method="trapezoid", newton_maxiter=1)
    e = info.value
    assert e.step >= 1 and f"step {e.step}" in str(e) and "newton_maxiter" in str(e)
    assert len(e.partial.t) == e.step
    # the default limit converges on the same problem
    solve(rhs, 2.0, 0.8, 0.1, 50, method="trapezoid")


def test_jacobian_wrong_shape_or_raising():
    with pytest.raises(RhsError, match="jacobian returned"):
        solve(lambda t, y: -y, [1.0, 1.0], 0.5, 0.01, 5, method="trapezoid", jacobian=lambda t, y: np.eye(3))
    with pytest.raises(RhsError, match="jacobian raised"):
        solve(lambda t, y: -y, 1.0, 0.5, 0.01, 5, method="trapezoid", jacobian=lambda t, y: 1 / 0)


# ------------------------------------------------------------ horizon


def test_stepper_horizon_refused_and_nothing_changes():
    st = Stepper(lambda t, y: -y, 1.0, 0.5, 0.01, memory="compressed", horizon=10)
    st.advance(8)
    before = (st.steps, st.t, st.y, st.rhs_evals)
    with pytest.raises(HorizonError):
        st.advance(3)
    assert (st.steps, st.t, st.y, st.rhs_evals) == before
    st.advance(2)
    assert st.steps == 10


def test_stepper_advance_matches_solve():
    res = solve(lambda t, y: -y, [1.0, 0.5], [0.4, 0.9], 0.01, 60)
    st = Stepper(lambda t, y: -y, [1.0, 0.5], [0.4, 0.9], 0.01)
    parts = [st.advance(k) for k in (1, 0, 17, 42)]
    t = np.concatenate([p[0] for p in parts])
    y = np.concatenate([p[1] for p in parts])
    assert np.array_equal(t, res.t[1:]) and np.array_equal(y, res.y[1:])
    assert st.steps == 60 and st.t == res.t[-1] and np.array_equal(st.y, res.y[-1])
    assert st.rhs_evals == res.rhs_evals


# ------------------------------------------------------------ progress


def test_progress_without_tqdm_says_how_to_install(monkeypatch):
    monkeypatch.setitem(sys.modules, "tqdm", None)  # import tqdm fails
    rhs = Counting()
    with pytest.raises(ImportError, match=r"pyfracconv\[progress\]"):
        solve(rhs, 1.0, 0.5, 0.01, 10, progress=True)
    assert rhs.calls == 0


def test_progress_bar_is_fed_and_changes_nothing(monkeypatch):
    seen = []

    class Bar:  # a stand-in with tqdm's context-manager interface
        def __init__(self, total, unit):
            seen.append(("total", total))

        def __enter__(self):
            return self

        def __exit__(self, *exc):
            return False

        def update(self, k):
            seen.append(("update", k))

    monkeypatch.setitem(sys.modules, "tqdm", types.SimpleNamespace(tqdm=Bar))
    a = solve(lambda t, y: -y, 1.0, 0.5, 0.001, 1000, progress=True)
    b = solve(lambda t, y: -y, 1.0, 0.5, 0.001, 1000)
    assert np.array_equal(a.y, b.y)
    assert seen[0] == ("total", 1000)
    assert sum(k for what, k in seen[1:]) == 1000


# ------------------------------------------------------------ save / load

CASES = [
    ("rectangle", "exact", 0.5),
    ("rectangle", "compressed", 1.4),
    ("predictor-corrector", "exact", 1.6),
    ("predictor-corrector", "compressed", 0.5),
    ("trapezoid", "exact", 0.7),
    ("trapezoid", "compressed", 0.3),
    ("implicit-rectangle", "exact", 0.6),
    ("implicit-rectangle", "compressed", 0.6),
    ("implicit-rectangle", "compressed", 1.0),
    ("implicit-rectangle", "compressed", 1.5),
]


def _vec(t, y):
    return np.array([-y[0] + 0.1 * y[1], np.cos(t) - y[1] ** 3])


@pytest.mark.parametrize("method,memory,a", CASES)
@pytest.mark.parametrize("vector", [False, True])
def test_save_load_resumes_bit_for_bit(method, memory, a, vector):
    rhs = _vec if vector else (lambda t, y: -y + np.sin(t))
    y0 = [1.0, 0.5] if vector else 1.0
    kw = dict(method=method, memory=memory, horizon=200)
    if a > 1:
        kw["dy0"] = [0.5, 0.0] if vector else 0.5
        if vector:
            a = [a, 0.8]
            kw["dy0"] = [0.5, 0.0]
    whole = Stepper(rhs, y0, a, 0.01, **kw)
    t_all, y_all = whole.advance(150)
    first = Stepper(rhs, y0, a, 0.01, **kw)
    first.advance(77)
    blob = first.save()
    again = Stepper.load(blob, rhs)
    assert again.steps == 77 and again.t == first.t and np.array_equal(again.y, first.y)
    assert (again.method, again.memory) == (method, memory)
    assert again.rhs_evals == first.rhs_evals
    t2, y2 = again.advance(73)
    assert np.array_equal(t2, t_all[77:]) and np.array_equal(y2, y_all[77:])
    assert again.rhs_evals == whole.rhs_evals
    # saving is repeatable and the source keeps going unchanged
    assert first.save() == blob
    t3, y3 = first.advance(73)
    assert np.array_equal(y3, y_all[77:])


def test_save_before_any_step_and_load_needs_rhs():
    st = Stepper(lambda t, y: -y, 1.0, 0.5, 0.01)
    blob = st.save()
    with pytest.raises(InputTypeError, match="rhs"):
        Stepper.load(blob, None)
    again = Stepper.load(blob, lambda t, y: -y)
    assert np.array_equal(again.advance(5)[1], st.advance(5)[1])


def _fnv1a(data):
    # FNV-1a 64 (Fowler, Noll and Vo; common practice)
    h = 0xCBF29CE484222325
    for b in data:
        h = ((h ^ b) * 0x100000001B3) & 0xFFFFFFFFFFFFFFFF
    return h


def _reseal(blob):
    """Python envelope (8 bytes) + C bytes with a recomputed checksum."""
    c = bytearray(blob[8:])
    c[-8:] = struct.pack("<Q", _fnv1a(bytes(c[:-8])))
    return blob[:8] + bytes(c)


def _saved(method="predictor-corrector", memory="exact", n=20, vector=True):
    st = Stepper(
        _vec if vector else (lambda t, y: -y),
        [1.0, 0.5] if vector else 1.0,
        0.6,
        0.01,
        method=method,
        memory=memory,
        horizon=100,
    )
    st.advance(n)
    return st.save()


def test_reseal_helper_is_the_format_checksum():
    blob = _saved()
    assert _reseal(blob) == blob


def test_forged_flipped_and_truncated_refused():
    blob = _saved()
    for i in range(0, len(blob), 5):
        b = bytearray(blob)
        b[i] ^= 0x04
        with pytest.raises(StateError):
            Stepper.load(bytes(b), _vec)
    for n in (0, 7, 8, 20, 100, len(blob) - 1):
        with pytest.raises(StateError):
            Stepper.load(blob[:n], _vec)
    with pytest.raises(StateError):
        Stepper.load(blob + b"\0", _vec)
    with pytest.raises(InputTypeError):
        Stepper.load("text", _vec)


def _field(blob, off, fmt, value):
    b = bytearray(blob)
    struct.pack_into(fmt, b, 8 + off, value)
    return _reseal(bytes(b))


@pytest.mark.parametrize("memory", ["exact", "compressed"])
@pytest.mark.parametrize(
    "off,fmt,value",
    [
        (8, "<I", 2),  # version
        (12, "<I", 7),  # method
        (16, "<I", 5),  # memory
        (20, "<I", 2),  # K (rows of initial values) inconsistent with orders < 1
        (24, "<Q", 2**60),  # components: more than the blob holds
        (24, "<Q", 1),  # components: fewer than saved
        (24, "<Q", 0),
        (32, "<d", -0.01),  # step
        (32, "<d", 0.02),  # step differs from the streams'
        (40, "<d", float("nan")),  # t0
        (64, "<d", 0.5),  # newton tol
        (72, "<I", 0),  # newton maxiter
        (76, "<I", 1000),  # corrections
        (80, "<Q", 10**6),  # steps beyond the streams' count
        (80, "<Q", 19),  # steps one fewer than the streams' count
        (88, "<Q", 0),  # f0 not done but steps > 0
        (96, "<Q", 3),  # fewer rhs calls than steps
        (112, "<d", 2.5),  # order out of range
        (112, "<d", 0.7),  # order differs from the streams'
        (120, "<d", 1.5),  # order > 1 while K = 1
        (128, "<d", float("inf")),  # initial value
        (144, "<d", float("nan")),  # current y
    ],
)
def test_forged_fields_with_valid_checksum_refused(memory, off, fmt, value):
    blob = _saved(memory=memory)
    forged = _field(blob, off, fmt, value)
    assert forged != blob
    with pytest.raises(StateError):
        Stepper.load(forged, _vec)


def test_forged_compressed_horizon_and_tol_refused():
    blob = _saved(memory="compressed")
    for off, value in ((48, 1e-6), (56, 10.0), (56, 1e300)):
        with pytest.raises(StateError):
            Stepper.load(_field(blob, off, "<d", value), _vec)


def test_forged_streams_swapped_refused():
    # the rectangle and trapezoid stream blobs exchanged: each is a valid
    # stream, but not the one its slot needs
    blob = _saved(vector=False)
    c = blob[8:]
    off = 112 + 8 * 3
    assert struct.unpack_from("<Q", c, off)[0] == 1  # one group
    off += 8
    n1 = struct.unpack_from("<Q", c, off)[0]
    s1 = c[off + 8 : off + 8 + n1]
    n2 = struct.unpack_from("<Q", c, off + 8 + n1)[0]
    s2 = c[off + 16 + n1 : off + 16 + n1 + n2]
    swapped = c[:off] + struct.pack("<Q", n2) + s2 + struct.pack("<Q", n1) + s1 + c[off + 16 + n1 + n2 :]
    forged = _reseal(blob[:8] + swapped)
    with pytest.raises(StateError):
        Stepper.load(forged, lambda t, y: -y)


def test_forged_implicit_rectangle_history_refused():
    blob = _saved(method="implicit-rectangle", vector=False)
    c = bytearray(blob[8:])
    # the f history rows: u64 row count before the last 20 doubles + checksum
    rows_at = len(c) - 8 - 20 * 8 - 8
    assert struct.unpack_from("<Q", c, rows_at)[0] == 20
    for value in (19, 21, 2**62):
        b = bytearray(c)
        struct.pack_into("<Q", b, rows_at, value)
        with pytest.raises(StateError):
            Stepper.load(_reseal(blob[:8] + bytes(b)), lambda t, y: -y)
    b = bytearray(c)
    struct.pack_into("<d", b, rows_at + 8, float("nan"))
    with pytest.raises(StateError):
        Stepper.load(_reseal(blob[:8] + bytes(b)), lambda t, y: -y)


def test_scalar_flag_of_envelope_checked():
    blob = _saved(vector=True)
    forged = blob[:6] + bytes([0x5A]) + blob[7:]
    with pytest.raises(StateError, match="scalar"):
        Stepper.load(forged, _vec)


def test_public_names():
    for name in ("solve", "Stepper", "SolveResult", "SolverError", "RhsError", "NewtonError"):
        assert name in pyfracconv.__all__
    assert issubclass(RhsError, pyfracconv.SolverError) and issubclass(NewtonError, RuntimeError)


def test_implicit_rectangle_exact_horizon_accepted_and_not_used():
    # a horizon given with exact memory (once required by the implicit
    # rectangle rule, at most 2**28) is still accepted and no longer limits
    # the steps: the results are those of a stepper made without one
    def rhs(t, y):
        return -y

    a = Stepper(rhs, 1.0, 0.5, 0.1, method="implicit-rectangle", horizon=5)
    b = Stepper(rhs, 1.0, 0.5, 0.1, method="implicit-rectangle")
    ya, yb = a.advance(200)[1], b.advance(200)[1]
    assert np.array_equal(ya, yb)
    again = Stepper.load(a.save(), rhs)
    assert np.array_equal(again.advance(100)[1], b.advance(100)[1])
    res = solve(rhs, 1.0, 0.5, 0.1, 200, method="implicit-rectangle", horizon=5)
    assert np.array_equal(res.y[1:], ya)


# tests/data/solver_v1_implicit_rectangle_exact.bin: a Stepper saved by the
# library before the exact implicit rectangle rule's stream grew on demand
# (it then required a horizon and rebuilt a kernel of floor(horizon) + 1
# weights at load), made by Stepper(_legacy_rhs, [1.0, 0.5], [0.6, 1.5],
# 0.01, dy0=[0.0, 0.2], method="implicit-rectangle", horizon=300,
# jacobian=_legacy_jac, newton_tol=1e-15) after advance(100).
def _legacy_rhs(t, y):
    return -y + 0.1 * np.sin(t)


def _legacy_jac(t, y):
    return -np.eye(2)


def test_implicit_rectangle_saved_with_a_horizon_still_loads():
    blob = (DATA / "solver_v1_implicit_rectangle_exact.bin").read_bytes()
    a = Stepper.load(blob, _legacy_rhs, jacobian=_legacy_jac)
    assert a.steps == 100
    # the same continuation as after the new code's own save/load round
    # trip, past the old horizon
    b = Stepper.load(a.save(), _legacy_rhs, jacobian=_legacy_jac)
    ya, yb = a.advance(250)[1], b.advance(250)[1]
    assert np.array_equal(ya, yb)
    # and the rule itself: the direct O(N^2) loop (tests/solver_reference.py)
    ref = implicit_rectangle_loop(_legacy_rhs, _legacy_jac, [1.0, 0.5], [0.6, 1.5], 0.01, 350, [0.0, 0.2])
    assert np.max(np.abs(ya - ref[101:]) / np.maximum(np.abs(ref[101:]), 1e-3)) < 1e-13


def _with_horizon(blob, horizon):
    # the horizon: bytes 56..64 of the C format (csrc/solver.c), after the
    # 8-byte Python envelope
    b = bytearray(blob)
    struct.pack_into("<d", b, 8 + 56, horizon)
    return _reseal(bytes(b))


_PEAK_RSS = """
import resource, sys
import pyfracconv
blob = open(sys.argv[1], "rb").read()
rhs = lambda t, y: -y
before = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss
st = pyfracconv.Stepper.load(blob, rhs)
after = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss
print(after - before, st.nbytes, st.steps)
"""


@pytest.mark.parametrize("steps", [0, 20])
def test_forged_implicit_rectangle_horizon_loads_with_small_memory(tmp_path, steps):
    # a blob of about 200 bytes claiming the largest horizon the old format
    # had, 2**28, once made the loader compute a kernel of 2**28 + 1
    # weights (2 GiB, twice); the stream now grows with the f rows the blob
    # holds. Peak RSS of a fresh process (resource.getrusage, kilobytes on
    # Linux) before and after the load.
    st = Stepper(lambda t, y: -y, 1.0, 0.6, 0.01, method="implicit-rectangle")
    st.advance(steps)
    blob = _with_horizon(st.save(), 2.0**28)
    assert len(blob) < 200 + 8 * steps
    path = tmp_path / "forged.bin"
    path.write_bytes(blob)
    out = subprocess.run(
        [sys.executable, "-c", _PEAK_RSS, str(path)], capture_output=True, text=True, check=True
    ).stdout.split()
    grew_kb, nbytes, loaded_steps = (int(v) for v in out)
    assert grew_kb < 64 * 1024 and nbytes < 1 << 20 and loaded_steps == steps
    # it loads here too and continues as the stepper that saved it
    again = Stepper.load(blob, lambda t, y: -y)
    assert np.array_equal(again.advance(30)[1], st.advance(30)[1])


def test_forged_exact_horizons_refused():
    # exact memory has no horizon: only an implicit rectangle blob of the
    # old format may hold one, 1 <= horizon <= 2**28 and at least its steps
    ir = _saved(method="implicit-rectangle", vector=False)
    pc = _saved(vector=False)
    for blob, horizon in (
        (ir, 2.0**28 + 1),
        (ir, 19.0),
        (ir, 0.5),
        (ir, float("nan")),
        (ir, -1.0),
        (pc, 100.0),
    ):
        with pytest.raises(StateError):
            Stepper.load(_with_horizon(blob, horizon), lambda t, y: -y)
    for horizon in (20.0, 2.0**28):
        Stepper.load(_with_horizon(ir, horizon), lambda t, y: -y)


def test_vector_rhs_gets_a_read_only_view():
    def rhs(t, y):
        y[0] = 0.0
        return -y

    with pytest.raises(RhsError, match="read-only"):
        solve(rhs, [1.0, 2.0], 0.5, 0.1, 3)


def test_zero_steps():
    res = solve(lambda t, y: -y, [1.0, 2.0], 0.5, 0.1, 0)
    assert res.t.shape == (1,) and res.y.shape == (1, 2) and res.rhs_evals == 0


def test_nbytes_bounded_in_compressed_memory():
    # compressed memory does not grow with the steps; exact memory does
    c = Stepper(lambda t, y: -y, 1.0, 0.5, 1e-3, memory="compressed", horizon=10**5)
    e = Stepper(lambda t, y: -y, 1.0, 0.5, 1e-3)
    c.advance(100)
    e.advance(100)
    c0, e0 = c.nbytes, e.nbytes
    c.advance(20000)
    e.advance(20000)
    assert c.nbytes == c0 and e.nbytes > e0 + 20000 * 8


@pytest.mark.parametrize("a", [0.5, 1.0, 1.5])
def test_nbytes_bounded_implicit_rectangle_compressed(a):
    # the implicit rectangle rule with compressed memory keeps two
    # compressed streams (one at a = 1) and no f history: its memory does
    # not grow with the steps, and its horizon may be as large as a stream's
    kw = {"dy0": 0.0} if a > 1 else {}
    c = Stepper(
        lambda t, y: -y, 1.0, a, 1e-3, method="implicit-rectangle", memory="compressed", horizon=1e12, **kw
    )
    c.advance(100)
    c0 = c.nbytes
    c.advance(20000)
    assert c.nbytes == c0 < 200_000


# ------------------------------------------------------------ scalar rhs paths


class _CallableRhs:
    def __call__(self, t, y):
        return -y


def _outcome(rhs, **kw):
    try:
        r = solve(rhs, 1.0, 0.5, 0.01, 30, **kw)
        return ("ok", r.y.tobytes(), r.rhs_evals, r.jac_evals)
    except BaseException as exc:  # noqa: BLE001 - compared between the paths
        part = getattr(exc, "partial", None)
        cause = exc.__cause__
        return (
            type(exc).__name__,
            str(exc),
            None if part is None else (part.t.tobytes(), part.y.tobytes()),
            type(cause).__name__ if cause is not None else None,
            cause is not None and cause.__traceback__ is not None,
        )


@pytest.mark.parametrize(
    "rhs",
    [
        lambda t, y: -y,
        lambda t, y: np.float64(-y),  # a float subclass: converted
        lambda t, y: int(-3 * y > -1),  # an int: converted
        lambda t, y: np.array(-y),  # a 0-d array: converted
        lambda t, y: [-y] if t > 0.1 else -y,  # a list: refused at step 11
        lambda t, y: "x" if t > 0.1 else -y,  # a string: refused
        lambda t, y: 1 / 0 if t > 0.1 else -y,  # raises: traceback kept
        lambda t, y: float("nan") if t > 0.1 else -y,
        _CallableRhs(),
    ],
)
@pytest.mark.parametrize("method", ["predictor-corrector", "implicit-rectangle"])
def test_scalar_rhs_direct_path_equals_cffi_callback(rhs, method, monkeypatch):
    # a scalar rhs is called from C through the Python C API (CPython;
    # setup_build.py, _fc_py_rhs1_direct) instead of the cffi callback:
    # the same results bit for bit, the same counts, the same errors with
    # the same partial solutions
    mod = sys.modules["pyfracconv.solve"]
    if not mod._DIRECT:
        pytest.skip("the direct path is CPython only")
    kw = dict(method=method)
    direct = _outcome(rhs, **kw)
    monkeypatch.setattr(mod, "_DIRECT", False)
    assert _outcome(rhs, **kw) == direct


def test_scalar_rhs_direct_path_keyboard_interrupt_and_stepper_load():
    def rhs(t, y):
        if t > 0.05:
            raise KeyboardInterrupt
        return -y

    st = Stepper(rhs, 1.0, 0.5, 0.01)
    assert st._direct is not None or not sys.modules["pyfracconv.solve"]._DIRECT
    with pytest.raises(KeyboardInterrupt):
        st.advance(20)
    assert st.steps == 5
    # a loaded stepper calls its new rhs on the same path
    again = Stepper.load(st.save(), lambda t, y: -y)
    t, y = again.advance(3)
    ref = Stepper(lambda t, y: -y, 1.0, 0.5, 0.01)
    ref.advance(5)
    assert np.array_equal(ref.advance(3)[1], y)
