"""Importing pyfracconv from a source checkout that was installed with
`pip install .` (not in place): the checkout's folder shadows the installed
package and has no compiled core. The import must fail with a message that
says what to do, not with a bare ModuleNotFoundError."""

from __future__ import annotations

import os
import shutil
import subprocess
import sys

ROOT = os.path.dirname(os.path.dirname(os.path.abspath(__file__)))


def test_checkout_without_core_explains(tmp_path):
    # -S: no site-packages, so nothing but the checkout's folder can supply
    # pyfracconv (as when it shadows an installed copy from the current
    # directory; an editable install's finder would otherwise win here)
    copy = tmp_path / "checkout"
    (copy / "pyfracconv").mkdir(parents=True)
    for f in os.listdir(os.path.join(ROOT, "pyfracconv")):
        if f.endswith(".py"):
            shutil.copy(os.path.join(ROOT, "pyfracconv", f), copy / "pyfracconv" / f)
    shutil.copy(os.path.join(ROOT, "setup_build.py"), copy / "setup_build.py")
    r = subprocess.run(
        [sys.executable, "-S", "-c", "import pyfracconv"],
        cwd=copy,
        capture_output=True,
        text=True,
        env={**os.environ, "PYTHONPATH": ""},
    )
    assert r.returncode != 0
    assert "compiled core" in r.stderr and "pip install -e ." in r.stderr, r.stderr
    assert "run from another directory" in r.stderr
