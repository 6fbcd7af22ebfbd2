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

import numpy as np
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


# ------------------------------------------------ grid and timed stream

GRID_TIMED_F90 = """
program grid_timed
  use, intrinsic :: iso_c_binding, only: c_double, c_int64_t, c_signed_char, c_size_t
  use, intrinsic :: ieee_arithmetic, only: ieee_value, ieee_quiet_nan
  use fracconv
  implicit none
  integer, parameter :: n = 401
  real(c_double) :: t(n), x1(n), x2(n), yr(n), yt(n), yl(n), ys(n), keep(n), ybad(n)
  real(c_double) :: two(n, 2), y2(n, 2), xb(2, n), yb(2, n), bad(n), y, z, nan
  real(c_double), parameter :: tol = 1e-12_c_double
  type(fc_stream) :: s, r, b, u
  integer(c_signed_char), allocatable :: blob(:), blob2(:), ublob(:)
  integer(c_int64_t) :: cnt
  integer :: st, k, kr, kt, kl, fails
  logical :: timed
  character(len=512) :: dir
  character(len=*), parameter :: row3 = "(a, 1x, i0, 3(1x, es25.17e3))"
  fails = 0
  call get_command_argument(1, dir)
  ! a jittered grid on [0, 1]: steps in [0.4, 1.6] / 400
  do k = 1, n
    t(k) = real(k - 1, c_double) / 400
    if (k > 1 .and. k < n) t(k) = (real(k - 1, c_double) + 0.3_c_double * sin(real(k - 1, c_double)**2)) / 400
    x1(k) = sqrt(t(k))
    x2(k) = t(k) * sqrt(t(k))
    print row3, "t", k - 1, t(k), x1(k), x2(k)
  end do

  ! ---- fc_grid_apply: the three rules, and two signals at once
  call fc_grid_apply(FC_RULE_RECTANGLE, 0.5_c_double, t, x1, yr, st, tol, kr)
  call check(st == FC_OK, "rectangle")
  call fc_grid_apply(FC_RULE_TRAPEZOID, 0.5_c_double, t, x1, yt, st, tol, kt)
  call check(st == FC_OK, "trapezoid")
  call fc_grid_apply(FC_RULE_L1, 0.4_c_double, t, x2, yl, st, tol, kl)
  call check(st == FC_OK, "l1")
  do k = 1, n
    print row3, "grid", k - 1, yr(k), yt(k), yl(k)
  end do
  print "(a, 3(1x, i0))", "terms", kr, kt, kl
  two(:, 1) = x1; two(:, 2) = x1
  call fc_grid_apply(FC_RULE_TRAPEZOID, 0.5_c_double, t, two, y2, st, tol)
  call check(st == FC_OK .and. same(y2(:, 1), yt) .and. same(y2(:, 2), yt), "two signals")

  ! refusals write nothing
  keep = 7; ybad = keep; bad = t; bad(201) = bad(200)
  call fc_grid_apply(FC_RULE_RECTANGLE, 0.5_c_double, bad, x1, ybad, st, tol)
  print "(a, i0)", "refused grid t status ", st
  call fc_grid_apply(FC_RULE_RECTANGLE, 0.5_c_double, t, x1, ybad, st, 1.0_c_double)
  print "(a, i0)", "refused grid tol status ", st
  call fc_grid_apply(FC_RULE_L1, 1.5_c_double, t, x1, ybad, st, tol)
  print "(a, i0)", "refused grid order status ", st
  call fc_grid_apply(FC_RULE_RECTANGLE, 0.5_c_double, t(1:n-1), x1, ybad, st, tol)
  print "(a, i0)", "refused grid size status ", st
  call check(same(ybad, keep), "refused grid calls write nothing")

  ! ---- a timed stream, one sample at a time
  call fc_stream_create_timed(s, FC_RULE_TRAPEZOID, 0.7_c_double, 5e-4_c_double, 2.0_c_double, &
       st, tol=tol)
  call check(st == FC_OK, "create timed")
  call fc_stream_is_timed(s, timed, st)
  call check(st == FC_OK .and. timed, "is timed")
  nan = ieee_value(nan, ieee_quiet_nan)
  do k = 1, n
    if (k == 251) then
      call fc_stream_save(s, blob, st)
      call fc_stream_push_timed(s, t(250), 1.0_c_double, y, st)
      print "(a, i0)", "refused push back status ", st
      call fc_stream_push_timed(s, t(250) + 1e-4_c_double, 1.0_c_double, y, st)
      print "(a, i0)", "refused push small status ", st
      call fc_stream_push_timed(s, nan, 1.0_c_double, y, st)
      print "(a, i0)", "refused push nan status ", st
      call fc_stream_preview_timed(s, t(250), 1.0_c_double, y, st)
      print "(a, i0)", "refused preview back status ", st
      call fc_stream_count(s, cnt, st)
      call fc_stream_save(s, blob2, st)
      call check(cnt == 250 .and. size(blob2) == size(blob), "refused pushes leave the count")
      call check(all(blob2 == blob), "refused pushes leave the state bit for bit")
    end if
    call fc_stream_preview_timed(s, t(k), x1(k), z, st)
    call check(st == FC_OK, "timed preview")
    call fc_stream_push_timed(s, t(k), x1(k), ys(k), st)
    call check(st == FC_OK .and. same1(z, ys(k)), "timed preview is the push bit for bit")
  end do
  do k = 1, n
    print "(a, 1x, i0, 1x, es25.17e3)", "timed", k - 1, ys(k)
  end do
  ! resumed from the bytes saved at 250: the same bits
  call fc_stream_load(r, blob, st)
  call check(st == FC_OK, "load timed")
  do k = 251, n
    call fc_stream_push_timed(r, t(k), x1(k), z, st)
    call check(st == FC_OK .and. same1(z, ys(k)), "loaded timed stream continues bit for bit")
  end do

  ! ---- two channels, one block
  call fc_stream_create_timed(b, FC_RULE_RECTANGLE, 0.5_c_double, 5e-4_c_double, 2.0_c_double, &
       st, channels=2, tol=tol)
  xb(1, :) = x1; xb(2, :) = x2
  call fc_stream_push_timed(b, t, xb, yb, st)
  call check(st == FC_OK, "block push")
  do k = 1, n
    print "(a, 1x, i0, 2(1x, es25.17e3))", "block", k - 1, yb(1, k), yb(2, k)
  end do
  call fc_stream_push_timed(b, t(1:3), xb(:, 1:2), yb(:, 1:2), st)
  print "(a, i0)", "refused block size status ", st
  call fc_stream_push_timed(b, 2.0_c_double, 1.0_c_double, y, st)
  print "(a, i0)", "refused scalar push status ", st
  call fc_stream_count(b, cnt, st)
  call check(cnt == n, "refused block pushes leave the count")

  ! ---- creation refused; an untimed stream is not timed and refuses timed pushes
  call fc_stream_create_timed(u, FC_RULE_RECTANGLE, 0.5_c_double, 0.0_c_double, 2.0_c_double, st)
  print "(a, i0)", "refused create step status ", st
  call fc_stream_create_timed(u, FC_RULE_RECTANGLE, 0.5_c_double, 5e-4_c_double, 2.0_c_double, &
       st, tol=1.0_c_double)
  print "(a, i0)", "refused create tol status ", st
  call fc_stream_create_timed(u, FC_RULE_GRUNWALD, 0.5_c_double, 5e-4_c_double, 2.0_c_double, st)
  print "(a, i0)", "refused create rule status ", st
  call fc_stream_create(u, FC_RULE_RECTANGLE, 0.5_c_double, 0.01_c_double, st)
  call fc_stream_is_timed(u, timed, st)
  call check(st == FC_OK .and. .not. timed, "an untimed stream")
  call fc_stream_push_timed(u, 1.0_c_double, 1.0_c_double, y, st)
  print "(a, i0)", "refused untimed push status ", st
  call fc_stream_save(u, ublob, st)
  call check(st == FC_OK, "untimed save")

  call fc_stream_free(s)
  call fc_stream_free(r)
  call fc_stream_free(b)
  call fc_stream_free(u)
  if (fails == 0) print "(a)", "all grid and timed checks passed"
  if (fails /= 0) error stop 1

contains

  subroutine check(ok, what)
    logical, intent(in) :: ok
    character(len=*), intent(in) :: what
    if (.not. ok) then
      print "(2a)", "FAIL ", what
      fails = fails + 1
    end if
  end subroutine check

  ! bit for bit: compared as 64-bit integers
  logical function same(a, c)
    real(c_double), intent(in) :: a(:), c(:)
    same = size(a) == size(c)
    if (same) same = all(transfer(a, 0_c_int64_t, size(a)) == transfer(c, 0_c_int64_t, size(c)))
  end function same

  logical function same1(a, c)
    real(c_double), intent(in) :: a, c
    same1 = transfer(a, 0_c_int64_t) == transfer(c, 0_c_int64_t)
  end function same1
end program grid_timed
"""


