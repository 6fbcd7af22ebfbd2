"""The command line program: pyfracconv.cli.main, run in-process, and once
through ``python -m pyfracconv``.

Results are held to the library's own batch functions on the same data
(the program must add nothing and lose no digits), and once to an identity
with no discretisation error (docs/references.md: the telescoping sum of the
rectangle weights, common practice; the order-1 special case).
"""

import math
import os
import subprocess
import sys

import numpy as np
import pytest

import pyfracconv
from pyfracconv import cli, demo
from pyfracconv._core import check_order, check_rule, check_step, DERIVATIVE_RULES
from pyfracconv._errors import ArgumentError, InputTypeError

# The cautions the help texts must carry (brief of the CLI).
CAUTIONS = [
    "validated on the actual plant before use",
    "actuator limits",
    "rate limits",
    "safe stop (emergency stop)",
    "independent of this software",
    "local codes, standards and licensed engineering practice",
]


def run(capsys, *argv):
    code = cli.main([str(a) for a in argv])
    cap = capsys.readouterr()
    return code, cap.out, cap.err


def flat(text):
    return " ".join(text.split())


def write_csv(path, header, rows):
    with open(path, "w", newline="") as fh:
        if header is not None:
            fh.write(",".join(header) + "\n")
        for row in rows:
            fh.write(",".join(repr(float(v)) if not isinstance(v, str) else v for v in row) + "\n")


def read_csv_back(path):
    with open(path) as fh:
        lines = fh.read().splitlines()
    return lines


def numbers(lines):
    return np.array([[float(v) for v in line.split(",")] for line in lines])


def signals(n=64, h=0.01):
    t = np.arange(n) * h
    return np.column_stack([np.sin(3 * t) + 1.0 / 3.0, np.exp(-t) * np.cos(t)])


def assert_clean_error(code, err, *fragments):
    """Exit status 2, one readable message, no traceback."""
    assert code == 2
    assert "Traceback" not in err
    assert err.startswith("pyfracconv")
    for frag in fragments:
        assert frag in err, (frag, err)


# ---------------------------------------------------------------- CSV


def test_csv_round_trip_keeps_header_and_every_digit(tmp_path, capsys):
    x = signals()
    src, dst = tmp_path / "in.csv", tmp_path / "out.csv"
    write_csv(src, ["force", "disp"], x)
    code, out, err = run(
        capsys, "integral", src, "-o", dst, "--order", "0.5", "--step", "0.01", "--rule", "trapezoid"
    )
    assert code == 0, err
    lines = read_csv_back(dst)
    assert lines[0] == "force,disp"
    got = numbers(lines[1:])
    want = pyfracconv.integral(x, 0.5, 0.01, rule="trapezoid", axis=0)
    # exact equality: the CSV text must read back to the very same doubles
    np.testing.assert_array_equal(got, want)


def test_csv_rectangle_on_constant_matches_identity(tmp_path, capsys):
    # Rectangle rule on f = 1 gives exactly h^a n^a / Gamma(a+1) at t_n
    # (sum_{j<n} ((j+1)^a - j^a) = n^a, a telescoping sum: common practice;
    # docs/references.md,
    # "Identities with no discretisation error").
    a, h, n = 0.3, 0.25, 200
    src, dst = tmp_path / "c.csv", tmp_path / "c_out.csv"
    write_csv(src, ["one"], np.ones((n, 1)))
    code, _, err = run(capsys, "integral", src, "-o", dst, "--order", a, "--step", h)
    assert code == 0, err
    got = numbers(read_csv_back(dst)[1:])[:, 0]
    k = np.arange(n)
    np.testing.assert_allclose(got, h**a * k**a / math.gamma(a + 1), rtol=1e-13, atol=0)


def test_csv_rectangle_order_one_is_left_rectangle_rule(tmp_path, capsys):
    # a = 1: the classical left rectangle rule, y_n = h * sum_{k<n} x_k
    # (common practice; docs/references.md, "Order a = 1").
    h = 0.5
    x = np.array([1.0, 2.0, -4.0, 8.0, 0.5, 3.0])
    src, dst = tmp_path / "r.csv", tmp_path / "r.npy"
    write_csv(src, None, x[:, None])
    code, _, err = run(capsys, "integral", src, "-o", dst, "--order", 1, "--step", h)
    assert code == 0, err
    got = np.load(dst)
    want = h * np.concatenate([[0.0], np.cumsum(x)[:-1]])
    np.testing.assert_allclose(got[:, 0], want, rtol=1e-14, atol=1e-15)


def test_column_selection_by_name_in_given_order(tmp_path, capsys):
    x = signals(40)
    src, dst = tmp_path / "sel.csv", tmp_path / "sel_out.csv"
    rows = [[f"2024-01-01T00:00:{k:02d}", x[k, 0], "note", x[k, 1]] for k in range(len(x))]
    with open(src, "w") as fh:
        fh.write("stamp, force ,label,disp\n")
        for r in rows:
            fh.write(f"{r[0]},{float(r[1])!r},{r[2]},{float(r[3])!r}\n")
    code, _, err = run(
        capsys,
        "derivative",
        src,
        "-o",
        dst,
        "--order",
        "0.4",
        "--step",
        "0.01",
        "--rule",
        "l1",
        "--columns",
        "disp,force",
    )
    assert code == 0, err
    lines = read_csv_back(dst)
    assert lines[0] == "disp, force "  # the header fields as written
    got = numbers(lines[1:])
    want = pyfracconv.derivative(x[:, ::-1], 0.4, 0.01, rule="l1", axis=0)
    np.testing.assert_array_equal(got, want)


