"""Argument checks shared by the batch functions, streams and the command
line: every message names the argument and its value
(``order=-0.5: must be finite and > 0``), and nothing is computed or
changed before a check has passed.

This module also holds the tables of names the Python layer accepts
(rules, engines, stream modes, horizon policies) and the ranges it checks
(order, index, compressed tolerance and horizon).
"""

from __future__ import annotations

import numbers
import os
import sys
from typing import Dict, List, Optional, Tuple

import numpy as np
from numpy.typing import NDArray

from . import _errors
from ._errors import (
    ArgumentError,
    InputTypeError,
    OutOfMemory,
    SampleError,
    show,
)
from ._fracconv import ffi, lib

__all__ = [
    "RULES",
    "INTEGRAL_RULES",
    "DERIVATIVE_RULES",
    "ENGINES",
    "MODES",
    "POLICIES",
    "MAX_ORDER",
    "order_range",
    "range_text",
    "in_range",
    "INDEX_LIMIT",
    "COMPRESSED_TOL_RANGE",
    "COMPRESSED_HORIZON_RANGE",
    "SIZE_MAX",
    "show",
    "check_bytes",
    "new_result",
    "contiguous_copy",
    "check_rule",
    "check_real",
    "check_order",
    "check_step",
    "check_count",
    "check_compressed",
    "check_engine",
    "check_axis",
    "check_channels",
    "check_mode",
    "check_policy",
    "is_masked",
    "refuse_masked",
    "as_float_array",
    "raise_nonfinite",
]

FloatArray = NDArray[np.float64]


def _rule_table() -> Tuple[Dict[str, int], Tuple[str, ...], Tuple[str, ...]]:
    """The rule names and kinds, read from the C core's rule table
    (fc_rule_count, fc_rule_info): Python keeps no copy of its own."""
    n = ffi.new("int *")
    if lib.fc_rule_count(n):  # pragma: no cover - cannot fail with a pointer
        raise RuntimeError("fc_rule_count failed")
    name = ffi.new("const char **")
    deriv = ffi.new("int *")
    rules: Dict[str, int] = {}
    integ: List[str] = []
    der: List[str] = []
    for code in range(n[0]):
        if lib.fc_rule_info(code, name, deriv):  # pragma: no cover
            raise RuntimeError(f"fc_rule_info({code}) failed")
        text = ffi.string(name[0]).decode("ascii")
        rules[text] = code
        (der if deriv[0] else integ).append(text)
    return rules, tuple(integ), tuple(der)


RULES, INTEGRAL_RULES, DERIVATIVE_RULES = _rule_table()
ENGINES: Dict[str, int] = {
    "auto": int(lib.FC_ENGINE_AUTO),
    "direct": int(lib.FC_ENGINE_DIRECT),
    "blocked": int(lib.FC_ENGINE_BLOCKED),
    "fft": int(lib.FC_ENGINE_FFT),
}
MODES: Dict[str, int] = {
    "exact": int(lib.FC_MODE_EXACT),
    "compressed": int(lib.FC_MODE_COMPRESSED),
}
# What a compressed stream does with a push that would take it past its
# horizon (the horizon_policy keyword and property).
POLICIES: Dict[str, int] = {
    "refuse": int(lib.FC_HORIZON_REFUSE),
    "continue": int(lib.FC_HORIZON_CONTINUE),
}


OrderRange = Tuple[float, bool, float, bool]


def order_range(rule: str, mode: int) -> OrderRange:
    """(lo, lo_inclusive, hi, hi_inclusive): the orders ``rule`` accepts in
    stream mode ``mode`` (FC_MODE_EXACT also covers the batch functions),
    as the C core's rule table states them (fc_rule_order_range)."""
    key = (rule, int(mode))
    got = _RANGES.get(key)
    if got is None:
        lo, loi = ffi.new("double *"), ffi.new("int *")
        hi, hii = ffi.new("double *"), ffi.new("int *")
        st = lib.fc_rule_order_range(RULES[rule], int(mode), lo, loi, hi, hii)
        if st:  # pragma: no cover - rule and mode come from the tables above
            raise RuntimeError(f"fc_rule_order_range({rule!r}, {mode}) failed: {st}")
        got = (float(lo[0]), bool(loi[0]), float(hi[0]), bool(hii[0]))
        _RANGES[key] = got
    return got


_RANGES: Dict[Tuple[str, int], OrderRange] = {}


def range_text(r: OrderRange) -> str:
    """An order range as text, e.g. ``0 < order <= 10``."""
    lo, loi, hi, hii = r
    left = f"{lo:g} {'<=' if loi else '<'} order"
    return f"{left} {'<=' if hii else '<'} {hi:g}"


