"""The structure of the C library as a C team sees it.

- The shared object exports only the public names: make builds it with
  -fvisibility=hidden and fracconv.h marks each public function FC_API, so
  that ``nm -D`` lists exactly the header's functions, all named fc_
  (never a private fc__ helper); the shared object carries a SONAME and
  the usual symlinks.
- Every prototype in the header's cffi block is preceded by a comment
  "Statuses:" naming the statuses it can return, each a status the header
  defines.
- The rule table (fc_rule_info, fc_rule_order_range) states the ranges the
  header's documentation gives (the comments of fc_weights and
  fc_stream_create in csrc/fracconv.h, the published contract), and
  fc_apply, exact and compressed fc_stream_create accept an order at each
  inclusive end and just inside each exclusive one and refuse it with
  FC_ERR_ORDER at each exclusive end and just beyond every end (the one
  order 5e-324 just above 0 passes the order check but an exact stream
  refuses it with FC_ERR_RANGE: its weights are not normal doubles).
- The stream engines are files behind one interface (docs/design.md,
  "Layout"; csrc/internal.h, fc__stream_ops): csrc/stream.c is the facade
  (busy guard, the argument and sample checks, the common save header)
  and holds no engine arithmetic and no engine state; csrc/stream_exact.c
  and csrc/stream_compressed.c each define their operations table and
  their own state struct and leave the NULL and finiteness checks to the
  facade; csrc/soe_build.c alone constructs the sums of exponentials.
  The facade does not branch on the mode (engines in a table indexed by
  mode, each mode's order range and limits in its operations), and the
  engines read the rule table's list of correction columns (no x_0-only
  path; tests/test_rule_columns.py runs a list of two).
Checks of the project against its own header: no outside source.
"""

import math
import os
import re
import shutil
import subprocess

import numpy as np
import pytest

import pyfracconv as pf
from pyfracconv import _core
from pyfracconv._fracconv import ffi, lib

ROOT = os.path.dirname(os.path.dirname(os.path.abspath(__file__)))
HEADER = os.path.join(ROOT, "csrc", "fracconv.h")


@pytest.fixture(autouse=True)
def _sources():
    if not os.path.exists(os.path.join(ROOT, "Makefile")):
        pytest.fail("these checks need the source checkout (Makefile)")


def header_text():
    with open(HEADER, encoding="utf-8") as fh:
        return fh.read()


def cdef_block():
    text = header_text()
    m = re.search(r"/\* FC_CDEF_BEGIN \*/(.*)/\* FC_CDEF_END \*/", text, re.S)
    assert m is not None
    return m.group(1)


def prototypes(block):
    """(name, return type, start offset) of every FC_API declaration."""
    return [
        (m.group(2), m.group(1).strip(), m.start())
        for m in re.finditer(r"^FC_API\s+([A-Za-z_ ]+?\**)\s*(fc_\w+)\(", block, re.M)
    ]


# ------------------------------------------------------------ exported names


@pytest.fixture(scope="module")
def shared_object(tmp_path_factory):
    if shutil.which("nm") is None:
        pytest.skip("nm (binutils) is not installed: the exported names cannot be listed")
    build = tmp_path_factory.mktemp("cbuild")
    env = {k: v for k, v in os.environ.items() if k != "CFLAGS"}
    subprocess.run(
        ["make", "-C", ROOT, f"BUILD={build}", "lib"], check=True, capture_output=True, text=True, env=env
    )
    return build


def test_shared_object_exports_only_the_public_functions(shared_object):
    out = subprocess.run(
        ["nm", "-D", "--defined-only", str(shared_object / "libfracconv.so")],
        check=True,
        capture_output=True,
        text=True,
    ).stdout
    names = set()
    for line in out.splitlines():
        parts = line.split()
        if len(parts) == 3 and parts[1] in "TtWwDdBbRrVvi":
            names.add(parts[2])
    assert names, out
    bad = sorted(n for n in names if not n.startswith("fc_") or n.startswith("fc__"))
    assert bad == [], f"names exported beside the public ones: {bad}"
    declared = {name for name, _, _ in prototypes(cdef_block())}
    assert names == declared


