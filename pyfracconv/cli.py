"""The command line program ``pyfracconv``.

Subcommands::

    pyfracconv integral   INPUT -o OUTPUT --order A --step H [--rule R] [--columns N,...]
    pyfracconv derivative INPUT -o OUTPUT --order A --step H [--rule R] [--columns N,...]
    pyfracconv demo

INPUT is a CSV file (comma separated, one optional header row of column
names, every column a signal sampled at t_k = k*step) or a ``.npy`` file
(1-D, or 2-D with time along axis 0). OUTPUT is chosen by its extension:
``.csv``, ``.npy``, or ``-`` for CSV on standard output.

Exit status: 0 on success, 2 for bad arguments or bad input (one message
on standard error, no traceback), 1 when ``demo`` finds a failed check.
"""

from __future__ import annotations

import argparse
import csv
import math
import os
import sys
import textwrap
from array import array

import numpy as np

from . import __version__
from ._core import (
    DERIVATIVE_RULES,
    INTEGRAL_RULES,
    check_order,
    check_rule,
    check_step,
    derivative,
    integral,
    show,
)
from ._errors import FracconvError

__all__ = ["main", "CAUTION"]

PROG = "pyfracconv"

CAUTION = """\
CAUTION - numbers from this program may end up driving real machinery.
Results of fractional-order operators used in controllers must be
validated on the actual plant before use, with actuator limits, rate
limits and a safe stop (emergency stop) in place independent of this
software. Check the discretisation (rule, step, order) against your own
requirements. Defer to local codes, standards and licensed engineering
practice. The software comes with no warranty (BSD-3-Clause license).
"""

_INPUT_HELP = """\
input:
  INPUT is a CSV file (comma separated) or a .npy file (by extension;
  '-' reads CSV from standard input). Every column is one signal sampled
  at t_k = k*step, k = 0, 1, ...; the first data row is t = 0. A CSV file
  may start with one header row of column names, which is kept in the
  output; if the first row is all numbers it is read as data and the
  output has no header. A .npy file holds a 1-D array (one signal) or a
  2-D array (time along axis 0, one signal per column).

output:
  OUTPUT ending in .csv or .npy is written in that format; '-' writes CSV
  to standard output. CSV numbers are written at full precision (Python
  repr: the shortest text that reads back to the same double).

exit status:
  0 success, 2 bad arguments or bad input (message on standard error).
"""


class CliError(Exception):
    """An error the user can fix: printed as one line, exit status 2."""


# ---------------------------------------------------------------- numbers

def _to_float(text):
    """float(text) for CSV fields and option values.

    Python's float() also accepts digit-group underscores ('1_000'); a data
    file with those is more likely garbled than meant, so they are refused.
    """
    if "_" in text:
        raise ValueError(text)
    return float(text)


def _real_option(name, text, checker, *extra):
    """Parse an option value and validate it with the library's checker,
    so that the messages are the library's own (they name the argument)."""
    try:
        value = _to_float(text)
    except ValueError:
        value = text  # the library's checker names it as not a real number
    return checker(value, *extra)


def _is_blank(row):
    return all(not field.strip() for field in row)


# ---------------------------------------------------------------- reading

def _open_text(path, label):
    if path == "-":
        # Re-wrap stdin so that a BOM is dropped and newlines are left to csv.
        return open(sys.stdin.fileno(), "r", encoding="utf-8-sig", newline="",
                    closefd=False)
    try:
        return open(path, "r", encoding="utf-8-sig", newline="")
    except OSError as exc:
        raise CliError(f"cannot read input {label!r}: {exc.strerror or exc}") from None


def _select(label, header, columns):
    """Indices of the requested column names in ``header``."""
    names = [c.strip() for c in columns.split(",")]
    if any(not n for n in names):
        raise CliError(f"--columns={columns!r}: empty column name")
    stripped = [h.strip() for h in header]
    available = ", ".join(repr(h) for h in stripped)
    idx = []
    for name in names:
        hits = [j for j, h in enumerate(stripped) if h == name]
        if not hits:
            raise CliError(
                f"{label}: no column {name!r}; available columns: {available}"
            )
        if len(hits) > 1:
            raise CliError(
                f"{label}: column name {name!r} appears {len(hits)} times in the "
                f"header; cannot select it by name"
            )
        idx.append(hits[0])
    return idx


