"""The blocked engine's grouped products (csrc/lagsum.c, part_blocks):
output blocks summed several at a time, the first blocks of a size (fewer
windows than segments), the last group of a record cut short, windows
taken straight from the samples or padded at the record's ends, and every
class of kernel shape (first segment p0 = 2, 4, 8, 16, from the power-law
exponent of the kernel).

Each output is checked against the definition y_n = sum_k c_{n-k} x_k
summed in long double (tests/reference.py, lag_reference: the plain sum,
common practice) with the componentwise promise of fracconv.h,
|y_n - y_n(exact)| <= 1e-13 sum_k |c_{n-k} x_k|.
"""

import numpy as np
import pytest

import pyfracconv
from reference import check_indices, componentwise_error, lag_reference

TOL = 1e-13  # the componentwise promise of fracconv.h


def power_kernel(K, g, rng):
    """c_m ~ (m+1)^-g with random signs: power-law exponent g, so that the
    engine picks p0 = 2 (g <= 4), 4 (g <= 6.8), 8 (g <= 12.4) or 16."""
    return rng.choice([-1.0, 1.0], K) * (1.0 + np.arange(K)) ** (-g)


def spike_then_silence(n):
    x = np.zeros(n)
    x[min(3, n - 1)] = 1.0
    return x


# Record lengths around the block sizes (32, 256, 2048 for p0 = 2 and the
# sizes of the other classes) and their multiples: groups of 8, shorter
# last groups, a size with one or two segments only.
LENGTHS = [129, 130, 191, 255, 257, 511, 513, 700, 1023, 1025, 2047, 2049, 4095, 4097, 5000]


@pytest.mark.parametrize("g", [0.5, 5.0, 9.0, 14.0])
@pytest.mark.parametrize("n", LENGTHS)
def test_grouped_blocks_every_output(g, n):
    rng = np.random.default_rng(int(10 * g) * 100000 + n)
    c = power_kernel(n, g, rng)
    idx = np.arange(n) if n <= 2100 else check_indices(n, rng, head=2100, random=300)
    for name, x in {
        "normal": rng.standard_normal(n),
        "positive": rng.random(n),
        "spike": spike_then_silence(n),
    }.items():
        y = pyfracconv.lagged_sum(x, c, engine="blocked")
        ref, scale = lag_reference(x, c, idx)
        err = componentwise_error(y[idx], ref, scale)
        assert err <= TOL, (name, err)


@pytest.mark.parametrize("K", [65, 100, 257, 600, 2049, 3000])
def test_kernel_shorter_than_record(K):
    # the last size carries from 1 to the full count of segments
    n = 6000
    rng = np.random.default_rng(K)
    c = power_kernel(K, 0.5, rng)
    x = rng.standard_normal(n)
    idx = check_indices(n, rng, head=2500, random=400)
    y = pyfracconv.lagged_sum(x, c, engine="blocked")
    ref, scale = lag_reference(x, c, idx)
    assert componentwise_error(y[idx], ref, scale) <= TOL


@pytest.mark.parametrize("workers", [1, 2])
def test_groups_same_bits_whatever_the_split(workers):
    # the grouped sums are those of one block at a time, so threads that
    # split the blocks into ranges give the same bits (fracconv.h)
    rng = np.random.default_rng(7)
    x = rng.standard_normal((3, 40000))
    one = pyfracconv.integral(x, 0.5, 1e-3, workers=1)
    other = pyfracconv.integral(x, 0.5, 1e-3, workers=workers)
    assert np.array_equal(one, other)
    # and the same as each signal alone
    for s in range(3):
        assert np.array_equal(pyfracconv.integral(x[s], 0.5, 1e-3), one[s])


@pytest.mark.parametrize("n", [2**17 + 5, 2**18])
def test_one_long_signal_split_same_bits(n):
    # one signal split into ranges of blocks per size (the phases of
    # part_run), segments one block away and growth 16: the bits of one
    # thread
    x = np.random.default_rng(n).standard_normal(n)
    one = pyfracconv.integral(x, 0.5, 1e-3)
    assert np.array_equal(pyfracconv.integral(x, 0.5, 1e-3, workers=2), one)
    assert np.array_equal(pyfracconv.derivative(x, 0.5, 1e-3, workers=2), pyfracconv.derivative(x, 0.5, 1e-3))


def near_integer_grunwald(K, a):
    """Grunwald-Letnikov weights g_m = (-1)^m binom(a, m) by the recurrence
    g_m = g_{m-1} (m - 1 - a) / m (common practice); at a = 1 + 1e-7 the
    weight g_2 = a (a - 1) / 2 is about 5e-8, a near zero among the first
    lags."""
    g = np.empty(K)
    g[0] = 1.0
    for m in range(1, K):
        g[m] = g[m - 1] * (m - 1 - a) / m
    return g


@pytest.mark.parametrize(
    "shape", ["decaying", "decaying_zero_first", "growing", "tiny_lag_2", "near_integer_grunwald"]
)
@pytest.mark.parametrize("n", [300, 1100, 5000])
def test_first_segment_one_block_away_or_not(shape, n):
    # segments may start one block from their outputs only when the first
    # lags are no smaller than 1/16 of the segment's kernel values (csrc/
    # lagsum.c, one_block_start); each of these kernels goes one way or the
    # other, and every output keeps the componentwise bound either way.
    # Spikes two samples before a block of 64 or 1024 outputs: that block's
    # first output then has one term, at lag 2, which a growing kernel or a
    # tiny c_2 makes far smaller than the segment's kernel values.
    rng = np.random.default_rng(n)
    m = np.arange(n, dtype=float)
    if shape == "decaying":
        c = (m + 1.0) ** -0.5
    elif shape == "decaying_zero_first":  # the rectangle rule's shape: c_0 = 0
        c = np.concatenate([[0.0], (m[1:]) ** -0.5])
    elif shape == "growing":  # power law m^3: exponent 3, the p0 = 2 class
        c = (m + 1.0) ** 3
    elif shape == "tiny_lag_2":  # a power law but for one early lag
        c = (m + 1.0) ** -0.5
        c[2] = 1e-9
    else:
        c = near_integer_grunwald(n, 1.0 + 1e-7)
    idx = np.arange(n) if n <= 1100 else check_indices(n, rng, head=1100, random=300)
    spikes = np.zeros(n)
    spikes[[j for j in (62, 1022) if j < n]] = 1.0
    for x in (spikes, spike_then_silence(n), rng.standard_normal(n), rng.random(n)):
        y = pyfracconv.lagged_sum(x, c, engine="blocked")
        ref, scale = lag_reference(x, c, idx)
        assert componentwise_error(y[idx], ref, scale) <= TOL, shape