def test_shared_object_has_soname_and_symlinks(shared_object):
    text = header_text()
    v = [
        re.search(rf"^#define FC_VERSION_{k} (\d+)", text, re.M).group(1) for k in ("MAJOR", "MINOR", "PATCH")
    ]
    so = shared_object / "libfracconv.so"
    assert os.readlink(so) == f"libfracconv.so.{v[0]}"
    assert os.readlink(shared_object / f"libfracconv.so.{v[0]}") == f"libfracconv.so.{'.'.join(v)}"
    if shutil.which("readelf") is None:
        pytest.skip("readelf is not installed: the SONAME cannot be read")
    dyn = subprocess.run(["readelf", "-d", str(so)], check=True, capture_output=True, text=True).stdout
    assert f"Library soname: [libfracconv.so.{v[0]}]" in dyn


# ------------------------------------------------------- statuses in the header


def test_every_prototype_names_its_statuses():
    block = cdef_block()
    defined = set(re.findall(r"^#define (FC_(?:OK|ERR_\w+)) ", block, re.M))
    protos = prototypes(block)
    assert len(protos) >= 40
    for name, ret, start in protos:
        # the comment line directly above the declaration
        before = block[:start].rstrip("\n").splitlines()[-1]
        m = re.fullmatch(r"/\* Statuses: (.*)\. \*/", before.strip())
        assert m, f"{name}: no 'Statuses:' comment directly above it"
        named = set(re.findall(r"\bFC_(?:OK|ERR_[A-Z]+)\b", m.group(1)))
        assert named <= defined, f"{name}: unknown statuses {named - defined}"
        if ret == "int" and name != "fc_version":
            assert "FC_OK" in named and len(named) >= 2, name
        else:
            assert m.group(1).startswith("none"), name


def test_the_cffi_declarations_carry_no_visibility_macro():
    import importlib.util

    spec = importlib.util.spec_from_file_location("setup_build", os.path.join(ROOT, "setup_build.py"))
    mod = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(mod)
    cdef = mod.read_cdef()
    assert "FC_API" not in cdef
    assert "int fc_rule_order_range(" in cdef


# ------------------------------------------------------------------ rule table

# The ranges fracconv.h documents (fc_weights: 0 < order <= 10, L1:
# 0 < order < 1; fc_stream_create, compressed: 1e-280 <= order < 1, and
# 1 <= order < 2 too for the rectangle rule), as
# (lo, lo_inclusive, hi, hi_inclusive).
DOC_EXACT = {
    "rectangle": (0.0, 0, 10.0, 1),
    "trapezoid": (0.0, 0, 10.0, 1),
    "grunwald": (0.0, 0, 10.0, 1),
    "l1": (0.0, 0, 1.0, 0),
}
DOC_COMPRESSED = {
    "rectangle": (1e-280, 1, 2.0, 0),
    "trapezoid": (1e-280, 1, 2.0, 0),
    "grunwald": (1e-280, 1, 1.0, 0),
    "l1": (1e-280, 1, 1.0, 0),
}


def rule_info(rule):
    name = ffi.new("char **")
    der = ffi.new("int *")
    st = lib.fc_rule_info(rule, ffi.cast("const char **", name), der)
    return st, (ffi.string(name[0]).decode() if st == lib.FC_OK else None), der[0]


def order_range(rule, mode):
    lo, hi = ffi.new("double *"), ffi.new("double *")
    li, hinc = ffi.new("int *"), ffi.new("int *")
    st = lib.fc_rule_order_range(rule, mode, lo, li, hi, hinc)
    return st, (lo[0], li[0], hi[0], hinc[0])


