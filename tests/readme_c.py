"""The README's commands for compiled callers (section "## C"), read from
README.md and run verbatim with bash; the programs they build come from
the README (prog.c) and docs/compiled.md (quick.cpp, quick.f90).

Used by tests/test_install.py, and by .ci/run as a script in the clean
`pip install .` environment (no pytest there):

    python tests/readme_c.py wheel     # the wheel's-copy route, in a temporary folder
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


def c_section():
    return _read("README.md").split("\n## C\n", 1)[1].split("\n## ", 1)[0]


def sh_blocks():
    """The section's sh blocks by role: install, c, others, wheel."""
    blocks = re.findall(r"```sh\n(.*?)\n```", c_section(), re.S)
    if len(blocks) != 4:
        raise AssertionError(f"README ## C: expected 4 sh blocks, found {len(blocks)}")
    roles = dict(zip(("install", "c", "others", "wheel"), blocks))
    if not roles["install"].startswith("make install"):
        raise AssertionError("README ## C: the first sh block is not make install")
    return roles


def c_program():
    blocks = re.findall(r"```c\n(.*?)```", c_section(), re.S)
    if len(blocks) != 1:
        raise AssertionError("README ## C: expected one c block")
    return blocks[0]


def doc_program(lang):
    blocks = re.findall(r"```" + lang + r"\n(.*?)```", _read("docs", "compiled.md"), re.S)
    if len(blocks) != 1:
        raise AssertionError(f"docs/compiled.md: expected one {lang} block")
    return blocks[0]


def run(block, cwd, env):
    """Run one README block with bash -e (every line must succeed)."""
    return subprocess.run(["bash", "-e", "-c", block], cwd=cwd, env=env,
                          capture_output=True, text=True)


def wheel_env():
    """The environment of a user whose Python environment is active: its
    bin folder (where pip put the pyfracconv program) first on PATH."""
    bindir = os.path.dirname(sys.executable)
    return dict(os.environ, PATH=bindir + os.pathsep + os.environ.get("PATH", ""))


def main(argv):
    if argv != ["wheel"]:
        print(__doc__)
        return 2
    with tempfile.TemporaryDirectory() as work:
        with open(os.path.join(work, "prog.c"), "w") as fh:
            fh.write(c_program())
        r = run(sh_blocks()["wheel"], work, wheel_env())
        sys.stdout.write(r.stdout)
        sys.stderr.write(r.stderr)
        if r.returncode == 0 and "exact" not in r.stdout:
            return 1
        return r.returncode


if __name__ == "__main__":
    sys.exit(main(sys.argv[1:]))
