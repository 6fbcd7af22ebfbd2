"""The README's commands for compiled callers (section "## Compiled
callers"), read from README.md and run verbatim with bash; the programs
they build come from the same section (prog.c, quick.cpp, quick.f90,
ctl_check.c).

Used by tests/test_install.py, and by .ci/run as a script in the clean
`pip install .` environment (no pytest there):

    python tests/readme_c.py wheel     # the wheel's-copy route, in a temporary folder
    python tests/readme_c.py export    # the exported controller, in a temporary folder
"""

import os
import re
import subprocess
import sys
import tempfile

ROOT = os.path.dirname(os.path.dirname(os.path.abspath(__file__)))


def _read(*parts):
    with open(os.path.join(ROOT, *parts), encoding="utf-8") as fh:
        return fh.read()


HEADING = "\n## Compiled callers: C, C++, Fortran, exported C99\n"
ROLES = ("install", "c", "others", "wheel", "export")


def c_section():
    return _read("README.md").split(HEADING, 1)[1].split("\n## ", 1)[0]


def sh_blocks():
    """The section's sh blocks by role: install, c, others, wheel, export."""
    blocks = re.findall(r"```sh\n(.*?)\n```", c_section(), re.S)
    if len(blocks) != len(ROLES):
        raise AssertionError(f"README compiled callers: expected {len(ROLES)} sh blocks, found {len(blocks)}")
    roles = dict(zip(ROLES, blocks))
    if not roles["install"].startswith("make install"):
        raise AssertionError("README compiled callers: the first sh block is not make install")
    if "export-controller" not in roles["export"]:
        raise AssertionError("README compiled callers: the last sh block is not the export")
    return roles


def _c_blocks():
    blocks = re.findall(r"```c\n(.*?)```", c_section(), re.S)
    if len(blocks) != 2:
        raise AssertionError("README compiled callers: expected two c blocks (prog.c, ctl_check.c)")
    return blocks


def c_program():
    """prog.c"""
    return _c_blocks()[0]


def export_program():
    """ctl_check.c"""
    return _c_blocks()[1]


def doc_program(lang):
    """quick.cpp (lang 'cpp') or quick.f90 ('fortran')."""
    blocks = re.findall(r"```" + lang + r"\n(.*?)```", c_section(), re.S)
    if len(blocks) != 1:
        raise AssertionError(f"README compiled callers: expected one {lang} block")
    return blocks[0]


def run(block, cwd, env):
    """Run one README block with bash -e (every line must succeed)."""
    return subprocess.run(["bash", "-e", "-c", block], cwd=cwd, env=env, capture_output=True, text=True)


def wheel_env():
    """The environment of a user whose Python environment is active: its
    bin folder (where pip put the pyfracconv program) first on PATH."""
    bindir = os.path.dirname(sys.executable)
    return dict(os.environ, PATH=bindir + os.pathsep + os.environ.get("PATH", ""))


def main(argv):
    if argv not in (["wheel"], ["export"]):
        print(__doc__)
        return 2
    with tempfile.TemporaryDirectory() as work:
        if argv == ["wheel"]:
            name, text, expect = "prog.c", c_program(), "exact"
        else:
            name, text, expect = "ctl_check.c", export_program(), "0 of "
        with open(os.path.join(work, name), "w") as fh:
            fh.write(text)
        r = run(sh_blocks()[argv[0]], work, wheel_env())
        sys.stdout.write(r.stdout)
        sys.stderr.write(r.stderr)
        if r.returncode == 0 and expect not in r.stdout:
            return 1
        return r.returncode


if __name__ == "__main__":
    sys.exit(main(sys.argv[1:]))
