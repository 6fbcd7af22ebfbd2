"""What the Python layer promises beyond the numbers: streams are freed as
soon as they are dropped, errors are the package's own and name the
argument with a plain value, masked arrays are refused, compressed streams
keep to their horizon, and a rejected call leaves the stream exactly as it
was (its saved bytes do not change)."""

import gc
import math
import re
import os
import tracemalloc
import weakref

import numpy as np
import pytest

import pyfracconv as pf
from pyfracconv import Stream

ROOT = os.path.dirname(os.path.dirname(os.path.abspath(__file__)))
HUGE = 10**400  # a Python int beyond the double range (DBL_MAX ~ 1.8e308)


def compressed(channels=None, horizon=100, tol=1e-10, **kw):
    return Stream.integral(0.5, 0.25, channels=channels, mode="compressed", tol=tol, horizon=horizon, **kw)


def message(exc_type, call):
    with pytest.raises(exc_type) as info:
        call()
    text = str(info.value)
    # never NumPy's repr of a scalar (np.float64(nan), np.str_('a'))
    assert not re.search(r"np\.\w+\(", text), text
    return text


def unchanged(stream, call, exc_type, *fragments):
    """call() raises exc_type with every fragment in its message and leaves
    the stream's saved state (and count) exactly as it was."""
    before, count = stream.save(), stream.count
    text = message(exc_type, call)
    for f in fragments:
        assert f in text, (f, text)
    assert stream.save() == before
    assert stream.count == count
    return text


# ------------------------------------------------ 1. no reference cycle

MAKERS = [
    lambda: Stream.integral(0.5, 0.1),
    lambda: Stream.derivative(0.5, 0.1, rule="l1"),
    lambda: Stream.from_kernel([1.0, 0.5]),
    lambda: compressed(horizon=1e6),
    lambda: Stream.integral(0.5, 0.1, channels=1),
]


@pytest.mark.parametrize("make", MAKERS, ids=["exact", "l1", "kernel", "compressed", "one-channel"])
def test_del_frees_the_stream_without_the_cyclic_collector(make):
    # CPython frees an object when its reference count drops to zero; only
    # objects in reference cycles wait for the cyclic collector (Python
    # Language Reference, 3.1 "Objects, values and types"). With the
    # collector off, the Stream and its C object must die at `del`.
    was = gc.isenabled()
    gc.disable()
    try:
        s = make()
        s.push(1.0 if s.channels is None else np.ones(1))
        alive = weakref.ref(s)
        c_object = weakref.ref(s._s)  # the cffi owner of the C stream
        freed = []
        weakref.finalize(s._s, freed.append, True)
        del s
        assert alive() is None
        assert c_object() is None and freed == [True]
    finally:
        if was:
            gc.enable()


def test_scalar_push_errors_still_named_after_the_change():
    s = Stream.integral(0.5, 0.1)
    s.push(1.0)
    unchanged(s, lambda: s.push(math.nan), pf.SampleError, "x=nan")
    unchanged(s, lambda: s.push("1"), pf.InputTypeError, "x='1'")
    unchanged(s, lambda: s.push([1.0, 2.0]), pf.ArgumentError, "shape (2,)")


# ------------------------------------------------ 2. the package's own errors


@pytest.mark.parametrize(
    "call, fragment",
    [
        (lambda: pf.integral([1.0, 2.0], HUGE, 0.1), "order=1e+400"),
        (lambda: pf.derivative([1.0, 2.0], HUGE, 0.1), "order=1e+400"),
        (lambda: pf.weights("rectangle", HUGE, 3), "order=1e+400"),
        (lambda: pf.integral([1.0, 2.0], 0.5, HUGE), "step=1e+400"),
        (lambda: pf.weights("grunwald", 0.5, 3, step=-HUGE), "step=-1e+400"),
        (lambda: Stream.integral(HUGE, 0.1), "order=1e+400"),
        (lambda: Stream.derivative(0.5, HUGE), "step=1e+400"),
        (lambda: Stream.integral(0.5, 0.1, mode="compressed", tol=HUGE), "tol=1e+400"),
        (lambda: Stream.integral(0.5, 0.1, mode="compressed", horizon=HUGE), "horizon=1e+400"),
        (lambda: Stream.integral(0.5, 0.1, channels=10**30), "channels=1e+30"),
        (lambda: Stream.from_kernel([1.0], channels=2**64), "channels=18446744073709551616"),
    ],
)
def test_huge_integers_are_argument_errors(call, fragment):
    text = message(pf.ArgumentError, call)
    assert text.startswith(fragment), text


