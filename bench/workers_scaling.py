"""workers=1 and workers=2 of the batch integral and of push_many on
16-channel exact and compressed streams, interleaved pairs (issue
12, item 2): for each shape, PAIRS rounds of (workers=1, workers=2) in
turn, median wall time of each, their ratio, and the CPU time over the
wall time of each (process_time / perf_counter: about 1 for one busy
thread, up to 2 for two on two free cores; less when other jobs share the
cores).

    python bench/workers_scaling.py [--pairs 9]
"""

import argparse
import os
import statistics
import time

import numpy as np

import pyfracconv

SHAPES = [(8, 2**18), (16, 2**16), (3, 2**18), (1, 2**20), (1, 2**18)]


def one(x, workers):
    c0, t0 = time.process_time(), time.perf_counter()
    pyfracconv.integral(x, 0.5, 1e-3, workers=workers)
    return time.perf_counter() - t0, time.process_time() - c0


def one_stream(x, mode, workers):
    kw = dict(mode="compressed", tol=1e-10, horizon=1e7) if mode == "compressed" else {}
    s = pyfracconv.Stream.integral(0.5, 1e-3, channels=x.shape[1], **kw)
    c0, t0 = time.process_time(), time.perf_counter()
    s.push_many(x, workers=workers)
    return time.perf_counter() - t0, time.process_time() - c0


def row(name, f, pairs):
    f(1), f(2)  # plans and work space of both
    w1, w2 = [], []
    for _ in range(pairs):
        w1.append(f(1))
        w2.append(f(2))
    m1 = statistics.median(t for t, _ in w1)
    m2 = statistics.median(t for t, _ in w2)
    r1 = sum(c for _, c in w1) / sum(t for t, _ in w1)
    r2 = sum(c for _, c in w2) / sum(t for t, _ in w2)
    print(f"| {name} | {m1 * 1e3:.1f} ms | {m2 * 1e3:.1f} ms | {m1 / m2:.2f}x | {r1:.2f} | {r2:.2f} |")


def main():
    ap = argparse.ArgumentParser()
    ap.add_argument("--pairs", type=int, default=9)
    args = ap.parse_args()
    print(f"os.cpu_count() = {os.cpu_count()}, load average {' '.join(f'{v:.2f}' for v in os.getloadavg())}")
    print("| call | workers=1 | workers=2 | ratio | CPU/wall w=1 | CPU/wall w=2 |")
    print("|---|---|---|---|---|---|")
    for shape in SHAPES:
        x = np.random.default_rng(0).standard_normal(shape)
        row(f"integral {shape[0]} x 2^{int(np.log2(shape[1]))}", lambda w, x=x: one(x, w), args.pairs)
    x = np.random.default_rng(1).standard_normal((2**16, 16))
    for mode in ("exact", "compressed"):
        row(f"push_many {mode} 16 x 2^16", lambda w, m=mode: one_stream(x, m, w), max(3, args.pairs // 3))


if __name__ == "__main__":
    main()
