"""pyfracconv: fractional integrals and derivatives of sampled signals.

Quadrature weights (product rectangle and trapezoidal rules,
Grunwald-Letnikov, L1) and fast, accurate lagged sums over whole
histories: batch functions for recorded signals and streams that take one
sample at a time.

Examples
--------
The order-1 rectangle rule is the left rectangle sum (common practice), the
same from the batch function and from a stream:

>>> import pyfracconv
>>> pyfracconv.integral([1.0, 2.0, 3.0], 1.0, 0.5)
array([0. , 0.5, 1.5])
>>> s = pyfracconv.Stream.integral(1.0, 0.5)
>>> [s.push(x) for x in (1.0, 2.0, 3.0)]
[0.0, 0.5, 1.5]
>>> pyfracconv.c_version == pyfracconv.__version__
True
"""

import os as _os

try:
    from . import _fracconv  # noqa: F401  (the compiled core)
except ImportError as _exc:  # pragma: no cover - exercised by a subprocess test
    _here = _os.path.dirname(_os.path.abspath(__file__))
    _checkout = _os.path.isfile(_os.path.join(_here, _os.pardir, "setup_build.py"))
    raise ImportError(
        "pyfracconv: the compiled core (pyfracconv._fracconv) is missing from "
        f"{_here}. "
        + (
            "This is the source checkout, which shadows an installed copy when "
            "Python runs from its top folder: run from another directory, or "
            "build in place with `pip install -e .`."
            if _checkout
            else "Reinstall the package (`pip install --force-reinstall pyfracconv`)."
        )
    ) from _exc

from ._errors import (
    ArgumentError,
    BusyError,
    FileError,
    HorizonError,
    RangeError,
    FracconvError,
    InputTypeError,
    OutOfMemory,
    SampleError,
    StateError,
)
from ._core import derivative, get_include, get_lib_dir, integral, lagged_sum, weights
from ._fracconv import ffi as _ffi, lib as _lib

__version__ = "0.1.0"
#: Version string of the compiled C library (equal to __version__).
c_version = _ffi.string(_lib.fc_version_string()).decode()

from .stream import Stream
from .stream_timed import TimedStream
from .solve import NewtonError, RhsError, SolveResult, SolverError, Stepper, solve
from .export import export_c, export_controller_c
from .control import Controller, HorizonWarning
from .frequency import FrequencyResponse, controller_response, operator_response

__all__ = [
    "weights",
    "lagged_sum",
    "integral",
    "derivative",
    "get_include",
    "get_lib_dir",
    "Stream",
    "TimedStream",
    "solve",
    "export_c",
    "export_controller_c",
    "Stepper",
    "SolveResult",
    "Controller",
    "HorizonWarning",
    "FrequencyResponse",
    "operator_response",
    "controller_response",
    "SolverError",
    "RhsError",
    "NewtonError",
    "FracconvError",
    "ArgumentError",
    "SampleError",
    "StateError",
    "InputTypeError",
    "OutOfMemory",
    "BusyError",
    "FileError",
    "HorizonError",
    "RangeError",
    "__version__",
]
