"""make install into a temporary prefix, and the README's commands for
compiled callers run verbatim from a temporary folder (tests/readme_c.py):
the C program against the installed prefix with pkg-config, the C++
program with pkg-config and with CMake's find_package, the Fortran program
against the prefix, and the C program against the package's own copy of
the library with `pyfracconv flags`.

The C program checks the trapezoid rule on f(t) = t against the closed
form I^0.5 t = t^1.5 / Gamma(2.5) (Podlubny 1999, docs/references.md; the
rule is exact on linear f, common practice); the C++ and Fortran programs
(README) check the rectangle rule on constants against h^a n^a /
Gamma(a+1), the solver against the closed forms exp(-t) (C++) and
3/2 exp(-t) + (sin t - cos t)/2 (Fortran: D y = -y + sin t), and a
refused order. Here the printed values are
compared with the closed form again, independently of the programs' own
exit status."""

import math
import os
import re
import shutil
import subprocess

import pytest

import pyfracconv
import readme_c

ROOT = readme_c.ROOT
EXACT = 1.0 / math.gamma(2.5)  # I^0.5 t at t = 1 (Podlubny 1999)


@pytest.fixture(scope="module")
def prefix(tmp_path_factory):
    """A user's HOME holding the README's install ($HOME/.local)."""
    if not os.path.exists(os.path.join(ROOT, "Makefile")):
        pytest.fail("the install tests need the source checkout (Makefile)")
    home = tmp_path_factory.mktemp("home")
    build = tmp_path_factory.mktemp("cbuild")
    # MAKEFLAGS: make's own build folder elsewhere than the checkout's
    # cbuild/, without changing the README's command
    env = dict(os.environ, HOME=str(home), MAKEFLAGS=f"BUILD={build}")
    r = readme_c.run(readme_c.sh_blocks()["install"], ROOT, env)
    assert r.returncode == 0, r.stdout + r.stderr
    return home, env


@pytest.fixture
def work(tmp_path):
    (tmp_path / "prog.c").write_text(readme_c.c_program())
    (tmp_path / "quick.cpp").write_text(readme_c.doc_program("cpp"))
    (tmp_path / "quick.f90").write_text(readme_c.doc_program("fortran"))
    (tmp_path / "ctl_check.c").write_text(readme_c.export_program())
    return tmp_path


def _user_env(home):
    # a fresh shell: nothing of make's or of the test's own set-up
    env = {
        k: v
        for k, v in os.environ.items()
        if k
        not in (
            "MAKEFLAGS",
            "PKG_CONFIG_PATH",
            "LD_LIBRARY_PATH",
            "CPATH",
            "LIBRARY_PATH",
            "CMAKE_PREFIX_PATH",
        )
    }
    env["HOME"] = str(home)
    return env


def _printed_value(out):
    m = re.search(r"I\^0\.5 t at t=1 = (\S+) \(exact", out)
    assert m, out
    return float(m.group(1))


def test_install_layout(prefix):
    home, _ = prefix
    p = home / ".local"
    lib = p / "lib"
    for f in (
        "include/fracconv.h",
        "include/fracconv.hpp",
        "include/fracconv.f90",
        "lib/libfracconv.a",
        "lib/pkgconfig/fracconv.pc",
        "lib/cmake/fracconv/fracconvConfig.cmake",
        "lib/cmake/fracconv/fracconvConfigVersion.cmake",
    ):
        assert (p / f).is_file(), f
    # libfracconv.so -> libfracconv.so.0 -> libfracconv.so.0.1.0
    assert os.readlink(lib / "libfracconv.so") == "libfracconv.so.0"
    assert os.readlink(lib / "libfracconv.so.0") == f"libfracconv.so.{pyfracconv.c_version}"
    pc = (lib / "pkgconfig" / "fracconv.pc").read_text()
    assert f"prefix={p}\n" in pc and f"Version: {pyfracconv.__version__}" in pc


