"""The compressed stream with a time per sample (TimedStream) against the
uniform compressed stream (Stream, mode='compressed'): rectangle rule,
a = 0.5, tol 1e-10, one channel, 10^5 samples in blocks of 1000 (push_many)
and 10^4 single pushes; the timed stream on jittered times (steps uniform
in [0.5, 1.5] ms, smallest step 0.5 ms, horizon 1000 s), the uniform one
on h = 1 ms with the same horizon in samples (10^6). At a = 1.5 (the
running integral path, csrc/stream_timed.c) the timed stream, both
integral rules, 10^5 and 10^6 jittered samples in blocks of 10^4.

    python -m pytest bench/test_bench_stream_timed.py --benchmark-group-by=group
"""

import numpy as np
import pytest

import pyfracconv

A, TOL = 0.5, 1e-10
N_BLOCK, N_SINGLE = 10**5, 10**4


def data(n):
    rng = np.random.default_rng(0)
    t = np.concatenate([[0.0], np.cumsum(rng.uniform(0.5e-3, 1.5e-3, n - 1))])
    return t, rng.standard_normal(n)


def timed():
    return pyfracconv.TimedStream(A, 0.5e-3, 1000.0, tol=TOL)


def uniform():
    return pyfracconv.Stream.integral(A, 1e-3, mode="compressed", tol=TOL, horizon=1e6)


def test_timed_push_many(benchmark):
    benchmark.group = f"push_many {N_BLOCK} samples"
    t, x = data(N_BLOCK)

    def run():
        s = timed()
        for i in range(0, N_BLOCK, 1000):
            s.push_many(t[i : i + 1000], x[i : i + 1000])

    benchmark.pedantic(run, rounds=3, iterations=1)


def test_uniform_push_many(benchmark):
    benchmark.group = f"push_many {N_BLOCK} samples"
    _, x = data(N_BLOCK)

    def run():
        s = uniform()
        for i in range(0, N_BLOCK, 1000):
            s.push_many(x[i : i + 1000])

    benchmark.pedantic(run, rounds=3, iterations=1)


def test_timed_push(benchmark):
    benchmark.group = f"push x {N_SINGLE}"
    t, x = data(N_SINGLE)
    tl, xl = t.tolist(), x.tolist()

    def run():
        s = timed()
        for ti, xi in zip(tl, xl):
            s.push(ti, xi)

    benchmark.pedantic(run, rounds=3, iterations=1)


def test_uniform_push(benchmark):
    benchmark.group = f"push x {N_SINGLE}"
    _, x = data(N_SINGLE)
    xl = x.tolist()

    def run():
        s = uniform()
        for xi in xl:
            s.push(xi)

    benchmark.pedantic(run, rounds=3, iterations=1)


@pytest.mark.parametrize("rule", ["rectangle", "trapezoid"])
@pytest.mark.parametrize("n", [10**5, 10**6], ids=lambda n: f"n=1e{int(np.log10(n))}")
def test_timed_push_many_order_1_5(benchmark, n, rule):
    benchmark.group = f"timed a=1.5 push_many {n} samples"
    t, x = data(n)

    def run():
        s = pyfracconv.TimedStream(1.5, 0.5e-3, 2000.0, rule=rule, tol=TOL)
        for i in range(0, n, 10**4):
            s.push_many(t[i : i + 10**4], x[i : i + 10**4])

    benchmark.pedantic(run, rounds=2, iterations=1)
