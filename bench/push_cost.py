"""Where the time of a scalar Stream.push() goes: medians and ranges.

    python bench/push_cost.py [--rounds R] [--calls N]

Every contender runs in the same process, interleaved round by round (so
that the load of a shared machine falls on all of them alike), on the same
stream state: each round reloads the stream from one saved state (not
timed), then times N calls. Printed per contender: the median, the minimum
and the maximum over the rounds of the time per call, in ns.

Contenders, for three streams (a one-tap kernel stream: the pure call
overhead; a compressed rule stream; an exact rule stream with 2^16 samples
of history):

  bare cffi        lib.fc_stream_push1(s, x, y) with every name bound
  + y[0]           the same and the read of the output double
  bare value       lib.fc_stream_push1_value(s, x, status): the output
                   returned, no buffer read (what Stream.push calls)
  Lock wrapper     the wrapper as it was before (threading.Lock acquire /
                   release around the call), rebuilt here for comparison
  Stream.push      the package's push (list-token busy guard around
                   fc_stream_push1_value)
  guard only       the busy guard's take/give alone (no call)
  Lock only        threading.Lock acquire(False) / release alone
"""

from __future__ import annotations

import argparse
import platform
import statistics
import threading
import time
import timeit
from typing import Any, Callable

import numpy as np

from pyfracconv import Stream
from pyfracconv._fracconv import ffi, lib


def _lock_wrapper(s: Any, y1: Any) -> Callable[[float], float]:
    """The scalar push as it was before: threading.Lock around the call."""
    lock = threading.Lock()
    acquire, release = lock.acquire, lock.release
    push1 = lib.fc_stream_push1

    def push(x: float) -> float:
        if not acquire(False):
            raise RuntimeError("busy")
        try:
            st = push1(s, x, y1)
            if st == 0:
                return y1[0]  # type: ignore[no-any-return]
        finally:
            release()
        raise RuntimeError(st)

    return push


def _streams() -> dict[str, bytes]:
    rng = np.random.default_rng(1)
    k = Stream.from_kernel([1.0])
    c = Stream.integral(0.5, 1e-3, mode="compressed", horizon=1e12)
    c.push_many(rng.random(2**16))
    e = Stream.integral(0.5, 1e-3)
    e.push_many(rng.random(2**16))
    return {"one-tap kernel": k.save(), "compressed, 2^16 pushed": c.save(), "exact, 2^16 pushed": e.save()}


#: contender: the statement timed (timeit, names bound in _names)
STATEMENTS = {
    "bare cffi": "push1(cs, 0.5, y)",
    "+ y[0]": "push1(cs, 0.5, y); y[0]",
    "bare value": "push1v(cs, 0.5, cell)",
    "Lock wrapper": "old(0.5)",
    "Stream.push": "push(0.5)",
    "guard only": "take(); give(True)",
    "Lock only": "acq(False); rel()",
}


def _names(s: Stream) -> dict[str, Any]:
    lock = threading.Lock()
    y = ffi.new("double[1]")
    return {
        "cs": s._s,
        "y": y,
        "cell": ffi.new("int[1]"),
        "push1": lib.fc_stream_push1,
        "push1v": lib.fc_stream_push1_value,
        "old": _lock_wrapper(s._s, y),
        "push": s.push,
        "take": s._lock.take,
        "give": s._lock.give,
        "acq": lock.acquire,
        "rel": lock.release,
    }


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    ap.add_argument("--rounds", type=int, default=15)
    ap.add_argument("--calls", type=int, default=20000)
    args = ap.parse_args()
    print(
        f"# {time.strftime('%Y-%m-%d %H:%M UTC', time.gmtime())}, "
        f"{platform.python_implementation()} {platform.python_version()}, "
        f"{platform.machine()}; {args.rounds} rounds x {args.calls} calls; "
        "ns per call (timeit's loop included)"
    )
    for name, blob in _streams().items():
        res: dict[str, list[float]] = {}
        for _ in range(args.rounds):
            for key, stmt in STATEMENTS.items():
                # a fresh copy of the same state for every contender
                timer = timeit.Timer(stmt, globals=_names(Stream.load(blob)))
                res.setdefault(key, []).append(timer.timeit(args.calls) / args.calls * 1e9)
        print(f"\n{name}")
        for key, v in res.items():
            print(f"  {key:14s} median {statistics.median(v):7.1f}   range {min(v):7.1f} .. {max(v):7.1f}")


if __name__ == "__main__":
    main()
