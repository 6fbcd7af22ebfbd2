"""The Examples sections of the public docstrings run, and every public
function, method and property documents its Parameters, Returns, Raises,
Examples and See Also (the numpydoc format; numpydoc's style guide).

The public API is found, not listed: every function of
``pyfracconv.__all__``, every public method and property of its classes
(the exception classes have their own test) and the public functions of
the submodules in SUBMODULES, so a new public name without the sections
fails here.

Each example states the outside fact it shows (a closed form from
docs/references.md or a fact of the trade marked "common practice"), so a
wrong number there is a failure here. doctest compares the printed result
text exactly (with NORMALIZE_WHITESPACE and ELLIPSIS): Python Standard
Library documentation, ``doctest``.
"""

import doctest
import importlib
import inspect
import pkgutil

import pytest

import pyfracconv
from pyfracconv import Stream

FLAGS = doctest.NORMALIZE_WHITESPACE | doctest.ELLIPSIS

# At least this many examples run in each module (today's counts, rounded
# down): a docstring that loses its examples, or a module doctest can no
# longer find, fails here.
MINIMUM = {
    "pyfracconv": 1,
    "pyfracconv._core": 25,
    "pyfracconv._errors": 15,
    "pyfracconv.stream": 100,
    "pyfracconv.stream_timed": 80,
    "pyfracconv.solve": 70,
    "pyfracconv.control": 75,
    "pyfracconv.export": 12,
    "pyfracconv.frequency": 45,
    "pyfracconv.grid": 12,
    "pyfracconv.records": 10,
    "pyfracconv.dask": 10,
}
# Every other module of the package runs too (examples added later are
# checked as soon as they exist); these are not imported by the test.
SKIP = {"pyfracconv.__main__", "pyfracconv._fracconv"}


def _modules():
    names = set(MINIMUM)
    for info in pkgutil.iter_modules(pyfracconv.__path__, "pyfracconv."):
        if info.name not in SKIP:
            names.add(info.name)
    return sorted(names)


@pytest.mark.parametrize("name", _modules())
def test_module_examples_run(name):
    mod = importlib.import_module(name)
    result = doctest.testmod(mod, optionflags=FLAGS, report=True)
    assert result.failed == 0, f"{result.failed} example(s) of {name} failed (see the output)"
    assert result.attempted >= MINIMUM.get(name, 0), (name, result.attempted)


def test_total_examples():
    total = 0
    for name in MINIMUM:
        total += doctest.testmod(importlib.import_module(name), optionflags=FLAGS, report=False).attempted
    assert total >= 500, total


# The submodules whose public functions are documented like the package's
# own: each one's __all__, plus the public helpers named here.
SUBMODULES = {
    "pyfracconv.grid": (),
    "pyfracconv.records": ("open_npy",),
    "pyfracconv.dask": (),
}


def _is_exception(obj):
    return inspect.isclass(obj) and issubclass(obj, BaseException)


def _public_callables():
    """Every public function of pyfracconv.__all__ and of SUBMODULES, and
    every public method of every public class of pyfracconv.__all__ (the
    exception classes have their own test below), as (id, object)."""
    found = {}
    for name in pyfracconv.__all__:
        obj = getattr(pyfracconv, name)
        if inspect.isfunction(obj):
            found[name] = obj
        elif inspect.isclass(obj) and not _is_exception(obj):
            for attr, raw in vars(obj).items():
                if attr.startswith("_"):
                    continue
                if isinstance(raw, (staticmethod, classmethod)):
                    raw = raw.__func__
                if inspect.isfunction(raw):
                    found[f"{name}.{attr}"] = raw
    for modname, extra in SUBMODULES.items():
        mod = importlib.import_module(modname)
        for name in tuple(getattr(mod, "__all__", ())) + tuple(extra):
            obj = getattr(mod, name)
            if inspect.isfunction(obj):
                found[f"{modname}.{name}"] = obj
    return sorted(found.items())


