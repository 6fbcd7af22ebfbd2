"""The command line program ``pyfracconv``.

Subcommands::

    pyfracconv integral   INPUT -o OUTPUT --order A (--step H | --time-column N)
                          [--rule R] [--columns N,...]
    pyfracconv derivative INPUT -o OUTPUT --order A (--step H | --time-column N)
                          [--rule R] [--columns N,...]
    pyfracconv control    INPUT -o OUTPUT --step H [--kp ..] [--live] ...
    pyfracconv chunked {integral,derivative} IN.npy -o OUT.npy --order A --step H
                          [--rule R] [--mode compressed|exact] [--tol T] [--horizon N]
                          [--chunk ROWS] [--progress]
    pyfracconv demo [--verify] [--out-dir DIR]
    pyfracconv flags [--cflags] [--libs] [--static]
    pyfracconv export-c --rule R --order A --step H [--tol T] [--horizon N]
                        [--precision single|double] [--prefix NAME] -o DIR
    pyfracconv export-controller --step H [--kp ..] [--tol T] [--horizon N]
                        [--precision single|double] [--prefix NAME] -o DIR

INPUT is a CSV file (comma separated, one optional header row of column
names, every column a signal sampled at t_k = k*step, or at the times of
the column ``--time-column N``) or a ``.npy`` file
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
import tempfile
import textwrap
from array import array

import numpy as np

from . import __version__
from ._core import (
    DERIVATIVE_RULES,
    INTEGRAL_RULES,
    RULES,
    c_flags,
    check_order,
    check_rule,
    check_step,
    check_workers,
    derivative,
    integral,
    show,
)
from ._checks import COMPRESSED_TOL_RANGE, compressed_text, order_range, range_text
from ._errors import ArgumentError, FracconvError, InputTypeError
from ._fracconv import lib
from .records import apply_npy, open_npy

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

CONTROL_CAUTION = """\
CONTROLLER SAFETY - a controller moves real machinery. Validate every
setting in simulation and then on the plant under supervision; keep
actuator limits and rate limits in the hardware as well; keep an
independent safe stop that does not depend on this software, its host or
its inputs. Past the horizon of its compressed memory the controller keeps
running (stopping mid-run is the greater hazard) and says so on stderr.
"""

_INPUT_HELP = """\
input:
  INPUT is a CSV file (comma separated) or a .npy file (by extension;
  '-' reads CSV from standard input). Every column is one signal sampled
  at t_k = k*step, k = 0, 1, ...; the first data row is t = 0. With
  --time-column N (without --live) column N holds the sample times
  instead: the operator runs from the first time on those times (the
  uniform engines when they are uniform within --time-tol), and the
  times are copied to the output's first column. A CSV file
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


#: Relative tolerance of the uniformity test of --time-column (batch): the
#: times are taken as uniform when every step is within TIME_TOL of the
#: mean step (decimal times written at full precision pass at any length
#: a CSV file holds; float32 times do not).
TIME_TOL = 1e-9


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
    try:
        return checker(value, *extra)
    except FracconvError as exc:
        hint = {
            "order": "a positive number such as 0.5",
            "step": "the sampling period in seconds, a positive number such as 0.001",
        }.get(name, "a number")
        what = "not a number" if isinstance(value, str) else "out of range"
        raise CliError(f"--{name} {text}: {what}; expected {hint} ({exc})") from None


def _is_blank(row):
    return all(not field.strip() for field in row)


# ---------------------------------------------------------------- reading


def _open_text(path, label):
    if path == "-":
        # Re-wrap stdin so that a BOM is dropped and newlines are left to csv.
        return open(sys.stdin.fileno(), "r", encoding="utf-8-sig", newline="", closefd=False)
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
            raise CliError(f"{label}: no column {name!r}; available columns: {available}")
        if len(hits) > 1:
            raise CliError(
                f"{label}: column name {name!r} appears {len(hits)} times in the "
                f"header; cannot select it by name"
            )
        idx.append(hits[0])
    return idx


def _uncommented(fh):
    """Lines of fh with comment lines ('#' first, after blanks) made blank,
    so that the csv reader skips them and line numbers stay right."""
    for line in fh:
        yield "\n" if line.lstrip().startswith("#") else line


def read_csv(path, columns=None, delimiter=",", time_index=None):
    """Read a CSV file of signals.

    Returns ``(data, names)``: ``data`` a float64 array of shape
    (samples, columns), ``names`` the header fields of the selected columns
    (as written in the file) or None when the file has no header row.
    """
    label = "<stdin>" if path == "-" else path
    fh = _open_text(path, label)
    try:
        reader = csv.reader(_uncommented(fh), delimiter=delimiter)
        try:
            return _parse_csv(reader, label, columns, delimiter, time_index)
        except csv.Error as exc:
            raise CliError(f"{label} line {reader.line_num}: {exc}") from None
        except UnicodeDecodeError as exc:
            raise CliError(f"{label}: not readable as UTF-8 text ({exc.reason}); is it a CSV file?") from None
        except OSError as exc:
            raise CliError(f"cannot read input {label!r}: {exc.strerror or exc}") from None
    finally:
        if fh is not None:
            fh.close()


