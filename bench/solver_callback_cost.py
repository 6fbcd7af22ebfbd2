"""Where the time of a scalar predictor-corrector run with a Python rhs
goes (invented problem D^a y = -y + 0.1 sin(t), a = 0.6, step 1e-4, as
bench/solver_1e6.py): the run, the bare calls of the same rhs, the same
run and bare calls with a trivial rhs (which isolates the solver's own
work plus the cost of the C-to-Python callback), and, for the design of a
Python-driven loop, the cost of one cffi call from Python into C.
Prints medians (and ranges) of `repeat` interleaved rounds, in seconds and in
nanoseconds per rhs call. The solver's own work per step with a C rhs is
cbuild/bench_solver (make bench-c).

    python bench/solver_callback_cost.py [steps] [repeat]
"""

import math
import os
import subprocess
import sys
import tempfile
import time

import numpy as np

from pyfracconv import solve
from pyfracconv._core import ffi, lib

solve_mod = sys.modules["pyfracconv.solve"]  # the module (pyfracconv.solve is the function)


def rhs(t, y):
    return -y + 0.1 * math.sin(t)


def trivial(t, y):
    return y


def bare(fn, n):
    y = 1.0
    for i in range(n):
        fn(i * 1e-4, y)


def run_solve(fn, n, memory, direct):
    # direct: the scalar rhs called from C with the Python C API (the
    # default on CPython); else the cffi callback (extern "Python")
    keep = solve_mod._DIRECT
    solve_mod._DIRECT = direct
    try:
        solve(fn, 1.0, 0.6, 1e-4, n, memory=memory)
    finally:
        solve_mod._DIRECT = keep


def cffi_calls(n):
    # a cheap C function with a pointer argument, as a Python-driven loop
    # would call the library once or twice a step
    s = ffi.new("fc_stream **")
    lib.fc_stream_create(lib.FC_RULE_RECTANGLE, 0.6, 1e-4, 1, lib.FC_MODE_EXACT, 0.0, 0.0, s)
    h = ffi.new("double[1]")
    hist = lib.fc_stream_history
    st = s[0]
    for _ in range(n):
        hist(st, h)
    lib.fc_stream_free(st)


C_RHS = """
#include <math.h>
int c_rhs(double t, const double *y, double *f, void *u)
{ (void)u; f[0] = -y[0] + 0.1 * sin(t); return 0; }
int c_trivial(double t, const double *y, double *f, void *u)
{ (void)t; (void)u; f[0] = y[0]; return 0; }
"""


def c_rhs_lib():
    # the same rhs in C, compiled here (None without a C compiler)
    d = tempfile.mkdtemp()
    src, so = os.path.join(d, "rhs.c"), os.path.join(d, "rhs.so")
    with open(src, "w") as fh:
        fh.write(C_RHS)
    try:
        subprocess.run(
            [os.environ.get("CC", "cc"), "-O2", "-shared", "-fPIC", src, "-o", so, "-lm"],
            check=True,
            capture_output=True,
        )
    except (OSError, subprocess.CalledProcessError):
        return None
    import cffi

    f2 = cffi.FFI()
    f2.cdef(
        "int c_rhs(double, const double *, double *, void *);"
        "int c_trivial(double, const double *, double *, void *);"
    )
    lib2 = f2.dlopen(so)
    out = {}
    for name in ("c_rhs", "c_trivial"):
        addr = int(f2.cast("uintptr_t", f2.addressof(lib2, name)))
        out[name] = ffi.cast("fc_rhs_fn", addr)
    out["_keep"] = lib2
    return out


def solve_c(fnptr, n, memory):
    # the solver from Python with a C rhs: its own work, no callback
    s = ffi.new("fc_solver **")
    o, init = ffi.new("double[1]", [0.6]), ffi.new("double[1]", [1.0])
    mem = lib.FC_MODE_EXACT if memory == "exact" else lib.FC_MODE_COMPRESSED
    st = lib.fc_solver_create(
        1, o, 1e-4, 0.0, init, lib.FC_METHOD_PC, mem, 1e-12 if memory != "exact" else 0.0, float(n), s
    )
    assert st == 0, st
    lib.fc_solver_set_rhs(s[0], fnptr, ffi.NULL)
    y = np.empty(n)
    t = np.empty(n)
    done = ffi.new("size_t *")
    st = lib.fc_solver_advance(
        s[0], n, ffi.cast("double *", t.ctypes.data), ffi.cast("double *", y.ctypes.data), done
    )
    lib.fc_solver_free(s[0])
    assert st == 0, st


def timed_rows(rows, repeat):
    # interleaved: every round runs each row once, so that a change of the
    # machine's load touches all rows alike; medians over the rounds
    ts = {label: [] for label, _ in rows}
    for _ in range(repeat):
        for label, fn in rows:
            t0 = time.perf_counter()
            fn()
            ts[label].append(time.perf_counter() - t0)
    return {k: (float(np.median(v)), min(v), max(v)) for k, v in ts.items()}


def main():
    n = int(float(sys.argv[1])) if len(sys.argv) > 1 else 10**6
    repeat = int(sys.argv[2]) if len(sys.argv) > 2 else 5
    calls = 2 * n + 1  # predictor-corrector, one corrector pass
    rows = [
        ("bare rhs calls", lambda: bare(rhs, calls)),
        ("bare trivial calls", lambda: bare(trivial, calls)),
        ("cffi calls Python->C", lambda: cffi_calls(calls)),
    ]
    for memory in ("exact", "compressed"):
        for name, fn in (("rhs", rhs), ("trivial", trivial)):
            for direct in (True, False):
                how = "direct" if direct else "cffi cb"
                rows.append(
                    (
                        f"solve PC {memory} {name} {how}",
                        lambda memory=memory, fn=fn, direct=direct: run_solve(fn, n, memory, direct),
                    )
                )
    clib = c_rhs_lib()
    if clib is not None:
        for memory in ("exact", "compressed"):
            rows.append(
                (f"C solver, C rhs, {memory}", lambda memory=memory: solve_c(clib["c_rhs"], n, memory))
            )
            rows.append(
                (
                    f"C solver, C trivial, {memory}",
                    lambda memory=memory: solve_c(clib["c_trivial"], n, memory),
                )
            )
    print(f"{n} steps ({calls} rhs calls), median (min .. max) of {repeat} interleaved rounds")
    res = timed_rows(rows, repeat)
    for label, _ in rows:
        med, lo, hi = res[label]
        print(f"{label:34s} {med:7.3f} s ({lo:.3f} .. {hi:.3f})  {1e9 * med / calls:6.0f} ns/call")


if __name__ == "__main__":
    main()
