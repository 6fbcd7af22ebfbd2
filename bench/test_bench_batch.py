"""Batch integral against what a user would otherwise write: NumPy weights
plus scipy.signal.fftconvolve (one full-length FFT, normwise accurate only).

    python -m pytest bench/test_bench_batch.py --benchmark-group-by=param:N

Each contender is timed in its own rounds here; bench/batch_sweep.py times
them in interleaved pairs (fairer on a busy machine) for the README table.
"""

import numpy as np
import pytest
import scipy.signal
import scipy.special

import pyfracconv

A, H = 0.5, 1e-3


def numpy_reference(x, a=A, h=H):
    m = np.arange(len(x), dtype=float)
    b = ((m + 1) ** a - m**a) * (h**a / scipy.special.gamma(a + 1))
    y = np.empty_like(x)
    y[0] = 0.0
    y[1:] = scipy.signal.fftconvolve(x, b)[: len(x) - 1]
    return y


@pytest.fixture(params=[2**e for e in range(8, 23, 2)], ids=lambda n: f"N=2^{int(np.log2(n))}")
def N(request):
    return request.param


@pytest.fixture
def x(N):
    return np.random.default_rng(0).random(N)


def test_pyfracconv_integral(benchmark, x):
    benchmark.group = f"integral N={len(x)}"
    y = benchmark(pyfracconv.integral, x, A, H)
    # same numbers as the reference (normwise; the reference is the less
    # accurate of the two on small outputs)
    ref = numpy_reference(x)
    assert np.max(np.abs(y - ref)) <= 1e-10 * np.max(np.abs(ref))


def test_numpy_fftconvolve(benchmark, x):
    benchmark.group = f"integral N={len(x)}"
    benchmark(numpy_reference, x)


def test_pyfracconv_single_fft_engine(benchmark, x):
    benchmark.group = f"integral N={len(x)}"
    benchmark(pyfracconv.integral, x, A, H, engine="fft")