def test_huge_integer_samples_are_sample_errors():
    assert "samples[1]=1e+400" in message(pf.SampleError, lambda: pf.integral([0.0, HUGE], 0.5, 0.1))
    assert "samples[(1, 0)]" in message(pf.SampleError, lambda: pf.integral([[0], [HUGE]], 0.5, 0.1, axis=0))
    for s in (Stream.integral(0.5, 0.1), compressed()):
        s.push(1.0)
        unchanged(s, lambda: s.push(HUGE), pf.SampleError, "x=1e+400")
        unchanged(s, lambda: s.push(-HUGE), pf.SampleError, "x=-1e+400")
        unchanged(s, lambda: s.preview(HUGE), pf.SampleError, "x=1e+400")
        unchanged(s, lambda: s.push_many([1.0, HUGE]), pf.SampleError, "xs[1]=1e+400")
    v = Stream.derivative(0.5, 0.1, channels=2)
    v.push([1.0, 2.0])
    unchanged(v, lambda: v.push([1, HUGE]), pf.SampleError, "x[1]=1e+400")
    unchanged(v, lambda: v.push_many([[1, 2], [3, HUGE]]), pf.SampleError, "xs[(1, 1)]=1e+400")


def test_python_integers_within_range_are_samples():
    # integers too large for int64 but within the double range: the
    # rectangle rule's second output is h^a / Gamma(a + 1) * x_0 (product
    # rectangle rule, y_1 = u b_0 x_0, b_0 = 1), Gamma from Python's math
    y = pf.integral([3, 10**300], 0.5, 0.25)
    assert y[0] == 0.0
    assert y[1] == pytest.approx(3 * 0.25**0.5 / math.gamma(1.5), rel=1e-14)


def test_oversized_weights_refused_before_allocating():
    tracemalloc.start()
    try:
        for call in (
            lambda: pf.weights("rectangle", 0.5, 2**40),
            lambda: pf._core.trapezoid_start(0.5, 2**40),
        ):
            text = message(pf.OutOfMemory, call)
            assert text.startswith("count=1099511627776"), text
        # an 8-byte broadcast view whose contiguous copy would be 8 TiB
        view = np.broadcast_to(1.0, (2**40,))
        for call, name in (
            (lambda: pf.integral(view, 0.5, 0.1), "samples"),
            (lambda: pf.lagged_sum([1.0], view), "kernel"),
        ):
            text = message(pf.OutOfMemory, call)
            assert text.startswith(f"{name}: a contiguous float64 copy"), text
        peak = tracemalloc.get_traced_memory()[1]
    finally:
        tracemalloc.stop()
    assert peak < 1 << 20  # nothing of the 8 TiB was allocated
    assert issubclass(pf.OutOfMemory, MemoryError)
    assert issubclass(pf.OutOfMemory, pf.FracconvError)


@pytest.mark.filterwarnings("ignore:Warning. converting a masked element")
def test_masked_arrays_refused():
    m = np.ma.array([1.0, 2.0, 3.0, 4.0], mask=[0, 1, 0, 0])
    clear = np.ma.array([1.0, 2.0, 3.0, 4.0])  # no element masked
    for values in (m, clear):
        for call, name in (
            (lambda: pf.integral(values, 0.5, 0.1), "samples"),
            (lambda: pf.derivative(values, 0.5, 0.1, rule="l1"), "samples"),
            (lambda: pf.lagged_sum(values, [1.0]), "samples"),
            (lambda: pf.lagged_sum([1.0, 2.0], values), "kernel"),
            (lambda: Stream.from_kernel(values), "kernel"),
        ):
            text = message(pf.InputTypeError, call)
            assert text.startswith(f"{name}: masked arrays are not accepted"), text
    s = Stream.integral(0.5, 0.1)
    s.push(1.0)
    unchanged(s, lambda: s.push_many(m), pf.InputTypeError, "xs: masked")
    unchanged(s, lambda: s.push(np.ma.masked), pf.InputTypeError, "x=masked")
    unchanged(s, lambda: s.preview(np.ma.masked), pf.InputTypeError, "x=masked")
    v = Stream.integral(0.5, 0.1, channels=4)
    v.push(np.ones(4))
    unchanged(v, lambda: v.push(m), pf.InputTypeError, "x: masked")
    unchanged(v, lambda: v.preview(clear), pf.InputTypeError, "x: masked")
    unchanged(v, lambda: v.push_many(m.reshape(1, 4)), pf.InputTypeError, "xs: masked")
    # the choice is documented where samples are taken
    for fn in (pf.integral, pf.derivative, pf.lagged_sum, Stream.from_kernel, Stream.push, Stream.push_many):
        assert "asked arrays are refused" in fn.__doc__, fn