def test_readme_c_program_with_pkg_config(prefix, work):
    if shutil.which("pkg-config") is None:
        pytest.fail("pkg-config is needed (apt-get install -y pkg-config)")
    home, _ = prefix
    r = readme_c.run(readme_c.sh_blocks()["c"], work, _user_env(home))
    assert r.returncode == 0, r.stdout + r.stderr
    assert f"libfracconv {pyfracconv.c_version}" in r.stdout
    assert abs(_printed_value(r.stdout) - EXACT) < 1e-12 * EXACT
    # linked against the installed shared object, found by the run-time path
    ldd = subprocess.run(["ldd", str(work / "prog")], capture_output=True, text=True).stdout
    assert str(home / ".local" / "lib" / "libfracconv.so.0") in ldd, ldd


def test_readme_cpp_and_fortran_against_the_prefix(prefix, work):
    missing = [t for t in ("pkg-config", "c++", "cmake", "gfortran") if shutil.which(t) is None]
    if missing:
        pytest.skip(
            f"not installed: {', '.join(missing)} (the README's C++/Fortran "
            "commands need them; .ci/run installs them)"
        )
    home, _ = prefix
    r = readme_c.run(readme_c.sh_blocks()["others"], work, _user_env(home))
    assert r.returncode == 0, r.stdout + r.stderr
    # quick.cpp ran twice (pkg-config, then CMake) and quick.f90 once
    exact = 1.0 / math.gamma(1.5)  # I^0.5 1 at t = 1 (Podlubny 1999)
    cpp = [float(v) for v in re.findall(r"I\^0\.5 1 at t=1:\s+(\S+)", r.stdout)]
    assert len(cpp) == 2 + 1, r.stdout
    assert all(abs(v - exact) < 1e-13 for v in cpp)
    assert r.stdout.count("refused (status 3)") == 2
    assert "refused: status 3: order must be" in r.stdout
    # the solver through each wrapper against the closed forms (the
    # predictor-corrector's error at h = 0.01: 6e-6 and 8e-6, measured)
    dec = [float(v) for v in re.findall(r"D y = -y at t=1: (\S+)", r.stdout)]
    assert len(dec) == 2 and all(abs(v - math.exp(-1.0)) < 2e-5 for v in dec)
    forced = re.search(r"D y = -y \+ sin t at t=1:\s+(\S+)", r.stdout)
    exact_f = 1.5 * math.exp(-1.0) + (math.sin(1.0) - math.cos(1.0)) / 2
    assert forced and abs(float(forced.group(1)) - exact_f) < 2e-5
    # the controller's first output: Kp e = 2 limited to the upper limit 1
    assert r.stdout.count("controller output 1.000 (limited: yes)") == 2
    assert "controller output  1.000" in r.stdout
    assert (work / "cmake-build" / "quick").is_file()


def test_cmake_refuses_another_major_version(prefix, tmp_path):
    if shutil.which("cmake") is None:
        pytest.skip("cmake is not installed")
    home, _ = prefix
    (tmp_path / "CMakeLists.txt").write_text(
        "cmake_minimum_required(VERSION 3.14)\nproject(v C)\nfind_package(fracconv 1.0 REQUIRED)\n"
    )
    r = subprocess.run(
        ["cmake", "-S", ".", "-B", "b", f"-DCMAKE_PREFIX_PATH={home}/.local"],
        cwd=tmp_path,
        capture_output=True,
        text=True,
    )
    assert r.returncode != 0
    assert pyfracconv.__version__ in r.stderr, r.stderr


def test_readme_c_program_with_the_wheel_copy(work):
    r = readme_c.run(
        readme_c.sh_blocks()["wheel"], work, _user_env(work) | {"PATH": readme_c.wheel_env()["PATH"]}
    )
    assert r.returncode == 0, r.stdout + r.stderr
    assert abs(_printed_value(r.stdout) - EXACT) < 1e-12 * EXACT
    ldd = subprocess.run(["ldd", str(work / "prog")], capture_output=True, text=True).stdout
    assert os.path.join(pyfracconv.get_lib_dir(), "libfracconv.so.0") in ldd, ldd