def test_headerless_csv_keeps_first_row_as_data(tmp_path, capsys):
    x = signals(30)
    src, dst = tmp_path / "nohead.csv", tmp_path / "nohead_out.csv"
    write_csv(src, None, x)
    code, _, err = run(capsys, "derivative", src, "-o", dst, "--order", "1.5", "--step", "0.01")
    assert code == 0, err
    lines = read_csv_back(dst)
    assert len(lines) == len(x)  # no header line added, first row kept
    got = numbers(lines)
    np.testing.assert_array_equal(got, pyfracconv.derivative(x, 1.5, 0.01, axis=0))


def test_blank_lines_and_bom_tolerated(tmp_path, capsys):
    src = tmp_path / "bom.csv"
    with open(src, "w", encoding="utf-8-sig") as fh:
        fh.write("force\n\n1.0\n2.0\n\n4.0\n\n")
    code, out, err = run(capsys, "integral", src, "-o", "-", "--order", "0.5", "--step", "1")
    assert code == 0, err
    lines = out.splitlines()
    assert lines[0] == "force"
    got = numbers(lines[1:])[:, 0]
    np.testing.assert_array_equal(got, pyfracconv.integral([1.0, 2.0, 4.0], 0.5, 1.0))


def test_csv_to_stdout(tmp_path, capsys):
    x = signals(20)
    src = tmp_path / "s.csv"
    write_csv(src, ["a", "b"], x)
    code, out, err = run(capsys, "integral", src, "-o", "-", "--order", "2.5", "--step", "0.01")
    assert code == 0, err
    assert err == ""
    lines = out.splitlines()
    assert lines[0] == "a,b"
    np.testing.assert_array_equal(numbers(lines[1:]), pyfracconv.integral(x, 2.5, 0.01, axis=0))


# ---------------------------------------------------------------- npy


def test_npy_1d_in_npy_out(tmp_path, capsys):
    x = signals(100)[:, 0]
    src, dst = tmp_path / "x.npy", tmp_path / "y.NPY"
    np.save(src, x)
    code, _, err = run(
        capsys, "integral", src, "-o", dst, "--order", "0.7", "--step", "0.01", "--rule", "trapezoid"
    )
    assert code == 0, err
    got = np.load(dst)
    assert got.shape == x.shape and got.dtype == np.float64
    np.testing.assert_array_equal(got, pyfracconv.integral(x, 0.7, 0.01, rule="trapezoid"))


def test_npy_2d_in_csv_out_has_no_header(tmp_path, capsys):
    x = (signals(50) * 1000).astype(np.int32)  # integer input is accepted
    src, dst = tmp_path / "x2.npy", tmp_path / "x2.csv"
    np.save(src, x)
    code, _, err = run(capsys, "derivative", src, "-o", dst, "--order", "0.5", "--step", "0.001")
    assert code == 0, err
    lines = read_csv_back(dst)
    assert len(lines) == len(x)
    np.testing.assert_array_equal(numbers(lines), pyfracconv.derivative(x.astype(float), 0.5, 0.001, axis=0))


def test_csv_in_npy_out(tmp_path, capsys):
    x = signals(33)
    src, dst = tmp_path / "z.csv", tmp_path / "z.npy"
    write_csv(src, ["p", "q"], x)
    code, _, err = run(
        capsys, "integral", src, "-o", dst, "--order", "0.5", "--step", "0.01", "--columns", "q"
    )
    assert code == 0, err
    got = np.load(dst)
    assert got.shape == (33, 1)
    np.testing.assert_array_equal(got[:, 0], pyfracconv.integral(x[:, 1], 0.5, 0.01))


# ---------------------------------------------------------------- errors


def test_missing_file_is_named(tmp_path, capsys):
    missing = tmp_path / "nowhere.csv"
    code, _, err = run(capsys, "integral", missing, "-o", tmp_path / "o.csv", "--order", "0.5", "--step", "1")
    assert_clean_error(code, err, str(missing), "cannot read")
    missing_npy = tmp_path / "nowhere.npy"
    code, _, err = run(
        capsys, "integral", missing_npy, "-o", tmp_path / "o.csv", "--order", "0.5", "--step", "1"
    )
    assert_clean_error(code, err, str(missing_npy), "cannot read")


