"""C status codes become exceptions in one table, keyed by the name of the
constant, and a non-finite sample is reported in one place.

Sources: the meaning of each status code is the comment beside its
``#define`` in csrc/fracconv.h; the exception each kind of failure maps to
is the rule in DEVELOPERS.md, "Python conventions" (every exception derives
from FracconvError and from ValueError, TypeError, MemoryError or
RuntimeError as fits).
"""

import math

import numpy as np
import pytest

import pyfracconv as pf
import pyfracconv._errors as errors_mod
from pyfracconv import Stream
from pyfracconv._fracconv import ffi, lib

ERR_NAMES = sorted(n for n in dir(lib) if n.startswith("FC_ERR_"))


def test_the_library_defines_status_codes():
    # csrc/fracconv.h defines FC_ERR_NULL .. FC_ERR_HORIZON (16 codes today);
    # an empty list would make the checks below vacuous
    assert len(ERR_NAMES) >= 16
    assert "FC_ERR_NONFINITE" in ERR_NAMES and "FC_ERR_RANGE" in ERR_NAMES


@pytest.mark.parametrize("name", ERR_NAMES)
def test_every_status_constant_has_an_entry(name):
    assert name in errors_mod.STATUS_CLASSES, (
        f"{name} of the compiled library has no entry in pyfracconv._errors.STATUS_CLASSES"
    )
    cls = errors_mod.STATUS_CLASSES[name]
    assert issubclass(cls, pf.FracconvError)
    code = int(getattr(lib, name))
    exc = errors_mod.status_error(code, "ctx")
    assert type(exc) is cls
    # the message is the C library's own, after the context
    assert str(exc) == "ctx: " + ffi.string(lib.fc_strerror(code)).decode()


def test_every_entry_is_a_constant_of_the_library():
    for name in errors_mod.STATUS_CLASSES:
        assert hasattr(lib, name), name
    codes = [int(getattr(lib, n)) for n in errors_mod.STATUS_CLASSES]
    assert len(set(codes)) == len(codes)
    assert int(lib.FC_OK) == 0 and 0 not in codes


# csrc/fracconv.h: what each code means; DEVELOPERS.md: which built-in
# exception fits that meaning.
EXPECTED_BASE = {
    "FC_ERR_NOMEM": MemoryError,  # an allocation failed
    "FC_ERR_BUSY": RuntimeError,  # used by another call
    "FC_ERR_HORIZON": RuntimeError,  # a push past the horizon
    "FC_ERR_FORMAT": ValueError,  # saved state corrupted
    "FC_ERR_IO": OSError,  # a file could not be read or written
    "FC_ERR_NONFINITE": ValueError,  # a sample is NaN or infinite
    "FC_ERR_RANGE": ValueError,  # beyond the double range
    "FC_ERR_ORDER": ValueError,
    "FC_ERR_STEP": ValueError,
}


@pytest.mark.parametrize("name", sorted(EXPECTED_BASE))
def test_classes_fit_the_meaning(name):
    assert issubclass(errors_mod.STATUS_CLASSES[name], EXPECTED_BASE[name])
    assert errors_mod.STATUS_CLASSES["FC_ERR_NONFINITE"] is pf.SampleError
    assert errors_mod.STATUS_CLASSES["FC_ERR_RANGE"] is pf.RangeError
    assert errors_mod.STATUS_CLASSES["FC_ERR_HORIZON"] is pf.HorizonError
    assert errors_mod.STATUS_CLASSES["FC_ERR_FORMAT"] is pf.StateError


def test_raise_for_status_ok_and_unknown():
    assert errors_mod.raise_for_status(0) is None
    with pytest.raises(pf.FracconvError) as info:
        errors_mod.raise_for_status(999, "x")
    # fc_strerror's text for a code it does not know (csrc/util.c)
    assert str(info.value) == "x: unknown status"


# ------------------------------------------------ the non-finite helper


def test_nonfinite_error_names_the_first_bad_element():
    e = errors_mod.nonfinite_error("xs", np.array([1.0, 2.0, math.inf, math.nan]))
    assert isinstance(e, pf.SampleError)
    assert str(e).startswith("xs[2]=inf: sample is NaN or infinite (first bad index 2)")
    a = np.zeros((3, 4))
    a[2, 1] = -math.inf
    a[2, 3] = math.nan
    e = errors_mod.nonfinite_error("samples", a, "nothing was pushed")
    assert str(e) == (
        "samples[2, 1]=-inf: sample is NaN or infinite (first bad index (2, 1)); nothing was pushed"
    )
    e = errors_mod.nonfinite_error("x", np.float64(math.nan), "the stream is unchanged")
    assert str(e) == "x=nan: sample is NaN or infinite; the stream is unchanged"


def test_nonfinite_status_goes_through_the_helper():
    code = int(lib.FC_ERR_NONFINITE)
    e = errors_mod.status_error(code, "ctx", samples=("q", [0.0, math.nan]))
    assert isinstance(e, pf.SampleError) and str(e).startswith("q[1]=nan:")
    # without the samples, the C library's message with the context
    e = errors_mod.status_error(code, "ctx")
    assert isinstance(e, pf.SampleError) and str(e).startswith("ctx: ")


def _calls_through_helper(monkeypatch, call):
    """Run call() (which must raise SampleError) with the helper replaced
    by a recorder; return the (name, array) pairs it was given."""
    seen = []
    real = errors_mod.nonfinite_error

    def recorder(name, values, after=""):
        seen.append((name, np.array(values, dtype=float, copy=True)))
        return real(name, values, after)

    monkeypatch.setattr(errors_mod, "nonfinite_error", recorder)
    with pytest.raises(pf.SampleError):
        call()
    return seen


def test_every_call_site_reports_nonfinite_samples_through_the_helper(monkeypatch):
    x = np.ones(40)
    x[7] = math.nan
    s = Stream.integral(0.5, 0.1)
    v = Stream.integral(0.5, 0.1, channels=2)
    blk = np.ones((5, 2))
    blk[3, 1] = math.inf
    cases = [
        (lambda: pf.integral(x, 0.5, 0.1), "samples"),
        (lambda: pf.derivative(x, 0.5, 0.1, rule="l1"), "samples"),
        (lambda: pf.lagged_sum(x, [1.0, 0.5]), "samples"),
        (lambda: pf.lagged_sum(np.ones(3), [1.0, math.nan]), "kernel"),
        (lambda: s.push(math.nan), "x"),
        (lambda: s.preview(math.inf), "x"),
        (lambda: s.push_many(x), "xs"),
        (lambda: v.push([1.0, math.nan]), "x"),
        (lambda: v.preview([math.nan, 1.0]), "x"),
        (lambda: v.push_many(blk), "xs"),
        (lambda: v.push_many(blk.T, axis=1), "xs"),
    ]
    for call, name in cases:
        seen = _calls_through_helper(monkeypatch, call)
        assert [n for n, _ in seen] == [name], (name, seen)
        assert not np.all(np.isfinite(seen[0][1]))
    assert s.count == 0 and v.count == 0
