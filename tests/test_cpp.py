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

import numpy as np
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


# ------------------------------------------------ grid and timed stream

GRID_TIMED_CPP = r"""
#include <cmath>
#include <cstdio>
#include <string>
#include <vector>
#include "fracconv.hpp"
namespace fc = pyfracconv;

static int fails = 0;
static void expect(bool ok, const char *what)
{
    if (!ok) { std::printf("FAIL %s\n", what); fails++; }
}
/* the status of a call that must throw pyfracconv::error (-1: it did not) */
template <class F>
static int status_of(F f)
{
    try {
        f();
    } catch (const fc::error &e) {
        return e.status();
    }
    return -1;
}

int main(int argc, char **argv)
{
    std::string dir = argc > 1 ? argv[1] : ".";
    const std::size_t n = 401;
    /* a jittered grid on [0, 1]: steps in [0.4, 1.6] / 400 */
    std::vector<double> t(n), x1(n), x2(n);
    for (std::size_t k = 0; k < n; k++) {
        double kk = double(k);
        t[k] = (k == 0 || k == n - 1) ? kk / 400.0 : (kk + 0.3 * std::sin(kk * kk)) / 400.0;
        x1[k] = std::sqrt(t[k]);
        x2[k] = t[k] * std::sqrt(t[k]);
    }
    for (std::size_t k = 0; k < n; k++) std::printf("t %zu %a %a %a\n", k, t[k], x1[k], x2[k]);

    /* ---- grid_apply: the three rules, and two signals at once */
    const double tol = 1e-12;
    std::vector<double> yr(n), yt(n), yl(n);
    std::size_t kr = fc::grid_apply(FC_RULE_RECTANGLE, 0.5, t, x1, 1, fc::view(yr), tol);
    std::size_t kt = fc::grid_apply(FC_RULE_TRAPEZOID, 0.5, t, x1, 1, fc::view(yt), tol);
    std::size_t kl = fc::grid_apply(FC_RULE_L1, 0.4, t, x2, 1, fc::view(yl), tol);
    for (std::size_t k = 0; k < n; k++) std::printf("grid %zu %a %a %a\n", k, yr[k], yt[k], yl[k]);
    std::printf("terms %zu %zu %zu\n", kr, kt, kl);
    expect(kr > 0 && kt > 0 && kl > 0, "grid_apply reports its terms");
    std::vector<double> both(x1);
    both.insert(both.end(), x1.begin(), x1.end());
    std::vector<double> y2 = fc::grid_apply(FC_RULE_TRAPEZOID, 0.5, t, both, tol, 2);
    expect(std::vector<double>(y2.begin(), y2.begin() + n) == yt &&
               std::vector<double>(y2.begin() + n, y2.end()) == yt,
           "two signals give the one-signal result twice");

    /* refusals of grid_apply write nothing */
    std::vector<double> bad(t), keep(n, 7.0);
    bad[200] = bad[199];
    std::vector<double> ybad(keep);
    int st = status_of([&] { fc::grid_apply(FC_RULE_RECTANGLE, 0.5, bad, x1, 1, fc::view(ybad), tol); });
    std::printf("refused grid t status %d\n", st);
    expect(ybad == keep, "a refused grid_apply writes nothing");
    st = status_of([&] { fc::grid_apply(FC_RULE_RECTANGLE, 0.5, t, x1, 1, fc::view(ybad), 1.0); });
    std::printf("refused grid tol status %d\n", st);
    st = status_of([&] { fc::grid_apply(FC_RULE_L1, 1.5, t, x1, 1, fc::view(ybad), tol); });
    std::printf("refused grid order status %d\n", st);
    fc::cview short_x(x1.data(), n - 1);
    st = status_of([&] { fc::grid_apply(FC_RULE_RECTANGLE, 0.5, t, short_x, 1, fc::view(ybad), tol); });
    std::printf("refused grid size status %d\n", st);
    expect(ybad == keep, "refused grid_apply calls write nothing");

    /* ---- timed stream, one sample at a time */
    fc::timed_stream s(FC_RULE_TRAPEZOID, 0.7, 5e-4, tol, 2.0);
    expect(s.rule() == FC_RULE_TRAPEZOID && s.order() == 0.7 && s.min_step() == 5e-4 &&
               s.horizon() == 2.0 && s.tol() == tol && s.channels() == 1 && s.terms() > 0,
           "timed stream parameters");
    std::vector<unsigned char> blob;
    std::vector<double> ys(n);
    for (std::size_t k = 0; k < n; k++) {
        if (k == 250) {
            blob = s.save();
            /* refused pushes: a time not after the previous one, a step
               below min_step, a time not finite; nothing changes */
            std::printf("refused push back status %d\n", status_of([&] { s.push(t[k - 1], 1.0); }));
            std::printf("refused push small status %d\n", status_of([&] { s.push(t[k - 1] + 1e-4, 1.0); }));
            std::printf("refused push nan status %d\n", status_of([&] { s.push(std::nan(""), 1.0); }));
            expect(s.count() == 250, "refused pushes leave the count");
            expect(s.save() == blob, "refused pushes leave the state bit for bit");
            std::printf("refused preview back status %d\n", status_of([&] { s.preview(t[k - 1], 1.0); }));
        }
        double pv = s.preview(t[k], x1[k]);
        double v2[1], x2v[1] = {x1[k]};
        s.preview(t[k], fc::cview(x2v, 1), fc::view(v2, 1));
        ys[k] = s.push(t[k], x1[k]);
        if (pv != ys[k] || v2[0] != ys[k]) expect(false, "preview is the push bit for bit");
    }
    for (std::size_t k = 0; k < n; k++) std::printf("timed %zu %a\n", k, ys[k]);
    /* resumed from the bytes saved at 250 (and from a file): the same bits */
    fc::timed_stream r = fc::timed_stream::load(blob);
    s.save_file(dir + "/timed.ckpt");
    fc::timed_stream f = fc::timed_stream::load_file(dir + "/timed.ckpt");
    bool same = r.count() == 250 && f.count() == n;
    for (std::size_t k = 250; k < n; k++) same = same && r.push(t[k], x1[k]) == ys[k];
    expect(same, "loaded timed stream continues bit for bit");
    fc::timed_stream g = fc::timed_stream::load(s.save());
    expect(f.push(1.01, 1.0) == g.push(1.01, 1.0), "file and bytes give the same stream");

    /* ---- two channels, one block */
    fc::timed_stream b(FC_RULE_RECTANGLE, 0.5, 5e-4, tol, 2.0, 2);
    std::vector<double> xb(2 * n);
    for (std::size_t k = 0; k < n; k++) { xb[2 * k] = x1[k]; xb[2 * k + 1] = x2[k]; }
    std::vector<double> yb = b.push_block(t, xb);
    for (std::size_t k = 0; k < n; k++) std::printf("block %zu %a %a\n", k, yb[2 * k], yb[2 * k + 1]);
    std::printf("refused block size status %d\n",
                status_of([&] { b.push_block(fc::cview(t.data(), 3), fc::cview(xb.data(), 5)); }));
    std::printf("refused scalar push status %d\n", status_of([&] { b.push(2.0, 1.0); }));
    expect(b.count() == n, "refused block pushes leave the count");

    /* ---- creation and loading refused */
    std::printf("refused create step status %d\n",
                status_of([&] { fc::timed_stream(FC_RULE_RECTANGLE, 0.5, 0.0, tol, 2.0); }));
    std::printf("refused create tol status %d\n",
                status_of([&] { fc::timed_stream(FC_RULE_RECTANGLE, 0.5, 5e-4, 1.0, 2.0); }));
    std::printf("refused create rule status %d\n",
                status_of([&] { fc::timed_stream(FC_RULE_GRUNWALD, 0.5, 5e-4, tol, 2.0); }));
    fc::stream untimed(FC_RULE_RECTANGLE, 0.5, 0.01);
    untimed.push(1.0);
    std::vector<unsigned char> ublob = untimed.save();
    std::printf("refused load untimed status %d\n", status_of([&] { fc::timed_stream::load(ublob); }));
    fc::timed_stream moved(std::move(g));
    std::printf("refused moved status %d\n", status_of([&] { g.push(3.0, 1.0); }));
    expect(moved.count() == n + 1, "the moved-to stream keeps the state");

    if (fails == 0) std::printf("all grid and timed checks passed\n");
    return fails ? 1 : 0;
}
"""


