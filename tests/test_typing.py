"""The public API carries type hints and says so (PEP 561: a ``py.typed``
marker in the package, shipped as package data)."""

import inspect
import os
import typing

import pyfracconv
from pyfracconv import Stream

ROOT = os.path.dirname(os.path.dirname(os.path.abspath(__file__)))
PKG = os.path.dirname(os.path.abspath(pyfracconv.__file__))


def test_py_typed_marker_is_shipped():
    assert os.path.isfile(os.path.join(PKG, "py.typed"))
    text = open(os.path.join(ROOT, "pyproject.toml"), encoding="utf-8").read()
    section = text.split("[tool.setuptools.package-data]", 1)[1].split("\n[", 1)[0]
    assert '"py.typed"' in section


def _check_annotated(func, name):
    sig = inspect.signature(func)
    for p in sig.parameters.values():
        if p.name in ("self", "cls"):
            continue
        assert p.annotation is not inspect.Parameter.empty, (name, p.name)
    assert sig.return_annotation is not inspect.Signature.empty, name
    # the annotations must resolve (no stale names)
    typing.get_type_hints(func)


def test_public_functions_are_annotated():
    for name in ("weights", "lagged_sum", "integral", "derivative", "get_include", "get_lib_dir"):
        _check_annotated(getattr(pyfracconv, name), name)


def test_stream_methods_and_properties_are_annotated():
    for name in (
        "integral",
        "derivative",
        "from_kernel",
        "push",
        "push_many",
        "preview",
        "history",
        "reset",
        "reserve",
        "save",
        "load",
    ):
        _check_annotated(getattr(Stream, name), f"Stream.{name}")
    for name, value in vars(Stream).items():
        if isinstance(value, property):
            _check_annotated(value.fget, f"Stream.{name}")
    _check_annotated(Stream.horizon_policy.fset, "Stream.horizon_policy (setter)")
