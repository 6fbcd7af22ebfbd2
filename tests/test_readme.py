"""The README's set-up commands are what CI runs."""

import os
import re

ROOT = os.path.dirname(os.path.dirname(os.path.abspath(__file__)))


def setup_commands():
    text = open(os.path.join(ROOT, "README.md"), encoding="utf-8").read()
    section = text.split("## Set-up", 1)[1].split("\n## ", 1)[0]
    return re.findall(r"```sh\n(.*?)\n```", section, re.S)


def test_two_setup_commands():
    cmds = setup_commands()
    assert len(cmds) == 2
    assert "pyfracconv demo" in cmds[0]
    assert "pytest" in cmds[1] and ".[test]" in cmds[1]


def test_ci_runs_the_readme_commands_verbatim():
    ci = open(os.path.join(ROOT, ".ci", "run"), encoding="utf-8").read()
    for cmd in setup_commands():
        assert cmd in ci, cmd


def test_readme_python_examples_run():
    text = open(os.path.join(ROOT, "README.md"), encoding="utf-8").read()
    blocks = re.findall(r"```python\n(.*?)```", text, re.S)
    assert len(blocks) >= 2
    for i, code in enumerate(blocks):
        exec(compile(code, f"README.md python block {i}", "exec"), {})
