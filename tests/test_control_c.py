"""The controller from C: examples/controller_example.c compiled against the
static library (built with make) and run; its checks are listed in its
header comment (closed-form weights, save/load bit for bit, forged data,
refusals)."""

import os
import shutil
import subprocess

import pytest

ROOT = os.path.dirname(os.path.dirname(os.path.abspath(__file__)))


def test_controller_example_program_passes(tmp_path):
    if not os.path.exists(os.path.join(ROOT, "Makefile")):
        pytest.fail("the C controller test needs the source checkout (Makefile)")
    cc = os.environ.get("CC") or shutil.which("cc") or shutil.which("gcc")
    assert cc, "no C compiler found"
    subprocess.run(
        ["make", "-C", ROOT, f"BUILD={tmp_path}", "lib"], check=True, capture_output=True, text=True
    )
    exe = tmp_path / "controller_example"
    subprocess.run(
        [
            cc,
            "-O2",
            "-std=c11",
            "-Wall",
            "-Wextra",
            "-Werror",
            "-I",
            os.path.join(ROOT, "csrc"),
            os.path.join(ROOT, "examples", "controller_example.c"),
            str(tmp_path / "libfracconv.a"),
            "-lm",
            "-o",
            str(exe),
        ],
        check=True,
        capture_output=True,
        text=True,
    )
    out = subprocess.run([str(exe)], capture_output=True, text=True)
    assert out.returncode == 0, out.stdout + out.stderr
    assert "all controller checks passed" in out.stdout
    assert "FAIL" not in out.stdout
