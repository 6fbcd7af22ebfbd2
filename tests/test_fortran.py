"""The Fortran 2008 module (fortran/fracconv.f90): examples/example.f90
built with gfortran -std=f2008 -Wall -Wextra -Werror against the static
library and run.

The program checks the rectangle rule on constants against the closed form
h^a n^a / Gamma(a+1) (common practice; Podlubny 1999, docs/references.md),
exact and compressed streams, save/load and refusals. Here its printed
weights are compared with the Python bindings' (agreement between
interfaces: the same C function, so equal to the last bit) and the
module's constants with the C header's.

examples/solver_controller.f90 (the solver with bind(c) callbacks and the
controller): its relaxation solutions against the Mittag-Leffler function
summed with mpmath, its controller outputs against pyfracconv.Controller
fed the same inputs."""

import math
import os
import re
import shutil
import subprocess

import pytest

import pyfracconv

ROOT = os.path.dirname(os.path.dirname(os.path.abspath(__file__)))
FC = shutil.which("gfortran")
pytestmark = pytest.mark.skipif(FC is None, reason="gfortran is not installed (apt-get install -y gfortran)")


@pytest.fixture(scope="module")
def example(tmp_path_factory):
    build = tmp_path_factory.mktemp("f90build")
    r = subprocess.run(
        ["make", "-C", ROOT, f"BUILD={build}", f"FC={FC}", "lib", "fortran-example"],
        capture_output=True,
        text=True,
    )
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


CONST = r"FC_(?:OK|ERR_\w+|RULE_\w+|ENGINE_\w+|MODE_\w+|METHOD_\w+|AW_\w+|CTRL_\w+)"


def test_module_constants_equal_the_c_header():
    with open(os.path.join(ROOT, "csrc", "fracconv.h")) as f:
        header = dict(re.findall(r"#define (" + CONST + r") (\d+)", f.read()))
    with open(os.path.join(ROOT, "fortran", "fracconv.f90")) as f:
        module = dict(re.findall(r"(" + CONST + r") = (\d+)", f.read()))
    assert module, "no constants found in the module"
    for name, value in module.items():
        assert header.get(name) == value, name
    # every status code of the header is in the module
    assert {k for k in header if k.startswith("FC_ERR_")} <= set(module)


def test_docs_fortran_example_builds_and_runs(tmp_path):
    # the README's quick.f90 (section "Compiled callers"), from the checkout
    import readme_c

    blocks = [readme_c.doc_program("fortran")]
    build = tmp_path / "build"
    subprocess.run(["make", "-C", ROOT, f"BUILD={build}", "lib"], check=True, capture_output=True, text=True)
    src = tmp_path / "quick.f90"
    src.write_text(blocks[0])
    exe = tmp_path / "quick"
    r = subprocess.run(
        [
            FC,
            "-std=f2008",
            "-Wall",
            "-Werror",
            "-J",
            str(tmp_path),
            os.path.join(ROOT, "fortran", "fracconv.f90"),
            str(src),
            str(build / "libfracconv.a"),
            "-lm",
            "-o",
            str(exe),
        ],
        capture_output=True,
        text=True,
    )
    assert r.returncode == 0, r.stderr
    out = subprocess.run([str(exe)], capture_output=True, text=True)
    assert out.returncode == 0, out.stdout + out.stderr
    assert "refused: status 3: order must be" in out.stdout
    # D y = -y + sin t, y(0) = 1: 3/2 exp(-t) + (sin t - cos t)/2 (linear
    # first-order ODE, closed form); predictor-corrector error at h = 0.01
    # about 8e-6 (measured)
    m = re.search(r"D y = -y \+ sin t at t=1:\s+(\S+)", out.stdout)
    exact = 1.5 * math.exp(-1.0) + (math.sin(1.0) - math.cos(1.0)) / 2
    assert m and abs(float(m.group(1)) - exact) < 2e-5