@pytest.fixture(scope="module")
def grid_timed(tmp_path_factory):
    """GRID_TIMED_F90 (fc_grid_apply, fc_stream_create_timed,
    fc_stream_push_timed and fc_stream_is_timed of the module) built with
    -std=f2008 -Werror against the static library and run; the printed
    values (17 significant digits: exact doubles) parsed."""
    tmp = tmp_path_factory.mktemp("f90grid")
    build = tmp / "build"
    subprocess.run(["make", "-C", ROOT, f"BUILD={build}", "lib"], check=True, capture_output=True, text=True)
    src = tmp / "grid_timed.f90"
    src.write_text(GRID_TIMED_F90)
    exe = tmp / "grid_timed"
    r = subprocess.run(
        [
            FC,
            "-std=f2008",
            "-Wall",
            "-Wextra",
            "-Werror",
            "-J",
            str(tmp),
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
    out = subprocess.run([str(exe), str(tmp)], capture_output=True, text=True)

    def table(tag, width):
        rows = re.findall(rf"^ *{tag} (\d+)((?: +\S+){{{width}}}) *$", out.stdout, re.M)
        return np.array([[float(v) for v in vals.split()] for _, vals in rows])

    return {
        "out": out,
        "t": table("t", 3),
        "grid": table("grid", 3),
        "timed": table("timed", 1)[:, 0],
        "block": table("block", 2),
        "terms": [int(v) for v in re.search(r"^ *terms (\d+) (\d+) (\d+)", out.stdout, re.M).groups()],
        "refused": {k: int(v) for k, v in re.findall(r"^ *refused (.+) status (-?\d+)", out.stdout, re.M)},
    }


def test_f90_grid_timed_program_passes(grid_timed):
    # its own checks: two signals at once, refusals that write nothing and
    # change nothing (the saved bytes compared), a loaded stream continuing
    # bit for bit, an untimed stream told apart
    out = grid_timed["out"]
    assert out.returncode == 0, out.stdout + out.stderr
    assert "all grid and timed checks passed" in out.stdout and "FAIL" not in out.stdout


def test_f90_grid_apply_equals_python_fast_engine(grid_timed):
    # the same C function behind integral/derivative(..., t=, engine='fast'):
    # equal to the last bit on the same times, samples and tol
    t, x1, x2 = grid_timed["t"].T
    g = grid_timed["grid"]
    assert t.size == 401 and np.all(np.diff(t) > 0)
    kw = dict(t=t, engine="fast", tol=1e-12)
    assert np.array_equal(g[:, 0], pyfracconv.integral(x1, 0.5, rule="rectangle", **kw))
    assert np.array_equal(g[:, 1], pyfracconv.integral(x1, 0.5, rule="trapezoid", **kw))
    assert np.array_equal(g[:, 2], pyfracconv.derivative(x2, 0.4, rule="l1", **kw))


def test_f90_grid_apply_against_the_closed_forms(grid_timed):
    # I^a t^b = Gamma(b+1)/Gamma(b+1+a) t^(b+a) (Podlubny 1999, chapter 2)
    # and D^a t^b = Gamma(b+1)/Gamma(b+1-a) t^(b-a) (Diethelm 2010) with
    # SciPy's gamma; the bounds are the rules' errors at these 400 steps
    # measured when the test was written (tests/test_cpp.py, the same grid:
    # rectangle 2.8e-3, trapezoid 4.2e-4, L1 2.7e-4) with a margin of 3
    from scipy.special import gamma

    t, x1, x2 = grid_timed["t"].T
    g = grid_timed["grid"]
    for col, (a, b, l1, bound) in enumerate(
        [(0.5, 0.5, 0, 8.4e-3), (0.5, 0.5, 0, 1.3e-3), (0.4, 1.5, 1, 8.1e-4)]
    ):
        if l1:
            exact = gamma(b + 1) / gamma(b + 1 - a) * t ** (b - a)
        else:
            exact = gamma(b + 1) / gamma(b + 1 + a) * t ** (b + a)
        assert np.max(np.abs(g[:, col] - exact)) < bound, col
    assert all(k > 0 for k in grid_timed["terms"])


def test_f90_timed_stream_equals_python_timed_stream(grid_timed):
    # pyfracconv.TimedStream over the same C stream, pushed one at a time
    # (the Fortran run refused three pushes at sample 250, which changed
    # nothing) and two channels in one block: equal to the last bit
    t, x1, x2 = grid_timed["t"].T
    s = pyfracconv.TimedStream(0.7, 5e-4, 2.0, rule="trapezoid", tol=1e-12)
    assert np.array_equal(grid_timed["timed"], [s.push(tk, xk) for tk, xk in zip(t, x1)])
    b = pyfracconv.TimedStream(0.5, 5e-4, 2.0, rule="rectangle", tol=1e-12, channels=2)
    assert np.array_equal(grid_timed["block"], b.push_many(t, np.stack([x1, x2], axis=1)))


def test_f90_grid_timed_refusals_carry_the_c_statuses(grid_timed):
    lib = pyfracconv._fracconv.lib
    want = {
        "grid t": lib.FC_ERR_ARG,
        "grid tol": lib.FC_ERR_TOL,
        "grid order": lib.FC_ERR_ORDER,
        "grid size": lib.FC_ERR_ARG,
        "push back": lib.FC_ERR_ARG,
        "push small": lib.FC_ERR_ARG,
        "push nan": lib.FC_ERR_NONFINITE,
        "preview back": lib.FC_ERR_ARG,
        "block size": lib.FC_ERR_ARG,
        "scalar push": lib.FC_ERR_ARG,
        "create step": lib.FC_ERR_STEP,
        "create tol": lib.FC_ERR_TOL,
        "create rule": lib.FC_ERR_RULE,
        "untimed push": lib.FC_ERR_ARG,
    }
    assert grid_timed["refused"] == {k: int(v) for k, v in want.items()}
