"""The library's own real FFT (csrc/fft.c) against pyFFTW and numpy.fft.

Real forward transform of n float64 samples, n = 2^8 .. 2^16. pyFFTW plans
with FFTW_MEASURE, single thread, aligned buffers; planning happens in the
fixture, outside the timing, and the timed call is the planned object's
execute(). numpy.fft.rfft (pocketfft) allocates its output on every call.
Our transform is called through the compiled cffi module, as a user of the
C API would (a plan made once, buffers passed without copies).

    python -m pytest bench/test_bench_fft.py --benchmark-group-by=group

Each group ("rfft n=2^k") holds the three contenders, so the ratios can be
read off directly; --benchmark-sort=mean puts the fastest first.
"""

import numpy as np
import pytest

from pyfracconv._fracconv import ffi, lib

# pyFFTW comes with the bench extra (pip install -e ".[test,bench]").
pyfftw = pytest.importorskip("pyfftw")

SIZES = [2**8, 2**10, 2**12, 2**14, 2**16]


def _group(n):
    return f"rfft n=2^{int(np.log2(n))}"


class OurPlan:
    """A plan of the library's FFT with the buffers bound once."""

    def __init__(self, n):
        p = ffi.new("fc_fft_plan **")
        status = lib.fc_rfft_create(n, p)
        if status != lib.FC_OK:
            raise RuntimeError(f"fc_rfft_create({n}) failed with status {status}")
        self.plan = ffi.gc(p[0], lib.fc_rfft_free)
        self.n = n

    def forward_into(self, x, out):
        """x: n float64 (contiguous); out: n+2 float64, written."""
        status = lib.fc_rfft_forward(
            self.plan,
            ffi.from_buffer("double[]", x),
            ffi.from_buffer("double[]", out, require_writable=True),
        )
        if status != lib.FC_OK:
            raise RuntimeError(f"fc_rfft_forward failed with status {status}")
        return out


@pytest.fixture(params=SIZES, ids=lambda n: f"n=2^{int(np.log2(n))}")
def n(request):
    return request.param


@pytest.fixture
def x(n):
    return np.random.default_rng(12345).standard_normal(n)


@pytest.fixture
def fftw_forward(n):
    a = pyfftw.empty_aligned(n, dtype="float64")
    b = pyfftw.empty_aligned(n // 2 + 1, dtype="complex128")
    # planning (FFTW_MEASURE runs trial transforms) is done here, untimed
    return pyfftw.FFTW(a, b, flags=("FFTW_MEASURE",), threads=1)


def test_same_spectrum(n, x, fftw_forward):
    """Not timed: ours, pyFFTW and numpy agree to 1e-12 relative (maximum
    error over the spectrum / maximum modulus); all three compute the same
    DFT X_k = sum_j x_j exp(-2 pi i jk/n) (common practice)."""
    ours = OurPlan(n).forward_into(x, np.empty(n + 2)).view(np.complex128)
    fftw_forward.input_array[:] = x
    theirs = fftw_forward().copy()
    ref = np.fft.rfft(x)
    scale = np.max(np.abs(ref))
    assert ours.shape == theirs.shape == ref.shape == (n // 2 + 1,)
    assert np.max(np.abs(ours - theirs)) <= 1e-12 * scale
    assert np.max(np.abs(ours - ref)) <= 1e-12 * scale
    # the imaginary parts of the DC and Nyquist bins are exactly zero
    assert ours[0].imag == 0.0 and ours[-1].imag == 0.0


def test_pyfracconv_rfft(benchmark, n, x):
    benchmark.group = _group(n)
    plan = OurPlan(n)
    out = np.empty(n + 2)
    xb = ffi.from_buffer("double[]", x)
    ob = ffi.from_buffer("double[]", out, require_writable=True)
    forward, p = lib.fc_rfft_forward, plan.plan
    status = benchmark(forward, p, xb, ob)
    assert status == lib.FC_OK


def test_pyfftw_measure(benchmark, n, x, fftw_forward):
    benchmark.group = _group(n)
    fftw_forward.input_array[:] = x
    benchmark(fftw_forward.execute)


def test_numpy_rfft(benchmark, n, x):
    benchmark.group = _group(n)
    benchmark(np.fft.rfft, x)