def compressed_text() -> str:
    """What compressed streams take, from the rule table: the range every
    rule shares and each rule's extension beyond it, e.g. ``0 < order < 1
    with every rule, and 1 <= order < 2 with rule='rectangle'`` (the
    smallest order, 1e-280, is left out of this summary)."""
    mode = int(lib.FC_MODE_COMPRESSED)
    ranges = {name: order_range(name, mode) for name in RULES}
    common = min(r[2] for r in ranges.values())
    parts = [f"0 < order < {common:g} with every rule"]
    for name, (_lo, _loi, hi, hii) in ranges.items():
        if hi > common:
            parts.append(f"{common:g} <= order {'<=' if hii else '<'} {hi:g} with rule={name!r}")
    return ", and ".join(parts)


def in_range(r: OrderRange, a: float) -> bool:
    """Whether a finite order a lies in the range r."""
    lo, loi, hi, hii = r
    return (lo <= a if loi else lo < a) and (a <= hi if hii else a < hi)


# The largest order any rule accepts (the batch functions and exact streams).
MAX_ORDER = max(order_range(r, int(lib.FC_MODE_EXACT))[2] for r in RULES)
INDEX_LIMIT = 2**53
# Compressed streams (fc_stream_create in csrc/fracconv.h, checked in
# csrc/stream.c): tol in [1e-15, 1e-2]; horizon in [1, 2**53 - 2], the
# number of samples the tolerance is guaranteed for. The one place Python
# keeps these ranges.
COMPRESSED_TOL_RANGE = (1e-15, 1e-2)
COMPRESSED_HORIZON_RANGE = (1.0, float(INDEX_LIMIT - 2))
# Largest value of size_t (channel counts and other sizes passed to C).
SIZE_MAX = 2 ** (8 * np.dtype(np.uintp).itemsize) - 1


# ---------------------------------------------------------------- memory


def _nbytes_text(n: int) -> str:
    for unit, size in (("TiB", 2**40), ("GiB", 2**30), ("MiB", 2**20), ("KiB", 2**10)):
        if n >= size:
            return f"{n / size:.1f} {unit}"
    return f"{n} bytes"


def _physical_memory() -> Optional[int]:
    try:
        return os.sysconf("SC_PHYS_PAGES") * os.sysconf("SC_PAGE_SIZE")
    except (AttributeError, ValueError, OSError):  # pragma: no cover
        return None


_RAM = _physical_memory()


def check_bytes(what: str, need: int, kind: str = "the result") -> None:
    """OutOfMemory naming ``what`` if ``need`` bytes exceed this machine's
    physical memory (checked before allocating)."""
    if _RAM is not None and need > _RAM:
        raise OutOfMemory(
            f"{what}: {kind} would need {_nbytes_text(need)}, more than "
            f"this machine's memory ({_nbytes_text(_RAM)}); nothing was allocated"
        )


def new_result(n: int, what: str) -> FloatArray:
    """An empty float64 array of ``n`` elements for a result whose size the
    caller chose (``what`` names the argument, e.g. ``"count=10"``).

    The size is checked before anything is allocated: more than this
    machine's physical memory raises OutOfMemory naming the argument, and so
    does an allocation that fails."""
    need = n * 8
    check_bytes(what, need)
    try:
        return np.empty(n, dtype=np.float64)
    except MemoryError:
        raise OutOfMemory(f"{what}: could not allocate the result ({_nbytes_text(need)})") from None


def contiguous_copy(name: str, arr: NDArray[np.generic]) -> FloatArray:
    """``arr`` as a C-contiguous float64 array; the copy (of a broadcast
    view, say) is checked against the machine's memory first, and a failed
    allocation is the package's OutOfMemory naming ``name``."""
    need = 8 * int(arr.size)
    check_bytes(name, need, f"a contiguous float64 copy of shape {arr.shape}")
    try:
        return np.ascontiguousarray(arr, dtype=np.float64)
    except MemoryError:
        raise OutOfMemory(
            f"{name}: could not allocate a contiguous float64 copy of shape "
            f"{arr.shape} ({_nbytes_text(need)})"
        ) from None


# ---------------------------------------------------------------- scalars


def check_rule(rule: object, allowed: Tuple[str, ...] = tuple(RULES)) -> int:
    """Return the C code of ``rule`` if it is one of ``allowed``."""
    if not isinstance(rule, str) or rule not in allowed:
        expected = ", ".join(repr(r) for r in allowed)
        raise ArgumentError(f"rule={show(rule)}: unknown; expected one of {expected}")
    return RULES[str(rule)]