def test_messages_show_plain_values():
    nan, half = np.float64("nan"), np.float64(-0.5)
    assert message(pf.ArgumentError, lambda: pf.integral([1.0], nan, 0.1)).startswith("order=nan:")
    assert message(pf.ArgumentError, lambda: pf.integral([1.0], 0.5, half)).startswith("step=-0.5:")
    assert message(pf.ArgumentError, lambda: pf.weights("l1", np.float32(1.5), 2)).startswith("order=1.5:")
    assert message(pf.ArgumentError, lambda: pf.weights("rectangle", 0.5, np.int64(-3))).startswith(
        "count=-3:"
    )
    assert message(
        pf.ArgumentError, lambda: pf.integral([1.0], 0.5, 0.1, rule=np.str_("simpson"))
    ).startswith("rule='simpson':")
    assert message(pf.SampleError, lambda: pf.integral(np.array([1.0, nan]), 0.5, 0.1)).startswith(
        "samples[1]=nan:"
    )
    assert message(
        pf.ArgumentError, lambda: Stream.integral(0.5, 0.1, mode="compressed", tol=np.float64(0.5))
    ).startswith("tol=0.5:")
    assert message(pf.ArgumentError, lambda: Stream.integral(0.5, 0.1, channels=np.int64(0))).startswith(
        "channels=0:"
    )
    s = Stream.integral(0.5, 0.1)
    unchanged(s, lambda: s.push(nan), pf.SampleError, "x=nan")
    unchanged(s, lambda: s.push_many(np.array([1.0, -np.inf])), pf.SampleError, "xs[1]=-inf")
    v = Stream.integral(0.5, 0.1, channels=2)
    unchanged(v, lambda: v.push(np.array([half, nan])), pf.SampleError, "x[1]=nan")


def _readme_exception_clauses():
    text = open(os.path.join(ROOT, "README.md"), encoding="utf-8").read()
    para = text.split("Every exception derives from `pyfracconv.FracconvError`", 1)[1]
    para = re.sub(r"\([^)]*\)", "", para.split("\n\n", 1)[0])
    clauses = []
    for clause in para.split(";"):
        names = re.findall(r"`(\w+)`", clause)
        clauses.append((names[:-1], names[-1]))
    return clauses


def test_readme_states_the_real_base_classes():
    # the README's list, checked against the classes themselves
    builtin = {
        "ValueError": ValueError,
        "TypeError": TypeError,
        "MemoryError": MemoryError,
        "RuntimeError": RuntimeError,
        "OSError": OSError,
    }
    listed = set()
    for names, base in _readme_exception_clauses():
        assert base in builtin, base
        for n in names:
            cls = getattr(pf, n)
            assert issubclass(cls, pf.FracconvError) and issubclass(cls, builtin[base]), n
            for other, b in builtin.items():
                if other != base:
                    assert not issubclass(cls, b), (n, other)
            listed.add(n)
    exported = {
        n
        for n in pf.__all__
        if isinstance(getattr(pf, n), type) and issubclass(getattr(pf, n), pf.FracconvError)
    } - {"FracconvError"}
    assert listed == exported
    assert issubclass(pf.BusyError, RuntimeError)
    assert issubclass(pf.HorizonError, RuntimeError)
    assert issubclass(pf.RangeError, pf.ArgumentError)


# ------------------------------------------------ 3. the horizon


