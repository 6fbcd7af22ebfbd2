"""The Examples sections of the public docstrings run, and every public
function, method and property documents its Parameters, Returns, Raises,
Examples and See Also (the numpydoc format; numpydoc's style guide).

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
        total += doctest.testmod(importlib.import_module(name), optionflags=FLAGS,
                                 report=False).attempted
    assert total >= 150, total


FUNCTIONS = [pyfracconv.weights, pyfracconv.lagged_sum, pyfracconv.integral,
             pyfracconv.derivative, pyfracconv.get_include, pyfracconv.get_lib_dir]
METHODS = ["integral", "derivative", "from_kernel", "push", "push_many", "preview",
           "history", "reset", "reserve", "save", "load"]
PROPERTIES = ["count", "nbytes", "terms", "remaining", "past_horizon",
              "horizon_policy", "channels", "mode", "order", "step", "rule", "tol",
              "horizon"]


def _sections(doc):
    """numpydoc section titles: a line followed by a line of dashes."""
    lines = [ln.strip() for ln in inspect.cleandoc(doc).splitlines()]
    return {a for a, b in zip(lines, lines[1:]) if b and set(b) == {"-"} and len(b) == len(a)}


def _documented(obj):
    doc = obj.__doc__ or ""
    return _sections(doc), doc


@pytest.mark.parametrize("func", FUNCTIONS + [getattr(Stream, m) for m in METHODS],
                         ids=[f.__name__ for f in FUNCTIONS] + [f"Stream.{m}" for m in METHODS])
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


@pytest.mark.parametrize("name", PROPERTIES)
def test_properties_have_examples_and_see_also(name):
    prop = inspect.getattr_static(Stream, name)
    assert isinstance(prop, property)
    sections, doc = _documented(prop)
    assert {"Examples", "See Also"} <= sections, (name, sections)
    assert ">>>" in doc


@pytest.mark.parametrize("name", ["FracconvError", "ArgumentError", "SampleError",
                                  "StateError", "InputTypeError", "OutOfMemory",
                                  "BusyError", "RangeError", "HorizonError"])
def test_exceptions_have_examples(name):
    sections, doc = _documented(getattr(pyfracconv, name))
    assert {"Examples", "See Also"} <= sections and ">>>" in doc, name