def test_blob_saved_from_fortran_loads_in_python(tmp_path):
    # the bytes pass through a Fortran integer(c_signed_char) array and a
    # stream-access file; the library's own loader must accept them and the
    # stream must continue exactly like one fed the same samples in Python
    import numpy as np

    build = tmp_path / "build"
    r = subprocess.run(
        ["make", "-C", ROOT, f"BUILD={build}", f"FC={FC}", "lib", "fortran-example"],
        capture_output=True,
        text=True,
    )
    assert r.returncode == 0, r.stderr
    blob_path = tmp_path / "cs.bin"
    out = subprocess.run([str(build / "example_f90"), str(blob_path)], capture_output=True, text=True)
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
    assert (
        lib.fc_stream_create(lib.FC_RULE_RECTANGLE, 0.6, 0.01, 2, lib.FC_MODE_COMPRESSED, 1e-10, 1e6, pp)
        == lib.FC_OK
    )
    fresh = ffi.gc(pp[0], lib.fc_stream_free)
    x = np.sin(0.05 * np.arange(400)) + 0.3
    xb = np.ascontiguousarray(np.stack([x, -2 * x], axis=1))  # channel fastest
    y0 = np.empty_like(xb)
    assert (
        lib.fc_stream_push_block(fresh, ffi.from_buffer("double[]", xb), 400, ffi.from_buffer("double[]", y0))
        == lib.FC_OK
    )
    rest = np.ascontiguousarray(xb[150:])
    y1 = np.empty_like(rest)
    assert (
        lib.fc_stream_push_block(
            loaded, ffi.from_buffer("double[]", rest), 250, ffi.from_buffer("double[]", y1)
        )
        == lib.FC_OK
    )
    np.testing.assert_array_equal(y1, y0[150:])


# ------------------------------------------------ solver and controller


@pytest.fixture(scope="module")
def solver_controller(tmp_path_factory):
    """examples/solver_controller.f90 (make fortran-example), built and run."""
    build = tmp_path_factory.mktemp("f90sc")
    r = subprocess.run(
        ["make", "-C", ROOT, f"BUILD={build}", f"FC={FC}", "lib", "fortran-example"],
        capture_output=True,
        text=True,
    )
    assert r.returncode == 0, r.stdout + r.stderr
    return subprocess.run([str(build / "solver_controller_f90")], capture_output=True, text=True)


def test_f90_solver_controller_program_passes(solver_controller):
    # its own checks: a stopping callback keeps the steps before it,
    # save/load bit for bit, refusals with the C status
    out = solver_controller
    assert out.returncode == 0, out.stdout + out.stderr
    assert "all solver and controller checks passed" in out.stdout
    assert "FAIL" not in out.stdout
    from pyfracconv._fracconv import ffi, lib

    msg = ffi.string(lib.fc_solver_strerror(lib.FC_ERR_CALLBACK)).decode()
    assert f"stopped: status {lib.FC_ERR_CALLBACK}: {msg}" in out.stdout


def test_f90_solver_matches_mittag_leffler(solver_controller):
    # D^a y = -y, y(0) = 1: y = E_a(-t^a) (Gorenflo, Kilbas, Mainardi and
    # Rogosin, Mittag-Leffler Functions, Springer 2014), summed with mpmath
    # (tests/solver_reference.py); a = 1 also against math.exp(-t). Bounds:
    # the methods' errors at h = 1/256 measured once (a = 1: 9.4e-7; a =
    # 0.6: 5.0e-6 predictor-corrector, 9.7e-6 trapezoid), margin 2 to 3.
    from solver_reference import mittag_leffler

    rows = re.findall(r"relax (\S+) a=\s*(\S+) t=\s*(\S+) y=\s*(\S+)", solver_controller.stdout)
    assert len(rows) == 16
    for tag, a, t, y in rows:
        a, t, y = float(a), float(t), float(y)
        ref = mittag_leffler(a, 1, -(t**a))
        if a == 1.0:
            assert abs(ref - math.exp(-t)) < 1e-15
            assert abs(y - ref) < 2e-6, (tag, t)
        else:
            assert abs(y - ref) < (3e-5 if tag == "trapezoid" else 1.5e-5), (tag, t, y - ref)


def test_f90_controller_equals_python_controller(solver_controller):
    # the same parameters and inputs (printed with 17 digits, which give
    # the double back exactly) to pyfracconv.Controller: the same C code
    # behind both interfaces, equal to the last bit
    rows = re.findall(r"ctl (\d+)\s+(\S+)\s+(\S+)\s+(\S+)", solver_controller.stdout)
    assert len(rows) == 600
    c = pyfracconv.Controller(
        2.0,
        1.5,
        0.3,
        integral_order=0.7,
        derivative_order=0.4,
        step=0.01,
        output_limits=(-1.0, 1.2),
        rate_limit=40.0,
        setpoint_weight=0.8,
        derivative_weight=0.0,
        derivative_filter=0.05,
        integral_rule="trapezoid",
        derivative_rule="grunwald",
        memory="compressed",
        tol=1e-10,
        horizon=1e9,
    )
    limited = 0
    for n, r, y, u in rows:
        n = int(n)
        if n == 200:
            c.manual(0.25)
        if n == 260:
            c.automatic()
        assert c.update(float(r), float(y)) == float(u), n
        limited += c.limited
    assert limited > 20  # the limits and the rate limit were exercised