def test_unreadable_input_is_named(tmp_path, capsys):
    folder = tmp_path / "folder.csv"
    folder.mkdir()
    code, _, err = run(capsys, "integral", folder, "-o", "-", "--order", "0.5", "--step", "1")
    assert_clean_error(code, err, str(folder), "cannot read")
    src = tmp_path / "latin1.csv"
    src.write_bytes("f\u00fcr\n1\n".encode("latin-1"))
    code, _, err = run(capsys, "integral", src, "-o", "-", "--order", "0.5", "--step", "1")
    assert_clean_error(code, err, str(src), "UTF-8")


@pytest.mark.parametrize("content", ["", "\n\n  \n", ",,\n"])
def test_empty_csv(tmp_path, capsys, content):
    src = tmp_path / "empty.csv"
    src.write_text(content)
    code, _, err = run(capsys, "integral", src, "-o", "-", "--order", "0.5", "--step", "1")
    assert_clean_error(code, err, str(src), "empty")


def test_empty_npy_file_and_header_only_csv(tmp_path, capsys):
    src = tmp_path / "empty.npy"
    src.write_bytes(b"")
    code, _, err = run(capsys, "integral", src, "-o", "-", "--order", "0.5", "--step", "1")
    assert_clean_error(code, err, str(src), "empty")
    src = tmp_path / "head.csv"
    src.write_text("force,disp\n")
    code, _, err = run(capsys, "integral", src, "-o", "-", "--order", "0.5", "--step", "1")
    assert_clean_error(code, err, str(src), "no data rows")


def test_missing_column_lists_available(tmp_path, capsys):
    src = tmp_path / "cols.csv"
    write_csv(src, ["force", "disp"], signals(5))
    code, _, err = run(
        capsys, "integral", src, "-o", "-", "--order", "0.5", "--step", "1", "--columns", "force,torque"
    )
    assert_clean_error(code, err, "'torque'", "available columns: 'force', 'disp'")


def test_bad_number_names_line_column_and_text(tmp_path, capsys, monkeypatch):
    monkeypatch.chdir(tmp_path)
    with open("data.csv", "w") as fh:
        fh.write("time,force\n")
        fh.write("0,1\n0.1,2\n\n0.2,3\n0.3,4\n")  # lines 2-6 (line 4 blank)
        fh.write("0.4,abc\n")  # line 7
    code, _, err = run(capsys, "integral", "data.csv", "-o", "out.csv", "--order", "0.5", "--step", "0.1")
    assert_clean_error(code, err, "data.csv line 7, column 'force': 'abc' is not a number")
    assert not os.path.exists("out.csv")


def test_bad_number_without_header_gives_column_number(tmp_path, capsys):
    src = tmp_path / "nh.csv"
    src.write_text("1,2,3\n4,5,6\n7,8,x9\n")
    code, _, err = run(capsys, "integral", src, "-o", "-", "--order", "0.5", "--step", "1")
    assert_clean_error(code, err, f"{src} line 3, column 3: 'x9' is not a number")


def test_bad_number_in_unselected_column_is_ignored(tmp_path, capsys):
    src = tmp_path / "u.csv"
    src.write_text("a,b\n1,n/a\n2,n/a\n")
    code, out, err = run(capsys, "integral", src, "-o", "-", "--order", "1", "--step", "1", "--columns", "a")
    assert code == 0, err
    assert numbers(out.splitlines()[1:])[:, 0].tolist() == [0.0, 1.0]
    code, _, err = run(capsys, "integral", src, "-o", "-", "--order", "1", "--step", "1")
    assert_clean_error(code, err, "line 2, column 'b': 'n/a' is not a number")


def test_ragged_rows(tmp_path, capsys):
    src = tmp_path / "rag.csv"
    src.write_text("a,b\n1,2\n3,4\n5\n")
    code, _, err = run(capsys, "integral", src, "-o", "-", "--order", "0.5", "--step", "1")
    assert_clean_error(code, err, f"{src} line 4", "1 field(s)", "has 2")
    src.write_text("1,2\n3,4,5\n")
    code, _, err = run(capsys, "integral", src, "-o", "-", "--order", "0.5", "--step", "1")
    assert_clean_error(code, err, f"{src} line 2", "3 field(s)", "line 1 has 2")


@pytest.mark.parametrize("text", ["nan", "inf", "-Infinity", "1e999"])
def test_non_finite_csv(tmp_path, capsys, text):
    src = tmp_path / "nf.csv"
    src.write_text(f"force\n1\n{text}\n")
    code, _, err = run(capsys, "integral", src, "-o", "-", "--order", "0.5", "--step", "1")
    assert_clean_error(code, err, f"{src} line 3, column 'force': {text!r}", "not finite")


def test_non_finite_npy(tmp_path, capsys):
    x = np.zeros((6, 3))
    x[4, 2] = np.nan
    src = tmp_path / "nf.npy"
    np.save(src, x)
    code, _, err = run(capsys, "integral", src, "-o", "-", "--order", "0.5", "--step", "1")
    assert_clean_error(code, err, str(src), "[4, 2]", "nan", "not finite")


