"""The version is stated once in C (FC_VERSION_MAJOR/MINOR/PATCH in
csrc/fracconv.h) and agrees everywhere else it appears: the string the
compiled library reports (fc_version_string, fc_version), the Python
package (pyfracconv.__version__) and the distribution (pyproject.toml).
Checks of the project against itself: no outside source."""

import os
import re

import pytest

import pyfracconv
from pyfracconv._fracconv import ffi, lib

ROOT = os.path.dirname(os.path.dirname(os.path.abspath(__file__)))
HEADER = os.path.join(ROOT, "csrc", "fracconv.h")
PYPROJECT = os.path.join(ROOT, "pyproject.toml")


@pytest.fixture(autouse=True)
def _sources():
    if not os.path.exists(HEADER):  # an installed package without the checkout
        pytest.fail("these checks need the source checkout (csrc/fracconv.h)")


def header_version():
    with open(HEADER, encoding="utf-8") as fh:
        text = fh.read()
    parts = []
    for name in ("MAJOR", "MINOR", "PATCH"):
        m = re.findall(rf"^#define FC_VERSION_{name} (\d+)\s*$", text, re.M)
        assert len(m) == 1, f"FC_VERSION_{name} must be defined exactly once"
        parts.append(int(m[0]))
    # the string is derived from the numbers, never written as a literal
    assert not re.search(r'#define FC_VERSION_STRING\s+"', text)
    return tuple(parts)


def pyproject_version():
    try:
        import tomllib
    except ImportError:  # Python < 3.11: the one line is enough
        with open(PYPROJECT, encoding="utf-8") as fh:
            return re.search(r'^version = "([^"]+)"', fh.read(), re.M).group(1)
    with open(PYPROJECT, "rb") as fh:
        return tomllib.load(fh)["project"]["version"]


def test_header_library_package_and_pyproject_agree():
    major, minor, patch = header_version()
    text = f"{major}.{minor}.{patch}"
    assert ffi.string(lib.fc_version_string()).decode() == text
    assert lib.fc_version() == major * 10000 + minor * 100 + patch
    assert lib.FC_VERSION_NUMBER == lib.fc_version()
    assert (lib.FC_VERSION_MAJOR, lib.FC_VERSION_MINOR, lib.FC_VERSION_PATCH) == (major, minor, patch)
    assert pyfracconv.__version__ == text
    assert pyfracconv.c_version == text
    assert pyproject_version() == text


def test_makefile_names_the_shared_object_from_the_header(tmp_path):
    # make -n prints the link line: the SONAME carries the major number,
    # the file the full version (both read from the header).
    import subprocess

    major, minor, patch = header_version()
    env = {k: v for k, v in os.environ.items() if k != "CFLAGS"}
    out = subprocess.run(
        ["make", "-n", "-C", ROOT, f"BUILD={tmp_path}", "lib"],
        check=True,
        capture_output=True,
        text=True,
        env=env,
    ).stdout
    assert f"-Wl,-soname,libfracconv.so.{major} " in out
    assert f"libfracconv.so.{major}.{minor}.{patch}" in out
