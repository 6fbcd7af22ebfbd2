"""Batch engines against the plain NumPy reference, componentwise."""

import numpy as np
import pytest

import pyfracconv
from reference import (
    check_indices,
    componentwise_error,
    lag_reference,
    rule_reference,
)

TOL = 1e-13  # the componentwise promise: |y_n - exact_n| <= 1e-13 sum|c x|
ENGINES = ["direct", "blocked", "auto"]
RULE_CASES = [
    ("integral", "rectangle", 0.5),
    ("integral", "rectangle", 0.05),
    ("integral", "rectangle", 1.7),
    ("integral", "trapezoid", 0.5),
    ("integral", "trapezoid", 0.1),
    ("integral", "trapezoid", 2.3),
    ("derivative", "grunwald", 0.5),
    ("derivative", "grunwald", 0.9),
    ("derivative", "grunwald", 1.6),
    ("derivative", "l1", 0.3),
    ("derivative", "l1", 0.8),
]


def apply(kind, x, a, h, rule, **kw):
    f = pyfracconv.integral if kind == "integral" else pyfracconv.derivative
    return f(x, a, h, rule=rule, **kw)


def signals(rng, N):
    """Random signed, random positive, smooth, and a spike followed by
    zeros (outputs decay by orders of magnitude after it)."""
    t = np.arange(N) / N
    spike = np.zeros(N)
    spike[min(5, N - 1)] = 1.0
    return {
        "normal": rng.standard_normal(N),
        "positive": rng.random(N),
        "smooth": np.exp(-3 * t) * np.sin(20 * t) + 1.0,
        "spike": spike,
    }


@pytest.mark.parametrize("n", [1, 2, 3, 63, 64, 65, 127, 129, 500, 1025, 3000])
@pytest.mark.parametrize("klen", [1, 2, 50, 64, 65, 129, 300, "n", "2n"])
@pytest.mark.parametrize("engine", ENGINES)
def test_lagged_sum_every_output(n, klen, engine):
    rng = np.random.default_rng(n * 1000 + (klen if isinstance(klen, int) else 7))
    K = {"n": n, "2n": 2 * n + 3}.get(klen, klen)
    x = rng.standard_normal(n)
    c = rng.standard_normal(K) / (1 + np.arange(K)) ** 0.7
    y = pyfracconv.lagged_sum(x, c, engine=engine)
    ref, scale = lag_reference(x, c, np.arange(n))
    assert y.dtype == np.float64 and y.shape == x.shape
    assert componentwise_error(y, ref, scale) <= TOL


@pytest.mark.parametrize("kind,rule,a", RULE_CASES)
@pytest.mark.parametrize("engine", ENGINES)
@pytest.mark.parametrize("N", [1, 2, 200, 4097])
def test_rules_every_output(kind, rule, a, engine, N):
    rng = np.random.default_rng(N)
    h = 0.01
    for name, x in signals(rng, N).items():
        y = apply(kind, x, a, h, rule, engine=engine)
        ref, scale = rule_reference(rule, a, h, x, np.arange(N))
        err = componentwise_error(y, ref, scale)
        assert err <= TOL, (name, err)


@pytest.mark.parametrize("kind,rule,a", RULE_CASES[::2])
def test_rules_2_16_componentwise(kind, rule, a):
    N = 2**16
    rng = np.random.default_rng(16)
    idx = check_indices(N, rng)
    for name, x in signals(rng, N).items():
        y = apply(kind, x, a, 1e-3, rule)
        ref, scale = rule_reference(rule, a, 1e-3, x, idx)
        assert componentwise_error(y[idx], ref, scale) <= TOL, name


@pytest.mark.slow
@pytest.mark.parametrize("kind,rule,a", [RULE_CASES[0], RULE_CASES[3], RULE_CASES[6], RULE_CASES[9]])
def test_rules_2_20_componentwise(kind, rule, a):
    N = 2**20
    rng = np.random.default_rng(20)
    idx = check_indices(N, rng, head=600, random=120)
    for name, x in signals(rng, N).items():
        y = apply(kind, x, a, 1e-3, rule)
        ref, scale = rule_reference(rule, a, 1e-3, x, idx)
        assert componentwise_error(y[idx], ref, scale) <= TOL, name


def test_single_fft_engine_is_only_normwise():
    # Why the default engine is blocked: one full-length FFT keeps normwise
    # accuracy but loses digits on the small early outputs after a spike
    # (Higham, Accuracy and Stability of Numerical Algorithms, 2002, ch. 24).
    N = 2**15
    x = np.zeros(N)
    x[0] = 1.0
    x[N // 2 :] = 1e6
    c = pyfracconv.weights("grunwald", 0.5, N)
    ref, scale = lag_reference(x, c, np.arange(0, N // 2, 97))
    y_fft = pyfracconv.lagged_sum(x, c, engine="fft")[np.arange(0, N // 2, 97)]
    y_blk = pyfracconv.lagged_sum(x, c, engine="blocked")[np.arange(0, N // 2, 97)]
    assert componentwise_error(y_blk, ref, scale) <= TOL
    assert componentwise_error(y_fft, ref, scale) > 1e3 * TOL
    # ... while normwise it is fine
    full = pyfracconv.lagged_sum(x, c, engine="fft")
    blk = pyfracconv.lagged_sum(x, c, engine="blocked")
    assert np.max(np.abs(full - blk)) <= 1e-12 * np.max(np.abs(blk))


def test_many_signals_and_axis():
    rng = np.random.default_rng(3)
    x = rng.standard_normal((3, 700, 2))
    y = pyfracconv.integral(x, 0.6, 0.1, axis=1)
    assert y.shape == x.shape and y.dtype == np.float64
    for i in range(3):
        for j in range(2):
            one = pyfracconv.integral(x[i, :, j], 0.6, 0.1)
            np.testing.assert_array_equal(y[i, :, j], one)
    # negative axis and a non-contiguous view give the same numbers
    z = pyfracconv.derivative(x[:, ::2, :], 0.4, 0.2, rule="l1", axis=-2)
    zz = pyfracconv.derivative(np.ascontiguousarray(x[:, ::2, :]), 0.4, 0.2, rule="l1", axis=1)
    np.testing.assert_array_equal(z, zz)


def test_integer_and_list_input():
    y1 = pyfracconv.integral([1, 2, 3, 4], 0.5, 1.0)
    y2 = pyfracconv.integral(np.array([1.0, 2.0, 3.0, 4.0]), 0.5, 1.0)
    np.testing.assert_array_equal(y1, y2)
    assert y1.dtype == np.float64


def test_empty_record():
    assert pyfracconv.integral(np.zeros(0), 0.5, 1.0).shape == (0,)
    assert pyfracconv.lagged_sum(np.zeros((2, 0)), [1.0]).shape == (2, 0)