@pytest.mark.parametrize(
    "arr, fragment",
    [
        (np.zeros((2, 2, 2)), "shape (2, 2, 2)"),
        (np.zeros(3, dtype=complex), "complex128"),
        (np.zeros(0), "no samples"),
        (np.array(["a", "b"]), "<U1"),
    ],
)
def test_unusable_npy(tmp_path, capsys, arr, fragment):
    src = tmp_path / "bad.npy"
    np.save(src, arr)
    code, _, err = run(capsys, "integral", src, "-o", "-", "--order", "0.5", "--step", "1")
    assert_clean_error(code, err, str(src), fragment)


def test_corrupt_npy(tmp_path, capsys):
    src = tmp_path / "junk.npy"
    src.write_bytes(b"this is not an npy file at all\n")
    code, _, err = run(capsys, "integral", src, "-o", "-", "--order", "0.5", "--step", "1")
    assert_clean_error(code, err, str(src), "not a readable .npy file")


def test_columns_need_names(tmp_path, capsys):
    src = tmp_path / "nh.csv"
    src.write_text("1,2\n3,4\n")
    code, _, err = run(capsys, "integral", src, "-o", "-", "--order", "0.5", "--step", "1", "--columns", "a")
    assert_clean_error(code, err, "--columns", "no header row")
    npy = tmp_path / "a.npy"
    np.save(npy, np.ones(3))
    code, _, err = run(capsys, "integral", npy, "-o", "-", "--order", "0.5", "--step", "1", "--columns", "a")
    assert_clean_error(code, err, "--columns", ".npy")


def _library_message(fn, *args):
    with pytest.raises((ArgumentError, InputTypeError)) as info:
        fn(*args)
    return str(info.value)


@pytest.mark.parametrize(
    "cmd, opts, expected",
    [
        ("integral", ["--order", "-1"], lambda: _library_message(check_order, -1.0, "rectangle")),
        ("integral", ["--order", "0"], lambda: _library_message(check_order, 0.0, "rectangle")),
        ("integral", ["--order", "abc"], lambda: _library_message(check_order, "abc", "rectangle")),
        ("integral", ["--order", "nan"], lambda: _library_message(check_order, float("nan"), "rectangle")),
        ("integral", ["--order", "11"], lambda: _library_message(check_order, 11.0, "rectangle")),
        ("derivative", ["--order", "1.5", "--rule", "l1"], lambda: _library_message(check_order, 1.5, "l1")),
        ("integral", ["--step", "0"], lambda: _library_message(check_step, 0.0)),
        ("integral", ["--step", "-0.5"], lambda: _library_message(check_step, -0.5)),
        ("integral", ["--step", "fast"], lambda: _library_message(check_step, "fast")),
        (
            "integral",
            ["--rule", "simpson"],
            lambda: _library_message(check_rule, "simpson", ("rectangle", "trapezoid")),
        ),
        (
            "derivative",
            ["--rule", "trapezoid"],
            lambda: _library_message(check_rule, "trapezoid", DERIVATIVE_RULES),
        ),
    ],
)
def test_bad_order_step_rule_use_library_messages(tmp_path, capsys, cmd, opts, expected):
    src = tmp_path / "ok.csv"
    write_csv(src, ["f"], np.ones((4, 1)))
    base = {"--order": "0.5", "--step": "1"}
    for k in range(0, len(opts), 2):
        base[opts[k]] = opts[k + 1]
    argv = [cmd, src, "-o", tmp_path / "o.csv"]
    for k, v in base.items():
        argv += [f"{k}={v}"]
    code, _, err = run(capsys, *argv)
    msg = expected()
    assert_clean_error(code, err, msg)
    # the library's messages name the argument and the value
    name = opts[0].lstrip("-")  # the option under test comes first
    assert f"{name}=" in msg
    assert not (tmp_path / "o.csv").exists()


def test_unknown_output_extension(tmp_path, capsys):
    src = tmp_path / "ok.csv"
    write_csv(src, ["f"], np.ones((4, 1)))
    code, _, err = run(capsys, "integral", src, "-o", tmp_path / "out.txt", "--order", "0.5", "--step", "1")
    assert_clean_error(code, err, "out.txt", ".csv", ".npy")


def test_unwritable_output_is_named(tmp_path, capsys):
    src = tmp_path / "ok.csv"
    write_csv(src, ["f"], np.ones((4, 1)))
    dst = tmp_path / "no_such_dir" / "out.csv"
    code, _, err = run(capsys, "integral", src, "-o", dst, "--order", "0.5", "--step", "1")
    assert_clean_error(code, err, "cannot write", str(dst))


def test_usage_errors_exit_2(tmp_path, capsys):
    code, _, err = run(capsys, "integral", "x.csv", "--order", "0.5", "--step", "1")
    assert code == 2 and "-o/--output" in err
    code, _, err = run(capsys)
    assert code == 2 and "usage" in err


# ---------------------------------------------------------------- help, version, demo


@pytest.mark.parametrize(
    "argv",
    [["--help"], ["integral", "--help"], ["derivative", "--help"], ["demo", "--help"], ["control", "--help"]],
)
def test_help_carries_cautions(capsys, argv):
    code, out, _ = run(capsys, *argv)
    assert code == 0
    text = flat(out)
    for phrase in CAUTIONS:
        assert phrase in text, phrase


