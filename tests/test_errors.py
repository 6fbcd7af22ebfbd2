"""Bad input: a clear error naming the argument and the value, and nothing
computed."""

import math

import numpy as np
import pytest

import pyfracconv
from pyfracconv import ArgumentError, FracconvError, InputTypeError, SampleError


def raises(exc, *fragments):
    """pytest.raises that also checks the message names what was wrong."""

    class _Check:
        def __enter__(self):
            self.ctx = pytest.raises(exc)
            self.info = self.ctx.__enter__()
            return self.info

        def __exit__(self, *a):
            ok = self.ctx.__exit__(*a)
            msg = str(self.info.value)
            for f in fragments:
                assert f in msg, (f, msg)
            return ok

    return _Check()


X = np.linspace(0, 1, 50)


@pytest.mark.parametrize("order", [0, -0.5, math.nan, math.inf, -math.inf, 10.5])
def test_bad_order(order):
    for call in (
        lambda: pyfracconv.integral(X, order, 0.1),
        lambda: pyfracconv.derivative(X, order, 0.1),
        lambda: pyfracconv.weights("rectangle", order, 5),
    ):
        with raises(ArgumentError, "order=", repr(order)):
            call()


@pytest.mark.parametrize("step", [0, -1e-3, math.nan, math.inf])
def test_bad_step(step):
    with raises(ArgumentError, "step=", repr(step)):
        pyfracconv.integral(X, 0.5, step)
    with raises(ArgumentError, "step="):
        pyfracconv.weights("grunwald", 0.5, 5, step=step)


def test_unknown_rule_and_wrong_kind():
    with raises(ArgumentError, "rule='simpson'", "'rectangle'"):
        pyfracconv.integral(X, 0.5, 0.1, rule="simpson")
    with raises(ArgumentError, "rule='grunwald'", "'trapezoid'"):
        pyfracconv.integral(X, 0.5, 0.1, rule="grunwald")
    with raises(ArgumentError, "rule='rectangle'", "'l1'"):
        pyfracconv.derivative(X, 0.5, 0.1, rule="rectangle")
    with raises(ArgumentError, "rule='nope'"):
        pyfracconv.weights("nope", 0.5, 3)


@pytest.mark.parametrize("order", [1.0, 1.5])
def test_l1_needs_order_below_one(order):
    with raises(ArgumentError, "order=", "l1"):
        pyfracconv.derivative(X, order, 0.1, rule="l1")
    with raises(ArgumentError, "order="):
        pyfracconv.weights("l1", order, 3)


def test_bad_counts():
    with raises(ArgumentError, "count=-1"):
        pyfracconv.weights("rectangle", 0.5, -1)
    with raises(ArgumentError, "start=-2"):
        pyfracconv.weights("rectangle", 0.5, 1, start=-2)
    with raises(ArgumentError, "start + count"):
        pyfracconv.weights("rectangle", 0.5, 10, start=2**53 - 5)
    with raises(InputTypeError, "count=2.5"):
        pyfracconv.weights("rectangle", 0.5, 2.5)


@pytest.mark.parametrize("bad", [math.nan, math.inf, -math.inf])
def test_nonfinite_samples_name_first_index(bad):
    x = X.copy()
    x[17] = bad
    x[30] = bad
    with raises(SampleError, "samples[17]", "first bad index 17"):
        pyfracconv.integral(x, 0.5, 0.1)
    with raises(SampleError, "samples[17]"):
        pyfracconv.derivative(x, 0.5, 0.1, rule="l1")
    with raises(SampleError, "samples[17]"):
        pyfracconv.lagged_sum(x, [1.0, 0.5])
    x2 = np.zeros((3, 40))
    x2[2, 5] = bad
    with raises(SampleError, "(2, 5)"):
        pyfracconv.integral(x2, 0.5, 0.1)
    with raises(SampleError, "kernel[1]"):
        pyfracconv.lagged_sum(X, [1.0, bad])


def test_input_not_modified_on_error():
    x = X.copy()
    x[3] = math.nan
    before = x.copy()
    with pytest.raises(SampleError):
        pyfracconv.integral(x, 0.5, 0.1)
    np.testing.assert_array_equal(x, before)


def test_non_numeric_input():
    with raises(InputTypeError, "samples"):
        pyfracconv.integral(["a", "b"], 0.5, 0.1)
    with raises(InputTypeError, "samples"):
        pyfracconv.integral(np.array([1 + 2j, 3j]), 0.5, 0.1)
    with raises(InputTypeError, "order='0.5'"):
        pyfracconv.integral(X, "0.5", 0.1)
    with raises(InputTypeError, "step=None"):
        pyfracconv.integral(X, 0.5, None)
    with raises(InputTypeError, "kernel"):
        pyfracconv.lagged_sum(X, ["x"])


def test_shapes_and_axis():
    with raises(ArgumentError, "scalar"):
        pyfracconv.integral(3.0, 0.5, 0.1)
    with raises(ArgumentError, "axis=2"):
        pyfracconv.integral(np.zeros((2, 3)), 0.5, 0.1, axis=2)
    with raises(ArgumentError, "kernel"):
        pyfracconv.lagged_sum(X, [])
    with raises(ArgumentError, "kernel"):
        pyfracconv.lagged_sum(X, np.ones((2, 2)))
    with raises(ArgumentError, "engine='gpu'"):
        pyfracconv.lagged_sum(X, [1.0], engine="gpu")


def test_exception_hierarchy():
    assert issubclass(ArgumentError, ValueError)
    assert issubclass(SampleError, ValueError)
    assert issubclass(InputTypeError, TypeError)
    assert issubclass(pyfracconv.OutOfMemory, MemoryError)
    for cls in (
        ArgumentError,
        SampleError,
        InputTypeError,
        pyfracconv.StateError,
        pyfracconv.OutOfMemory,
        pyfracconv.BusyError,
    ):
        assert issubclass(cls, FracconvError)


def test_c_status_messages():
    # every status code has its own message (C strerror table)
    from pyfracconv._fracconv import ffi, lib

    msgs = {ffi.string(lib.fc_strerror(s)) for s in range(0, 15)}
    assert len(msgs) == 15
    assert ffi.string(lib.fc_strerror(999)) == b"unknown status"
    assert pyfracconv.c_version == pyfracconv.__version__
    assert lib.fc_version() == lib.FC_VERSION_NUMBER
