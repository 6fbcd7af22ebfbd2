"""push_many's time axis: axis=0 by default (one row per time step), any
axis accepted, outputs in the layout of the input.

Sources: the layouts are compared with each other bit for bit (the same
samples reach the C engine in the same order, so the outputs must be
identical), and with outside references: np.convolve on small integers
(exact in double precision, common practice) for a kernel stream, and the
left rectangle sum h (x_0 + ... + x_{n-1}) for the order-1 rectangle rule
(docs/references.md, "Identities with no discretisation error", Order
a = 1).
"""

import math

import numpy as np
import pytest

import pyfracconv as pf
from pyfracconv import Stream

MAKERS = {
    "integral": lambda c: Stream.integral(0.5, 0.1, channels=c),
    "trapezoid": lambda c: Stream.integral(0.7, 0.05, rule="trapezoid", channels=c),
    "l1": lambda c: Stream.derivative(0.3, 0.1, rule="l1", channels=c),
    "compressed": lambda c: Stream.integral(0.5, 0.1, channels=c, mode="compressed", horizon=1e4),
    "kernel": lambda c: Stream.from_kernel([1.0, -0.5, 0.25], channels=c),
}


@pytest.mark.parametrize("kind", sorted(MAKERS))
@pytest.mark.parametrize("channels", [1, 2, 3])
def test_time_along_axis_1_is_the_transpose(kind, channels):
    rng = np.random.default_rng(20 + channels)
    x = rng.standard_normal((300, channels))  # (T, C)
    a, b = MAKERS[kind](channels), MAKERS[kind](channels)
    # in blocks of different sizes, so that blocks continue across calls
    for lo, hi in ((0, 1), (1, 70), (70, 300)):
        ya = a.push_many(x[lo:hi])
        yb = b.push_many(x[lo:hi].T, axis=1)
        assert yb.shape == (channels, hi - lo)
        assert np.array_equal(yb, ya.T)
        assert np.array_equal(b.push_many(np.ones((channels, 0)), axis=1), np.ones((channels, 0)))
    assert a.count == b.count == 300
    assert a.save() == b.save()


@pytest.mark.parametrize("channels", [1, 2, 3])
def test_negative_axes_and_the_default(channels):
    rng = np.random.default_rng(7)
    x = rng.standard_normal((50, channels))
    ref = Stream.integral(0.5, 0.1, channels=channels).push_many(x)
    assert np.array_equal(Stream.integral(0.5, 0.1, channels=channels).push_many(x, axis=-2), ref)
    assert np.array_equal(Stream.integral(0.5, 0.1, channels=channels).push_many(x.T, axis=-1), ref.T)
    assert np.array_equal(Stream.integral(0.5, 0.1, channels=channels).push_many(x, axis=0), ref)
    # a non-contiguous view with time along axis 1
    wide = np.asfortranarray(x.T)
    assert np.array_equal(Stream.integral(0.5, 0.1, channels=channels).push_many(wide, axis=1), ref.T)


def test_scalar_stream_axis():
    x = np.arange(10.0)
    ref = Stream.integral(1.0, 0.5).push_many(x)
    # order 1: the left rectangle sum (docs/references.md, Order a = 1);
    # exact here: halves of small integers
    assert np.array_equal(ref, 0.5 * np.concatenate(([0.0], np.cumsum(x)[:-1])))
    assert np.array_equal(Stream.integral(1.0, 0.5).push_many(x, axis=-1), ref)
    s = Stream.integral(1.0, 0.5)
    with pytest.raises(pf.ArgumentError, match=r"axis=1"):
        s.push_many(x, axis=1)
    assert s.count == 0


def test_outside_references_with_time_along_axis_1():
    # small integers: every product and sum is exact in double precision,
    # so the lagged sum equals np.convolve exactly (common practice)
    rng = np.random.default_rng(3)
    k = rng.integers(-4, 5, size=9).astype(float)
    x = rng.integers(-9, 10, size=(3, 200)).astype(float)  # (C, T)
    y = Stream.from_kernel(k, channels=3).push_many(x, axis=1)
    for c in range(3):
        assert np.array_equal(y[c], np.convolve(x[c], k)[:200])
    # the rectangle rule at order 1 is the left rectangle sum
    r = Stream.integral(1.0, 0.25, channels=3).push_many(x, axis=1)
    left = 0.25 * np.concatenate((np.zeros((3, 1)), np.cumsum(x, axis=1)[:, :-1]), axis=1)
    assert np.allclose(r, left, rtol=1e-13, atol=1e-12)


def test_bad_axis_and_shapes_change_nothing():
    s = Stream.integral(0.5, 0.1, channels=2)
    s.push_many(np.ones((4, 2)))
    before = s.save()
    with pytest.raises(pf.ArgumentError, match=r"axis=2"):
        s.push_many(np.ones((4, 2)), axis=2)
    with pytest.raises(pf.InputTypeError, match=r"axis='1'"):
        s.push_many(np.ones((4, 2)), axis="1")
    with pytest.raises(pf.InputTypeError, match=r"axis=1.0"):
        s.push_many(np.ones((4, 2)), axis=1.0)
    with pytest.raises(pf.ArgumentError, match=r"expected shape \(2, T\) \(time along axis=1\)"):
        s.push_many(np.ones((4, 3)), axis=1)
    with pytest.raises(pf.ArgumentError, match=r"expected shape \(T, 2\)"):
        s.push_many(np.ones((4, 3)), axis=0)
    bad = np.ones((2, 6))
    bad[1, 4] = math.nan
    # the message indexes the array as the caller passed it
    with pytest.raises(pf.SampleError, match=r"xs\[1, 4\]=nan.*nothing was pushed"):
        s.push_many(bad, axis=1)
    assert s.save() == before and s.count == 4


def test_horizon_refusal_with_time_along_axis_1():
    s = Stream.integral(0.5, 0.1, channels=2, mode="compressed", horizon=5)
    before = s.save()
    with pytest.raises(pf.HorizonError, match=r"xs \(shape \(2, 7\)\)"):
        s.push_many(np.ones((2, 7)), axis=1)
    assert s.save() == before
    assert s.push_many(np.ones((2, 6)), axis=1).shape == (2, 6)