def test_version(capsys):
    code, out, _ = run(capsys, "--version")
    assert code == 0
    assert out.strip() == f"pyfracconv {pyfracconv.__version__}"


def test_demo_verify_passes_and_says_invented(capsys):
    # the verification table, kept under --verify
    code, out, err = run(capsys, "demo", "--verify")
    assert code == 0, out + err
    assert "invented" in out.lower()
    assert "PASS" in out and "FAIL" not in out
    # every rule is reported, with its observed order
    for rule in ("rectangle", "trapezoid", "grunwald", "l1"):
        assert f"PASS  order {rule}" in out
        assert f"PASS  scenario {rule}" in out


def test_demo_checks_can_fail(capsys):
    # A wrong integral (off by 0.1 %) must make the demo's checks fail.
    def bad_integral(x, order, step, rule="rectangle", **kw):
        return pyfracconv.integral(x, order, step, rule=rule, **kw) * 1.001

    def bad_derivative(x, order, step, rule="grunwald", **kw):  # wrong order a
        return pyfracconv.derivative(x, order * 1.02, step, rule=rule, **kw)

    import io

    buf = io.StringIO()
    assert demo.run(buf, integral=bad_integral) == 1
    assert "FAIL  scenario trapezoid" in buf.getvalue()
    buf = io.StringIO()
    assert demo.run(buf, derivative=bad_derivative) == 1
    assert "FAIL  scenario l1" in buf.getvalue()


# ---------------------------------------------------------------- python -m


def test_python_dash_m(tmp_path):
    x = signals(25)
    src, dst = tmp_path / "m.csv", tmp_path / "m_out.csv"
    write_csv(src, ["u", "v"], x)
    env = dict(os.environ)
    proc = subprocess.run(
        [
            sys.executable,
            "-m",
            "pyfracconv",
            "integral",
            str(src),
            "-o",
            str(dst),
            "--order",
            "0.5",
            "--step",
            "0.01",
        ],
        capture_output=True,
        text=True,
        timeout=120,
        env=env,
    )
    assert proc.returncode == 0, proc.stderr
    lines = read_csv_back(dst)
    assert lines[0] == "u,v"
    # another process: allow for rounding-level differences in engine choice
    np.testing.assert_allclose(
        numbers(lines[1:]), pyfracconv.integral(x, 0.5, 0.01, axis=0), rtol=1e-13, atol=1e-15
    )
    proc = subprocess.run(
        [
            sys.executable,
            "-m",
            "pyfracconv",
            "integral",
            str(tmp_path / "gone.csv"),
            "-o",
            "-",
            "--order",
            "0.5",
            "--step",
            "0.01",
        ],
        capture_output=True,
        text=True,
        timeout=120,
        env=env,
    )
    assert proc.returncode == 2
    assert "gone.csv" in proc.stderr and "Traceback" not in proc.stderr


# ---------------------------------------------------------------- the closed-loop demo


def test_demo_closed_loop_writes_files_and_summary(tmp_path, capsys, monkeypatch):
    monkeypatch.chdir(tmp_path)
    code, out, err = run(capsys, "demo", "--out-dir", tmp_path / "d")
    assert code == 0, out + err
    assert "INVENTED" in out and "CAUTION" in out
    assert "loop settled with both memories" in out
    for word in ("settling s", "overshoot %", "energy", "ctrl bytes", "largest deviation between memories"):
        assert word in out
    traj = tmp_path / "d" / "trajectory.csv"
    lines = traj.read_text().splitlines()
    assert lines[0].startswith("# invented")
    assert lines[1] == "t,setpoint,theta_compressed,q_compressed,theta_exact,q_exact"
    data = np.loadtxt(traj, delimiter=",", skiprows=2)
    assert data.shape == (100000, 6)
    # heater limits held; settles near the setpoint; memories agree
    assert data[:, 3].min() >= 0 and data[:, 3].max() <= 60e3
    assert abs(data[-1, 2] - 50) < 0.5
    assert np.max(np.abs(data[:, 2] - data[:, 4])) < 1e-6
    try:
        import matplotlib  # noqa: F401

        assert (tmp_path / "d" / "bode.png").exists()
    except ImportError:
        assert "pip install 'pyfracconv[plot]'" in out
    assert not (tmp_path / "pyfracconv-demo").exists()


# ---------------------------------------------------------------- options, files


def test_option_messages_for_command_line_users(tmp_path, capsys):
    src = tmp_path / "ok.csv"
    write_csv(src, ["f"], np.ones((4, 1)))
    code, _, err = run(capsys, "integral", src, "-o", "-", "--order", "abc", "--step", "1")
    assert_clean_error(code, err, "--order abc: not a number")
    code, _, err = run(capsys, "integral", src, "-o", "-", "--order", "0.5", "--step=-1e-3")
    assert_clean_error(code, err, "--step -1e-3: out of range", "positive")


def test_output_may_not_be_the_input(tmp_path, capsys):
    src = tmp_path / "ok.csv"
    write_csv(src, ["f"], np.ones((4, 1)))
    before = src.read_bytes()
    code, _, err = run(capsys, "integral", src, "-o", src, "--order", "0.5", "--step", "1")
    assert_clean_error(code, err, "is the input file")
    assert src.read_bytes() == before


