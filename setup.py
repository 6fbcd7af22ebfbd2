"""The short shim setuptools still needs for cffi_modules."""

import os
import shutil

from setuptools import setup

HERE = os.path.dirname(os.path.abspath(__file__))

# Ship the public header inside the package (pyfracconv.get_include()).
os.makedirs(os.path.join(HERE, "pyfracconv", "include"), exist_ok=True)
shutil.copyfile(
    os.path.join(HERE, "csrc", "fracconv.h"),
    os.path.join(HERE, "pyfracconv", "include", "fracconv.h"),
)

setup(
    cffi_modules=["setup_build.py:ffibuilder"],
    package_data={"pyfracconv": ["include/fracconv.h"]},
)
