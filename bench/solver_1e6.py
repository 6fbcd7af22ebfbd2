"""One million steps of the scalar predictor-corrector with a Python rhs
(invented problem D^a y = -y + 0.1 sin(t), a = 0.6, step 1e-4), exact and
compressed memory, against the bare calls of the same rhs (2e6 + 1 of them).
Longer than the bench suite's default run, so a script: prints the median
and range of 3 runs of each.

    python bench/solver_1e6.py [steps]
"""

import math
import sys
import time

from pyfracconv import solve


def rhs(t, y):
    return -y + 0.1 * math.sin(t)


def bare(n):
    y = 1.0
    for i in range(n):
        rhs(i * 1e-4, y)


def timed(fn, repeat=3):
    ts = []
    for _ in range(repeat):
        t0 = time.perf_counter()
        fn()
        ts.append(time.perf_counter() - t0)
    ts.sort()
    return ts[len(ts) // 2], ts[0], ts[-1]


def main():
    n = int(float(sys.argv[1])) if len(sys.argv) > 1 else 10**6
    rows = [("bare rhs calls", lambda: bare(2 * n + 1))]
    for memory in ("exact", "compressed"):
        rows.append((f"solve PC {memory}",
                     lambda memory=memory: solve(rhs, 1.0, 0.6, 1e-4, n, memory=memory)))
    base = None
    print(f"{n} steps, median (min .. max) of 3 runs")
    for name, fn in rows:
        med, lo, hi = timed(fn)
        base = base or med
        print(f"{name:24s} {med:7.3f} s ({lo:.3f} .. {hi:.3f})  {med / base:5.2f} x bare calls")


if __name__ == "__main__":
    main()