def test_failed_write_keeps_previous_output(tmp_path, capsys, monkeypatch):
    src, dst = tmp_path / "ok.csv", tmp_path / "out.csv"
    write_csv(src, ["f"], np.ones((4, 1)))
    dst.write_text("previous\n")

    def boom(*a, **k):
        raise OSError(28, "No space left on device")

    monkeypatch.setattr(cli, "_write_csv", boom)
    code, _, err = run(capsys, "integral", src, "-o", dst, "--order", "0.5", "--step", "1")
    assert_clean_error(code, err, "cannot write", "No space left")
    assert dst.read_text() == "previous\n"
    # the temporary file is removed
    assert sorted(p.name for p in tmp_path.iterdir()) == ["ok.csv", "out.csv"]


def test_comment_lines_and_delimiters(tmp_path, capsys):
    src = tmp_path / "c.csv"
    src.write_text("# logger export\nf\n1\n# note\n2\n3\n")
    code, out, err = run(capsys, "integral", src, "-o", "-", "--order", "1", "--step", "1")
    assert code == 0, err
    assert out.splitlines() == ["f", "0.0", "1.0", "3.0"]  # rectangle: running sum
    semi = tmp_path / "s.csv"
    semi.write_text("1;2\n3;4\n")
    code, _, err = run(capsys, "integral", semi, "-o", "-", "--order", "1", "--step", "1")
    assert_clean_error(code, err, "--delimiter ';'")
    code, out, err = run(
        capsys, "integral", semi, "-o", "-", "--order", "1", "--step", "1", "--delimiter", ";"
    )
    assert code == 0, err


def test_control_command_equals_controller(tmp_path, capsys):
    src = tmp_path / "loop.csv"
    rng = np.random.default_rng(5)
    x = np.c_[np.ones(50), rng.normal(size=50)]
    write_csv(src, ["sp", "pv"], x)
    code, out, err = run(
        capsys,
        "control",
        src,
        "-o",
        "-",
        "--kp",
        "2",
        "--ki",
        "0.5",
        "--integral-order",
        "0.7",
        "--step",
        "0.1",
        "--out-max",
        "3",
    )
    assert code == 0, err
    got = numbers(out.splitlines()[1:])
    want = pyfracconv.Controller(
        2.0, 0.5, 0.0, integral_order=0.7, derivative_order=0.5, step=0.1, output_limits=(-np.inf, 3)
    ).update_block(x[:, 0], x[:, 1])
    np.testing.assert_array_equal(got.ravel(), want)


# ---------------------------------------------------------------- live


def _live_proc(*args):
    return subprocess.Popen(
        [sys.executable, "-m", "pyfracconv", *args],
        stdin=subprocess.PIPE,
        stdout=subprocess.PIPE,
        stderr=subprocess.PIPE,
        text=True,
        bufsize=1,
    )


def test_live_first_line_arrives_before_stdin_closes():
    p = _live_proc(
        "integral",
        "-",
        "-o",
        "-",
        "--live",
        "--order",
        "1",
        "--step",
        "0.5",
        "--time-column",
        "1",
        "--time-tol",
        "1e-6",
    )
    try:
        p.stdin.write("t,f\n")
        p.stdin.write("0,2\n")
        p.stdin.flush()
        assert p.stdout.readline() == "t,f\n"  # header echoed at once
        assert p.stdout.readline() == "0.0,0.0\n"  # rectangle: y_0 = 0
        p.stdin.write("0.5,4\n")  # the slow producer's next line
        p.stdin.flush()
        assert p.stdout.readline() == "0.5,1.0\n"  # h * 2
        p.stdin.write("1.2,4\n")  # time step 0.7, not 0.5
        p.stdin.flush()
        assert p.stdout.readline() == "1.2,3.0\n"
        p.stdin.close()
        assert p.wait(timeout=60) == 0
        err = p.stderr.read()
        assert "time step" in err and "--time-tol" in err
    finally:
        p.kill()


def test_live_controller_and_closed_pipe():
    p = _live_proc("control", "-", "-o", "-", "--live", "--kp", "2", "--step", "1")
    try:
        p.stdin.write("1,0.25\n")
        p.stdin.flush()
        assert float(p.stdout.readline()) == 1.5
        p.stdout.close()  # the reader goes away
        for _ in range(200):
            try:
                p.stdin.write("1,0\n")
                p.stdin.flush()
            except BrokenPipeError:
                break
        try:
            p.stdin.close()
        except BrokenPipeError:
            pass
        p.wait(timeout=60)
        err = p.stderr.read()
        assert "Traceback" not in err
    finally:
        p.kill()


