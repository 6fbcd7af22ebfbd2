"""The short shim setuptools still needs for cffi_modules.

The public header csrc/fracconv.h ships inside the package as
pyfracconv/include/fracconv.h (pyfracconv.get_include()): build_py copies it
into the build directory, never into the source tree. An editable install
has no copy; get_include() then finds csrc/ of the checkout.
"""

import os

from setuptools import setup
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


setup(
    cffi_modules=["setup_build.py:ffibuilder"],
    cmdclass={"build_py": build_py_with_header},
)