def rules():
    n = ffi.new("int *")
    assert lib.fc_rule_count(n) == lib.FC_OK
    return range(n[0])


def test_rule_table_names_kinds_and_numbers():
    seen = {}
    for r in rules():
        st, name, der = rule_info(r)
        assert st == lib.FC_OK
        seen[name] = (r, der)
    # the numbers are part of the save format: the header's constants
    assert {k: v[0] for k, v in seen.items()} == {
        "rectangle": lib.FC_RULE_RECTANGLE,
        "trapezoid": lib.FC_RULE_TRAPEZOID,
        "grunwald": lib.FC_RULE_GRUNWALD,
        "l1": lib.FC_RULE_L1,
    }
    assert {k: v[0] for k, v in seen.items()} == _core.RULES
    assert sorted(k for k, v in seen.items() if not v[1]) == sorted(_core.INTEGRAL_RULES)
    assert sorted(k for k, v in seen.items() if v[1]) == sorted(_core.DERIVATIVE_RULES)


def test_unknown_rules_and_modes_are_refused():
    count = len(rules())
    for r in (-1, count, count + 1, 2**31 - 1):
        assert rule_info(r)[0] == lib.FC_ERR_RULE
        assert order_range(r, lib.FC_MODE_EXACT)[0] == lib.FC_ERR_RULE
        out = ffi.new("fc_stream **")
        assert lib.fc_stream_create(r, 0.5, 1.0, 1, lib.FC_MODE_EXACT, 0, 0, out) == lib.FC_ERR_RULE
        x = np.zeros(4)
        y = np.zeros(4)
        assert (
            lib.fc_apply(
                ffi.NULL,
                r,
                0.5,
                1.0,
                ffi.from_buffer("double[]", x),
                1,
                4,
                lib.FC_ENGINE_DIRECT,
                ffi.from_buffer("double[]", y),
            )
            == lib.FC_ERR_RULE
        )
    assert order_range(0, 2)[0] == lib.FC_ERR_MODE
    assert order_range(0, -1)[0] == lib.FC_ERR_MODE


def test_rule_table_ranges_are_the_documented_ones():
    for r in rules():
        name = rule_info(r)[1]
        assert order_range(r, lib.FC_MODE_EXACT) == (lib.FC_OK, DOC_EXACT[name])
        assert order_range(r, lib.FC_MODE_COMPRESSED) == (lib.FC_OK, DOC_COMPRESSED[name])


def _apply(rule, order):
    x = np.linspace(0.0, 1.0, 8)
    y = np.zeros(8)
    return lib.fc_apply(
        ffi.NULL,
        rule,
        order,
        0.5,
        ffi.from_buffer("double[]", x),
        1,
        8,
        lib.FC_ENGINE_DIRECT,
        ffi.from_buffer("double[]", y),
    )


def _create(rule, order, mode):
    out = ffi.new("fc_stream **")
    st = lib.fc_stream_create(rule, order, 0.5, 1, mode, 1e-6, 100.0, out)
    if st == lib.FC_OK:
        lib.fc_stream_free(out[0])
    return st


def _probes(lo, li, hi, hinc):
    """(order, accepted) at and beyond both ends."""
    yield lo, bool(li)
    yield math.nextafter(lo, -math.inf), False
    if not li:
        yield math.nextafter(lo, math.inf), True
    yield hi, bool(hinc)
    yield math.nextafter(hi, math.inf), False
    if not hinc:
        yield math.nextafter(hi, -math.inf), True