def _delimiter_hint(text, delimiter):
    for d, name in ((";", "';'"), ("\t", "tab"), (",", "','"), (" ", "space")):
        if d != delimiter and d in text.strip():
            arg = "$'\\t'" if d == "\t" else repr(d)
            return f" (it contains a {name}: if fields are separated by {name}, pass --delimiter {arg})"
    return ""


def _parse_csv(reader, label, columns, delimiter=",", time_index=None):
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
            raise CliError(f"{label} line {line}: {len(row)} field(s), but {shape_from} has {ncol}")
        for j in idx:
            text = row[j]
            try:
                v = _to_float(text)
            except ValueError:
                raise CliError(
                    f"{label} line {line}, column {colname[j]}: {text!r} is not "
                    f"a number{_delimiter_hint(text, delimiter)}"
                ) from None
            if not math.isfinite(v):
                if j == time_index:
                    raise CliError(
                        f"--time-column {j + 1}: {label} line {line}: time {text!r} "
                        "is not finite (the times must be finite)"
                    )
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
            if vals is not None and math.isfinite(sum(vals)) and "_" not in "".join([row[j] for j in idx]):
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


def read_npy(path, columns=None, time_index=None):
    """Read a .npy file of signals: ``(data, None)`` with data 1-D or 2-D."""
    label = path
    if columns is not None:
        raise CliError(
            f"--columns: {label} is a .npy file, whose columns have no names to "
            f"select by (only CSV files with a header row have them)"
        )
    try:
        arr = open_npy(path, label, mmap_mode=None)
    except (ArgumentError, InputTypeError) as exc:
        raise CliError(str(exc)) from None
    data = arr.astype(np.float64)
    bad = np.argwhere(~np.isfinite(data))
    if len(bad):
        where = tuple(int(i) for i in bad[0])
        text = ", ".join(str(i) for i in where)
        if data.ndim == 2 and where[1] == time_index:
            raise CliError(
                f"--time-column {time_index + 1}: {label}: time [{text}] is "
                f"{show(data[where])}, not finite (the times must be finite)"
            )
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
        rows = flat[start : start + chunk].tolist()  # Python floats: repr is exact
        fh.write("\n".join([",".join(map(repr, row)) for row in rows]))
        fh.write("\n")


def check_not_input(inp, out):
    """Refuse an output that is the input file (it would be destroyed)."""
    if inp == "-" or out == "-":
        return
    same = os.path.abspath(inp) == os.path.abspath(out)
    if not same and os.path.exists(out) and os.path.exists(inp):
        try:
            same = os.path.samefile(inp, out)
        except OSError:
            same = False
    if same:
        raise CliError(
            f"output {out!r} is the input file; refusing to overwrite the input (choose another output name)"
        )


def write_output(path, result, names):
    """Write the result; a file is written to a temporary file in the same
    directory and renamed over the target (os.replace), so a failed write
    leaves any previous output intact."""
    kind = _output_kind(path)
    if kind == "stdout":
        _write_csv(sys.stdout, result, names)
        sys.stdout.flush()
        return
    tmp = None
    try:
        d = os.path.dirname(os.path.abspath(path))
        fd, tmp = tempfile.mkstemp(prefix=".pyfracconv-", suffix=".tmp", dir=d)
        if kind == "npy":
            with os.fdopen(fd, "wb") as fh:
                np.save(fh, result, allow_pickle=False)
        else:
            with os.fdopen(fd, "w", encoding="utf-8", newline="") as fh:
                _write_csv(fh, result, names)
        os.replace(tmp, path)
        tmp = None
    except OSError as exc:
        raise CliError(f"cannot write output {path!r}: {exc.strerror or exc}") from None
    finally:
        if tmp is not None:
            try:
                os.unlink(tmp)
            except OSError:
                pass


# ---------------------------------------------------------------- commands


def _live_loop(args, ncols_wanted, process, header_out):
    """Read standard input line by line; for each data line write one output
    line at once, flushed. ``process(values) -> list of floats``.
    Comment lines ('#') and blank lines are passed over; a first line that
    is not all numbers is a header (``header_out(names)`` gives the output
    header). --time-column: that column is not processed but copied to the
    output's first column; with --time-tol, its increments are checked
    against --step and a non-uniform increment is reported on stderr."""
    out = sys.stdout
    delim = args.delimiter
    tcol = args.time_column
    step = args.step_value
    prev_t, bad_dt, nline, first = None, 0, 0, True
    readline = sys.stdin.readline
    while True:
        line = readline()
        if not line:
            break
        nline += 1
        if not line.strip() or line.lstrip().startswith("#"):
            continue
        fields = next(csv.reader([line], delimiter=delim))
        try:
            vals = [_to_float(f) for f in fields]
        except ValueError:
            vals = None
        if vals is None:
            if first:
                names = [f.strip() for f in fields]
                if tcol is not None:
                    if not 1 <= tcol <= len(names):
                        raise CliError(f"--time-column {tcol}: the input has {len(names)} columns")
                    tname = names.pop(tcol - 1)
                    out.write(delim.join([tname] + header_out(names)) + "\n")
                else:
                    out.write(delim.join(header_out(names)) + "\n")
                out.flush()
                first = False
                continue
            bad = next(f for f in fields if not _is_number(f))
            raise CliError(f"<stdin> line {nline}: {bad!r} is not a number{_delimiter_hint(bad, delim)}")
        first = False
        if not all(math.isfinite(v) for v in vals):
            raise CliError(f"<stdin> line {nline}: NaN or infinite value")
        t = None
        if tcol is not None:
            if not 1 <= tcol <= len(vals):
                raise CliError(f"--time-column {tcol}: line {nline} has {len(vals)} columns")
            t = vals.pop(tcol - 1)
            if args.time_tol is not None and prev_t is not None:
                dt = t - prev_t
                if abs(dt - step) > args.time_tol * step:
                    bad_dt += 1
                    if bad_dt <= 5:
                        print(
                            f"{PROG}: warning: line {nline}: time step {dt!r} "
                            f"differs from --step {step!r} by more than "
                            f"--time-tol {args.time_tol!r} of it; outputs assume "
                            "uniform sampling",
                            file=sys.stderr,
                            flush=True,
                        )
            prev_t = t
        if ncols_wanted is not None and len(vals) != ncols_wanted:
            raise CliError(f"<stdin> line {nline}: {len(vals)} data columns, expected {ncols_wanted}")
        res = process(vals)
        row = ([repr(t)] if t is not None else []) + [repr(float(v)) for v in res]
        out.write(delim.join(row) + "\n")
        out.flush()
    if bad_dt:
        print(
            f"{PROG}: warning: {bad_dt} time step(s) outside --time-tol in all", file=sys.stderr, flush=True
        )
    return 0


