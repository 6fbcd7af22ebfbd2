"""The C++17 wrapper (csrc/fracconv.hpp): examples/example.cpp built with
g++ -std=c++17 -Wall -Wextra -Werror against the static library and run.

The program checks the rectangle rule on constants against the closed form
h^a n^a / Gamma(a+1) (common practice; Podlubny 1999, docs/references.md),
the wrapper against the C API called directly (agreement between
interfaces: bit for bit), streams, save/load and the error type. Here the
printed values are also checked against the closed form independently of
the program's own verdict.

examples/solver_controller.cpp (the solver and controller classes): its
relaxation solutions against the Mittag-Leffler function summed with
mpmath, its controller outputs against pyfracconv.Controller fed the same
inputs."""

import math
import os
import re
import shutil
import subprocess

import pytest

ROOT = os.path.dirname(os.path.dirname(os.path.abspath(__file__)))
CXX = shutil.which("g++")


@pytest.fixture(scope="module")
def example(tmp_path_factory):
    if not os.path.exists(os.path.join(ROOT, "Makefile")):
        pytest.fail("the C++ tests need the source checkout (Makefile)")
    if CXX is None:
        pytest.fail("g++ is needed for the C++ wrapper tests")
    build = tmp_path_factory.mktemp("cppbuild")
    r = subprocess.run(
        ["make", "-C", ROOT, f"BUILD={build}", f"CXX={CXX}", "lib", "cpp-example"],
        capture_output=True,
        text=True,
    )
    assert r.returncode == 0, r.stdout + r.stderr
    out = subprocess.run([str(build / "example_cpp")], capture_output=True, text=True)
    return out


def test_example_cpp_builds_warning_free_and_passes(example):
    assert example.returncode == 0, example.stdout + example.stderr
    assert "all checks passed" in example.stdout
    assert "FAIL" not in example.stdout


def test_example_cpp_reports_the_closed_form_error(example):
    m = re.search(r"rectangle I\^0\.6 1 on 500 points: max rel err (\S+)", example.stdout)
    assert m and float(m.group(1)) < 1e-13


def test_example_cpp_error_message_is_the_c_message(example):
    # fc_strerror(FC_ERR_ORDER), read through the Python bindings
    from pyfracconv._fracconv import ffi, lib

    msg = ffi.string(lib.fc_strerror(lib.FC_ERR_ORDER)).decode()
    assert f"fc_stream_create: {msg}" in example.stdout


def test_header_compiles_alone_pedantic(tmp_path):
    if CXX is None:
        pytest.fail("g++ is needed for the C++ wrapper tests")
    src = tmp_path / "only.cpp"
    src.write_text('#include "fracconv.hpp"\nint main() { return 0; }\n')
    r = subprocess.run(
        [
            CXX,
            "-std=c++17",
            "-Wall",
            "-Wextra",
            "-Wpedantic",
            "-Werror",
            "-fsyntax-only",
            "-I",
            os.path.join(ROOT, "csrc"),
            str(src),
        ],
        capture_output=True,
        text=True,
    )
    assert r.returncode == 0, r.stderr


def _doc_block(lang):
    # the README's quick.cpp (section "Compiled callers")
    import readme_c

    return readme_c.doc_program(lang)