def read_csv(path, columns=None):
    """Read a CSV file of signals.

    Returns ``(data, names)``: ``data`` a float64 array of shape
    (samples, columns), ``names`` the header fields of the selected columns
    (as written in the file) or None when the file has no header row.
    """
    label = "<stdin>" if path == "-" else path
    fh = _open_text(path, label)
    try:
        reader = csv.reader(fh)
        try:
            return _parse_csv(reader, label, columns)
        except csv.Error as exc:
            raise CliError(f"{label} line {reader.line_num}: {exc}") from None
        except UnicodeDecodeError as exc:
            raise CliError(
                f"{label}: not readable as UTF-8 text ({exc.reason}); is it a "
                f"CSV file?"
            ) from None
        except OSError as exc:
            raise CliError(f"cannot read input {label!r}: {exc.strerror or exc}") from None
    finally:
        if fh is not None:
            fh.close()


def _parse_csv(reader, label, columns):
    first = None
    for row in reader:
        if not _is_blank(row):
            first = row
            break
    if first is None:
        raise CliError(f"{label}: file is empty (no rows)")
    first_line = reader.line_num
    ncol = len(first)

    def numeric(field):
        try:
            _to_float(field)
        except ValueError:
            return False
        return True

    has_header = not all(numeric(f) for f in first)
    if has_header:
        header = first
        shape_from = "the header"
        idx = _select(label, header, columns) if columns is not None else list(range(ncol))
        names = [header[j] for j in idx]
        colname = [repr(h.strip()) for h in header]
        pending = []
    else:
        if columns is not None:
            raise CliError(
                f"--columns: {label} has no header row (its first row is all "
                f"numbers), so its columns have no names to select by"
            )
        shape_from = f"line {first_line}"
        idx = list(range(ncol))
        names = None
        colname = [str(j + 1) for j in range(ncol)]
        pending = [(first_line, first)]

    values = array("d")
    nrows = 0

    def diagnose(line, row):
        """The slow path: say exactly what is wrong with a row (or return
        False for a row that is only blank fields, which is skipped)."""
        if _is_blank(row):
            return False
        if len(row) != ncol:
            raise CliError(
                f"{label} line {line}: {len(row)} field(s), but {shape_from} "
                f"has {ncol}"
            )
        for j in idx:
            text = row[j]
            try:
                v = _to_float(text)
            except ValueError:
                raise CliError(
                    f"{label} line {line}, column {colname[j]}: {text!r} is not "
                    f"a number"
                ) from None
            if not math.isfinite(v):
                raise CliError(
                    f"{label} line {line}, column {colname[j]}: {text!r} is not "
                    f"finite (NaN and infinite samples cannot be processed)"
                )
        return True

    def take(line, row):
        # Fast path for a good row; anything unusual goes to diagnose().
        if len(row) == ncol:
            try:
                vals = [float(row[j]) for j in idx]
            except ValueError:
                vals = None
            if (vals is not None and math.isfinite(sum(vals))
                    and "_" not in "".join([row[j] for j in idx])):
                values.extend(vals)
                return True
        if not diagnose(line, row):
            return False
        vals = [float(row[j]) for j in idx]  # finite, but their sum overflowed
        values.extend(vals)
        return True

    for line, row in pending:
        nrows += take(line, row)
    for row in reader:
        if row:
            nrows += take(reader.line_num, row)
    if nrows == 0:
        raise CliError(f"{label}: no data rows after the header (line {first_line})")
    data = np.frombuffer(values, dtype=np.float64).reshape(nrows, len(idx))
    return data, names