def _is_number(text):
    try:
        _to_float(text)
    except ValueError:
        return False
    return True


def _run_operator(args):
    kind = args.command
    allowed = INTEGRAL_RULES if kind == "integral" else DERIVATIVE_RULES
    # Validate arguments first (the library's checkers and messages), and
    # the output name, before reading any data.
    rule = args.rule
    check_rule(rule, allowed)
    order = _real_option("order", args.order, check_order, rule)
    grid = args.time_column is not None and not args.live
    if grid:
        if args.step is not None:
            raise CliError(
                f"--step {args.step} with --time-column {args.time_column}: "
                "the column's times are the grid; give one of the two "
                "(--step with --time-column only with --live)"
            )
        step = None
        if args.time_column < 1:
            raise CliError(f"--time-column {args.time_column}: must be >= 1 (columns are counted from 1)")
        ttol = TIME_TOL if args.time_tol is None else args.time_tol
        if not (math.isfinite(ttol) and 0.0 <= ttol < 0.5):
            raise CliError(f"--time-tol {args.time_tol!r}: must be in [0, 0.5)")
    else:
        if args.step is None:
            raise CliError(
                "--step: required (the sampling step), or --time-column N "
                "without --live to take the times from column N"
            )
        step = _real_option("step", args.step, check_step)
    _output_kind(args.output)
    check_not_input(args.input, args.output)
    workers = None
    if args.workers is not None:
        try:
            count = int(args.workers)
        except ValueError:
            raise CliError(
                f"--workers {args.workers}: not an integer; expected a "
                "thread count such as 2, or -1 for every CPU"
            ) from None
        try:
            workers = check_workers(count)
        except FracconvError as exc:
            raise CliError(f"--workers {args.workers}: out of range ({exc})") from None
    if grid:
        return _run_operator_on_times(args, kind, rule, order, ttol, workers)

    if args.live:
        if workers is not None:
            raise CliError("--workers is not available with --live (one line at a time)")
        if args.input != "-" or args.output != "-":
            raise CliError("--live reads standard input and writes standard output: use INPUT '-' and -o -")
        if args.columns is not None:
            raise CliError(
                "--columns is not available with --live (every data "
                "column is processed; --time-column excepted)"
            )
        from .stream import Stream

        make = Stream.integral if kind == "integral" else Stream.derivative
        state = {}
        args.step_value = step

        def process(vals):
            s = state.get("s")
            if s is None:
                s = state["s"] = make(order, step, rule=rule, channels=len(vals))
                state["n"] = len(vals)
            elif len(vals) != state["n"]:
                raise CliError(f"a line has {len(vals)} data columns, the first had {state['n']}")
            return s.push(np.array(vals))

        return _live_loop(args, None, process, lambda names: names)

    reader = read_npy if _is_npy(args.input) else read_csv
    if reader is read_csv:
        data, names = reader(args.input, args.columns, args.delimiter)
    else:
        data, names = reader(args.input, args.columns)
    op = integral if kind == "integral" else derivative
    result = op(data, order, step, rule=rule, axis=0, workers=workers)
    write_output(args.output, result, names)
    return 0


def _uniform_step(times, tol):
    """The step of times that are uniform within tol (relative to the mean
    step), else None."""
    n = times.size - 1
    if n < 1:
        return None
    h = (float(times[-1]) - float(times[0])) / n
    if not (math.isfinite(h) and h > 0.0):
        return None
    dev = float(np.max(np.abs(np.diff(times) - h)))
    return h if dev <= tol * h else None


