"""Term counts of the compressed stream (csrc/soe_build.c).

Prints, for each rule, the number of exponential terms by order and
tolerance at horizon 1e8 (band of 64 exact lags), plus the creation time.

    python bench/soe_terms.py [horizon]
"""

import sys
import time

from pyfracconv import Stream

ORDERS = [0.05, 0.1, 0.25, 0.5, 0.75, 0.9, 0.95]
TOLS = [1e-6, 1e-10, 1e-12, 1e-13]
RULES = ["rectangle", "trapezoid", "grunwald", "l1"]
HIGH_ORDERS = [1.0, 1.05, 1.25, 1.5, 1.75, 1.9, 1.95]


def make(rule, order, tol, horizon):
    kind = Stream.integral if rule in ("rectangle", "trapezoid") else Stream.derivative
    return kind(order, 1.0, rule=rule, mode="compressed", tol=tol, horizon=horizon)


def main(horizon=1e8):
    print(f"terms of the compressed stream, horizon {horizon:g}")
    head = "tol      " + "".join(f"{a:>6}" for a in ORDERS) + "   max create ms"
    for rule in RULES:
        print(f"\n{rule}\n{head}")
        for tol in TOLS:
            row, worst = [], 0.0
            for a in ORDERS:
                t0 = time.perf_counter()
                s = make(rule, a, tol, horizon)
                worst = max(worst, time.perf_counter() - t0)
                row.append(s.terms)
            print(f"{tol:<9.0e}" + "".join(f"{n:>6}" for n in row) + f"   {1e3 * worst:8.1f}")
    # rectangle and trapezoid rules, 1 <= a < 2 (engine on the running sum;
    # a = 1: no terms)
    for rule in ("rectangle", "trapezoid"):
        head = "tol      " + "".join(f"{a:>6}" for a in HIGH_ORDERS) + "   max create ms"
        print(f"\n{rule}, 1 <= a < 2\n{head}")
        for tol in TOLS:
            row, worst = [], 0.0
            for a in HIGH_ORDERS:
                t0 = time.perf_counter()
                s = make(rule, a, tol, horizon)
                worst = max(worst, time.perf_counter() - t0)
                row.append(s.terms)
            print(f"{tol:<9.0e}" + "".join(f"{n:>6}" for n in row) + f"   {1e3 * worst:8.1f}")


if __name__ == "__main__":
    main(float(sys.argv[1]) if len(sys.argv) > 1 else 1e8)
