"""pyfracconv: fractional integrals and derivatives of sampled signals.

Quadrature weights (product rectangle and trapezoidal rules,
Grunwald-Letnikov, L1) and fast, accurate lagged sums over whole
histories: batch functions for recorded signals and streams that take one
sample at a time.
"""

from ._errors import (
    ArgumentError,
    BusyError,
    HorizonError,
    RangeError,
    FracconvError,
    InputTypeError,
    OutOfMemory,
    SampleError,
    StateError,
)
from ._core import derivative, get_include, integral, lagged_sum, weights
from ._fracconv import ffi as _ffi, lib as _lib

__version__ = "0.1.0"
#: Version string of the compiled C library (equal to __version__).
c_version = _ffi.string(_lib.fc_version_string()).decode()

from .stream import Stream
from .solve import NewtonError, RhsError, SolveResult, SolverError, Stepper, solve
from .control import Controller, HorizonWarning
from .frequency import FrequencyResponse, controller_response, operator_response

__all__ = [
    "weights",
    "lagged_sum",
    "integral",
    "derivative",
    "get_include",
    "Stream",
    "solve",
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
    "HorizonError",
    "RangeError",
    "__version__",
]
