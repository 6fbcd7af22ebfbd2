"""pyfracconv.export_c: the exported C99 operator compiled with
gcc -std=c99 -Wall -Wextra -Werror -pedantic and run.

The reference is the library's own compressed stream (pyfracconv.Stream,
already verified against exact sums in tests/test_promises_compressed.py):
the point is agreement between two implementations of the same
arithmetic. Double precision: bit for bit where the compiler uses hardware
fma (as the library's explicit fma() does), and within 64 * 2^-52 of each
output's error scale sum_k |c_(n-k) u_k| otherwise (the rounding allowance
of the library's compressed promise, fracconv.h). Single precision: within
the bound written into the generated header, on inputs the export did not
measure (other seed, longer)."""

import re
import shutil
import subprocess

import numpy as np
import pytest

import pyfracconv
from pyfracconv.export import _scale, export_c

CC = shutil.which("gcc")
CFLAGS = ["-std=c99", "-Wall", "-Wextra", "-Werror", "-pedantic", "-O2"]
CASES = [("rectangle", 0.5), ("trapezoid", 0.3), ("grunwald", 0.7), ("l1", 0.4), ("rectangle", 1.5)]
STEP, TOL, HORIZON = 0.01, 1e-9, 1e5

RUNNER = r"""
#include <stdio.h>
#include "@.h"
int main(void)
{
    @_state st;
    double x;
    @_init(&st);
    while (scanf("%lf", &x) == 1) {
        @_real y;
        int r = @_step(&st, (@_real)x, &y);
        if (r != 0) { printf("refused %d\n", r); continue; }
        printf("%a\n", (double)y);
    }
    return 0;
}
"""

TESTVEC = r"""
#include <stdio.h>
#include "@.h"
#include "@_testvec.h"
int main(void)
{
    @_state st;
    int i, bad = 0;
    @_init(&st);
    for (i = 0; i < @U_TV_N; i++) {
        @_real y;
        double d;
        if (@_step(&st, (@_real)@_tv_x[i], &y) != 0) return 2;
        d = (double)y - @_tv_y[i];
        if (d < 0) d = -d;
        if (d > @U_TV_REL * @_tv_scale[i]) bad++;
    }
    printf("%d outside\n", bad);
    return bad != 0;
}
"""


def _cpu_has_fma(tmp):
    probe = tmp / "probe.c"
    probe.write_text('int main(void){return __builtin_cpu_supports("fma") ? 0 : 1;}\n')
    subprocess.run([CC, str(probe), "-o", str(tmp / "probe")], check=True)
    return subprocess.run([str(tmp / "probe")]).returncode == 0


def _build(exp, tmp, main, extra=()):
    if CC is None:
        pytest.fail("gcc is needed for the export tests")
    exp.write(str(tmp))
    p = exp.prefix
    (tmp / "main.c").write_text(main.replace("@U", p.upper()).replace("@", p))
    exe = tmp / "run"
    # no -lm: the generated code must not need libm
    r = subprocess.run(
        [CC, *CFLAGS, *extra, "-I", str(tmp), str(tmp / "main.c"), str(tmp / f"{p}.c"), "-o", str(exe)],
        capture_output=True,
        text=True,
    )
    assert r.returncode == 0, r.stderr
    return exe


def _run(exe, x):
    out = subprocess.run(
        [str(exe)], input="\n".join(repr(float(v)) for v in x), capture_output=True, text=True, check=True
    ).stdout.split("\n")
    return out[:-1]


def _library(rule, order, x, tol=TOL, horizon=HORIZON):
    make = pyfracconv.Stream.derivative if rule in ("grunwald", "l1") else pyfracconv.Stream.integral
    s = make(order, STEP, rule=rule, mode="compressed", tol=tol, horizon=horizon)
    return np.array([s.push(v) for v in x])


def _inputs(n, seed):
    rng = np.random.default_rng(seed)
    spikes = np.zeros(n)
    spikes[::97] = 1.0
    return {
        "random": rng.standard_normal(n),
        "step": np.ones(n),
        "spike": spikes,
        "ramp+noise": np.arange(n) * 1e-3 + 0.1 * rng.uniform(-1, 1, n),
    }