def test_workers_option_same_output_and_refusals(tmp_path, capsys):
    # --workers gives the bytes of the default run (the library's
    # bit-for-bit promise, tests/test_workers.py); bad values are refused
    # with the library's message before any output is written
    src = tmp_path / "x.npy"
    np.save(src, np.random.default_rng(4).standard_normal((40000, 3)))
    outs = []
    for extra in ([], ["--workers", "2"], ["--workers", "-1"]):
        out = tmp_path / f"y{len(outs)}.npy"
        code, _, err = run(capsys, "integral", src, "-o", out, "--order", "0.5", "--step", "0.01", *extra)
        assert code == 0, err
        outs.append(np.load(out))
    assert outs[0].tobytes() == outs[1].tobytes() == outs[2].tobytes()
    for bad, frag in (("0", "workers=0: must not be 0"), ("two", "not an integer"), ("-999", "workers=-999")):
        code, _, err = run(
            capsys,
            "derivative",
            src,
            "-o",
            tmp_path / "bad.npy",
            "--order",
            "0.5",
            "--step",
            "0.01",
            "--workers",
            bad,
        )
        assert_clean_error(code, err, "--workers", frag)
        assert not (tmp_path / "bad.npy").exists()


# ---------------------------------------------------------------- --time-column (batch)


def _timed_csv(path, t, x, names=("time", "f", "g")):
    write_csv(path, list(names), [[ti, *xi] for ti, xi in zip(t, x)])


def test_time_column_is_the_grid_closed_form(tmp_path, capsys):
    # I^a 1 = t^a / Gamma(a+1) (Podlubny 1999): the rectangle rule is exact
    # for constants on any grid (its weights telescope), so the output
    # equals the closed form at the given times, measured from the first
    rng = np.random.default_rng(3)
    t = 2.0 + np.cumsum(rng.uniform(0.001, 0.05, 40))
    x = np.column_stack([np.ones(40), np.sin(t)])
    src, out = tmp_path / "in.csv", tmp_path / "out.csv"
    _timed_csv(src, t, x)
    code, _, err = run(capsys, "integral", src, "-o", out, "--order", "0.6", "--time-column", "1")
    assert code == 0, err
    lines = read_csv_back(out)
    assert lines[0] == "time,f,g"
    got = numbers(lines[1:])
    np.testing.assert_array_equal(got[:, 0], t)  # copied, every digit
    want = (t - t[0]) ** 0.6 / math.gamma(1.6)
    np.testing.assert_allclose(got[:, 1], want, rtol=1e-13, atol=1e-15)
    # the signals are the library's rules on those times (not integrated as a signal)
    np.testing.assert_array_equal(got[:, 1:], pyfracconv.integral(x, 0.6, t=t, axis=0))


def test_time_column_uniform_times_use_the_uniform_engines(tmp_path, capsys):
    # times k*h written in full precision: uniform within the stated
    # tolerance, so the output is the step= result bit for bit, and
    # Grunwald-Letnikov (uniform grids only) is accepted
    h = 0.001
    t = h * np.arange(300)
    x = signals(300, h)
    src, out = tmp_path / "in.csv", tmp_path / "out.npy"
    _timed_csv(src, t, x)
    code, _, err = run(
        capsys, "derivative", src, "-o", out, "--order", "0.4", "--time-column", "1", "--rule", "grunwald"
    )
    assert code == 0, err
    got = np.load(out)
    step = (t[-1] - t[0]) / 299
    np.testing.assert_array_equal(got[:, 1:], pyfracconv.derivative(x, 0.4, step, axis=0))
    np.testing.assert_array_equal(got[:, 0], t)


def test_time_column_tolerance_decides_uniform_or_grid(tmp_path, capsys):
    # steps differing from their mean by about 5e-8 relative: uniform at
    # --time-tol 1e-6, not at the default (1e-9), where the rules on the
    # given times run
    h = 0.01
    n = 50
    t = h * (np.arange(n) + 5e-8 * (np.arange(n) % 2))
    x = signals(n, h)
    src = tmp_path / "in.csv"
    _timed_csv(src, t, x)
    for tol, uniform in (("1e-6", True), (None, False)):
        out = tmp_path / f"out{tol}.npy"
        extra = () if tol is None else ("--time-tol", tol)
        code, _, err = run(
            capsys,
            "integral",
            src,
            "-o",
            out,
            "--order",
            "0.5",
            "--time-column",
            "1",
            "--rule",
            "trapezoid",
            *extra,
        )
        assert code == 0, err
        got = np.load(out)[:, 1:]
        if uniform:
            want = pyfracconv.integral(x, 0.5, (t[-1] - t[0]) / (n - 1), rule="trapezoid", axis=0)
        else:
            want = pyfracconv.integral(x, 0.5, t=t, rule="trapezoid", axis=0)
        np.testing.assert_array_equal(got, want)
    # both agree to about the jitter (the results are continuous in the times)
    a = np.load(tmp_path / "out1e-6.npy")
    b = np.load(tmp_path / "outNone.npy")
    assert np.max(np.abs(a - b)) < 1e-6


