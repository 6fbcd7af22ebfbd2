"""A record larger than the memory limit: 1e8 samples (800 MB of float64)
through ``pyfracconv.records.apply_npy`` in compressed mode, peak memory
measured.

    python bench/records_1e8.py [--samples 1e8] [--limit-mb 200] [--dir DIR]
                                [--mode compressed|exact] [--keep]

The record (an invented signal: a slow sine plus seeded noise) is written
chunk by chunk into DIR (default: the system's temporary folder). The
processing runs in a fresh child process, which reports its own peak
resident memory, mapped file pages included (``VmHWM`` of
``/proc/self/status``, the figure ``resource.getrusage`` gives as
``ru_maxrss`` but without the pages of the parent before the child's exec,
which ``ru_maxrss`` keeps; ``ru_maxrss`` where there is no ``/proc``).
Then the first 2**20 outputs
are checked against the batch integral of the first 2**20 samples (the
operator is causal, so they depend on nothing later) within the stream's
stated bound. Exit status 1 if the peak exceeds --limit-mb or the check
fails.
"""

import argparse
import json
import os
import platform
import subprocess
import sys
import tempfile
import time

import numpy as np

ORDER, STEP, TOL = 0.5, 1e-4, 1e-12
HEAD = 2**20

CHILD = r"""
import json, resource, sys, time
def peak():
    # the peak resident set of this process image (VmHWM: what ru_maxrss
    # reports, but reset by exec, so the parent's pages before the exec of
    # this child do not count); ru_maxrss where /proc is missing
    try:
        for line in open("/proc/self/status"):
            if line.startswith("VmHWM:"):
                return int(line.split()[1]) * 1024
    except OSError:
        pass
    return resource.getrusage(resource.RUSAGE_SELF).ru_maxrss * 1024
if sys.argv[1] == "--import-only":
    import pyfracconv.records
    print(json.dumps(dict(rss_self=peak())))
    sys.exit(0)
import pyfracconv.records as records
inp, out, mode, order, step, tol = sys.argv[1:7]
t0 = time.perf_counter()
s = records.apply_npy(inp, out, "integral", float(order), float(step), mode=mode,
                      tol=float(tol))
wall = time.perf_counter() - t0
rss = peak()
print(json.dumps(dict(wall=wall, rss_self=rss,
                      stream_nbytes=s.stream_nbytes, chunk=s.chunk)))
"""


def write_record(path, n, seed=0):
    """The invented test record, written 2**22 samples at a time."""
    rng = np.random.default_rng(seed)
    arr = np.lib.format.open_memmap(path, mode="w+", dtype=np.float64, shape=(n,))
    block = 2**22
    for i in range(0, n, block):
        j = min(i + block, n)
        t = np.arange(i, j) * STEP
        arr[i:j] = np.sin(2.0 * t) + 0.3 * rng.standard_normal(j - i)
    arr.flush()
    del arr


def cpu_name():
    try:
        with open("/proc/cpuinfo") as fh:
            for line in fh:
                if line.startswith("model name"):
                    return line.split(":", 1)[1].strip()
    except OSError:
        pass
    return platform.processor() or platform.machine()


def main():
    ap = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    ap.add_argument("--samples", type=float, default=1e8)
    ap.add_argument("--limit-mb", type=float, default=200.0)
    ap.add_argument("--dir", default=None)
    ap.add_argument("--mode", choices=("compressed", "exact"), default="compressed")
    ap.add_argument("--keep", action="store_true", help="keep the files")
    args = ap.parse_args()
    n = int(args.samples)
    d = tempfile.mkdtemp(prefix="pyfracconv-records-", dir=args.dir)
    inp, out = os.path.join(d, "record.npy"), os.path.join(d, "result.npy")
    try:
        t0 = time.perf_counter()
        write_record(inp, n)
        print(
            f"record: {n:.3g} samples, {os.path.getsize(inp) / 2**20:.0f} MiB, "
            f"written in {time.perf_counter() - t0:.1f} s",
            flush=True,
        )
        base = json.loads(
            subprocess.run(
                [sys.executable, "-c", CHILD, "--import-only"], capture_output=True, text=True, check=True
            ).stdout
        )["rss_self"]
        proc = subprocess.run(
            [sys.executable, "-c", CHILD, inp, out, args.mode, repr(ORDER), repr(STEP), repr(TOL)],
            capture_output=True,
            text=True,
        )
        if proc.returncode:
            print(proc.stderr, file=sys.stderr)
            return 1
        r = json.loads(proc.stdout.strip().splitlines()[-1])
        mb = r["rss_self"] / 2**20
        print(
            f"apply_npy(mode={args.mode!r}, order={ORDER}, step={STEP}, tol={TOL}): "
            f"{r['wall']:.1f} s ({r['wall'] / n * 1e9:.0f} ns/sample), chunk "
            f"{r['chunk']} rows"
        )
        print(
            f"peak resident memory of the process: {mb:.1f} MiB "
            f"(limit {args.limit_mb:g} MiB; the record is "
            f"{os.path.getsize(inp) / 2**20:.0f} MiB, the result as much)"
        )
        print(
            f"the stream held {r['stream_nbytes']} bytes; a bare `import "
            f"pyfracconv` process peaks at {base / 2**20:.1f} MiB"
        )
        # the head: causal, so the batch integral of the first HEAD samples
        import pyfracconv

        x = np.load(inp, mmap_mode="r")
        y = np.load(out, mmap_mode="r")
        m = min(HEAD, n)
        xh = np.array(x[:m])
        ref = pyfracconv.integral(xh, ORDER, STEP)
        scale = pyfracconv.integral(np.abs(xh), ORDER, STEP)
        bound = (TOL + 128 * 2.0**-52) * scale
        ok = bool(np.all(np.abs(np.asarray(y[:m]) - ref) <= bound))
        print(f"first {m} outputs within (tol + 128 eps) * sum|terms| of the batch integral: {ok}")
        print(
            f"machine: {cpu_name()}, {os.cpu_count()} cores, {platform.system()}, "
            f"Python {platform.python_version()}, NumPy {np.__version__}; "
            f"{time.strftime('%Y-%m-%d', time.gmtime())}"
        )
        return 0 if ok and mb < args.limit_mb else 1
    finally:
        if not args.keep:
            for p in (inp, out):
                try:
                    os.unlink(p)
                except OSError:
                    pass
            try:
                os.rmdir(d)
            except OSError:
                pass


if __name__ == "__main__":
    sys.exit(main())