def check_real(name: str, value: object) -> float:
    """A real scalar as a Python float (InputTypeError if not numeric,
    ArgumentError if beyond the range of a double, e.g. 10**400)."""
    if type(value) is float:  # the common case, without the ABC checks below
        return value
    if isinstance(value, (bool, np.bool_)) or not isinstance(value, numbers.Real):
        raise InputTypeError(f"{name}={show(value)}: expected a real number, got {type(value).__name__}")
    try:
        return float(value)
    except OverflowError:
        raise ArgumentError(
            f"{name}={show(value)}: beyond the range of a double (magnitude above 1.8e308)"
        ) from None


def check_order(order: object, rule: object, mode: Optional[int] = None) -> float:
    """The order as a float, in the range the C core's rule table gives
    ``rule`` (a name of RULES, already checked) in stream mode ``mode``
    (None or FC_MODE_EXACT: the batch functions and exact streams)."""
    a = check_real("order", order)
    if not np.isfinite(a) or a <= 0.0:
        raise ArgumentError(f"order={show(order)}: must be finite and > 0")
    m = int(lib.FC_MODE_EXACT) if mode is None else int(mode)
    r = order_range(str(rule), m)
    if not in_range(r, a):
        if m == int(lib.FC_MODE_COMPRESSED):
            exact = range_text(order_range(str(rule), int(lib.FC_MODE_EXACT)))
            if a < r[0] or (a == r[0] and not r[1]):
                need = f"needs order {'>=' if r[1] else '>'} {r[0]:g}"
            else:
                need = f"with rule={show(rule)} needs {range_text(r)}; it takes {compressed_text()}"
            raise ArgumentError(
                f"order={show(order)}: mode='compressed' {need} "
                f"(use mode='exact', which takes {exact} with this rule)"
            )
        raise ArgumentError(f"order={show(order)}: rule={show(rule)} needs {range_text(r)}")
    return a


def check_step(step: object) -> float:
    """The step as a float: finite and > 0."""
    h = check_real("step", step)
    if not np.isfinite(h) or h <= 0.0:
        raise ArgumentError(f"step={show(step)}: must be finite and > 0")
    return h


def check_count(name: str, value: object, minimum: int = 0, maximum: Optional[int] = None) -> int:
    """An integer in [minimum, maximum] as a Python int."""
    if isinstance(value, (bool, np.bool_)) or not isinstance(value, numbers.Integral):
        raise InputTypeError(f"{name}={show(value)}: expected an integer, got {type(value).__name__}")
    v = int(value)
    if v < minimum:
        raise ArgumentError(f"{name}={show(value)}: must be >= {minimum}")
    if maximum is not None and v > maximum:
        raise ArgumentError(f"{name}={show(value)}: must be <= {maximum}")
    return v


THREADS_MAX = int(lib.FC_THREADS_MAX)  # 256


def check_workers(workers: object) -> int:
    """The thread count of a ``workers`` argument, SciPy's convention
    (scipy.fft): None is 1; a positive count is used as given (above
    THREADS_MAX as THREADS_MAX); a negative one counts back from the CPUs,
    -1 every CPU (``os.cpu_count()``), -2 all but one, down to
    -os.cpu_count(); 0 and counts below that are refused."""
    if workers is None:
        return 1
    if isinstance(workers, (bool, np.bool_)) or not isinstance(workers, numbers.Integral):
        raise InputTypeError(
            f"workers={show(workers)}: expected an integer or None, got {type(workers).__name__}"
        )
    w = int(workers)
    if w == 0:
        raise ArgumentError(
            "workers=0: must not be 0 (None or 1: one thread; a positive count; "
            "-1: every CPU, -2: all but one, ...)"
        )
    if w < 0:
        cpus = os.cpu_count() or 1
        if w < -cpus:
            raise ArgumentError(
                f"workers={w}: a negative count must be >= -{cpus} "
                f"(-os.cpu_count() on this machine; -1 is every CPU)"
            )
        w += cpus + 1
    return min(w, THREADS_MAX)


def check_compressed(tol: object, horizon: object) -> Tuple[float, float]:
    """tol and horizon of a compressed stream, as floats, within
    COMPRESSED_TOL_RANGE and COMPRESSED_HORIZON_RANGE."""
    t = check_real("tol", tol)
    hz = check_real("horizon", horizon)
    lo, hi = COMPRESSED_TOL_RANGE
    if not (lo <= t <= hi):
        raise ArgumentError(f"tol={show(tol)}: must be in [{lo:g}, {hi:g}] for mode='compressed'")
    lo, hi = COMPRESSED_HORIZON_RANGE
    if not (lo <= hz <= hi):
        raise ArgumentError(
            f"horizon={show(horizon)}: must be in [{lo:g}, 2**53 - 2 = {hi:.0f}] "
            "for mode='compressed' (the number of samples the tolerance is "
            "guaranteed for)"
        )
    return t, hz


