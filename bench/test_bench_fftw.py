"""The single-FFT lagged sum: lagged_sum(engine="fft") (the library's own C
FFT) against the same convolution through pyFFTW (bench/fftw_path.py,
not wired into the library because it measured no faster on the machines
we have) and scipy.signal.fftconvolve; N = 2^16 and 2^18 samples, one signal,
Grunwald-Letnikov kernel of N values (transform size P = 2N).

    python -m pytest bench/test_bench_fftw.py --benchmark-group-by=group

Contenders in each group ("engine=fft N=2^k"):

* ``c_fft``: lagged_sum(engine="fft"), the C engine;
* ``pyfftw_tuned``: _fftw.lagged_sum_fft with FFTW_MEASURE plans made from
  wisdom (the wisdom is built in the test, outside the timing, in a
  temporary cache folder; FFTW_MEASURE takes about a minute at 2^19);
* ``pyfftw_estimate``: the pyFFTW path with quick FFTW_ESTIMATE plans;
* ``scipy_fftconvolve``: what a user would otherwise write.

Plans are made before timing starts (one untimed call). Single thread.
With --benchmark-disable (CI) every contender runs once and the measuring
planner is skipped (the tuned contender then runs ESTIMATE plans through
the same code), so the file stays fast there.
"""

import numpy as np
import pytest
import scipy.signal

import fftw_path as _fftw
import pyfracconv

# pyFFTW comes with the bench extra (pip install -e ".[test,bench]"); without
# it this file is skipped, as is bench/test_bench_fft.py.
pytest.importorskip("pyfftw")

SIZES = [2**16, 2**18]


@pytest.fixture(params=SIZES, ids=lambda n: f"N=2^{int(np.log2(n))}")
def N(request):
    return request.param


@pytest.fixture
def data(N):
    x = np.random.default_rng(3).standard_normal(N)
    c = pyfracconv.weights("grunwald", 0.5, N)
    return x, c


def _group(N):
    return f"engine=fft N=2^{int(np.log2(N))}"


def _check(y, x, c):
    """Same numbers as the componentwise C engine (normwise: the single-FFT
    engine's accuracy)."""
    y = np.ravel(y)
    ref = pyfracconv.lagged_sum(x, c, engine="blocked")
    assert np.max(np.abs(y - ref)) <= 1e-12 * np.max(np.abs(ref))


@pytest.fixture
def no_wisdom(tmp_path, monkeypatch):
    monkeypatch.setenv("PYFRACCONV_CACHE_DIR", str(tmp_path / "empty"))
    _fftw.reset()
    yield
    _fftw.reset()


def test_c_fft(benchmark, data, no_wisdom):
    x, c = data
    benchmark.group = _group(x.size)
    y = benchmark(pyfracconv.lagged_sum, x, c, engine="fft")
    _check(y, x, c)


def test_pyfftw_estimate(benchmark, data, no_wisdom):
    x, c = data
    benchmark.group = _group(x.size)
    block = x.reshape(1, -1)
    P = _fftw.transform_size(x.size, c.size)
    assert _fftw.get_plan(P, "forward")[1] is False  # plans, untimed
    y = benchmark(_fftw.lagged_sum_fft, block, c)
    _check(y, x, c)


def test_pyfftw_tuned(benchmark, data, no_wisdom, request):
    x, c = data
    benchmark.group = _group(x.size)
    P = _fftw.transform_size(x.size, c.size)
    lg = P.bit_length() - 1
    block = x.reshape(1, -1)
    if not request.config.getoption("benchmark_disable", False):
        _fftw.build_plans(lg, "measure", min_log2=lg)
        assert _fftw.get_plan(P, "forward")[1]  # really from wisdom
    _fftw.lagged_sum_fft(block, c)  # plans, untimed
    y = benchmark(_fftw.lagged_sum_fft, block, c)
    _check(y, x, c)


def test_scipy_fftconvolve(benchmark, data):
    x, c = data
    benchmark.group = _group(x.size)
    y = benchmark(lambda: scipy.signal.fftconvolve(x, c)[: x.size])
    _check(y, x, c)
