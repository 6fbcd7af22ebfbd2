"""The solver object from C: examples/solver_example.c built with make
against the static library and run (its checks: exp(t) erfc(sqrt t) for
D^(1/2) y = -y, the Mittag-Leffler function of order 1/2 (Gorenflo,
Kilbas, Mainardi and Rogosin 2014); callback stop; save/load bit for bit;
forged data refused; bad arguments refused with nothing written)."""

import os
import subprocess

import pytest

ROOT = os.path.dirname(os.path.dirname(os.path.abspath(__file__)))


def test_solver_example_program_passes(tmp_path):
    if not os.path.exists(os.path.join(ROOT, "Makefile")):
        pytest.fail("the C solver test needs the source checkout (Makefile)")
    subprocess.run(
        ["make", "-C", ROOT, f"BUILD={tmp_path}", "solver-example"],
        check=True,
        capture_output=True,
        text=True,
    )
    out = subprocess.run([str(tmp_path / "solver_example")], capture_output=True, text=True)
    assert out.returncode == 0, out.stdout + out.stderr
    assert "all solver checks passed" in out.stdout
    assert "FAIL" not in out.stdout
