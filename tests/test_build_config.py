"""The two build paths of the C sources agree: the Makefile (C library) and
setup_build.py (cffi extension) use the one flag list of csrc/flags.mk, and
the header the package reports (pyfracconv.get_include()) is the header of
the sources. Checks of the project against itself: no outside source."""

import importlib.util
import os
import shlex
import subprocess

import pytest

import pyfracconv

ROOT = os.path.dirname(os.path.dirname(os.path.abspath(__file__)))
HAVE_SOURCES = os.path.exists(os.path.join(ROOT, "Makefile"))


def _setup_build():
    spec = importlib.util.spec_from_file_location("setup_build", os.path.join(ROOT, "setup_build.py"))
    mod = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(mod)
    return mod


@pytest.fixture(autouse=True)
def _sources():
    if not HAVE_SOURCES:  # an installed package without the source tree
        pytest.fail("these checks need the source checkout (Makefile)")


def test_make_and_extension_use_the_same_flags(tmp_path):
    # make's dry run of one object file: the flags before -fPIC -Icsrc are
    # setup_build.compile_args(), in the same order.
    env = {k: v for k, v in os.environ.items() if k != "CFLAGS"}
    obj = tmp_path / "obj" / "util.o"
    out = subprocess.run(
        ["make", "-n", "-B", "-C", ROOT, f"BUILD={tmp_path}", str(obj)],
        check=True,
        capture_output=True,
        text=True,
        env=env,
    ).stdout
    line = next(ln for ln in out.splitlines() if " -c csrc/util.c" in ln)
    words = shlex.split(line)[1:]  # without the compiler
    flags = words[: words.index("-fPIC")]
    assert flags == _setup_build().compile_args()
    # and they are the flags DEVELOPERS.md states
    assert flags == ["-O3", "-std=c11", "-fno-math-errno", "-Wall", "-Wextra", "-pthread"]


def test_installed_header_is_the_source_header():
    inc = pyfracconv.get_include()
    with open(os.path.join(inc, "fracconv.h"), "rb") as fh:
        installed = fh.read()
    with open(os.path.join(ROOT, "csrc", "fracconv.h"), "rb") as fh:
        source = fh.read()
    assert installed == source