@pytest.mark.parametrize("rule,order", CASES)
def test_double_matches_library_stream(rule, order, tmp_path):
    exp = export_c(rule, order, STEP, tol=TOL, horizon=HORIZON, precision="double")
    (tmp_path / "plain").mkdir()
    (tmp_path / "fused").mkdir()
    plain = _build(exp, tmp_path / "plain", RUNNER)
    fused = _build(exp, tmp_path / "fused", RUNNER, ["-mfma"]) if _cpu_has_fma(tmp_path) else None
    eps = 2.0**-52
    for name, x in _inputs(700, 11).items():
        ref = _library(rule, order, x)
        scale = _scale(rule, order, STEP, x)
        got = np.array([float.fromhex(v) for v in _run(plain, x)])
        dev = np.abs(got - ref)
        assert np.all(dev <= 64 * eps * scale), (name, float(np.max(dev / np.maximum(scale, 1e-300))))
        if fused is not None:
            got = np.array([float.fromhex(v) for v in _run(fused, x)])
            assert np.array_equal(got.view(np.int64), ref.view(np.int64)), name


@pytest.mark.parametrize("rule,order", CASES)
@pytest.mark.parametrize("precision", ["double", "single"])
def test_generated_test_vector_passes(rule, order, precision, tmp_path):
    exp = export_c(
        rule,
        order,
        STEP,
        tol=TOL,
        horizon=HORIZON,
        precision=precision,
        prefix="ctl_op",
        test_length=400,
        seed=3,
    )
    exe = _build(exp, tmp_path, TESTVEC)
    r = subprocess.run([str(exe)], capture_output=True, text=True)
    assert r.returncode == 0 and r.stdout.strip() == "0 outside", r.stdout


@pytest.mark.parametrize("rule,order", CASES)
def test_single_within_stated_bound_on_unmeasured_inputs(rule, order, tmp_path):
    exp = export_c(rule, order, STEP, tol=1e-6, horizon=HORIZON, precision="single")
    stated = exp.info["stated"]
    # the figure is in the header, with the method
    m = re.search(r"Largest measured: (\S+)\. Stated bound", exp.header)
    assert m and float(m.group(1)) == pytest.approx(exp.info["measured"], rel=1e-3)
    assert f"{stated:.3e}" in exp.header and "unit step" in exp.header
    # single precision is not double precision: the error is visible
    assert 1e-9 < exp.info["measured"] < 1e-5
    exe = _build(exp, tmp_path, RUNNER)
    for name, x in _inputs(4000, 12345).items():
        x = x.astype(np.float32).astype(np.float64)  # what the float code receives
        ref = _library(rule, order, x, tol=1e-6)
        scale = _scale(rule, order, STEP, x)
        got = np.array([float.fromhex(v) for v in _run(exe, x)])
        err = np.abs(got - ref)
        assert np.all(err <= stated * scale + 1e-30), (name, float(np.max(err / np.maximum(scale, 1e-300))))


def test_exported_object_has_no_undefined_symbols(tmp_path):
    exp = export_c("trapezoid", 0.5, STEP, tol=1e-8, horizon=1e4)
    exp.write(str(tmp_path))
    obj = tmp_path / "fcop.o"
    subprocess.run([CC, *CFLAGS, "-c", str(tmp_path / "fcop.c"), "-o", str(obj)], check=True)
    nm = shutil.which("nm")
    if nm is None:
        pytest.fail("nm (binutils) is needed")
    undefined = subprocess.run(
        [nm, "-u", str(obj)], capture_output=True, text=True, check=True
    ).stdout.split()
    assert undefined == []
    src = exp.source + exp.header
    assert "#include <" not in src
    for word in ("malloc", "printf", "exit(", "abort"):
        assert word not in src, word
    assert "independent safe stop" in exp.header and "licensed" in exp.header