def test_f90_params_type_matches_the_c_struct():
    # type, bind(C) :: fc_controller_params lists the C struct's fields in
    # the C order with the matching kinds (double: real(c_double), int:
    # integer(c_int))
    with open(os.path.join(ROOT, "csrc", "fracconv.h")) as f:
        body = re.search(r"typedef struct fc_controller_params \{(.*?)\}", f.read(), re.S).group(1)
    c_fields = []
    for line in body.splitlines():
        m = re.match(r"\s*(double|int)\s+([^;]+);", line)
        if m:
            c_fields += [(m.group(1), n.strip()) for n in m.group(2).split(",")]
    with open(os.path.join(ROOT, "fortran", "fracconv.f90")) as f:
        body = re.search(
            r"type, bind\(C\), public :: fc_controller_params\n(.*?)end type", f.read(), re.S
        ).group(1)
    f_fields = []
    for line in re.sub(r"&\s*\n\s*", " ", body).splitlines():
        m = re.match(r"\s*(real\(c_double\)|integer\(c_int\)) :: (.+)", line)
        if m:
            kind = "double" if m.group(1).startswith("real") else "int"
            f_fields += [(kind, n.strip()) for n in m.group(2).split(",")]
    assert c_fields and f_fields == c_fields


CHECKPOINT_F90 = """
program ckpt
  use, intrinsic :: iso_c_binding, only: c_double, c_size_t, c_int64_t
  use fracconv
  implicit none
  type(fc_stream) :: s, r
  real(c_double) :: x(1, 40), y(1, 40), z(1, 40)
  character(len=512) :: dir
  integer :: st, i
  call get_command_argument(1, dir)
  do i = 1, 40
    x(1, i) = 0.1_c_double * i
  end do
  call fc_stream_create(s, FC_RULE_L1, 0.4_c_double, 0.1_c_double, st, channels=1, &
                        mode=FC_MODE_COMPRESSED, tol=1.0e-9_c_double, horizon=1.0e3_c_double)
  if (st /= FC_OK) error stop 1
  call fc_stream_push_block(s, x(:, 1:20), y(:, 1:20), st)
  call fc_stream_save_file(s, trim(dir) // "/s.ckpt", st)
  if (st /= FC_OK) error stop 2
  call fc_stream_load_file(r, trim(dir) // "/s.ckpt", 1048576_c_size_t, st)
  if (st /= FC_OK) error stop 3
  call fc_stream_push_block(s, x(:, 21:40), y(:, 21:40), st)
  call fc_stream_push_block(r, x(:, 21:40), z(:, 21:40), st)
  ! bit for bit: the outputs compared as 64-bit integers
  if (any(transfer(y(1, 21:40), 0_c_int64_t, 20) /= transfer(z(1, 21:40), 0_c_int64_t, 20))) &
    error stop 4
  call fc_stream_save_file(s, trim(dir) // "/no-such-dir/s.ckpt", st)
  print "(a, i0)", "save refused: status ", st
  call fc_stream_load_file(r, trim(dir) // "/s.ckpt", 10_c_size_t, st)
  print "(a, i0)", "load refused: status ", st
  call fc_stream_free(s)
  call fc_stream_free(r)
end program ckpt
"""