@pytest.mark.parametrize("channels", [None, 2])
def test_push_past_the_horizon_refused_by_default(channels):
    rng = np.random.default_rng(5)
    s = compressed(channels, horizon=100.5)  # outputs 0 .. 100 promised
    assert s.horizon_policy == "refuse"
    shape = (101,) if channels is None else (101, channels)
    assert s.remaining == 101
    s.push_many(rng.standard_normal((60,) + shape[1:]))
    assert s.remaining == 41
    one = 0.5 if channels is None else np.full(channels, 0.5)
    # a block one longer than what is left: nothing pushed
    text = unchanged(
        s,
        lambda: s.push_many(rng.standard_normal((42,) + shape[1:])),
        pf.HorizonError,
        "xs (shape",
        "42 time steps asked for, 41 left",
        "horizon_policy='continue'",
    )
    assert "horizon=100.5" in text
    s.push_many(rng.standard_normal((40,) + shape[1:]))
    s.push(one)  # output 100: the last promised
    assert s.remaining == 0 and s.count == 101 and not s.past_horizon
    name = "x=0.5" if channels is None else "x:"
    unchanged(s, lambda: s.push(one), pf.HorizonError, name, "101 samples pushed")
    unchanged(s, lambda: s.preview(one), pf.HorizonError, name)
    unchanged(s, lambda: s.history(), pf.HorizonError, "history()")
    unchanged(s, lambda: s.push_many(np.ones((1,) + shape[1:])), pf.HorizonError, "xs")
    # bad samples are still reported as such, and change nothing either
    bad = math.nan if channels is None else np.array([0.0, math.nan])
    unchanged(s, lambda: s.push(bad), pf.SampleError, "nan")
    assert not s.past_horizon and s.remaining == 0
    s.reset()
    assert s.remaining == 101 and s.count == 0


@pytest.mark.parametrize("channels", [None, 3])
def test_continue_policy_goes_on_with_a_flag(channels):
    s = compressed(channels, horizon=50, horizon_policy="continue")
    t = compressed(channels, horizon=50)
    assert s.horizon_policy == "continue"
    one = 1.0 if channels is None else np.ones(channels)
    for _ in range(51):
        # same outputs as a refusing stream while under the promise
        assert np.array_equal(s.push(one), t.push(one))
        assert not s.past_horizon
    assert s.remaining == 0
    s.preview(one)
    s.history()
    s.push(one)  # output 51: beyond
    assert s.past_horizon and s.remaining == 0 and s.count == 52
    s.push_many(np.ones((10,) if channels is None else (10, channels)))
    assert s.past_horizon and s.count == 62
    # switching a refusing stream over
    with pytest.raises(pf.HorizonError):
        t.push(one)
    t.horizon_policy = "continue"
    t.push(one)
    assert t.past_horizon
    t.horizon_policy = "refuse"
    with pytest.raises(pf.HorizonError):
        t.push(one)


def test_bad_policy_refused_and_changes_nothing():
    assert message(pf.ArgumentError, lambda: compressed(horizon_policy="ignore")).startswith(
        "horizon_policy='ignore': unknown"
    )
    assert message(pf.ArgumentError, lambda: Stream.derivative(0.5, 0.1, horizon_policy=1)).startswith(
        "horizon_policy=1: unknown"
    )
    s = compressed(horizon_policy="continue")
    s.push(1.0)
    before = s.save()
    with pytest.raises(pf.ArgumentError, match=r"horizon_policy='stop'"):
        s.horizon_policy = "stop"
    assert s.horizon_policy == "continue" and s.save() == before


def test_exact_streams_have_no_horizon():
    s = Stream.integral(0.5, 0.1, horizon_policy="continue")
    k = Stream.from_kernel([1.0, 2.0])
    for st in (s, k):
        st.push_many(np.ones(300))
        assert not st.past_horizon and st.remaining > 2**32
        assert st.horizon is None and st.tol is None
    assert k.remaining == 2**64 - 1 - 300  # fracconv.h: UINT64_MAX - count


def test_load_starts_refusing_and_keeps_the_count():
    s = compressed(2, horizon=20, horizon_policy="continue")
    s.push_many(np.ones((25, 2)))
    assert s.past_horizon
    t = Stream.load(s.save())
    assert t.horizon_policy == "refuse"
    assert t.past_horizon and t.remaining == 0 and t.count == 25
    unchanged(t, lambda: t.push(np.ones(2)), pf.HorizonError, "x:")
    u = Stream.load(compressed(horizon=20).save())
    assert u.remaining == 21 and not u.past_horizon
    # pickle and copy keep the setting
    import copy
    import pickle

    assert pickle.loads(pickle.dumps(s)).horizon_policy == "continue"
    assert copy.deepcopy(s).horizon_policy == "continue"