def test_horizon_and_nonfinite_refused(tmp_path):
    exp = export_c("grunwald", 0.5, STEP, tol=1e-6, horizon=100.5)
    exe = _build(exp, tmp_path, RUNNER)
    out = _run(exe, [1.0] * 101 + [1.0])
    assert all(not v.startswith("refused") for v in out[:101])
    assert out[101] == "refused 1"
    out = _run(exe, [1.0, float("nan"), 2.0])
    assert out[1] == "refused 2" and not out[2].startswith("refused")
    # the refused NaN changed nothing: same as pushing 1.0, 2.0
    ref = _library("grunwald", 0.5, [1.0, 2.0], tol=1e-6, horizon=100.5)
    assert float.fromhex(out[2]) == pytest.approx(ref[1], rel=1e-14)


@pytest.mark.parametrize(
    "kwargs",
    [
        dict(rule="trapezoid", order=1.5),
        dict(rule="grunwald", order=1.2),
        dict(rule="l1", order=1.0),
        dict(rule="rectangle", order=2.5),
        dict(rule="rectangle", order=0.5, precision="half"),
        dict(rule="rectangle", order=0.5, prefix="9bad"),
        dict(rule="simpson", order=0.5),
    ],
)
def test_refusals(kwargs):
    kw = dict(step=STEP, tol=1e-6, horizon=1e4)
    kw.update(kwargs)
    with pytest.raises(pyfracconv.ArgumentError):
        export_c(**kw)


def test_docs_export_example_runs(tmp_path, monkeypatch):
    import os

    root = os.path.dirname(os.path.dirname(os.path.abspath(__file__)))
    with open(os.path.join(root, "docs", "compiled.md")) as f:
        text = f.read()
    py = re.findall(r"```python\n(.*?)```", text, re.S)
    c = re.findall(r"```c\n(.*?)```", text, re.S)
    assert len(py) == 1 and len(c) == 1
    monkeypatch.chdir(tmp_path)
    exec(compile(py[0], "docs/compiled.md", "exec"), {})
    (tmp_path / "main.c").write_text(c[0])
    r = subprocess.run(
        [CC, *CFLAGS, "main.c", "dhalf.c", "-o", "main"], capture_output=True, text=True, cwd=tmp_path
    )
    assert r.returncode == 0, r.stderr
    out = subprocess.run(["./main"], capture_output=True, text=True, cwd=tmp_path)
    assert out.returncode == 0 and out.stdout.startswith("0 of 300"), out.stdout


# ----------------------------------------------------- command line


def _cli(argv, capsys):
    from pyfracconv.cli import main

    rc = main(argv)
    out = capsys.readouterr()
    return rc, out.out, out.err


def test_cli_export_single_compiles_pedantic_and_matches(tmp_path, capsys):
    # the command writes what export_c writes; the code compiles warning-free
    # as C99 and stays within the stated bound of the library's double stream
    # on inputs the export did not measure
    if CC is None:
        pytest.fail("gcc is needed for the export tests")
    rc, _, err = _cli(
        [
            "export-c",
            "--rule",
            "grunwald",
            "--order",
            "0.5",
            "--step",
            str(STEP),
            "--tol",
            str(TOL),
            "--horizon",
            str(HORIZON),
            "--precision",
            "single",
            "--prefix",
            "dhalf",
            "-o",
            str(tmp_path),
        ],
        capsys,
    )
    assert rc == 0, err
    api = export_c("grunwald", 0.5, STEP, tol=TOL, horizon=HORIZON, precision="single", prefix="dhalf")
    for name, text in api.files.items():
        assert (tmp_path / name).read_text() == text, name
    stated = api.info["stated"]
    assert f"stated bound {stated:.3g}" in err and "measured" in err
    p = "dhalf"
    for main, name in ((RUNNER, "run.c"), (TESTVEC, "tv.c")):
        (tmp_path / name).write_text(main.replace("@U", p.upper()).replace("@", p))
    exes = {}
    for name in ("run", "tv"):
        exe = tmp_path / name
        r = subprocess.run(
            [
                CC,
                *CFLAGS,
                "-I",
                str(tmp_path),
                str(tmp_path / f"{name}.c"),
                str(tmp_path / "dhalf.c"),
                "-o",
                str(exe),
            ],
            capture_output=True,
            text=True,
        )
        assert r.returncode == 0 and r.stderr == "", r.stderr
        exes[name] = exe
    assert subprocess.run([str(exes["tv"])], capture_output=True).returncode == 0
    x = _inputs(600, 23)["random"].astype(np.float32).astype(np.float64)
    got = np.array([float.fromhex(v) for v in _run(exes["run"], x)])
    ref = _library("grunwald", 0.5, x)
    scale = _scale("grunwald", 0.5, STEP, x)
    assert np.all(np.abs(got - ref) <= stated * scale + 1e-30)


