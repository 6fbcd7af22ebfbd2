"""Memory of exact streams: nbytes after 1e3 .. 1e7 samples.

    python bench/stream_memory.py [--max 1e7] [--channels 1]

Pushes zeros in blocks (the values do not change the memory) and prints
nbytes and bytes per sample and channel; a compressed stream is added for
comparison when the compressed engine is available.
"""

import argparse
import time

import numpy as np

from pyfracconv import Stream


def main():
    ap = argparse.ArgumentParser()
    ap.add_argument("--max", type=float, default=1e7)
    ap.add_argument("--channels", type=int, default=1)
    args = ap.parse_args()
    C = args.channels
    marks = [int(m) for m in (1e3, 1e4, 1e5, 1e6, 1e7) if m <= args.max]
    streams = {
        "exact rectangle": Stream.integral(0.5, 1e-3, channels=C),
        "exact kernel(1000)": Stream.from_kernel(np.ones(1000), channels=C),
    }
    try:
        streams["compressed"] = Stream.integral(
            0.5, 1e-3, channels=C, mode="compressed", tol=1e-12, horizon=1e8
        )
    except Exception as exc:  # engine not linked in
        print(f"(compressed mode unavailable: {exc})")
    print(f"channels={C}")
    print(f"{'samples':>10} " + " ".join(f"{k:>26}" for k in streams))
    done = 0
    block = 1 << 16
    t0 = time.perf_counter()
    for m in marks:
        while done < m:
            b = min(block, m - done)
            z = np.zeros((b, C))
            for s in streams.values():
                s.push_many(z)
            done += b
        cells = []
        for s in streams.values():
            nb = s.nbytes
            cells.append(f"{nb / 2**20:10.2f} MiB {nb / (m * C):8.1f} B/s")
        print(f"{m:>10} " + " ".join(f"{c:>26}" for c in cells), flush=True)
    print(f"({time.perf_counter() - t0:.1f} s)")


if __name__ == "__main__":
    main()