def _run_operator_on_times(args, kind, rule, order, ttol, workers=None):
    """integral/derivative with --time-column (batch): the column's times
    are the grid; uniform times go to the uniform engines."""
    col = args.time_column
    opt = f"--time-column {col}"
    npy = _is_npy(args.input)
    if npy:
        data, _ = read_npy(args.input, args.columns, time_index=col - 1)
        if data.ndim != 2 or not 1 <= col <= data.shape[1]:
            cols = 1 if data.ndim == 1 else data.shape[1]
            raise CliError(f"{opt}: {args.input} has {cols} column(s)")
        names = None
        tname = None
        keep = [j for j in range(data.shape[1]) if j != col - 1]
    else:
        data, header = read_csv(args.input, None, args.delimiter, time_index=col - 1)
        if not 1 <= col <= data.shape[1]:
            raise CliError(f"{opt}: the input has {data.shape[1]} column(s)")
        label = "<stdin>" if args.input == "-" else args.input
        if args.columns is not None:
            if header is None:
                raise CliError(
                    f"--columns: {label} has no header row (its first row is all "
                    f"numbers), so its columns have no names to select by"
                )
            keep = _select(label, header, args.columns)
            if col - 1 in keep:
                raise CliError(
                    f"--columns {args.columns}: names the time column "
                    f"({opt}, {header[col - 1].strip()!r}), which is the "
                    "grid, not a signal"
                )
        else:
            keep = [j for j in range(data.shape[1]) if j != col - 1]
        names = None if header is None else [header[j] for j in keep]
        tname = None if header is None else header[col - 1]
    times = np.ascontiguousarray(data[:, col - 1])
    dt = np.diff(times)
    bad = np.flatnonzero(~(dt > 0.0))
    if bad.size:
        i = int(bad[0])
        raise CliError(
            f"{opt}: the times must be strictly increasing: data row {i + 2} "
            f"has time {float(times[i + 1])!r} after {float(times[i])!r} in "
            f"data row {i + 1} (rows counted from 1, header excluded)"
        )
    x = np.ascontiguousarray(data[:, keep])
    if x.shape[1] == 0:
        raise CliError(f"{opt}: the input has no column besides the times")
    op = integral if kind == "integral" else derivative
    h = _uniform_step(times, ttol)
    if h is not None:
        result = op(x, order, h, rule=rule, axis=0, workers=workers)
    else:
        if rule == "grunwald":
            raise CliError(
                f"--rule grunwald with {opt}: the times are not uniform (within "
                f"--time-tol {ttol:g}) and the Grunwald-Letnikov rule has no "
                "standard form on a non-uniform grid; use --rule l1 (Caputo, "
                "0 < A < 1)"
            )
        result = op(x, order, rule=rule, axis=0, t=times, workers=workers)
    out = np.column_stack([times, result])
    write_output(args.output, out, None if names is None else [tname] + names)
    return 0


def _controller_from_args(args):
    from .control import Controller

    step = _real_option("step", args.step, check_step)

    def num(name, text):
        try:
            return _to_float(text)
        except ValueError:
            raise CliError(f"--{name} {text}: not a number") from None

    kw = dict(
        integral_order=num("integral-order", args.integral_order),
        derivative_order=num("derivative-order", args.derivative_order),
        step=step,
        output_limits=(num("out-min", args.out_min), num("out-max", args.out_max)),
        rate_limit=num("rate-limit", args.rate_limit),
        setpoint_weight=num("setpoint-weight", args.setpoint_weight),
        derivative_weight=num("derivative-weight", args.derivative_weight),
        derivative_filter=num("derivative-filter", args.derivative_filter),
        anti_windup=not args.no_anti_windup,
        memory=args.memory,
    )
    if args.integral_rule:
        kw["integral_rule"] = args.integral_rule
    kw["derivative_rule"] = args.derivative_rule
    for name in ("tol", "horizon"):
        if getattr(args, name, None) is not None:
            kw[name] = num(name, getattr(args, name))
    try:
        return Controller(num("kp", args.kp), num("ki", args.ki), num("kd", args.kd), **kw), step
    except FracconvError as exc:
        raise CliError(f"controller settings: {exc}") from None


def _run_control(args):
    ctl, step = _controller_from_args(args)
    _output_kind(args.output)
    check_not_input(args.input, args.output)
    if args.live:
        if args.input != "-" or args.output != "-":
            raise CliError("--live reads standard input and writes standard output: use INPUT '-' and -o -")
        if args.columns is not None:
            raise CliError(
                "--columns is not available with --live (the data "
                "columns are setpoint, measurement; --time-column "
                "excepted)"
            )
        args.step_value = step
        upd = ctl.update

        def process(vals):
            return [upd(vals[0], vals[1])]

        return _live_loop(args, 2, process, lambda names: ["output"])
    if _is_npy(args.input):
        data, names = read_npy(args.input)
    else:
        data, names = read_csv(args.input, args.columns, args.delimiter)
    if data.ndim != 2 or data.shape[1] != 2:
        raise CliError(
            f"{args.input}: expected two columns, setpoint and "
            "measurement (or pick them with --columns SP,PV)"
        )
    u = ctl.update_block(data[:, 0], data[:, 1])
    write_output(args.output, u.reshape(-1, 1), ["output"] if names else None)
    if ctl.past_horizon:
        print(
            f"{PROG}: warning: the controller ran past the horizon of its "
            "compressed memory (it kept running; tolerance no longer promised)",
            file=sys.stderr,
        )
    return 0