def test_time_column_in_the_middle_with_columns_and_npy(tmp_path, capsys):
    t = np.array([0.0, 0.1, 0.3, 0.35, 0.9])
    f = np.cos(t)
    src = tmp_path / "in.csv"
    write_csv(src, ["f", "time", "g"], [[a, b, c] for a, b, c in zip(f, t, 2 * f)])
    code, out, err = run(
        capsys,
        "derivative",
        src,
        "-o",
        "-",
        "--order",
        "0.5",
        "--rule",
        "l1",
        "--time-column",
        "2",
        "--columns",
        "g",
    )
    assert code == 0, err
    lines = out.splitlines()
    assert lines[0] == "time,g"
    got = numbers(lines[1:])
    np.testing.assert_array_equal(got[:, 1], pyfracconv.derivative(2 * f, 0.5, t=t, rule="l1"))
    npy = tmp_path / "in.npy"
    np.save(npy, np.column_stack([f, t, 2 * f]))
    res = tmp_path / "out.npy"
    code, _, err = run(
        capsys, "derivative", npy, "-o", res, "--order", "0.5", "--rule", "l1", "--time-column", "2"
    )
    assert code == 0, err
    arr = np.load(res)
    assert arr.shape == (5, 3)
    np.testing.assert_array_equal(arr[:, 0], t)
    np.testing.assert_array_equal(
        arr[:, 1:], pyfracconv.derivative(np.column_stack([f, 2 * f]), 0.5, t=t, rule="l1", axis=0)
    )


@pytest.mark.parametrize(
    "rows, argv, fragments",
    [
        (
            [[0.0, 1.0], [0.1, 2.0], [0.1, 3.0]],
            ("--time-column", "1"),
            ["--time-column 1: the times must be strictly increasing", "data row 3", "time 0.1 after 0.1"],
        ),
        (
            [[0.0, 1.0], [0.2, 2.0], [0.1, 3.0]],
            ("--time-column", "1"),
            ["--time-column 1", "time 0.1 after 0.2"],
        ),
        ([[0.0, 1.0], ["nan", 2.0]], ("--time-column", "1"), ["--time-column 1", "time 'nan' is not finite"]),
        ([[0.0, 1.0], ["inf", 2.0]], ("--time-column", "1"), ["time 'inf' is not finite"]),
        (
            [[0.0, 1.0], [0.1, 2.0]],
            ("--time-column", "1", "--step", "0.1"),
            ["--step 0.1 with --time-column 1", "give one of the two"],
        ),
        ([[0.0, 1.0], [0.1, 2.0]], (), ["--step: required", "--time-column N"]),
        ([[0.0, 1.0], [0.1, 2.0]], ("--time-column", "3"), ["--time-column 3: the input has 2 column(s)"]),
        ([[0.0, 1.0], [0.1, 2.0]], ("--time-column", "0"), ["--time-column 0: must be >= 1"]),
        (
            [[0.0, 1.0], [0.1, 2.0]],
            ("--time-column", "1", "--columns", "t"),
            ["--columns t: names the time column"],
        ),
        (
            [[0.0, 1.0], [0.1, 2.0]],
            ("--time-column", "1", "--time-tol", "-1"),
            ["--time-tol -1.0: must be in [0, 0.5)"],
        ),
        (
            [[0.0], [0.1]],
            ("--time-column", "1"),
            ["--time-column 1: the input has no column besides the times"],
        ),
    ],
)
def test_time_column_refusals_name_the_option(tmp_path, capsys, rows, argv, fragments):
    src, out = tmp_path / "in.csv", tmp_path / "out.csv"
    write_csv(src, ["t", "f"][: len(rows[0])], rows)
    code, _, err = run(capsys, "integral", src, "-o", out, "--order", "0.5", *argv)
    assert_clean_error(code, err, *fragments)
    assert not out.exists()


def test_time_column_grunwald_on_non_uniform_times_is_refused(tmp_path, capsys):
    src, out = tmp_path / "in.csv", tmp_path / "out.csv"
    write_csv(src, ["t", "f"], [[0.0, 1.0], [0.1, 2.0], [0.3, 1.0]])
    code, _, err = run(capsys, "derivative", src, "-o", out, "--order", "0.5", "--time-column", "1")
    assert_clean_error(code, err, "--rule grunwald with --time-column 1", "not uniform", "--rule l1")
    assert not out.exists()


def test_time_column_npy_non_finite_time(tmp_path, capsys):
    src = tmp_path / "in.npy"
    np.save(src, np.array([[0.0, 1.0], [np.nan, 2.0]]))
    code, _, err = run(
        capsys, "integral", src, "-o", tmp_path / "o.npy", "--order", "0.5", "--time-column", "1"
    )
    assert_clean_error(code, err, "--time-column 1", "time [1, 0] is nan")


def test_time_column_help_states_the_tolerance(capsys):
    code, out, _ = run(capsys, "integral", "--help")
    assert code == 0
    text = flat(out)
    assert "--time-tol (default 1e-09)" in text
    assert "the uniform engines" in text


def test_control_help_keeps_the_live_time_column(capsys):
    # the controller's --time-column is still the --live one (copied times)
    code, out, _ = run(capsys, "control", "--help")
    assert code == 0
    text = flat(out)
    assert "--live: column N (1-based) holds the time" in text
    assert "the uniform engines" not in text
