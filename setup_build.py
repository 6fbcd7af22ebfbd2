"""cffi builder for pyfracconv (API mode, out of line).

The C declarations are read from csrc/fracconv.h, between the markers
FC_CDEF_BEGIN and FC_CDEF_END, so the header is the one source of truth.
"""

import os
import re
import sys

from cffi import FFI

HERE = os.path.dirname(os.path.abspath(__file__))
CSRC = os.path.join(HERE, "csrc")


def read_cdef(header=os.path.join(CSRC, "fracconv.h")):
    with open(header, encoding="utf-8") as fh:
        text = fh.read()
    m = re.search(r"/\* FC_CDEF_BEGIN \*/(.*)/\* FC_CDEF_END \*/", text, re.S)
    if m is None:
        raise RuntimeError(f"{header}: no FC_CDEF_BEGIN/FC_CDEF_END block")
    return m.group(1)


def c_sources():
    return sorted(
        os.path.join("csrc", f) for f in os.listdir(CSRC) if f.endswith(".c")
    )


def compile_args():
    if sys.platform == "win32":
        return ["/O2"]
    return ["-O3", "-std=c11", "-fno-math-errno", "-Wall", "-Wextra"]


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
    ),
)

if __name__ == "__main__":
    ffibuilder.compile(verbose=True)
