"""cffi builder for pyfracconv (API mode, out of line).

The C declarations are read from csrc/fracconv.h, between the markers
FC_CDEF_BEGIN and FC_CDEF_END, so the header is the one source of truth.
The compiler flags are read from csrc/flags.mk, which the Makefile includes,
so the extension and the C library are built with the same flags
(``python setup_build.py --print-cflags`` prints them).
"""

import os
import re
import sys

from cffi import FFI

HERE = os.path.dirname(os.path.abspath(__file__))
CSRC = os.path.join(HERE, "csrc")


HEADER = os.path.join(CSRC, "fracconv.h")
FLAGS_FILE = os.path.join(CSRC, "flags.mk")


def read_cdef(header=HEADER):
    with open(header, encoding="utf-8") as fh:
        text = fh.read()
    m = re.search(r"/\* FC_CDEF_BEGIN \*/(.*)/\* FC_CDEF_END \*/", text, re.S)
    if m is None:
        raise RuntimeError(f"{header}: no FC_CDEF_BEGIN/FC_CDEF_END block")
    # FC_API (the visibility attribute of the public functions) is a macro
    # cffi's parser does not know: the declarations are given without it.
    return re.sub(r"\bFC_API\s+", "", m.group(1))


def c_sources():
    return sorted(os.path.join("csrc", f) for f in os.listdir(CSRC) if f.endswith(".c"))


def read_flags(path=FLAGS_FILE):
    """The ``NAME = words`` lines of csrc/flags.mk as {NAME: [words]}."""
    flags = {}
    with open(path, encoding="utf-8") as fh:
        for line in fh:
            line = line.split("#", 1)[0].strip()
            if not line:
                continue
            m = re.fullmatch(r"([A-Za-z_][A-Za-z0-9_]*)\s*=\s*(.*)", line)
            if m is None:
                raise RuntimeError(f"{path}: not a plain NAME = words line: {line!r}")
            flags[m.group(1)] = m.group(2).split()
    return flags


def compile_args():
    if sys.platform == "win32":
        return ["/O2"]
    flags = read_flags()
    return flags["FC_OPT_CFLAGS"] + flags["FC_STD_CFLAGS"] + flags["FC_THREAD_FLAGS"]


def link_args():
    if sys.platform == "win32":
        return []
    return read_flags()["FC_THREAD_FLAGS"]


# Python functions the C solver calls back (pyfracconv/solve.py defines
# them with ffi.def_extern); declared here, after the header's block, since
# the header is plain C.
PYTHON_CALLBACKS = """
extern "Python" int _fc_py_rhs(double, const double *, double *, void *);
extern "Python" double _fc_py_rhs1(double, double, void *);
extern "Python" int _fc_py_jac(double, const double *, double *, void *);
int _fc_py_rhs1_bridge(double, const double *, double *, void *);
int _fc_py_advance(fc_solver *, size_t, double *, double *, size_t *);
typedef struct { void *fn; void *slow; } _fc_py_call1;
int _fc_py_rhs1_direct(double, const double *, double *, void *);
"""
# A scalar rhs is called as double f(double t, double y, void *user): fewer
# objects to build per call than pointers. A Python failure returns NaN
# (which the solver reports as non-finite; the Python side then finds the
# recorded failure). The bridge has the solver's callback signature.
BRIDGE_SOURCE = """
static double _fc_py_rhs1(double, double, void *);
int _fc_py_rhs1_bridge(double t, const double *y, double *f, void *user)
{
    f[0] = _fc_py_rhs1(t, y[0], user);
    return 0;
}
/* A scalar rhs called straight from C with the Python C API (CPython: fn
   and slow are the addresses of Python objects that the caller keeps
   alive). The fast path, a float back, costs the call itself and two
   floats; anything else (an exception, another type) goes to
   slow(t, value, raised), which records a failure as _fc_py_rhs1 does and
   returns the float to use (NaN after a failure). No exception is left
   set. The GIL is taken (a counter when the caller holds it). */
typedef struct { void *fn; void *slow; } _fc_py_call1;
int _fc_py_rhs1_direct(double t, const double *y, double *f, void *user)
{
    const _fc_py_call1 *c = (const _fc_py_call1 *)user;
    PyGILState_STATE g = PyGILState_Ensure();
    double out = NAN;
    PyObject *pt = PyFloat_FromDouble(t);
    PyObject *py = pt ? PyFloat_FromDouble(y[0]) : NULL;
    PyObject *v = py ? PyObject_CallFunctionObjArgs((PyObject *)c->fn, pt, py, NULL)
                     : NULL;
    if (v && PyFloat_CheckExact(v)) {
        out = PyFloat_AsDouble(v);
    }
    else if (pt) {
        PyObject *obj = v, *raised = Py_False, *r;
        if (!v) {
            PyObject *et, *ev, *tb;
            PyErr_Fetch(&et, &ev, &tb);
            PyErr_NormalizeException(&et, &ev, &tb);
            if (ev && tb) PyException_SetTraceback(ev, tb);
            Py_XDECREF(et);
            Py_XDECREF(tb);
            obj = ev ? ev : Py_None;
            if (!ev) Py_INCREF(Py_None);
            raised = Py_True;
        }
        r = PyObject_CallFunctionObjArgs((PyObject *)c->slow, pt, obj, raised, NULL);
        if (r) {
            out = PyFloat_AsDouble(r);
            Py_DECREF(r);
        }
        if (!v) Py_DECREF(obj);
    }
    Py_XDECREF(v);
    Py_XDECREF(py);
    Py_XDECREF(pt);
    if (PyErr_Occurred()) { PyErr_Clear(); out = NAN; }
    PyGILState_Release(g);
    f[0] = out;
    return 0;
}
/* fc_solver_advance with the GIL held for the whole run (cffi releases it
   around every call): each Python callback then finds it held and does
   not take it again, which is most of the cost of a callback. */
int _fc_py_advance(fc_solver *s, size_t n, double *t, double *y, size_t *done)
{
    PyGILState_STATE g = PyGILState_Ensure();
    int st = fc_solver_advance(s, n, t, y, done);
    PyGILState_Release(g);
    return st;
}
"""

ffibuilder = FFI()
ffibuilder.cdef(read_cdef() + PYTHON_CALLBACKS)
ffibuilder.set_source(
    "pyfracconv._fracconv",
    '#include <math.h>\n#include "fracconv.h"\n' + BRIDGE_SOURCE,
    sources=c_sources(),
    include_dirs=["csrc"],
    extra_compile_args=compile_args(),
    extra_link_args=link_args(),
    libraries=[] if sys.platform == "win32" else ["m"],
    depends=sorted(os.path.join("csrc", f) for f in os.listdir(CSRC) if f.endswith(".h"))
    + [os.path.join("csrc", "flags.mk")],
)

if __name__ == "__main__":
    if sys.argv[1:] == ["--print-cflags"]:
        print(" ".join(compile_args()))
    else:
        ffibuilder.compile(verbose=True)
