"""Benchmarks of pyfracconv.Controller (per-update cost from Python).

    python -m pytest bench/test_bench_control.py -s --benchmark-group-by=group

  - Controller.update() from Python, compressed and exact memory, at about
    1e5 samples of history;
  - update_block() of 1e5 samples (the C loop without the Python call);
  - the worst single update() over 1e5 updates, the fastest of 3 runs per
    position, beside the median (printed and stored in extra_info).
The C figures come from bench/c/bench_controller.c (make bench-c).
"""

import time

import numpy as np
import pytest

import pyfracconv as pf

N = 100_000


def _controller(memory):
    return (
        pf.Controller(
            1.0,
            0.5,
            0.1,
            integral_order=0.7,
            derivative_order=0.5,
            step=1e-3,
            output_limits=(-10, 10),
            memory=memory,
            horizon=1e7,
        )
        if memory == "compressed"
        else pf.Controller(
            1.0,
            0.5,
            0.1,
            integral_order=0.7,
            derivative_order=0.5,
            step=1e-3,
            output_limits=(-10, 10),
            memory=memory,
        )
    )


@pytest.mark.parametrize("memory", ["compressed", "exact"])
def test_update_python(benchmark, memory):
    benchmark.group = "controller update (Python)"
    c = _controller(memory)
    c.update_block(1.0, np.sin(np.arange(N) * 1e-3))
    benchmark(c.update, 1.0, 0.5)


@pytest.mark.parametrize("memory", ["compressed", "exact"])
def test_update_block(benchmark, memory):
    benchmark.group = "controller update_block 1e5"
    y = np.sin(np.arange(N) * 1e-3)

    def run():
        _controller(memory).update_block(1.0, y)

    benchmark.pedantic(run, rounds=3, iterations=1)
    if benchmark.stats is not None:  # None with --benchmark-disable
        benchmark.extra_info["ns_per_update"] = benchmark.stats.stats.min / N * 1e9


@pytest.mark.parametrize("memory", ["compressed", "exact"])
def test_worst_update_python(benchmark, memory):
    benchmark.group = "controller worst update"
    y = np.sin(np.arange(N) * 1e-3)
    best = np.full(N, np.inf)
    for _ in range(3):
        c = _controller(memory)
        upd, pc = c.update, time.perf_counter_ns
        t = np.empty(N)
        for i in range(N):
            a = pc()
            upd(1.0, y[i])
            t[i] = pc() - a
        best = np.minimum(best, t)
    med, worst = float(np.median(best)), float(best.max())
    benchmark.extra_info.update(median_ns=med, worst_ns=worst)
    print(
        f"\n{memory}: median {med:.0f} ns, worst {worst:.0f} ns "
        f"({worst / med:.1f}x), p99.9 {np.quantile(best, 0.999):.0f} ns"
    )
    benchmark.pedantic(lambda: None, rounds=1)
