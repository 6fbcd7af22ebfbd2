"""fc_stream_push1_value (csrc/fracconv.h) and the scalar push built on it.

Checks against the library's own fc_stream_push1 (the documented twin:
the same push, bit for bit) and the promises of the docstring of
pyfracconv.Stream: a refused call raises and leaves the stream as it was,
a stream in use by another thread raises BusyError. Samples are invented
(seeded random numbers).
"""

import math

import numpy as np
import pytest

import pyfracconv as pf
from pyfracconv import Stream
from pyfracconv._fracconv import ffi, lib


def _twins(mode):
    if mode == "compressed":
        make = lambda: Stream.integral(0.5, 1e-2, mode="compressed", horizon=5000)  # noqa: E731
    elif mode == "kernel":
        make = lambda: Stream.from_kernel([0.5, -0.25, 0.125])  # noqa: E731
    else:
        make = lambda: Stream.integral(0.5, 1e-2, rule="trapezoid")  # noqa: E731
    return make(), make()


@pytest.mark.parametrize("mode", ["exact", "compressed", "kernel"])
def test_value_equals_push1_bit_for_bit(mode):
    a, b = _twins(mode)
    x = np.random.default_rng(12).standard_normal(3000)
    y = ffi.new("double[1]")
    cell = ffi.new("int[1]")
    for v in x.tolist():
        assert lib.fc_stream_push1(a._s, v, y) == lib.FC_OK
        got = lib.fc_stream_push1_value(b._s, v, cell)
        assert struct_bits(got) == struct_bits(y[0])
    assert cell[0] == 0  # never written on success
    assert a.save() == b.save()


def struct_bits(v):
    return np.float64(v).view(np.uint64)


def test_value_refusals_return_nan_and_change_nothing():
    s = Stream.integral(0.5, 1e-2)
    s.push_many(np.arange(10.0))
    before = s.save()
    cell = ffi.new("int[1]")
    assert math.isnan(lib.fc_stream_push1_value(s._s, math.inf, cell))
    assert cell[0] == lib.FC_ERR_NONFINITE
    assert math.isnan(lib.fc_stream_push1_value(s._s, 1.0, ffi.NULL))  # no cell
    assert math.isnan(lib.fc_stream_push1_value(ffi.NULL, 1.0, cell))
    assert cell[0] == lib.FC_ERR_NULL
    v = Stream.integral(0.5, 1e-2, channels=2)
    assert math.isnan(lib.fc_stream_push1_value(v._s, 1.0, cell))
    assert cell[0] == lib.FC_ERR_ARG  # 2 channels
    assert s.save() == before
    # RANGE: w0 = 1/h = 1e300 times 1e300 is beyond the double range
    d = Stream.derivative(1.0, 1e-300)
    assert math.isnan(lib.fc_stream_push1_value(d._s, 1e300, cell))
    assert cell[0] == lib.FC_ERR_RANGE and d.count == 0


def test_python_push_messages_and_unchanged():
    s = Stream.integral(0.5, 1e-2)
    s.push(1.0)
    before = s.save()
    with pytest.raises(pf.SampleError, match=r"^x=nan"):
        s.push(math.nan)
    with pytest.raises(pf.InputTypeError, match=r"^x='a': expected a real number"):
        s.push("a")
    with pytest.raises(pf.SampleError, match=r"^x=1e\+400: beyond the range"):
        s.push(10**400)
    assert s.save() == before
    assert s.push(2) == Stream.load(before).push(2.0)  # ints are accepted


def test_python_push_refused_while_the_guard_is_held():
    s = Stream.integral(0.5, 1e-2)
    s.push(1.0)
    before = s.save()
    assert s._lock.acquire(False)  # as another method in another thread
    try:
        assert not s._lock.acquire(False)
        with pytest.raises(pf.BusyError, match="being used by another thread"):
            s.push(1.0)
        with pytest.raises(pf.BusyError):
            s.push_many([1.0])
    finally:
        s._lock.release()
    assert s.save() == before
    assert s.push(1.0) == Stream.load(before).push(1.0)
