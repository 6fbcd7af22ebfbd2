"""Batch integral sweep 2^8 .. 2^22 samples: pyfracconv.integral(x, 0.5,
1e-3) (engine 'auto', componentwise, weights included) and its single-FFT
engine (engine='fft', normwise only) against NumPy weights +
scipy.signal.fftconvolve (what a user would write), in interleaved pairs
(reference, pyfracconv, fft engine, reference, ...) so that a busy machine
slows all of them alike. One thread. Prints a Markdown table: medians of
the pairs' times, the median speed-up over the reference and its range
over the pairs.

    python bench/batch_sweep.py [pairs]      # default 9 pairs
"""

import statistics
import sys
import time

import numpy as np
import scipy.signal
import scipy.special

import pyfracconv

A, H = 0.5, 1e-3
EXPONENTS = range(8, 23, 2)


def reference(x, a=A, h=H):
    m = np.arange(len(x), dtype=float)
    b = ((m + 1) ** a - m**a) * (h**a / scipy.special.gamma(a + 1))
    y = np.empty_like(x)
    y[0] = 0.0
    y[1:] = scipy.signal.fftconvolve(x, b)[: len(x) - 1]
    return y


def timed(f, x, reps, **kw):
    t = time.perf_counter()
    for _ in range(reps):
        f(x, **kw)
    return (time.perf_counter() - t) / reps


def ours(x, **kw):
    return pyfracconv.integral(x, A, H, **kw)


def main(argv=None):
    argv = sys.argv[1:] if argv is None else argv
    pairs = int(argv[0]) if argv else 9
    print(f"Batch integral sweep, {pairs} interleaved pairs per size, one thread:\n")
    print('| samples | integral | reference | speed-up (range) | `engine="fft"` | its speed-up |')
    print("|---|---|---|---|---|---|")
    for e in EXPONENTS:
        x = np.random.default_rng(0).random(2**e)
        for f, kw in ((ours, {}), (ours, {"engine": "fft"}), (reference, {})):
            f(x, **kw)  # plans, caches, page faults
        reps = max(1, int(2e-2 / max(timed(reference, x, 1), 1e-7)))  # ~20 ms a timing
        tr, to, tf = [], [], []
        for _ in range(pairs):
            tr.append(timed(reference, x, reps))
            to.append(timed(ours, x, reps))
            tf.append(timed(ours, x, reps, engine="fft"))
        sp = [r / o for r, o in zip(tr, to)]
        spf = [r / f for r, f in zip(tr, tf)]
        med = statistics.median

        def ms(s):
            return f"{s * 1e3:.3g} ms"

        print(
            f"| 2^{e} | {ms(med(to))} | {ms(med(tr))} | {med(sp):.2f}x "
            f"({min(sp):.2f}-{max(sp):.2f}) | {ms(med(tf))} | {med(spf):.2f}x |"
        )


if __name__ == "__main__":
    main()
