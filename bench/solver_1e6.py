"""One million steps of the scalar predictor-corrector with a Python rhs
(invented problem D^a y = -y + 0.1 sin(t), a = 0.6, step 1e-4), exact and
compressed memory, against the bare calls of the same rhs (2e6 + 1 of them),
with the scalar rhs called from C through the Python C API (the default on
CPython) and through the cffi callback (the path before, and the one
elsewhere). Longer than the bench suite's default run, so a script: prints
the median and range of `repeat` interleaved rounds (default 5).

    python bench/solver_1e6.py [steps] [repeat]
"""

import math
import sys
import time

import numpy as np

from pyfracconv import solve

solve_mod = sys.modules["pyfracconv.solve"]  # the module (pyfracconv.solve is the function)


def rhs(t, y):
    return -y + 0.1 * math.sin(t)


def bare(n):
    y = 1.0
    for i in range(n):
        rhs(i * 1e-4, y)


def run(n, memory, direct):
    keep = solve_mod._DIRECT
    solve_mod._DIRECT = direct
    try:
        solve(rhs, 1.0, 0.6, 1e-4, n, memory=memory)
    finally:
        solve_mod._DIRECT = keep


def main():
    n = int(float(sys.argv[1])) if len(sys.argv) > 1 else 10**6
    repeat = int(sys.argv[2]) if len(sys.argv) > 2 else 5
    rows = [("bare rhs calls", lambda: bare(2 * n + 1))]
    for direct in (True, False):
        for memory in ("exact", "compressed"):
            how = "C API" if direct else "cffi callback"
            rows.append(
                (f"solve PC {memory}, {how}", lambda memory=memory, direct=direct: run(n, memory, direct))
            )
    ts = {label: [] for label, _ in rows}
    for _ in range(repeat):  # interleaved rounds: load changes touch every row
        for label, fn in rows:
            t0 = time.perf_counter()
            fn()
            ts[label].append(time.perf_counter() - t0)
    print(f"{n} steps, median (min .. max) of {repeat} interleaved rounds")
    base = float(np.median(ts[rows[0][0]]))
    for label, _ in rows:
        v = ts[label]
        med = float(np.median(v))
        print(f"{label:32s} {med:7.3f} s ({min(v):.3f} .. {max(v):.3f})  {med / base:5.2f} x bare calls")


if __name__ == "__main__":
    main()