@pytest.fixture(scope="module")
def grid_timed(tmp_path_factory):
    """GRID_TIMED_CPP (pyfracconv::grid_apply and pyfracconv::timed_stream
    of csrc/fracconv.hpp) built with -Werror against the static library and
    run; its output parsed."""
    if CXX is None:
        pytest.fail("g++ is needed for the C++ wrapper tests")
    tmp = tmp_path_factory.mktemp("cppgrid")
    build = tmp / "build"
    subprocess.run(["make", "-C", ROOT, f"BUILD={build}", "lib"], check=True, capture_output=True, text=True)
    src = tmp / "grid_timed.cpp"
    src.write_text(GRID_TIMED_CPP)
    exe = tmp / "grid_timed"
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
    out = subprocess.run([str(exe), str(tmp)], capture_output=True, text=True)

    def table(tag, width):
        rows = re.findall(rf"^{tag} (\d+)((?: \S+){{{width}}})$", out.stdout, re.M)
        return [[float.fromhex(v) for v in vals.split()] for _, vals in rows]

    return {
        "out": out,
        "t": np.array(table("t", 3)),
        "grid": np.array(table("grid", 3)),
        "timed": np.array(table("timed", 1))[:, 0],
        "block": np.array(table("block", 2)),
        "terms": [int(v) for v in re.search(r"^terms (\d+) (\d+) (\d+)$", out.stdout, re.M).groups()],
        "refused": dict(re.findall(r"^refused (.+) status (-?\d+)$", out.stdout, re.M)),
    }