def _run_chunked(args):
    kind = args.kind
    allowed = INTEGRAL_RULES if kind == "integral" else DERIVATIVE_RULES
    rule = args.rule if args.rule is not None else allowed[0]
    check_rule(rule, allowed)
    order = _real_option("order", args.order, check_order, rule)
    step = _real_option("step", args.step, check_step)
    for name, path in (("INPUT", args.input), ("-o", args.output)):
        if not _is_npy(path):
            raise CliError(
                f"{name} {path!r}: chunked reads and writes .npy files only (a name ending in .npy)"
            )
    check_not_input(args.input, args.output)

    def num(name, text):
        if text is None:
            return None
        try:
            return _to_float(text)
        except ValueError:
            raise CliError(f"--{name} {text}: not a number") from None

    tol = num("tol", args.tol)
    horizon = num("horizon", args.horizon)
    kw = {} if tol is None else {"tol": tol}
    try:
        apply_npy(
            args.input,
            args.output,
            kind,
            order,
            step,
            rule=rule,
            mode=args.mode,
            horizon=horizon,
            chunk=args.chunk,
            progress=args.progress,
            **kw,
        )
    except ImportError as exc:  # --progress without tqdm
        raise CliError(str(exc)) from None
    except OSError as exc:
        text = str(exc.strerror or exc)
        if "out_path=" not in text:
            text = f"cannot write output {args.output!r}: {text}; no output was written"
        raise CliError(text) from None
    return 0


def _run_demo(args):
    if args.verify:
        from . import demo

        return demo.run(sys.stdout)
    from . import demo_loop

    return demo_loop.run(sys.stdout, out_dir=args.out_dir)


def _run_flags(args):
    both = not (args.cflags or args.libs)
    try:
        words = c_flags(cflags=args.cflags or both, libs=args.libs or both, static=args.static)
    except FileNotFoundError as exc:
        raise CliError(str(exc)) from None
    print(" ".join(words))
    return 0


def _run_export(args):
    from .export import export_c

    order = _real_option("order", args.order, check_order, args.rule)
    step = _real_option("step", args.step, check_step)

    def number(text):
        try:
            return _to_float(text)
        except ValueError:
            return text  # the library's check names the argument and the value

    tol, horizon = number(args.tol), number(args.horizon)
    if not os.path.isdir(args.output):
        raise CliError(f"-o {args.output}: not an existing directory")
    op = export_c(
        args.rule, order, step, tol=tol, horizon=horizon, precision=args.precision, prefix=args.prefix
    )
    paths = op.write(args.output)
    info = op.info
    err = (
        f"single-precision error measured {info['measured']:.3g}, stated bound "
        f"{info['stated']:.3g} of each output's error scale"
        if info["stated"] is not None
        else "double precision"
    )
    print(f"{PROG}: wrote {', '.join(paths)} ({info['terms']} exponential terms; {err})", file=sys.stderr)
    return 0


def _run_export_controller(args):
    from .export import export_controller_c

    if not os.path.isdir(args.output):
        raise CliError(f"-o {args.output}: not an existing directory")
    ctl, _ = _controller_from_args(args)
    try:
        ex = export_controller_c(ctl, precision=args.precision, prefix=args.prefix)
    except FracconvError as exc:
        raise CliError(f"export-controller: {exc}") from None
    paths = ex.write(args.output)
    info = ex.info
    print(
        f"{PROG}: wrote {', '.join(paths)} ({args.precision} precision; error against "
        f"the library's controller measured {info['measured']:.3g}, stated bound "
        f"{info['stated']:.3g} of the action scale)",
        file=sys.stderr,
    )
    print(
        f"{PROG}: CAUTION - the exported controller moves machinery: validate it on "
        "the plant, keep actuator and rate limits in the hardware and an independent "
        "safe stop; local codes and licensed practice take precedence (see "
        f"{args.prefix}.h)",
        file=sys.stderr,
    )
    return 0


def _wrap(text):
    return textwrap.fill(" ".join(text.split()), width=76, break_on_hyphens=False)


def _order_text(rule):
    """The orders a rule takes (batch and exact streams), from the C core's
    rule table, written with A for the order."""
    return range_text(order_range(rule, int(lib.FC_MODE_EXACT))).replace("order", "A")


def _add_order_step(p, order_help, step_required=True):
    """--order and --step, shared by the operator commands and chunked."""
    p.add_argument("--order", metavar="A", required=True, help=order_help)
    p.add_argument(
        "--step",
        metavar="H",
        required=step_required,
        help="sampling step h > 0 (t_k = k*h)"
        + ("" if step_required else "; required unless --time-column gives the times (without --live)"),
    )


def _add_controller_options(c):
    """The controller's settings (control, export-controller)."""
    c.add_argument("--kp", default="1", help="proportional gain (default 1)")
    c.add_argument("--ki", default="0", help="integral gain (default 0)")
    c.add_argument("--kd", default="0", help="derivative gain (default 0)")
    c.add_argument("--integral-order", default="1", help="lambda (default 1)")
    c.add_argument("--derivative-order", default="0.5", help="mu (default 0.5)")
    c.add_argument("--step", metavar="H", required=True, help="sampling period h > 0")
    c.add_argument("--out-min", default="-inf", help="lower output limit")
    c.add_argument("--out-max", default="inf", help="upper output limit")
    c.add_argument("--rate-limit", default="inf", help="largest output change per unit time (default none)")
    c.add_argument("--setpoint-weight", default="1", help="b (default 1)")
    c.add_argument("--derivative-weight", default="1", help="c (default 1; 0: derivative on the measurement)")
    c.add_argument(
        "--derivative-filter",
        default="0",
        help="filter time constant Tf of the derivative action (default 0: none)",
    )
    c.add_argument("--no-anti-windup", action="store_true", help="turn conditional integration off")
    c.add_argument("--integral-rule", choices=INTEGRAL_RULES)
    c.add_argument("--derivative-rule", choices=DERIVATIVE_RULES, default="grunwald")
    c.add_argument("--memory", choices=("compressed", "exact"), default="compressed")