def test_flags_command_static(work):
    flags = subprocess.run(
        [os.path.join(os.path.dirname(readme_c.sys.executable), "pyfracconv"), "flags", "--static"],
        capture_output=True,
        text=True,
        check=True,
    )
    words = flags.stdout.split()
    assert words[0] == "-I" + pyfracconv.get_include()
    assert words[1] == os.path.join(pyfracconv.get_lib_dir(), "libfracconv.a")
    assert not any("rpath" in w for w in words)
    cc = shutil.which("cc") or shutil.which("gcc")
    r = subprocess.run(
        [cc, "-std=c11", "prog.c", *words, "-o", "prog_static"], cwd=work, capture_output=True, text=True
    )
    assert r.returncode == 0, r.stderr
    out = subprocess.run([str(work / "prog_static")], capture_output=True, text=True, env=_user_env(work))
    assert out.returncode == 0 and abs(_printed_value(out.stdout) - EXACT) < 1e-12 * EXACT
    ldd = subprocess.run(["ldd", str(work / "prog_static")], capture_output=True, text=True)
    assert "libfracconv" not in ldd.stdout


def test_uninstall_removes_what_install_wrote(prefix):
    home, env = prefix
    r = subprocess.run(
        ["make", "-C", ROOT, "uninstall", f"PREFIX={home}/.local"], env=env, capture_output=True, text=True
    )
    assert r.returncode == 0, r.stderr
    left = [os.path.join(d, f) for d, _, fs in os.walk(home / ".local") for f in fs]
    assert left == []
    # and the next install works again (the other tests may run after this one)
    r = readme_c.run(readme_c.sh_blocks()["install"], ROOT, env)
    assert r.returncode == 0, r.stderr


def test_flags_command_parts(capsys):
    from pyfracconv.cli import main

    assert main(["flags", "--cflags"]) == 0
    assert capsys.readouterr().out.split() == ["-I" + pyfracconv.get_include()]
    assert main(["flags", "--libs"]) == 0
    d = pyfracconv.get_lib_dir()
    assert capsys.readouterr().out.split() == [os.path.join(d, "libfracconv.so.0"), "-Wl,-rpath," + d, "-lm"]
    # the shared object is the library's: its SONAME and its version
    import ctypes

    so = ctypes.CDLL(os.path.join(d, "libfracconv.so.0"))
    so.fc_version_string.restype = ctypes.c_char_p
    assert so.fc_version_string().decode() == pyfracconv.c_version


def test_missing_library_copy_is_explained(monkeypatch, capsys):
    # a package built without the library (not Linux) or a removed copy
    from pyfracconv import _core
    from pyfracconv.cli import main

    monkeypatch.setattr(_core.os.path, "isfile", lambda path: False)
    with pytest.raises(FileNotFoundError, match="libfracconv.so.0, libfracconv.a.*reinstall"):
        pyfracconv.get_lib_dir()
    assert main(["flags"]) == 2
    assert "no C library" in capsys.readouterr().err


def test_readme_static_link_on_the_prefix(prefix, work):
    # the README's inline command for the static library, run verbatim
    home, _ = prefix
    cmd = re.search(r"The static library instead: `([^`]+)`", readme_c.c_section()).group(1)
    r = readme_c.run(
        cmd + " && ./prog", work, {**_user_env(home), "PKG_CONFIG_PATH": f"{home}/.local/lib/pkgconfig"}
    )
    assert r.returncode == 0, r.stdout + r.stderr
    assert abs(_printed_value(r.stdout) - EXACT) < 1e-12 * EXACT
    ldd = subprocess.run(["ldd", str(work / "prog")], capture_output=True, text=True).stdout
    assert "libfracconv" not in ldd


def test_readme_exported_single_controller_compiles_pedantic_and_matches(work):
    # the README's export commands, verbatim: pyfracconv export-controller
    # writes pid.h, pid.c, pid_testvec.h; the README's ctl_check.c is built
    # with -std=c99 -Wall -Wextra -Werror -pedantic and checks every output
    # of the test vector (the library's controller on a closed loop)
    # against the stated single-precision bound
    r = readme_c.run(
        readme_c.sh_blocks()["export"], work, _user_env(work) | {"PATH": readme_c.wheel_env()["PATH"]}
    )
    assert r.returncode == 0, r.stdout + r.stderr
    m = re.search(r"(\d+) of (\d+) outputs outside the stated bound (\S+); worst (\S+) of", r.stdout)
    assert m and m.group(1) == "0" and int(m.group(2)) > 100, r.stdout
    stated, worst = float(m.group(3)), float(m.group(4))
    assert worst <= stated
    assert "#define PID_TV_REL" in (work / "pid_testvec.h").read_text()
    assert "independent safe stop" in (work / "pid.h").read_text()