@pytest.mark.parametrize("mode", ["exact", "compressed"])
def test_engines_accept_exactly_the_table_ranges(mode):
    m = lib.FC_MODE_EXACT if mode == "exact" else lib.FC_MODE_COMPRESSED
    for r in rules():
        st, rng = order_range(r, m)
        assert st == lib.FC_OK
        for order, accepted in _probes(*rng):
            got = [_create(r, order, m)]
            if mode == "exact":
                got.append(_apply(r, order))
            for g in got:
                if accepted:
                    # past the order check; an exact stream at a subnormal
                    # order still refuses with FC_ERR_RANGE (its weights
                    # leave the normal range, as fc_stream_push documents)
                    assert g in (lib.FC_OK, lib.FC_ERR_RANGE), (rule_info(r)[1], mode, order, g)
                    if order >= 1e-300:
                        assert g == lib.FC_OK, (rule_info(r)[1], mode, order, g)
                else:
                    assert g == lib.FC_ERR_ORDER, (rule_info(r)[1], mode, order, g)


@pytest.mark.parametrize("mode", ["exact", "compressed"])
def test_python_checks_accept_exactly_the_table_ranges(mode):
    # the Python layer asks the C table (fc_rule_order_range) instead of
    # keeping its own copy: its order check must move with the table's ends
    from pyfracconv import _checks

    m = lib.FC_MODE_EXACT if mode == "exact" else lib.FC_MODE_COMPRESSED
    names = {rule_info(r)[1]: r for r in rules()}
    assert _checks.RULES == names
    assert set(_checks.INTEGRAL_RULES) | set(_checks.DERIVATIVE_RULES) == set(names)
    for name, r in names.items():
        assert (name in _checks.DERIVATIVE_RULES) == bool(rule_info(r)[2])
        st, rng = order_range(r, m)
        assert st == lib.FC_OK
        for order, accepted in _probes(*rng):
            if order <= 0.0:
                accepted = False
            try:
                _checks.check_order(order, name, m)
                got = True
            except pf.ArgumentError as e:
                got = False
                assert str(e).startswith(f"order={order!r}"), str(e)
            assert got == accepted, (name, mode, order)


# ------------------------------------------------------------ stream engines

CSRC = os.path.join(ROOT, "csrc")
ENGINE_FILES = ("stream.c", "stream_exact.c", "stream_compressed.c", "stream_timed.c", "soe_build.c")


def c_source(name):
    with open(os.path.join(CSRC, name), encoding="utf-8") as fh:
        return fh.read()


def c_code(name):
    """The C source without its comments (so that prose cannot satisfy or
    break a check)."""
    return re.sub(r"/\*.*?\*/", " ", c_source(name), flags=re.S)


def test_stream_engines_are_separate_files():
    present = set(os.listdir(CSRC))
    for name in ENGINE_FILES:
        assert name in present, name
    assert "compressed.c" not in present  # split into the runtime and soe_build.c


def test_stream_facade_holds_no_engine():
    code = c_code("stream.c")
    # no FFTs, kernels, recursions or sums of exponentials
    for name in (
        "fc__fft_",
        "fc__spec_dot",
        "fc__lag_kernel",
        "fc__x0_correction",
        "fc__correction",
        "fc__soe_build",
        "fc__segment_start",
        "fma(",
        "immintrin",
        "level_frame",
        "cs_step",
        "leaf_dot",
    ):
        assert name not in code, name
    # the stream object keeps the common fields, the operations and an
    # opaque engine pointer
    m = re.search(r"struct fc_stream \{(.*?)\};", code, re.S)
    assert m is not None
    body = m.group(1)
    assert re.search(r"const fc__stream_ops \*ops;", body)
    assert re.search(r"void \*eng;", body)
    fields = set(re.findall(r"(\w+)(?:\[\w+\])?\s*[;,]", body))
    for exact_only in (
        "leaf",
        "segs",
        "lev",
        "u",
        "acc",
        "xprev",
        "x0",
        "kernel",
        "corr",
        "work",
        "umax",
        "cs",
    ):
        assert exact_only not in fields, exact_only
    # every call goes through the table
    for op in (
        "create",
        "load",
        "free",
        "push_block",
        "push1",
        "preview",
        "history",
        "reset",
        "count",
        "nbytes",
        "terms",
        "save_size",
        "save",
    ):
        assert f"ops->{op}(" in code, op