def test_stream_checkpoint_files(tmp_path):
    # fc_stream_save_file / fc_stream_load_file of the module: a resumed
    # stream continues bit for bit; FC_ERR_IO for a missing directory,
    # FC_ERR_SIZE past max_size; the file loads in Python too
    build = tmp_path / "build"
    subprocess.run(["make", "-C", ROOT, f"BUILD={build}", "lib"], check=True, capture_output=True, text=True)
    src = tmp_path / "ckpt.f90"
    src.write_text(CHECKPOINT_F90)
    exe = tmp_path / "ckpt"
    r = subprocess.run(
        [
            FC,
            "-std=f2008",
            "-Wall",
            "-Wextra",
            "-Werror",
            "-J",
            str(tmp_path),
            os.path.join(ROOT, "fortran", "fracconv.f90"),
            str(src),
            str(build / "libfracconv.a"),
            "-lm",
            "-o",
            str(exe),
        ],
        capture_output=True,
        text=True,
    )
    assert r.returncode == 0, r.stderr
    out = subprocess.run([str(exe), str(tmp_path)], capture_output=True, text=True)
    assert out.returncode == 0, out.stdout + out.stderr
    assert out.stdout.split("\n")[:2] == [
        f"save refused: status {int(pyfracconv._fracconv.lib.FC_ERR_IO)}",
        f"load refused: status {int(pyfracconv._fracconv.lib.FC_ERR_SIZE)}",
    ]
    s = pyfracconv.Stream.load_file(str(tmp_path / "s.ckpt"))
    assert s.count == 20 and s.channels == 1


CHECKPOINT_CTRL_F90 = """
program ckpt_ctrl
  use, intrinsic :: iso_c_binding, only: c_double, c_size_t, c_int64_t
  use fracconv
  implicit none
  type(fc_controller) :: c, d
  type(fc_controller_params) :: p
  type(fc_solver) :: s
  real(c_double) :: u, v
  character(len=512) :: dir
  integer :: st, i
  call get_command_argument(1, dir)
  call fc_controller_default_params(p, st)
  p%kp = 1; p%ki = 0.5_c_double; p%kd = 0.1_c_double
  p%integral_order = 0.7_c_double; p%derivative_order = 0.4_c_double
  p%step = 0.01_c_double; p%out_min = -2; p%out_max = 2
  call fc_controller_create(c, p, st)
  if (st /= FC_OK) error stop 1
  do i = 0, 39
    call fc_controller_update(c, 1.0_c_double, 0.02_c_double * i, u, st)
  end do
  call fc_controller_save_file(c, trim(dir) // "/c.ckpt", st)
  if (st /= FC_OK) error stop 2
  call fc_controller_load_file(d, trim(dir) // "/c.ckpt", 1048576_c_size_t, st)
  if (st /= FC_OK) error stop 3
  do i = 40, 79
    call fc_controller_update(c, 1.0_c_double, 0.02_c_double * i, u, st)
    call fc_controller_update(d, 1.0_c_double, 0.02_c_double * i, v, st)
    ! bit for bit: compared as 64-bit integers
    if (transfer(u, 0_c_int64_t) /= transfer(v, 0_c_int64_t)) error stop 4
  end do
  call fc_controller_save_file(c, trim(dir) // "/no-such-dir/c.ckpt", st)
  print "(a, i0)", "save refused: status ", st
  call fc_solver_load_file(s, trim(dir) // "/missing.ckpt", 1048576_c_size_t, st)
  print "(a, i0)", "load refused: status ", st
  call fc_controller_free(c)
  call fc_controller_free(d)
end program ckpt_ctrl
"""


def test_controller_solver_checkpoint_files(tmp_path):
    # fc_controller_save_file / _load_file and fc_solver_load_file of the
    # module: a resumed controller continues bit for bit; FC_ERR_IO for a
    # missing directory and a missing file; the file loads in Python too
    build = tmp_path / "build"
    subprocess.run(["make", "-C", ROOT, f"BUILD={build}", "lib"], check=True, capture_output=True, text=True)
    src = tmp_path / "ckpt_ctrl.f90"
    src.write_text(CHECKPOINT_CTRL_F90)
    exe = tmp_path / "ckpt_ctrl"
    r = subprocess.run(
        [
            FC,
            "-std=f2008",
            "-Wall",
            "-Wextra",
            "-Werror",
            "-J",
            str(tmp_path),
            os.path.join(ROOT, "fortran", "fracconv.f90"),
            str(src),
            str(build / "libfracconv.a"),
            "-lm",
            "-o",
            str(exe),
        ],
        capture_output=True,
        text=True,
    )
    assert r.returncode == 0, r.stderr
    out = subprocess.run([str(exe), str(tmp_path)], capture_output=True, text=True)
    assert out.returncode == 0, out.stdout + out.stderr
    io = int(pyfracconv._fracconv.lib.FC_ERR_IO)
    assert out.stdout.split("\n")[:2] == [f"save refused: status {io}", f"load refused: status {io}"]
    c = pyfracconv.Controller.load_file(str(tmp_path / "c.ckpt"))
    assert c.count == 40