@pytest.mark.parametrize(
    "make, expect",
    [
        (
            lambda: Stream.integral(
                0.3, 0.25, rule="trapezoid", channels=3, mode="compressed", tol=1e-9, horizon=500.5
            ),
            ("trapezoid", 0.3, 0.25, 1e-9, 500.5, 3, "compressed"),
        ),
        (lambda: Stream.derivative(0.7, 2.0, rule="l1"), ("l1", 0.7, 2.0, None, None, None, "exact")),
        (lambda: Stream.from_kernel([1.0, 0.5], channels=2), (None, None, None, None, None, 2, "exact")),
    ],
)
def test_parameters_after_load(make, expect):
    t = Stream.load(make().save())
    assert (t.rule, t.order, t.step, t.tol, t.horizon, t.channels, t.mode) == expect


def test_forged_channel_count_allocates_nothing():
    s = compressed(2)
    s.push_many(np.ones((5, 2)))
    good = bytearray(s.save())
    # the C state's channel count, a u64 at byte 40 of the C bytes (after
    # the 8-byte Python envelope), see the format comment in csrc/stream.c
    assert int.from_bytes(good[48:56], "little") == 2
    forged = bytes(good[:48]) + (10**9).to_bytes(8, "little") + bytes(good[56:])
    tracemalloc.start()
    try:
        with pytest.raises(pf.StateError):
            Stream.load(forged)
        peak = tracemalloc.get_traced_memory()[1]
    finally:
        tracemalloc.stop()
    assert peak < 4 * len(forged) + (1 << 16)  # nothing sized by 10**9


def test_scalar_envelope_with_many_channels_refused():
    # a Python envelope saying channels=None around a two-channel state
    data = bytearray(compressed(2).save())
    data[6] = 0x5A
    with pytest.raises(pf.StateError, match="2 channels"):
        Stream.load(bytes(data))


# ------------------------------------------------ 4. compressed parameters


def test_tol_and_horizon_ranges_named():
    from pyfracconv._core import COMPRESSED_HORIZON_RANGE, COMPRESSED_TOL_RANGE

    lo, hi = COMPRESSED_TOL_RANGE
    assert (lo, hi) == (1e-15, 1e-2)  # fracconv.h, fc_stream_create
    assert COMPRESSED_HORIZON_RANGE == (1.0, 2.0**53 - 2)
    for tol in (1e-16, 0.1, math.nan, -1.0):
        text = message(pf.ArgumentError, lambda: compressed(tol=tol))
        assert text.startswith(f"tol={tol!r}: must be in [1e-15, 0.01]"), text
    for hz in (1e16, 2.0**53, 0.5, math.nan, math.inf):
        text = message(pf.ArgumentError, lambda: compressed(horizon=hz))
        assert text.startswith(f"horizon={hz!r}: must be in [1, 2**53 - 2"), text
        assert "9007199254740990" in text
    # the ends of the ranges are accepted: Python is not stricter than C
    assert compressed(horizon=2.0**53 - 2).remaining == 2**53 - 1
    assert compressed(horizon=1.0).remaining == 2
    Stream.integral(0.5, 0.1, mode="compressed", tol=1e-2, horizon=1e4)
    Stream.integral(0.5, 0.1, mode="compressed", tol=1e-15, horizon=1e3)
    # the header comment states the same tolerance range
    header = open(os.path.join(ROOT, "csrc", "fracconv.h"), encoding="utf-8").read()
    assert "tol in [1e-15, 1e-2]" in header


@pytest.mark.parametrize(
    "make",
    [
        lambda: Stream.integral(0.9999999999, 0.1, mode="compressed", tol=1e-10, horizon=1e6),
        lambda: Stream.derivative(1 - 1e-15, 0.1, mode="compressed", tol=1e-10, horizon=1e6),
        lambda: Stream.integral(1.0000001, 0.1, mode="compressed", tol=1e-10, horizon=1e6),
        lambda: Stream.integral(1.9999999, 0.1, mode="compressed", tol=1e-10, horizon=1e6),
    ],
)
def test_near_integer_orders_are_served_in_compressed_mode(make):
    # refused with a vague message before; the construction now reaches
    # them (their accuracy against the extended-precision reference is
    # checked in test_promises_compressed.py)
    s = make()
    assert s.terms > 0


