"""The short shim setuptools still needs for cffi_modules.

The public header csrc/fracconv.h ships inside the package as
pyfracconv/include/fracconv.h (pyfracconv.get_include()): build_py copies it
into the build directory, never into the source tree. An editable install
has no copy; get_include() then finds csrc/ of the checkout.

The C library for compiled callers ships in the package too, as
pyfracconv/lib/libfracconv.so.MAJOR (the shared object under its SONAME;
wheels hold no symbolic links) and pyfracconv/lib/libfracconv.a
(pyfracconv.get_lib_dir(), `pyfracconv flags`). build_ext compiles them in
its own temporary folder with the flags of csrc/flags.mk (as the Makefile
does) and copies them into the build directory; an editable install puts
them in build/pyfracconv-lib/ of the checkout (setuptools' tree, which the
Makefile never touches), never into the source folders. Linux (ELF) only:
elsewhere the package has no library copy and get_lib_dir() says so.
"""

import os
import re
import sys

from setuptools import setup
from setuptools.command.build_ext import build_ext
from setuptools.command.build_py import build_py

HERE = os.path.dirname(os.path.abspath(__file__))
# The C header and the header-only C++ wrapper over it.
HEADERS = ("fracconv.h", "fracconv.hpp")


class build_py_with_header(build_py):
    def _header_targets(self):
        return [os.path.join(self.build_lib, "pyfracconv", "include", h) for h in HEADERS]

    def run(self):
        super().run()
        if getattr(self, "editable_mode", False):
            return  # the checkout's csrc/ serves get_include()
        for name, target in zip(HEADERS, self._header_targets()):
            self.mkpath(os.path.dirname(target))
            self.copy_file(os.path.join(HERE, "csrc", name), target)

    def get_outputs(self, include_bytecode=True):
        outputs = super().get_outputs(include_bytecode)
        if getattr(self, "editable_mode", False):
            return outputs
        return outputs + self._header_targets()


def _version_major():
    with open(os.path.join(HERE, "csrc", "fracconv.h"), encoding="utf-8") as fh:
        m = re.search(r"^#define FC_VERSION_MAJOR (\d+)", fh.read(), re.M)
    if m is None:
        raise RuntimeError("csrc/fracconv.h: no FC_VERSION_MAJOR")
    return m.group(1)


# the checkout folder an editable install's library goes to (get_lib_dir())
EDITABLE_LIB_DIR = os.path.join(HERE, "build", "pyfracconv-lib")


class build_ext_with_clib(build_ext):
    """The cffi extension, then the C library for compiled callers."""

    def _lib_names(self):
        return ["libfracconv.so." + _version_major(), "libfracconv.a"]

    def _lib_dest(self):
        if getattr(self, "editable_mode", False) or self.inplace:
            return EDITABLE_LIB_DIR
        return os.path.join(self.build_lib, "pyfracconv", "lib")

    def run(self):
        super().run()
        if not sys.platform.startswith("linux"):
            return
        import importlib.util  # setup_build.py: the flags of csrc/flags.mk, as make uses

        spec = importlib.util.spec_from_file_location("setup_build", os.path.join(HERE, "setup_build.py"))
        setup_build = importlib.util.module_from_spec(spec)
        spec.loader.exec_module(setup_build)
        flags = setup_build.read_flags()
        cflags = (
            flags["FC_OPT_CFLAGS"]
            + flags["FC_STD_CFLAGS"]
            + flags["FC_THREAD_FLAGS"]
            + ["-fPIC", "-fvisibility=hidden"]
        )
        tmp = os.path.join(self.build_temp, "clib")
        objects = self.compiler.compile(
            setup_build.c_sources(), output_dir=tmp, include_dirs=["csrc"], extra_postargs=cflags
        )
        soname, static = self._lib_names()
        self.compiler.link_shared_object(
            objects,
            soname,
            output_dir=tmp,
            libraries=["m"],
            extra_postargs=["-Wl,-soname," + soname] + flags["FC_THREAD_FLAGS"],
        )
        self.compiler.create_static_lib(objects, "fracconv", output_dir=tmp)
        dest = self._lib_dest()
        self.mkpath(dest)
        for name in (soname, static):
            self.copy_file(os.path.join(tmp, name), os.path.join(dest, name))

    def get_outputs(self):
        outputs = super().get_outputs()
        if not sys.platform.startswith("linux") or self._lib_dest() == EDITABLE_LIB_DIR:
            return outputs
        return outputs + [os.path.join(self._lib_dest(), n) for n in self._lib_names()]


setup(
    cffi_modules=["setup_build.py:ffibuilder"],
    cmdclass={"build_py": build_py_with_header, "build_ext": build_ext_with_clib},
)