def _add_operator(sub, name, rules, default, what, description):
    p = sub.add_parser(
        name,
        help=what,
        description=_wrap(description),
        epilog=_INPUT_HELP + "\n" + CAUTION,
        formatter_class=argparse.RawDescriptionHelpFormatter,
    )
    p.add_argument("input", metavar="INPUT", help="CSV or .npy file of signals ('-': CSV on standard input)")
    p.add_argument(
        "-o",
        "--output",
        metavar="OUTPUT",
        required=True,
        help="output file, .csv or .npy ('-': CSV on standard output)",
    )
    _add_order_step(
        p,
        "order of the operator (" + "; ".join(f"{r}: {_order_text(r)}" for r in rules) + ")",
        step_required=False,
    )
    p.add_argument(
        "--rule", metavar="RULE", default=default, help=f"{' or '.join(rules)} (default {default})"
    )
    p.add_argument(
        "--columns",
        metavar="NAME,NAME...",
        help="process only these CSV columns, by header name, in this order",
    )
    p.add_argument(
        "--workers",
        metavar="N",
        help="threads (SciPy's convention: 1 the default, -1 every CPU, "
        "-2 all but one); the output is the same bit for bit for "
        "every N; not with --live",
    )
    _add_io_options(p, grid_times=True)
    p.set_defaults(func=_run_operator)
    return p


def _add_io_options(p, grid_times=False):
    p.add_argument(
        "--delimiter",
        metavar="CHAR",
        default=",",
        help="field separator of the CSV input and output (default ','); "
        "lines starting with '#' are comments and are skipped",
    )
    p.add_argument(
        "--live",
        action="store_true",
        help="read standard input line by line and write each output "
        "line as soon as its input line has arrived, flushed "
        "(INPUT and OUTPUT must be '-'); for piping a data logger",
    )
    if not grid_times:
        p.add_argument(
            "--time-column",
            metavar="N",
            type=int,
            help="--live: column N (1-based) holds the time; it is not "
            "processed but copied to the output's first column",
        )
        p.add_argument(
            "--time-tol",
            metavar="REL",
            type=float,
            help="--live with --time-column: check that each time step "
            "equals --step within REL*step; report on stderr when not",
        )
        return
    p.add_argument(
        "--time-column",
        metavar="N",
        type=int,
        help="column N (1-based) holds the sample times; it is not "
        "processed but copied to the output's first column. "
        "Without --live the times are the grid (no --step): "
        "finite, strictly increasing; when every step equals "
        "(t_last - t_first)/(rows - 1) within --time-tol "
        f"(default {TIME_TOL:g}) of it the uniform engines run "
        "with that step, else the rules on the given times "
        "(rectangle, trapezoid, l1; grunwald needs uniform times). "
        "With --live: the times are copied and the step is --step",
    )
    p.add_argument(
        "--time-tol",
        metavar="REL",
        type=float,
        help="with --time-column: without --live, the relative "
        f"tolerance of the uniformity test (default {TIME_TOL:g}); "
        "with --live, check that each time step equals --step "
        "within REL*step and report on stderr when not",
    )


_CHUNKED_HELP = """\
input and output:
  IN.npy holds a 1-D array (one signal) or a 2-D array (time along axis 0,
  one signal per column) of real numbers sampled at t_k = k*step. It is
  memory-mapped and read chunk by chunk; OUT.npy (float64, the input's
  shape) is written memory-mapped to a temporary file in its folder and
  renamed into place when complete, so a failure leaves no partial output
  (and an older OUT.npy as it was). OUT.npy must not be the input.

memory:
  compressed (default): bounded whatever the length: 5-7 KB for one column
  and about 2 KB for each further one for the stream, three buffers of 8 * ROWS * columns bytes, and up to
  16 MiB resident of each mapped file. Outputs are within --tol of the
  exact ones (relative to the sum of the absolute terms) over --horizon
  samples (default: the record's length).
  {orders}
  exact: the exact stream keeps the whole history, about 70 bytes per
  sample and column (7 GB for 1e8 samples); refused when that exceeds the
  machine's memory.

exit status:
  0 success, 2 bad arguments, bad input or a failed write (message on
  standard error; no output written).
"""


