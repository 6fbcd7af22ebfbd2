"""The Fortran 2008 module (fortran/fracconv.f90): examples/example.f90
built with gfortran -std=f2008 -Wall -Wextra -Werror against the static
library and run.

The program checks the rectangle rule on constants against the closed form
h^a n^a / Gamma(a+1) (common practice; Podlubny 1999, docs/references.md),
exact and compressed streams, save/load and refusals. Here its printed
weights are compared with the Python bindings' (agreement between
interfaces: the same C function, so equal to the last bit) and the
module's constants with the C header's."""

import os
import re
import shutil
import subprocess

import pytest

import pyfracconv

ROOT = os.path.dirname(os.path.dirname(os.path.abspath(__file__)))
FC = shutil.which("gfortran")
pytestmark = pytest.mark.skipif(FC is None, reason="gfortran is not installed "
                                "(apt-get install -y gfortran)")


@pytest.fixture(scope="module")
def example(tmp_path_factory):
    build = tmp_path_factory.mktemp("f90build")
    r = subprocess.run(["make", "-C", ROOT, f"BUILD={build}", f"FC={FC}", "lib",
                        "fortran-example"], capture_output=True, text=True)
    assert r.returncode == 0, r.stdout + r.stderr
    return subprocess.run([str(build / "example_f90")], capture_output=True, text=True)


def test_example_f90_passes(example):
    assert example.returncode == 0, example.stdout + example.stderr
    assert "all checks passed" in example.stdout and "FAIL" not in example.stdout


def test_example_f90_closed_form_error(example):
    m = re.search(r"rectangle I\^0\.6 1: max rel err\s+(\S+)", example.stdout)
    assert m and float(m.group(1)) < 1e-13


def test_fortran_weights_equal_python_weights(example):
    got = [float(v) for v in re.findall(r"grunwald weight \d+ =\s+(\S+)", example.stdout)]
    want = pyfracconv.weights("grunwald", 0.6, 6, step=0.01)
    assert len(got) == 6
    assert got == [float(v) for v in want]


def test_fortran_message_is_the_c_message(example):
    from pyfracconv._fracconv import ffi, lib
    msg = ffi.string(lib.fc_strerror(lib.FC_ERR_ORDER)).decode()
    assert f"status {lib.FC_ERR_ORDER}: {msg}" in example.stdout


def test_module_constants_equal_the_c_header():
    with open(os.path.join(ROOT, "csrc", "fracconv.h")) as f:
        header = dict(re.findall(r"#define (FC_(?:OK|ERR_\w+|RULE_\w+|ENGINE_\w+|MODE_\w+)) (\d+)",
                                 f.read()))
    with open(os.path.join(ROOT, "fortran", "fracconv.f90")) as f:
        module = dict(re.findall(r"(FC_(?:OK|ERR_\w+|RULE_\w+|ENGINE_\w+|MODE_\w+)) = (\d+)",
                                 f.read()))
    assert module, "no constants found in the module"
    for name, value in module.items():
        assert header.get(name) == value, name
    # every status code of the header is in the module
    assert {k for k in header if k.startswith("FC_ERR_")} <= set(module)


def test_docs_fortran_example_builds_and_runs(tmp_path):
    with open(os.path.join(ROOT, "docs", "compiled.md")) as f:
        blocks = re.findall(r"```fortran\n(.*?)```", f.read(), re.S)
    assert len(blocks) == 1
    build = tmp_path / "build"
    subprocess.run(["make", "-C", ROOT, f"BUILD={build}", "lib"], check=True,
                   capture_output=True, text=True)
    src = tmp_path / "quick.f90"
    src.write_text(blocks[0])
    exe = tmp_path / "quick"
    r = subprocess.run([FC, "-std=f2008", "-Wall", "-Werror", "-J", str(tmp_path),
                        os.path.join(ROOT, "fortran", "fracconv.f90"), str(src),
                        str(build / "libfracconv.a"), "-lm", "-o", str(exe)],
                       capture_output=True, text=True)
    assert r.returncode == 0, r.stderr
    out = subprocess.run([str(exe)], capture_output=True, text=True)
    assert out.returncode == 0, out.stdout + out.stderr
    assert "refused: status 3: order must be" in out.stdout


def test_blob_saved_from_fortran_loads_in_python(tmp_path):
    # the bytes pass through a Fortran integer(c_signed_char) array and a
    # stream-access file; the library's own loader must accept them and the
    # stream must continue exactly like one fed the same samples in Python
    import numpy as np
    build = tmp_path / "build"
    r = subprocess.run(["make", "-C", ROOT, f"BUILD={build}", f"FC={FC}", "lib",
                        "fortran-example"], capture_output=True, text=True)
    assert r.returncode == 0, r.stderr
    blob_path = tmp_path / "cs.bin"
    out = subprocess.run([str(build / "example_f90"), str(blob_path)], capture_output=True,
                         text=True)
    assert out.returncode == 0, out.stdout
    # the C-level bytes (Stream.save adds a Python envelope; this is the
    # C format the Fortran and C++ interfaces exchange)
    from pyfracconv._fracconv import ffi, lib
    data = blob_path.read_bytes()
    pp = ffi.new("fc_stream **")
    assert lib.fc_stream_load(data, len(data), pp) == lib.FC_OK
    loaded = ffi.gc(pp[0], lib.fc_stream_free)
    count = ffi.new("uint64_t *")
    assert lib.fc_stream_count(loaded, count) == lib.FC_OK and count[0] == 150
    assert lib.fc_stream_create(lib.FC_RULE_RECTANGLE, 0.6, 0.01, 2, lib.FC_MODE_COMPRESSED,
                                1e-10, 1e6, pp) == lib.FC_OK
    fresh = ffi.gc(pp[0], lib.fc_stream_free)
    x = np.sin(0.05 * np.arange(400)) + 0.3
    xb = np.ascontiguousarray(np.stack([x, -2 * x], axis=1))  # channel fastest
    y0 = np.empty_like(xb)
    assert lib.fc_stream_push_block(fresh, ffi.from_buffer("double[]", xb), 400,
                                    ffi.from_buffer("double[]", y0)) == lib.FC_OK
    rest = np.ascontiguousarray(xb[150:])
    y1 = np.empty_like(rest)
    assert lib.fc_stream_push_block(loaded, ffi.from_buffer("double[]", rest), 250,
                                    ffi.from_buffer("double[]", y1)) == lib.FC_OK
    np.testing.assert_array_equal(y1, y0[150:])