def _public_properties():
    """Every public property of every public class of pyfracconv.__all__."""
    found = {}
    for name in pyfracconv.__all__:
        obj = getattr(pyfracconv, name)
        if inspect.isclass(obj) and not _is_exception(obj):
            for attr, raw in vars(obj).items():
                if not attr.startswith("_") and isinstance(raw, property):
                    found[f"{name}.{attr}"] = raw
    return sorted(found.items())


CALLABLES = _public_callables()
PROPERTIES = _public_properties()
# The Stream properties, named so that the enumeration cannot lose them.
STREAM_PROPERTIES = [
    "count",
    "nbytes",
    "terms",
    "remaining",
    "past_horizon",
    "horizon_policy",
    "channels",
    "mode",
    "order",
    "step",
    "rule",
    "tol",
    "horizon",
]


def test_enumeration_finds_the_known_api():
    """The enumeration sees the core functions, the classes' methods and the
    submodules (a broken enumeration would pass every test below)."""
    ids = {i for i, _ in CALLABLES}
    for known in (
        "weights",
        "lagged_sum",
        "integral",
        "derivative",
        "get_include",
        "get_lib_dir",
        "solve",
        "export_c",
        "export_controller_c",
        "operator_response",
        "controller_response",
        "Stream.integral",
        "Stream.from_kernel",
        "Stream.push",
        "Stream.load",
        "TimedStream.push",
        "Stepper.advance",
        "Controller.update",
        "pyfracconv.grid.graded_mesh",
        "pyfracconv.records.apply_npy",
        "pyfracconv.dask.solve_many",
    ):
        assert known in ids, known
    assert len(ids) >= 50, len(ids)
    props = {i for i, _ in PROPERTIES}
    assert {f"Stream.{p}" for p in STREAM_PROPERTIES} <= props, props


def _sections(doc):
    """numpydoc section titles: a line followed by a line of dashes."""
    lines = [ln.strip() for ln in inspect.cleandoc(doc).splitlines()]
    return {a for a, b in zip(lines, lines[1:]) if b and set(b) == {"-"} and len(b) == len(a)}


def _documented(obj):
    doc = obj.__doc__ or ""
    return _sections(doc), doc


@pytest.mark.parametrize("func", [f for _, f in CALLABLES], ids=[i for i, _ in CALLABLES])
def test_functions_and_methods_have_every_section(func):
    sections, doc = _documented(func)
    params = [p for p in inspect.signature(func).parameters if p not in ("self", "cls")]
    wanted = {"Returns", "Raises", "Examples", "See Also"}
    if params:
        wanted.add("Parameters")
    assert wanted <= sections, (func.__qualname__, wanted - sections)
    assert ">>>" in doc
    for p in params:
        assert p in doc, (func.__qualname__, p)


@pytest.mark.parametrize("name", STREAM_PROPERTIES)
def test_stream_properties_have_examples_and_see_also(name):
    prop = inspect.getattr_static(Stream, name)
    assert isinstance(prop, property)
    sections, doc = _documented(prop)
    assert {"Examples", "See Also"} <= sections, (name, sections)
    assert ">>>" in doc


@pytest.mark.parametrize("prop", [p for _, p in PROPERTIES], ids=[i for i, _ in PROPERTIES])
def test_properties_have_examples_and_see_also(prop):
    """The public properties of every class (Stream's included)."""
    sections, doc = _documented(prop)
    assert {"Examples", "See Also"} <= sections, sections
    assert ">>>" in doc


@pytest.mark.parametrize(
    "name",
    [
        "FracconvError",
        "ArgumentError",
        "SampleError",
        "StateError",
        "InputTypeError",
        "OutOfMemory",
        "BusyError",
        "RangeError",
        "HorizonError",
    ],
)
def test_exceptions_have_examples(name):
    sections, doc = _documented(getattr(pyfracconv, name))
    assert {"Examples", "See Also"} <= sections and ">>>" in doc, name