@pytest.mark.parametrize(
    "argv,what",
    [
        (["--rule", "l1", "--order", "1.5"], "--order 1.5"),
        (["--rule", "grunwald", "--order", "0.5", "--tol", "abc"], "tol='abc'"),
        (["--rule", "grunwald", "--order", "0.5", "--prefix", "9x"], "prefix='9x'"),
        (["--rule", "grunwald", "--order", "zero"], "--order zero"),
    ],
)
def test_cli_export_refusals_write_nothing(argv, what, tmp_path, capsys):
    rc, _, err = _cli(["export-c", *argv, "--step", "0.01", "-o", str(tmp_path)], capsys)
    assert rc == 2 and what in err, err
    assert list(tmp_path.iterdir()) == []


def test_cli_export_needs_an_existing_directory(tmp_path, capsys):
    rc, _, err = _cli(
        [
            "export-c",
            "--rule",
            "rectangle",
            "--order",
            "0.5",
            "--step",
            "0.01",
            "-o",
            str(tmp_path / "missing"),
        ],
        capsys,
    )
    assert rc == 2 and "not an existing directory" in err


def test_cli_export_help_carries_the_controller_cautions(capsys):
    rc, out, _ = _cli(["export-c", "--help"], capsys)
    text = " ".join(out.split())
    assert rc == 0
    for phrase in (
        "validate the complete controller on the plant",
        "actuator limits and rate limits",
        "independent safe stop",
        "local codes",
        "licensed engineering practice",
    ):
        assert phrase in text, phrase


SILENCE = r"""
#include <stdio.h>
#include "@.h"
/* a spike, then zeros: count states that are subnormal after each step */
int main(void)
{
    @_state st;
    int i, l, bad = 0;
    @_init(&st);
    for (i = 0; i < 6000; i++) {
        @_real y;
        if (@_step(&st, (@_real)(i == 0 ? 1.0 : 0.0), &y) != 0) return 2;
        for (l = 0; l < (int)(sizeof st.S / sizeof st.S[0]); l++) {
            @_real s = st.S[l], e = st.Sc[l];
            if (s != 0 && s < LIM && s > -LIM) bad++;
            if (e != 0 && e < LIM && e > -LIM) bad++;
        }
        printf("%a\n", (double)y);
    }
    printf("%d\n", bad);
    return 0;
}
"""


@pytest.mark.parametrize("precision", ["double", "single"])
def test_exported_states_never_subnormal(precision, tmp_path):
    """A spike then silence: the one-pole states decay geometrically, and
    the exported code sets them to zero below the smallest normal number
    (as the library does, csrc/stream_compressed.c), so no state is ever
    subnormal; in double precision with FMA the outputs stay the library's
    bit for bit."""
    exp = export_c("rectangle", 0.5, STEP, tol=TOL, horizon=HORIZON, precision=precision)
    extra = ["-mfma"] if precision == "double" and _cpu_has_fma(tmp_path) else []
    # the smallest normal numbers (IEEE 754 binary64 and binary32)
    lim = "2.2250738585072014e-308" if precision == "double" else "1.17549435082228751e-38f"
    lines = _run(_build(exp, tmp_path, f"#define LIM {lim}\n" + SILENCE, extra), [])
    assert int(lines[-1]) == 0
    got = np.array([float.fromhex(v) for v in lines[:-1]])
    x = np.zeros(6000)
    x[0] = 1.0
    ref = _library("rectangle", 0.5, x)
    if extra:
        assert np.array_equal(got.view(np.int64), ref.view(np.int64))
    else:
        assert np.all(np.abs(got - ref) <= 1e-5 * np.abs(ref) + 1e-30)