def test_cpp_grid_timed_program_passes(grid_timed):
    # its own checks: two signals at once, refusals that write nothing and
    # change nothing (the saved bytes compared), save/load and save_file /
    # load_file continuing bit for bit, a moved-from stream refused
    out = grid_timed["out"]
    assert out.returncode == 0, out.stdout + out.stderr
    assert "all grid and timed checks passed" in out.stdout
    assert "FAIL" not in out.stdout


def test_cpp_grid_apply_equals_python_fast_engine(grid_timed):
    # the same C function behind integral/derivative(..., t=, engine='fast'):
    # equal to the last bit on the same times, samples and tol
    import pyfracconv as pf

    t, x1, x2 = grid_timed["t"].T
    g = grid_timed["grid"]
    assert t.size == 401 and np.all(np.diff(t) > 0)
    kw = dict(t=t, engine="fast", tol=1e-12)
    assert np.array_equal(g[:, 0], pf.integral(x1, 0.5, rule="rectangle", **kw))
    assert np.array_equal(g[:, 1], pf.integral(x1, 0.5, rule="trapezoid", **kw))
    assert np.array_equal(g[:, 2], pf.derivative(x2, 0.4, rule="l1", **kw))


def _abs_terms(rule, a, t, x):
    from pyfracconv.grid import grid_weights

    S = np.zeros(t.size)
    for n in range(1, t.size):
        w = grid_weights(rule, a, t, n)
        S[n] = w @ np.abs(np.diff(x[: n + 1])) if rule == "l1" else np.abs(w) @ np.abs(x[: n + 1])
    return S


def test_cpp_grid_apply_within_its_promise_and_the_closed_form(grid_timed):
    # against the direct engine (pyfracconv.grid.apply_on_grid, weights
    # checked against mpmath in tests/test_grid.py): the promise of
    # fracconv.h, |y - y_direct| <= (tol + (K + 64) 2^-52) S_n plus 2e-14 S_n
    # for the direct engine's own weights; and against the closed forms
    # I^a t^b = Gamma(b+1)/Gamma(b+1+a) t^(b+a) (Podlubny 1999, chapter 2)
    # and D^a t^b = Gamma(b+1)/Gamma(b+1-a) t^(b-a) (Diethelm 2010), the
    # errors of the rules at 400 steps of about 1/400 measured when the test
    # was written (rectangle 2.8e-3, trapezoid 4.2e-4, t^0.5 being rough at
    # 0, L1 2.7e-4), with a margin of 3: a rule of lower order would fail
    from scipy.special import gamma

    from pyfracconv import grid

    t, x1, x2 = grid_timed["t"].T
    g = grid_timed["grid"]
    cases = [
        ("rectangle", 0.5, x1, 0, 0.5, 8.4e-3),
        ("trapezoid", 0.5, x1, 1, 0.5, 1.3e-3),
        ("l1", 0.4, x2, 2, 1.5, 8.1e-4),
    ]
    for (rule, a, x, col, b, bound), K in zip(cases, grid_timed["terms"]):
        direct = grid.apply_on_grid(rule, a, x[None], t)[0]
        S = _abs_terms(rule, a, t, x)
        assert np.all(np.abs(g[:, col] - direct) <= (1e-12 + (K + 64) * 2.0**-52 + 2e-14) * S + 1e-300), rule
        if rule == "l1":
            exact = gamma(b + 1) / gamma(b + 1 - a) * t ** (b - a)
        else:
            exact = gamma(b + 1) / gamma(b + 1 + a) * t ** (b + a)
        err = np.max(np.abs(g[:, col] - exact))
        assert err < bound, (rule, err)


def test_cpp_timed_stream_equals_python_timed_stream(grid_timed):
    # pyfracconv.TimedStream over the same C stream: pushed one at a time
    # (the C++ run refused three pushes at sample 250, which changed
    # nothing), and two channels in one block: equal to the last bit; and
    # the stream within its promise of the direct engine on the same times
    import pyfracconv as pf
    from pyfracconv import grid

    t, x1, x2 = grid_timed["t"].T
    s = pf.TimedStream(0.7, 5e-4, 2.0, rule="trapezoid", tol=1e-12)
    want = np.array([s.push(tk, xk) for tk, xk in zip(t, x1)])
    assert np.array_equal(grid_timed["timed"], want)
    direct = grid.apply_on_grid("trapezoid", 0.7, x1[None], t)[0]
    S = _abs_terms("trapezoid", 0.7, t, x1)
    bound = (1e-12 + (s.terms + 64) * 2.0**-52 + 2e-14) * S + 1e-300
    assert np.all(np.abs(grid_timed["timed"] - direct) <= bound)
    b = pf.TimedStream(0.5, 5e-4, 2.0, rule="rectangle", tol=1e-12, channels=2)
    assert np.array_equal(grid_timed["block"], b.push_many(t, np.stack([x1, x2], axis=1)))


def test_cpp_grid_timed_refusals_carry_the_c_statuses(grid_timed):
    from pyfracconv._fracconv import lib

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
        "load untimed": lib.FC_ERR_ARG,
        "moved": lib.FC_ERR_NULL,
    }
    assert {k: int(v) for k, v in grid_timed["refused"].items()} == {k: int(v) for k, v in want.items()}