def read_npy(path, columns=None):
    """Read a .npy file of signals: ``(data, None)`` with data 1-D or 2-D."""
    label = path
    if columns is not None:
        raise CliError(
            f"--columns: {label} is a .npy file, whose columns have no names to "
            f"select by (only CSV files with a header row have them)"
        )
    try:
        with open(path, "rb") as fh:
            if os.fstat(fh.fileno()).st_size == 0:
                raise CliError(f"{label}: file is empty")
            arr = np.load(fh, allow_pickle=False)
    except CliError:
        raise
    except OSError as exc:
        if getattr(exc, "strerror", None):
            raise CliError(f"cannot read input {label!r}: {exc.strerror}") from None
        raise CliError(f"{label}: not a readable .npy file ({exc})") from None
    except (ValueError, EOFError) as exc:
        raise CliError(f"{label}: not a readable .npy file ({exc})") from None
    if not isinstance(arr, np.ndarray):  # e.g. an .npz archive renamed
        raise CliError(f"{label}: not a .npy array file")
    if arr.dtype.kind not in "iuf":
        raise CliError(
            f"{label}: holds values of dtype {arr.dtype}; expected real numbers "
            f"(integer or floating point)"
        )
    if arr.ndim not in (1, 2):
        raise CliError(
            f"{label}: array of shape {arr.shape}; expected 1-D (one signal) or "
            f"2-D (time along axis 0, one signal per column)"
        )
    if arr.shape[0] == 0:
        raise CliError(f"{label}: array of shape {arr.shape} holds no samples")
    if arr.ndim == 2 and arr.shape[1] == 0:
        raise CliError(f"{label}: array of shape {arr.shape} holds no columns")
    data = arr.astype(np.float64)
    bad = np.argwhere(~np.isfinite(data))
    if len(bad):
        where = tuple(int(i) for i in bad[0])
        text = ", ".join(str(i) for i in where)
        raise CliError(
            f"{label}: element [{text}] is {show(data[where])}, not finite (NaN and "
            f"infinite samples cannot be processed)"
        )
    return data, None


def _is_npy(path):
    return path != "-" and path.lower().endswith(".npy")


def _output_kind(path):
    if path == "-":
        return "stdout"
    low = path.lower()
    if low.endswith(".csv"):
        return "csv"
    if low.endswith(".npy"):
        return "npy"
    raise CliError(
        f"output {path!r}: unknown extension; use a name ending in .csv or .npy, "
        f"or '-' for CSV on standard output"
    )


# ---------------------------------------------------------------- writing

def _write_csv(fh, result, names):
    if names is not None:
        csv.writer(fh, lineterminator="\n").writerow(names)
    flat = result.reshape(result.shape[0], -1)
    chunk = 8192
    for start in range(0, flat.shape[0], chunk):
        rows = flat[start:start + chunk].tolist()  # Python floats: repr is exact
        fh.write("\n".join([",".join(map(repr, row)) for row in rows]))
        fh.write("\n")


def write_output(path, result, names):
    kind = _output_kind(path)
    if kind == "stdout":
        _write_csv(sys.stdout, result, names)
        sys.stdout.flush()
        return
    try:
        if kind == "npy":
            with open(path, "wb") as fh:
                np.save(fh, result, allow_pickle=False)
        else:
            with open(path, "w", encoding="utf-8", newline="") as fh:
                _write_csv(fh, result, names)
    except OSError as exc:
        raise CliError(f"cannot write output {path!r}: {exc.strerror or exc}") from None


# ---------------------------------------------------------------- commands

def _run_operator(args):
    kind = args.command
    allowed = INTEGRAL_RULES if kind == "integral" else DERIVATIVE_RULES
    # Validate arguments first (the library's checkers and messages), and
    # the output name, before reading any data.
    rule = args.rule
    check_rule(rule, allowed)
    order = _real_option("order", args.order, check_order, rule)
    step = _real_option("step", args.step, check_step)
    _output_kind(args.output)

    reader = read_npy if _is_npy(args.input) else read_csv
    data, names = reader(args.input, args.columns)
    op = integral if kind == "integral" else derivative
    result = op(data, order, step, rule=rule, axis=0)
    write_output(args.output, result, names)
    return 0


def _run_demo(args):
    from . import demo

    return demo.run(sys.stdout)


def _wrap(text):
    return textwrap.fill(" ".join(text.split()), width=76, break_on_hyphens=False)


