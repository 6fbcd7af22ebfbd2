"""The C library for compiled callers: built with make from the same
sources, and the example program compiled against the installed header."""

import os
import shutil
import subprocess

import pytest

import pyfracconv

ROOT = os.path.dirname(os.path.dirname(os.path.abspath(__file__)))
HAVE_SOURCES = os.path.exists(os.path.join(ROOT, "Makefile"))


@pytest.fixture(scope="module")
def built(tmp_path_factory):
    if not HAVE_SOURCES:  # an installed package without the source tree
        pytest.fail("the C library tests need the source checkout (Makefile)")
    build = tmp_path_factory.mktemp("cbuild")
    subprocess.run(
        ["make", "-C", ROOT, f"BUILD={build}", "lib", "example"], check=True, capture_output=True, text=True
    )
    return build


def test_make_builds_shared_and_static(built):
    assert (built / "libfracconv.so").stat().st_size > 0
    assert (built / "libfracconv.a").stat().st_size > 0


def test_example_program_passes(built):
    out = subprocess.run([str(built / "example")], capture_output=True, text=True)
    assert out.returncode == 0, out.stdout + out.stderr
    assert "all checks passed" in out.stdout
    assert pyfracconv.__version__ in out.stdout


def test_example_against_installed_header_and_shared_lib(built, tmp_path):
    # What a compiled caller does: -I$(python -c 'import pyfracconv;
    # print(pyfracconv.get_include())') and link the shared library.
    inc = pyfracconv.get_include()
    assert os.path.exists(os.path.join(inc, "fracconv.h"))
    cc = shutil.which("cc") or shutil.which("gcc")
    exe = tmp_path / "example_shared"
    subprocess.run(
        [
            cc,
            "-std=c11",
            "-I",
            inc,
            os.path.join(ROOT, "examples", "example.c"),
            "-L",
            str(built),
            "-lfracconv",
            "-lm",
            "-o",
            str(exe),
        ],
        check=True,
        capture_output=True,
        text=True,
    )
    env = dict(os.environ, LD_LIBRARY_PATH=str(built))
    out = subprocess.run([str(exe)], capture_output=True, text=True, env=env)
    assert out.returncode == 0, out.stdout + out.stderr


def test_header_cdef_block_is_what_python_sees():
    # setup_build reads its declarations from the header: every function
    # declared there is present in the compiled module.
    import importlib.util
    import re

    from pyfracconv._fracconv import lib

    spec = importlib.util.spec_from_file_location("setup_build", os.path.join(ROOT, "setup_build.py"))
    setup_build = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(setup_build)

    names = re.findall(r"\b(fc_[a-z0-9_]+)\s*\(", setup_build.read_cdef())
    assert len(names) > 20
    for n in names:
        assert hasattr(lib, n), n


def test_make_clean_leaves_setuptools_tree_alone():
    # make's folder is cbuild/; build/ belongs to setuptools (pip install)
    out = subprocess.run(
        ["make", "-n", "-C", ROOT, "clean"], check=True, capture_output=True, text=True
    ).stdout
    assert "rm -rf cbuild" in out
    assert not any(w in ("build", "build/") for ln in out.splitlines() for w in ln.split())