def test_stream_facade_does_not_branch_on_mode():
    # a mode is the index of the engine table; its order range and limits
    # come from the engine's operations (fc__stream_ops), the correction
    # columns from the rule table: no switch, no comparison with a mode
    code = c_code("stream.c")
    assert not re.search(r"\bswitch\b", code)
    assert not re.search(r"mode\s*[=!]=|[=!]=\s*FC_MODE_", code)
    assert re.search(r"\[FC_MODE_EXACT\]\s*=\s*&fc__exact_ops", code)
    assert re.search(r"\[FC_MODE_COMPRESSED\]\s*=\s*&fc__compressed_ops", code)
    assert "ops->order_range(" in code
    for name in ("FC__CS_TOL_MIN", "FC__CS_TOL_MAX", "FC__CS_HORIZON_MAX", "->exact", "->compressed"):
        assert name not in code, name
    rules = c_code("rules.c")
    assert "ops->order_range(" in rules and "FC_MODE_" not in rules


def test_engines_read_the_correction_columns_from_the_table():
    # every engine loops over the rule's list (fc__correction of column k),
    # none is limited to an x_0 term
    for name in ("lagsum.c", "stream_exact.c", "stream_compressed.c"):
        code = c_code(name)
        assert "fc__correction(" in code or "fc__unit_correction(" in code, name
        assert "ncorr" in code or "cs_runtime_cols" in code, name
        for old in ("fc__x0_correction", "fc__unit_x0_correction", "fc__rule_has_x0"):
            assert old not in code, (name, old)


def test_each_engine_has_its_table_state_and_no_repeated_checks():
    for name, table, state in (
        ("stream_exact.c", "fc__exact_ops", "ex_engine"),
        ("stream_compressed.c", "fc__compressed_ops", "cs_engine"),
        ("stream_timed.c", "fc__timed_ops", "ts_engine"),
    ):
        code = c_code(name)
        assert re.search(rf"^const fc__stream_ops {table} = \{{", code, re.M), name
        # its own state struct, the one the engine pointer stands for
        assert re.search(rf"^\}} {state};", code, re.M), name
        assert re.search(rf"{state} \*\w+ = eng;", code), name
        assert "struct fc_stream" not in code, name
        # the facade checks pointers and samples once
        assert "FC_ERR_NULL" not in code, name
        assert "fc__check_finite" not in code, name
        assert "partial_overlap" not in code, name
    facade = c_code("stream.c")
    # push_block, preview, push_timed (whose times are checked there too) and
    # preview_timed (one time, a scalar: isfinite)
    assert facade.count("fc__check_finite(x") == 4
    assert facade.count("fc__check_finite(t") == 1
    # the construction lives in soe_build.c only
    soe = c_code("soe_build.c")
    assert re.search(r"^int fc__soe_build\(", soe, re.M)
    runtime = c_code("stream_compressed.c")
    for name in ("soe_gauss_discrete", "soe_jacobi_eig", "soe_verify", "gauss", "jacobi"):
        assert name not in runtime, name
    assert "cs_step" not in soe and "cs_engine" not in soe


def test_api_driver_calls_every_public_function():
    # issue 14 item 2: the C API driver (run plain, under ASan + UBSan and
    # valgrind) calls every public function with valid and invalid
    # arguments; a function added to the header without a case there fails
    with open(HEADER) as fh:
        names = set(re.findall(r"FC_API[^;(]*?\b(fc_[a-z0-9_]+)\s*\(", fh.read()))
    with open(os.path.join(ROOT, "tests", "c", "api_driver.c")) as fh:
        driver = fh.read()
    assert len(names) > 60
    missing = sorted(n for n in names if not re.search(r"\b%s\s*\(" % n, driver))
    assert not missing, missing