def _add_chunked(sub):
    p = sub.add_parser(
        "chunked",
        help="a .npy record of any length, chunk by chunk, in bounded memory",
        description=_wrap(
            "Fractional integral (rules rectangle, trapezoid) or derivative "
            "(rules grunwald, l1) of a .npy record that may be larger than "
            "memory, pushed through a stream one chunk of time steps at a "
            "time: compressed (bounded memory, within a stated tolerance) or "
            "exact (the whole history in memory)."
        ),
        epilog=_CHUNKED_HELP.format(
            orders=textwrap.fill(f"Orders: {compressed_text()}.", 74, subsequent_indent="  ")
        )
        + "\n"
        + CAUTION,
        formatter_class=argparse.RawDescriptionHelpFormatter,
    )
    p.add_argument("kind", choices=("integral", "derivative"), help="the operator")
    p.add_argument("input", metavar="IN.npy", help="the record (.npy)")
    p.add_argument(
        "-o", "--output", metavar="OUT.npy", required=True, help="the result (.npy), not the input"
    )
    _add_order_step(
        p, "order of the operator, A > 0 (compressed: " + compressed_text().replace("order", "A") + ")"
    )
    p.add_argument(
        "--rule",
        metavar="RULE",
        help="integral: rectangle (default) or trapezoid; derivative: grunwald (default) or l1",
    )
    p.add_argument(
        "--mode",
        choices=("compressed", "exact"),
        default="compressed",
        help="compressed (default: bounded memory) or exact (memory grows with the record)",
    )
    p.add_argument(
        "--tol",
        metavar="T",
        help="compressed: relative tolerance in [%g, %g] (default 1e-12)" % COMPRESSED_TOL_RANGE,
    )
    p.add_argument(
        "--horizon",
        metavar="N",
        help="compressed: samples the tolerance is promised for (default: the record's length)",
    )
    p.add_argument(
        "--chunk", metavar="ROWS", type=int, help="time steps per chunk (default 2**18 values per chunk)"
    )
    p.add_argument(
        "--progress",
        action="store_true",
        help="a progress bar on standard error (needs tqdm: pip install 'pyfracconv[progress]')",
    )
    p.set_defaults(func=_run_chunked)
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
        sub,
        "integral",
        INTEGRAL_RULES,
        "rectangle",
        "Riemann-Liouville fractional integral",
        "Riemann-Liouville fractional integral of order A, from t = 0, of every "
        "column of INPUT, written to OUTPUT. Rules: rectangle (product "
        "rectangle rule, left end points, first order) or trapezoid (product "
        "trapezoidal rule, second order for smooth signals).",
    )
    _add_operator(
        sub,
        "derivative",
        DERIVATIVE_RULES,
        "grunwald",
        "fractional derivative (grunwald: Riemann-Liouville; l1: Caputo)",
        "Fractional derivative of order A, from t = 0, of every column of INPUT, "
        "written to OUTPUT. Rules: grunwald (Grunwald-Letnikov approximation of "
        f"the Riemann-Liouville derivative, {_order_text('grunwald')}, first order) "
        f"or l1 (L1 scheme for the Caputo derivative, {_order_text('l1')}, order 2 - A).",
    )
    c = sub.add_parser(
        "control",
        help="fractional PID controller over a setpoint,measurement record or live",
        description=_wrap(
            "Fractional PID controller u = Kp (b r - y) + Ki I^lambda (r - y) + "
            "Kd D^mu (c r - y) (Podlubny 1999) with output limits, conditional "
            "integration against windup, a rate limit and a derivative filter. "
            "INPUT has two columns, setpoint and measurement (or --columns SP,PV); "
            "OUTPUT has one, the controller output. With --live, one output line "
            "per input line, flushed at once."
        ),
        epilog=CONTROL_CAUTION + "\n" + CAUTION,
        formatter_class=argparse.RawDescriptionHelpFormatter,
    )
    c.add_argument("input", metavar="INPUT", help="CSV or .npy file ('-': CSV on standard input)")
    c.add_argument(
        "-o",
        "--output",
        metavar="OUTPUT",
        required=True,
        help="output file, .csv or .npy ('-': CSV on standard output)",
    )
    _add_controller_options(c)
    c.add_argument("--columns", metavar="SP,PV", help="the setpoint and measurement columns, by header name")
    _add_io_options(c)
    c.set_defaults(func=_run_control)
    _add_chunked(sub)
    d = sub.add_parser(
        "demo",
        help="closed-loop scenario with invented data (--verify: the verification table)",
        description=_wrap(
            "A closed-loop scenario of our own with invented data: a heated slab "
            "whose surface temperature follows the half-order integral of the "
            "net heat flux (semi-infinite conduction), held by the fractional "
            "controller with heater limits; compressed and exact controller "
            "memory compared. Writes trajectory.csv (and response.png, bode.png "
            "when matplotlib is installed: pip install 'pyfracconv[plot]') to "
            "--out-dir. With --verify: the verification table instead (a "
            "viscoelastic damper test rig, invented data: half-order operators "
            "checked against closed forms and observed orders of convergence). "
            "Exit status 0 if every check passes, 1 otherwise."
        ),
        epilog=CONTROL_CAUTION + "\n" + CAUTION,
        formatter_class=argparse.RawDescriptionHelpFormatter,
    )
    d.add_argument("--verify", action="store_true", help="print the verification table against closed forms")
    d.add_argument(
        "--out-dir",
        default="pyfracconv-demo",
        metavar="DIR",
        help="where the demo writes its files (default ./pyfracconv-demo)",
    )
    d.set_defaults(func=_run_demo)
    f = sub.add_parser(
        "flags",
        help="compiler and linker flags for C, C++ and Fortran programs using the library",
        description=_wrap(
            "Print the flags that compile and link a program against the copy of "
            "the C library inside this Python package (the header folder of "
            "pyfracconv.get_include(), the libraries of pyfracconv.get_lib_dir()). "
            "Without options: --cflags and --libs. The shared library is linked "
            "by its path with a run-time path (-Wl,-rpath) to its folder, so the "
            "program runs without LD_LIBRARY_PATH; --static links the static "
            "library instead. Example: cc prog.c $(pyfracconv flags) -o prog. "
            "For an installed prefix (make install) use pkg-config fracconv."
        ),
        formatter_class=argparse.RawDescriptionHelpFormatter,
    )
    f.add_argument("--cflags", action="store_true", help="the -I flag of the headers")
    f.add_argument("--libs", action="store_true", help="the library, its run-time path and -lm")
    f.add_argument(
        "--static", action="store_true", help="with the libraries: the static library (libfracconv.a) instead"
    )
    f.set_defaults(func=_run_flags)
    e = sub.add_parser(
        "export-c",
        help="write a compressed-mode operator as self-contained C99 for embedded targets",
        description=_wrap(
            "Write a compressed-mode operator (the bounded-memory sum of "
            "exponentials of a compressed stream, one channel) as plain C99: "
            "PREFIX.h, PREFIX.c and a test vector PREFIX_testvec.h (inputs, the "
            "library's outputs, each output's error scale) in directory DIR. "
            "Coefficients are constants; the state is a struct the caller owns; "
            "the update allocates nothing, does no I/O and calls no library "
            "function. Single precision: the error against the library's double "
            "precision stream is measured at export and written into the header "
            "with a stated bound (printed on stderr too). Orders: 0 < A < 1 for "
            "every rule, 1 <= A < 2 with rule rectangle. See docs/compiled.md."
        ),
        epilog=_wrap(
            "CAUTION for controllers - exported code may end up moving machinery. "
            "It is a numerical building block, not a safety function: validate the "
            "complete controller on the plant (or a faithful model of it) before "
            "use; enforce actuator limits and rate limits outside this code; keep "
            "an independent safe stop that depends neither on this code nor on "
            "the processor running it; local codes, standards and licensed "
            "engineering practice take precedence."
        )
        + "\n\n"
        + CAUTION,
        formatter_class=argparse.RawDescriptionHelpFormatter,
    )
    e.add_argument(
        "--rule",
        required=True,
        choices=tuple(RULES),
        help="rectangle or trapezoid (integrals), grunwald or l1 (derivatives)",
    )
    e.add_argument("--order", metavar="A", required=True, help="order of the operator")
    e.add_argument("--step", metavar="H", required=True, help="sampling period h > 0")
    e.add_argument(
        "--tol", metavar="T", default="1e-9", help="tolerance of the compressed memory (default 1e-9)"
    )
    e.add_argument(
        "--horizon",
        metavar="N",
        default="1e6",
        help="samples the compressed memory covers; the exported update "
        "refuses outputs past it (default 1e6)",
    )
    e.add_argument(
        "--precision",
        choices=("double", "single"),
        default="double",
        help="floating type of the generated code (default double)",
    )
    e.add_argument(
        "--prefix", default="fcop", help="C identifier prefix of the generated names and files (default fcop)"
    )
    e.add_argument(
        "-o",
        "--output",
        metavar="DIR",
        required=True,
        help="existing directory the three files are written to",
    )
    e.set_defaults(func=_run_export)
    x = sub.add_parser(
        "export-controller",
        help="write a fractional PID controller as self-contained C99 for embedded targets",
        description=_wrap(
            "Write the controller of the given settings (those of the control "
            "command; compressed memory) as plain C99 for one loop: PREFIX.h, "
            "PREFIX.c and a test vector PREFIX_testvec.h (setpoints, measurements "
            "and the library's outputs of a closed loop) in directory DIR. The "
            "output limits, rate limit, setpoint weights, derivative filter, "
            "conditional integration and manual mode with bumpless return are the "
            "library's; coefficients are constants; the state is a struct the "
            "caller owns; the update allocates nothing, does no I/O and calls no "
            "library function. The error against the library's controller is "
            "measured at export (the update emulated in the generated type) and "
            "written into the header with a stated bound (printed on stderr too). "
            "Refused: --memory exact, --integral-rule trapezoid with "
            "--integral-order >= 1. See docs/compiled.md."
        ),
        epilog=CONTROL_CAUTION
        + "\n"
        + _wrap(
            "The exported code is a numerical building block, not a safety "
            "function: validate the complete control system in simulation and "
            "then on the plant under supervision; keep actuator limits and rate "
            "limits in the hardware as well; keep an independent safe stop that "
            "depends neither on this code nor on the processor running it; local "
            "codes, standards and licensed engineering practice take "
            "precedence."
        )
        + "\n\n"
        + CAUTION,
        formatter_class=argparse.RawDescriptionHelpFormatter,
    )
    _add_controller_options(x)
    x.add_argument(
        "--tol", metavar="T", default="1e-10", help="tolerance of the compressed memory (default 1e-10)"
    )
    x.add_argument(
        "--horizon",
        metavar="N",
        default="1e9",
        help="samples the compressed memory covers (default 1e9); past it the "
        "exported controller keeps running and reports it",
    )
    x.add_argument(
        "--precision",
        choices=("double", "single"),
        default="double",
        help="floating type of the generated code (default double)",
    )
    x.add_argument(
        "--prefix",
        default="fcpid",
        help="C identifier prefix of the generated names and files (default fcpid)",
    )
    x.add_argument(
        "-o",
        "--output",
        metavar="DIR",
        required=True,
        help="existing directory the three files are written to",
    )
    x.set_defaults(func=_run_export_controller)
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