def check_engine(engine: object) -> int:
    """The C code of a batch engine name."""
    if not isinstance(engine, str) or engine not in ENGINES:
        expected = ", ".join(repr(e) for e in ENGINES)
        raise ArgumentError(f"engine={show(engine)}: unknown; expected one of {expected}")
    return ENGINES[str(engine)]


def check_axis(axis: object, ndim: int) -> int:
    """``axis`` of an array of ``ndim`` dimensions, as 0 .. ndim-1."""
    if isinstance(axis, (bool, np.bool_)) or not isinstance(axis, numbers.Integral):
        raise InputTypeError(f"axis={show(axis)}: expected an integer")
    ax = int(axis)
    if not -ndim <= ax < ndim:
        raise ArgumentError(f"axis={show(axis)}: out of range for an array of {ndim} dimension(s)")
    return ax % ndim


def check_channels(channels: object) -> int:
    """The channel count of a stream: None means one (a scalar stream)."""
    if channels is None:
        return 1
    if isinstance(channels, (bool, np.bool_)) or not isinstance(channels, numbers.Integral):
        raise InputTypeError(
            f"channels={show(channels)}: expected None or an integer, got {type(channels).__name__}"
        )
    c = int(channels)
    if c < 1:
        raise ArgumentError(f"channels={show(channels)}: must be >= 1")
    if c > SIZE_MAX:
        raise ArgumentError(f"channels={show(channels)}: must be <= {SIZE_MAX} (the largest size)")
    return c


def check_mode(mode: object) -> int:
    """The C code of a stream mode name."""
    if not isinstance(mode, str) or mode not in MODES:
        raise ArgumentError(f"mode={show(mode)}: unknown; expected one of 'exact', 'compressed'")
    return MODES[str(mode)]


def check_policy(policy: object) -> int:
    """The C code of a horizon policy name."""
    if not isinstance(policy, str) or policy not in POLICIES:
        raise ArgumentError(f"horizon_policy={show(policy)}: unknown; expected one of 'refuse', 'continue'")
    return POLICIES[str(policy)]


# ---------------------------------------------------------------- arrays


def is_masked(values: object) -> bool:
    """True if ``values`` is a masked array (numpy.ma)."""
    # numpy.ma is imported only by programs that use it: if it is not
    # loaded, values cannot be a masked array.
    ma = sys.modules.get("numpy.ma")
    return ma is not None and isinstance(values, ma.MaskedArray)


_is_masked = is_masked  # the name stream.py used


def refuse_masked(name: str, values: object) -> None:
    """Masked arrays are refused: converting one would drop the mask and
    use the values underneath."""
    if is_masked(values):
        raise InputTypeError(
            f"{name}: masked arrays are not accepted (the mask would be "
            f"ignored); pass np.ma.filled({name}, fill) or {name}.compressed()"
        )


def _object_to_float(name: str, arr: NDArray[np.object_]) -> FloatArray:
    """An object array of Python numbers as float64, naming the first
    element beyond the range of a double."""
    out = np.empty(arr.shape, dtype=np.float64)
    for idx, v in np.ndenumerate(arr):
        if isinstance(v, (bool, np.bool_)) or not isinstance(v, numbers.Real):
            raise InputTypeError(
                f"{name}: expected real numbers, got an array of dtype object holding {type(v).__name__}"
            )
        try:
            out[idx] = float(v)
        except OverflowError:
            where = idx[0] if len(idx) == 1 else idx
            raise SampleError(
                f"{name}[{where}]={show(v)}: beyond the range of a double (samples must be finite)"
            ) from None
    return out


def as_float_array(name: str, values: object) -> FloatArray:
    """``values`` as a C-contiguous float64 ndarray (no copy when it already
    is one); InputTypeError for non-numeric data and for masked arrays."""
    if type(values) is np.ndarray and values.dtype == np.float64:
        return values if values.flags.c_contiguous else contiguous_copy(name, values)
    refuse_masked(name, values)
    try:
        arr = np.asarray(values)
    except Exception as exc:  # ragged lists and the like
        raise InputTypeError(f"{name}: cannot be read as a numeric array ({exc})") from None
    if arr.dtype.kind == "O":  # Python integers too large for int64, ...
        return _object_to_float(name, arr)
    if arr.dtype.kind not in "biuf":
        raise InputTypeError(f"{name}: expected real numbers, got an array of dtype {arr.dtype}")
    if arr.dtype == np.float64 and arr.flags.c_contiguous:
        return arr
    return contiguous_copy(name, arr)


def raise_nonfinite(name: str, arr: object) -> None:
    """Raise SampleError naming the first non-finite element of ``arr``
    (:func:`pyfracconv._errors.nonfinite_error`)."""
    raise _errors.nonfinite_error(name, arr)
