"""Compressed stream (engine 4) throughput from Python, against the exact
stream on the same samples.

    python -m pytest bench/test_bench_compressed.py --benchmark-group-by=group

The per-sample cost from C (no Python overhead), the median and the worst
single push are measured by bench/c/bench_compressed.c.
"""

import numpy as np
import pytest

from pyfracconv import Stream

RULES = ["rectangle", "trapezoid", "grunwald", "l1"]
N = 2**20


def make(rule, mode, channels=None, tol=1e-12, horizon=1e8):
    kind = Stream.integral if rule in ("rectangle", "trapezoid") else Stream.derivative
    kw = dict(rule=rule, channels=channels, mode=mode)
    if mode == "compressed":
        kw.update(tol=tol, horizon=horizon)
    return kind(0.5, 0.01, **kw)


@pytest.fixture(scope="module")
def x():
    return np.random.default_rng(0).standard_normal(N)


@pytest.mark.parametrize("rule", RULES)
@pytest.mark.parametrize("mode", ["compressed", "exact"])
def test_push_many_2_20(benchmark, x, rule, mode):
    benchmark.group = f"push_many 2^20 samples, {rule}"

    def run():
        s = make(rule, mode)
        return s.push_many(x)

    y = benchmark(run)
    assert y.shape == x.shape and np.all(np.isfinite(y))


@pytest.mark.parametrize("tol", [1e-6, 1e-12, 1e-13])
def test_push_many_by_tol(benchmark, x, tol):
    benchmark.group = "push_many by tolerance (grunwald)"
    s = make("grunwald", "compressed", tol=tol)
    benchmark.extra_info["terms"] = s.terms
    y = benchmark(s.push_many, x)
    assert np.all(np.isfinite(y))


def test_single_push(benchmark):
    benchmark.group = "single push (Python call overhead included)"
    s = make("rectangle", "compressed")
    benchmark(s.push, 0.25)


@pytest.mark.parametrize("channels", [1, 8, 64])
def test_channels(benchmark, channels):
    benchmark.group = "push_many 10^4 steps by channels (l1)"
    xs = np.random.default_rng(1).standard_normal((10_000, channels))
    s = make("l1", "compressed", channels=channels)
    benchmark.extra_info["ns_per_sample_channel_hint"] = "mean / (1e4 * channels)"
    y = benchmark(s.push_many, xs)
    assert y.shape == xs.shape


def test_create(benchmark):
    benchmark.group = "creation (SOE build and verification)"
    s = benchmark(make, "grunwald", "compressed", None, 1e-13, 1e8)
    assert 0 < s.terms <= 80
