"""First call in a fresh process: pyfracconv.integral against NumPy weights
+ scipy.signal.fftconvolve, 2^20 samples, each in its own new interpreter
(imports done before the clock starts; plans, caches and page faults of the
first call included). Prints a Markdown table; median of 5 processes each.

    python bench/first_call.py
"""

import statistics
import subprocess
import sys

N = 2**20
CODE = {
    "pyfracconv.integral": (
        "import numpy as np, pyfracconv\n"
        "x = np.random.default_rng(0).random({N})\n"
        "t = time.perf_counter(); pyfracconv.integral(x, 0.5, 1e-3)\n"
    ),
    "NumPy weights + fftconvolve": (
        "import numpy as np, scipy.signal, scipy.special\n"
        "x = np.random.default_rng(0).random({N})\n"
        "t = time.perf_counter()\n"
        "m = np.arange({N}, dtype=float)\n"
        "b = ((m + 1) ** 0.5 - m ** 0.5) * (1e-3 ** 0.5 / scipy.special.gamma(1.5))\n"
        "scipy.signal.fftconvolve(x, b)[:{N}]\n"
    ),
}


def first_call(code):
    src = "import time\n" + code.format(N=N) + "print(time.perf_counter() - t)\n"
    out = subprocess.run([sys.executable, "-c", src], capture_output=True, text=True, check=True)
    return float(out.stdout.strip())


def main():
    res = {k: statistics.median(first_call(c) for _ in range(5)) for k, c in CODE.items()}
    base = res["NumPy weights + fftconvolve"]
    print("First call in a fresh process, N = 2^20 (median of 5 processes)\n")
    print("| call | time | ratio to reference |")
    print("|---|---|---|")
    for k, v in res.items():
        print(f"| {k} | {v * 1e3:.0f} ms | {v / base:.2f} |")


if __name__ == "__main__":
    main()
