"""workers=1 against workers=2 in the same run (issue 12, item 2): the batch
integral of 8 x 2^18 samples (parallel over the signals), 3 x 2^18 (the
signals split: 3 is not a multiple of 2) and one signal of 2^20 (the
segment products split). Each row also records the CPU time over the wall
time of its rounds (extra_info cpu_per_wall: near 1 for one thread, up to
2 for two threads on two free cores).

    python -m pytest bench/test_bench_workers.py --benchmark-group-by=group

On a machine shared with other jobs the ratio of the two rows is noisy:
read it with the cpu_per_wall column (below 2 with workers=2 means the
second core was busy elsewhere). `python bench/workers_scaling.py` gives
medians of interleaved pairs and the same ratio.
"""

import time

import numpy as np
import pytest

import pyfracconv

A, H = 0.5, 1e-3
SHAPES = {"8 x 2^18": (8, 2**18), "3 x 2^18": (3, 2**18), "1 x 2^20": (1, 2**20)}


@pytest.fixture(params=list(SHAPES), scope="module")
def case(request):
    x = np.random.default_rng(0).standard_normal(SHAPES[request.param])
    return request.param, x


@pytest.mark.parametrize("workers", [1, 2])
def test_integral_workers(benchmark, case, workers):
    name, x = case
    benchmark.group = f"integral {name}"
    ref = pyfracconv.integral(x, A, H)  # also makes the plans of this thread
    cpu = [0.0]

    def run():
        c0 = time.process_time()
        y = pyfracconv.integral(x, A, H, workers=workers)
        cpu[0] += time.process_time() - c0
        return y

    t0 = time.perf_counter()
    y = benchmark.pedantic(run, rounds=7, iterations=1, warmup_rounds=1)
    wall = time.perf_counter() - t0
    benchmark.extra_info["cpu_per_wall"] = round(cpu[0] / wall, 2)
    assert y.tobytes() == ref.tobytes()  # bit for bit, whatever workers


STREAMS = {"exact 16 x 2^16": ("exact", 16, 2**16), "compressed 16 x 2^16": ("compressed", 16, 2**16)}


@pytest.mark.parametrize("workers", [1, 2])
@pytest.mark.parametrize("name", list(STREAMS))
def test_push_many_workers(benchmark, name, workers):
    mode, C, T = STREAMS[name]
    benchmark.group = f"push_many {name}"
    x = np.random.default_rng(1).standard_normal((T, C))
    kw = dict(mode="compressed", tol=1e-10, horizon=1e7) if mode == "compressed" else {}
    cpu = [0.0]
    out = {}

    def setup():
        return (pyfracconv.Stream.integral(A, H, channels=C, **kw),), {}

    def run(s):
        c0 = time.process_time()
        out["y"] = s.push_many(x, workers=workers)
        cpu[0] += time.process_time() - c0

    t0 = time.perf_counter()
    benchmark.pedantic(run, setup=setup, rounds=5, iterations=1)
    wall = time.perf_counter() - t0
    benchmark.extra_info["cpu_per_wall"] = round(cpu[0] / wall, 2)
    ref = pyfracconv.Stream.integral(A, H, channels=C, **kw).push_many(x)
    assert out["y"].tobytes() == ref.tobytes()
