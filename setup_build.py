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
    return sorted(
        os.path.join("csrc", f) for f in os.listdir(CSRC) if f.endswith(".c")
    )


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
    return flags["FC_OPT_CFLAGS"] + flags["FC_STD_CFLAGS"]


ffibuilder = FFI()
ffibuilder.cdef(read_cdef())
ffibuilder.set_source(
    "pyfracconv._fracconv",
    '#include "fracconv.h"\n',
    sources=c_sources(),
    include_dirs=["csrc"],
    extra_compile_args=compile_args(),
    libraries=[] if sys.platform == "win32" else ["m"],
    depends=sorted(
        os.path.join("csrc", f) for f in os.listdir(CSRC) if f.endswith(".h")
    ) + [os.path.join("csrc", "flags.mk")],
)

if __name__ == "__main__":
    if sys.argv[1:] == ["--print-cflags"]:
        print(" ".join(compile_args()))
    else:
        ffibuilder.compile(verbose=True)