def test_docs_cpp_example_builds_and_runs(example, tmp_path):
    # the README's example, built from the checkout (with -Werror too);
    # tests/test_install.py builds it against an installed prefix
    build = tmp_path / "build"
    subprocess.run(["make", "-C", ROOT, f"BUILD={build}", "lib"], check=True, capture_output=True, text=True)
    src = tmp_path / "quick.cpp"
    src.write_text(_doc_block("cpp"))
    exe = tmp_path / "quick"
    r = subprocess.run(
        [
            CXX,
            "-std=c++17",
            "-Wall",
            "-Wextra",
            "-Werror",
            "-I",
            os.path.join(ROOT, "csrc"),
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
    assert out.returncode == 0, out.stdout
    assert "refused (status 3)" in out.stdout
    # D y = -y, y(0) = 1: exp(-t) (closed form); the predictor-corrector's
    # error at h = 0.01 is 6e-6 (measured)
    m = re.search(r"D y = -y at t=1: (\S+)", out.stdout)
    assert m and abs(float(m.group(1)) - math.exp(-1.0)) < 2e-5


# ------------------------------------------------ solver and controller


@pytest.fixture(scope="module")
def solver_controller(tmp_path_factory):
    """examples/solver_controller.cpp (make cpp-example), built and run."""
    if CXX is None:
        pytest.fail("g++ is needed for the C++ wrapper tests")
    build = tmp_path_factory.mktemp("cppsc")
    r = subprocess.run(
        ["make", "-C", ROOT, f"BUILD={build}", f"CXX={CXX}", "lib", "cpp-example"],
        capture_output=True,
        text=True,
    )
    assert r.returncode == 0, r.stdout + r.stderr
    return subprocess.run([str(build / "solver_controller_cpp")], capture_output=True, text=True)


def test_cpp_solver_controller_program_passes(solver_controller):
    # its own checks: lambdas with captured state as rhs and Jacobian, a
    # callback's exception rethrown with the steps before it kept,
    # save/load bit for bit, moved-from and bad arguments refused
    out = solver_controller
    assert out.returncode == 0, out.stdout + out.stderr
    assert "all solver and controller checks passed" in out.stdout
    assert "FAIL" not in out.stdout


def test_cpp_solver_matches_mittag_leffler(solver_controller):
    # D^a y = -y, y(0) = 1: y = E_a(-t^a) (Gorenflo, Kilbas, Mainardi and
    # Rogosin, Mittag-Leffler Functions, Springer 2014), summed with mpmath
    # (tests/solver_reference.py); a = 1 also against math.exp(-t). The
    # bounds are the methods' errors at h = 1/256 measured once (a = 1:
    # 9.4e-7; a = 0.6: 5.0e-6 predictor-corrector, 9.7e-6 trapezoid) with
    # a margin of 2 to 3: a method that lost an order would fail them.
    from solver_reference import mittag_leffler

    rows = re.findall(r"relax (\S+) a=(\S+) t=(\S+) y=(\S+)", solver_controller.stdout)
    assert len(rows) == 16
    for tag, a, t, y in rows:
        a, t, y = float(a), float(t), float.fromhex(y)
        ref = mittag_leffler(a, 1, -(t**a))
        if a == 1.0:
            assert abs(ref - math.exp(-t)) < 1e-15
            assert abs(y - ref) < 2e-6, (tag, t)
        else:
            assert abs(y - ref) < (3e-5 if tag == "trapezoid" else 1.5e-5), (tag, t, y - ref)


def test_cpp_controller_equals_python_controller(solver_controller):
    # the same parameters and inputs to pyfracconv.Controller (the same C
    # code behind both interfaces: equal to the last bit)
    import pyfracconv

    rows = re.findall(r"ctl (\d+) (\S+) (\S+) (\S+)", solver_controller.stdout)
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
        got = c.update(float.fromhex(r), float.fromhex(y))
        assert got == float.fromhex(u), n
        limited += c.limited
    assert limited > 20  # the limits and the rate limit were exercised


CHECKPOINT_CPP = r"""
#include <cstdio>
#include <string>
#include <vector>
#include "fracconv.hpp"
int main(int argc, char **argv)
{
    (void)argc;
    std::string dir = argv[1];
    pyfracconv::stream s(FC_RULE_L1, 0.4, 0.1, 1, FC_MODE_COMPRESSED, 1e-9, 1000.0);
    std::vector<double> x(40);
    for (std::size_t i = 0; i < x.size(); i++) x[i] = 0.1 * double(i);
    s.push_block(pyfracconv::cview(x.data(), 20));
    s.save_file(dir + "/s.ckpt");
    pyfracconv::stream r = pyfracconv::stream::load_file(dir + "/s.ckpt");
    std::vector<double> a = s.push_block(pyfracconv::cview(x.data() + 20, 20));
    std::vector<double> b = r.push_block(pyfracconv::cview(x.data() + 20, 20));
    if (a != b) { std::printf("resumed stream differs\n"); return 1; }
    try {
        s.save_file(dir + "/no-such-dir/s.ckpt");
    } catch (const pyfracconv::error &e) {
        std::printf("refused (status %d)\n", e.status());
    }
    try {
        pyfracconv::stream::load_file(dir + "/s.ckpt", 10);
    } catch (const pyfracconv::error &e) {
        std::printf("refused (status %d)\n", e.status());
    }
    return 0;
}
"""


def test_stream_checkpoint_files(tmp_path):
    # pyfracconv::stream::save_file / load_file (csrc/fracconv.hpp) over
    # fc_stream_save_file / fc_stream_load_file: resume bit for bit, and
    # FC_ERR_IO (17) for a missing directory, FC_ERR_SIZE (5) past max_size
    if CXX is None:
        pytest.fail("g++ is needed for the C++ wrapper tests")
    build = tmp_path / "build"
    subprocess.run(["make", "-C", ROOT, f"BUILD={build}", "lib"], check=True, capture_output=True, text=True)
    src = tmp_path / "ckpt.cpp"
    src.write_text(CHECKPOINT_CPP)
    exe = tmp_path / "ckpt"
    r = subprocess.run(
        [
            CXX,
            "-std=c++17",
            "-Wall",
            "-Wextra",
            "-Werror",
            "-I",
            os.path.join(ROOT, "csrc"),
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
    assert out.returncode == 0, out.stdout
    assert out.stdout.splitlines() == ["refused (status 17)", "refused (status 5)"]


CHECKPOINT_SC_CPP = r"""
#include <cstdio>
#include <string>
#include <vector>
#include "fracconv.hpp"
namespace fc = pyfracconv;
int main(int argc, char **argv)
{
    (void)argc;
    std::string dir = argv[1];
    std::vector<double> order{0.6}, init{1.0};
    auto relax = [](double, const double *y, double *f) { f[0] = -y[0]; };
    fc::solver s(order, 0.01, 0.0, init);
    s.set_rhs(relax);
    s.advance_states(50);
    s.save_file(dir + "/s.ckpt");
    fc::solver r = fc::solver::load_file(dir + "/s.ckpt");
    r.set_rhs(relax);
    if (s.advance_states(30) != r.advance_states(30)) { std::printf("solver differs\n"); return 1; }
    fc_controller_params p = fc::controller_defaults();
    p.kp = 1.0; p.ki = 0.5; p.kd = 0.1; p.integral_order = 0.7; p.derivative_order = 0.4;
    p.step = 0.01; p.out_min = -2.0; p.out_max = 2.0;
    fc::controller c(p);
    for (int i = 0; i < 40; i++) c.update(1.0, 0.02 * i);
    c.save_file(dir + "/c.ckpt");
    fc::controller d = fc::controller::load_file(dir + "/c.ckpt");
    for (int i = 40; i < 80; i++)
        if (c.update(1.0, 0.02 * i) != d.update(1.0, 0.02 * i)) {
            std::printf("controller differs\n");
            return 1;
        }
    try {
        c.save_file(dir + "/no-such-dir/c.ckpt");
    } catch (const fc::error &e) {
        std::printf("refused (status %d)\n", e.status());
    }
    try {
        fc::solver::load_file(dir + "/s.ckpt", 8);
    } catch (const fc::error &e) {
        std::printf("refused (status %d)\n", e.status());
    }
    return 0;
}
"""


def test_solver_controller_checkpoint_files(tmp_path):
    # pyfracconv::solver / controller ::save_file and ::load_file over the C
    # pairs: resumed runs continue bit for bit (== on doubles); FC_ERR_IO
    # (17) for a missing directory, FC_ERR_SIZE (5) past max_size
    if CXX is None:
        pytest.fail("g++ is needed for the C++ wrapper tests")
    build = tmp_path / "build"
    subprocess.run(["make", "-C", ROOT, f"BUILD={build}", "lib"], check=True, capture_output=True, text=True)
    src = tmp_path / "ckpt_sc.cpp"
    src.write_text(CHECKPOINT_SC_CPP)
    exe = tmp_path / "ckpt_sc"
    r = subprocess.run(
        [
            CXX,
            "-std=c++17",
            "-Wall",
            "-Wextra",
            "-Werror",
            "-I",
            os.path.join(ROOT, "csrc"),
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
    assert out.returncode == 0, out.stdout
    assert out.stdout.splitlines() == ["refused (status 17)", "refused (status 5)"]