@pytest.mark.parametrize(
    "make, order",
    [
        (lambda: Stream.integral(1e-300, 0.1, mode="compressed", tol=1e-10, horizon=1e6), "1e-300"),
        (
            lambda: Stream.integral(2.5, 0.1, rule="trapezoid", mode="compressed", tol=1e-10, horizon=1e6),
            "2.5",
        ),
    ],
)
def test_orders_compressed_mode_cannot_serve(make, order):
    text = message(pf.ArgumentError, make)
    assert text.startswith(f"order={order}"), text
    assert "mode='compressed'" in text and "mode='exact'" in text


class _Injected:
    """The compiled library with one function replaced by one returning a
    given status: how Python words a status the C library reports."""

    def __init__(self, lib, name, status):
        self._lib, self._name, self._status = lib, name, status

    def __getattr__(self, attr):
        if attr == self._name:
            return lambda *args: self._status
        return getattr(self._lib, attr)


class _InjectedValue(_Injected):
    """As _Injected, for a function that returns a value and reports a
    refusal by NaN with the status written to its last argument."""

    def __getattr__(self, attr):
        if attr == self._name:

            def refuse(*args):
                args[-1][0] = self._status
                return math.nan

            return refuse
        return getattr(self._lib, attr)


def test_status_order_from_compressed_creation(monkeypatch):
    import pyfracconv.stream as stream_mod

    lib = stream_mod.lib
    monkeypatch.setattr(stream_mod, "lib", _Injected(lib, "fc_stream_create", lib.FC_ERR_ORDER))
    text = message(pf.ArgumentError, lambda: compressed())
    assert text.startswith("order=0.5: mode='compressed' cannot serve this order")
    assert "use mode='exact'" in text


def test_status_range_worded_per_call(monkeypatch):
    import pyfracconv._core as core_mod
    import pyfracconv.stream as stream_mod

    lib = core_mod.lib
    R = lib.FC_ERR_RANGE
    monkeypatch.setattr(core_mod, "lib", _Injected(lib, "fc_apply", R))
    text = message(pf.RangeError, lambda: pf.derivative([1.0, 2.0], 1.0, 1e-300))
    assert text.startswith(
        "samples (or step=1e-300, order=1.0): the result is beyond the double range (largest |sample| 2.0)"
    ), text
    monkeypatch.setattr(core_mod, "lib", _Injected(lib, "fc_weights", R))
    text = message(pf.RangeError, lambda: pf.weights("grunwald", 10, 3, step=1e-40))
    assert text.startswith("step=1e-40 (or order=10)"), text
    monkeypatch.setattr(core_mod, "lib", _Injected(lib, "fc_lagged_sum", R))
    assert message(pf.RangeError, lambda: pf.lagged_sum([1e308, 1e308], [1.0, 1.0])).startswith(
        "samples (or kernel): the result is beyond the double range "
        "(largest |sample| 1e+308, largest |kernel value| 1.0)"
    )
    # the scalar push calls fc_stream_push1_value (NaN, status in the cell)
    monkeypatch.setattr(stream_mod, "lib", _InjectedValue(lib, "fc_stream_push1_value", R))
    s = Stream.derivative(1.0, 1e-300)
    assert message(pf.RangeError, lambda: s.push(1e300)).startswith(
        "x=1e+300: the output would be beyond the double range"
    )
    monkeypatch.setattr(stream_mod, "lib", _Injected(lib, "fc_stream_push_block_threads", R))
    v = Stream.derivative(1.0, 1e-300, channels=2)
    assert message(pf.RangeError, lambda: v.push_many(np.ones((3, 2)))).startswith(
        "xs (shape (3, 2)): an output would be beyond the double range"
    )
    monkeypatch.setattr(stream_mod, "lib", _Injected(lib, "fc_stream_create", R))
    assert message(pf.RangeError, lambda: Stream.derivative(10, 1e-40)).startswith(
        "step=1e-40 (or order=10): the kernel is beyond the double range"
    )


def test_range_errors_from_the_real_library():
    # the same messages without injection: h^10 with h = 1e40 is 1e400, beyond
    # the double range (IEEE 754 binary64 tops out near 1.8e308: common
    # practice), so both the weights and these outputs are out of range
    with pytest.raises(pf.RangeError, match=r"^step=1e\+40 \(or order=10\)"):
        pf.weights("rectangle", 10, 3, step=1e40)
    with pytest.raises(
        pf.RangeError, match=r"^samples \(or step=1e\+40, order=10\).*largest \|sample\| 1\.0"
    ):
        pf.integral(np.ones(4), 10, 1e40)