def _add_operator(sub, name, rules, default, what, description):
    p = sub.add_parser(
        name,
        help=what,
        description=_wrap(description),
        epilog=_INPUT_HELP + "\n" + CAUTION,
        formatter_class=argparse.RawDescriptionHelpFormatter,
    )
    p.add_argument("input", metavar="INPUT",
                   help="CSV or .npy file of signals ('-': CSV on standard input)")
    p.add_argument("-o", "--output", metavar="OUTPUT", required=True,
                   help="output file, .csv or .npy ('-': CSV on standard output)")
    p.add_argument("--order", metavar="A", required=True,
                   help="order of the operator, 0 < A <= 10"
                        + (" (rule l1: 0 < A < 1)" if name == "derivative" else ""))
    p.add_argument("--step", metavar="H", required=True,
                   help="sampling step h > 0 (t_k = k*h)")
    p.add_argument("--rule", metavar="RULE", default=default,
                   help=f"{' or '.join(rules)} (default {default})")
    p.add_argument("--columns", metavar="NAME,NAME...",
                   help="process only these CSV columns, by header name, in this order")
    p.set_defaults(func=_run_operator)
    return p


def build_parser():
    parser = argparse.ArgumentParser(
        prog=PROG,
        description=_wrap(
            "Fractional integrals and derivatives of sampled signals "
            "(Riemann-Liouville integral: product rectangle and trapezoidal "
            "rules; derivatives: Grunwald-Letnikov and the L1 scheme for "
            "Caputo). Run 'pyfracconv COMMAND --help' for each command."
        ),
        epilog=CAUTION,
        formatter_class=argparse.RawDescriptionHelpFormatter,
    )
    parser.add_argument("--version", action="version", version=f"{PROG} {__version__}")
    sub = parser.add_subparsers(dest="command", metavar="COMMAND")
    _add_operator(
        sub, "integral", INTEGRAL_RULES, "rectangle",
        "Riemann-Liouville fractional integral",
        "Riemann-Liouville fractional integral of order A, from t = 0, of every "
        "column of INPUT, written to OUTPUT. Rules: rectangle (product "
        "rectangle rule, left end points, first order) or trapezoid (product "
        "trapezoidal rule, second order for smooth signals).")
    _add_operator(
        sub, "derivative", DERIVATIVE_RULES, "grunwald",
        "fractional derivative (grunwald: Riemann-Liouville; l1: Caputo)",
        "Fractional derivative of order A, from t = 0, of every column of INPUT, "
        "written to OUTPUT. Rules: grunwald (Grunwald-Letnikov approximation of "
        "the Riemann-Liouville derivative, 0 < A <= 10, first order) or l1 (L1 "
        "scheme for the Caputo derivative, 0 < A < 1, order 2 - A).")
    d = sub.add_parser(
        "demo",
        help="run a built-in scenario with invented data and check it against closed forms",
        description=_wrap(
            "A built-in scenario with invented data (a viscoelastic damper test "
            "rig): half-order integrals and derivatives of a ramp-and-hold "
            "strain, checked against closed forms, plus the observed order of "
            "convergence of every rule. Exit status 0 if every check passes, "
            "1 otherwise."
        ),
        epilog=CAUTION,
        formatter_class=argparse.RawDescriptionHelpFormatter,
    )
    d.set_defaults(func=_run_demo)
    return parser


def main(argv=None):
    """Run the program; returns the exit status (0, 1 or 2)."""
    parser = build_parser()
    try:
        args = parser.parse_args(argv)
    except SystemExit as exc:  # --help, --version, or a usage error
        code = exc.code
        return code if isinstance(code, int) else (0 if code is None else 2)
    if args.command is None:
        parser.print_help(sys.stderr)
        return 2
    try:
        return args.func(args)
    except (CliError, FracconvError) as exc:
        print(f"{PROG}: error: {exc}", file=sys.stderr)
        return 2
    except MemoryError:
        print(f"{PROG}: error: out of memory", file=sys.stderr)
        return 2
    except BrokenPipeError:
        # The reader of our standard output went away (e.g. `| head`).
        try:
            sys.stdout = open(os.devnull, "w")
        except OSError:  # pragma: no cover
            pass
        return 1
    except KeyboardInterrupt:
        print(f"{PROG}: interrupted", file=sys.stderr)
        return 130


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
