"""Caputo initial value problems: :func:`solve` and :class:`Stepper`.

The problem D^a y = f(t, y), y^(k)(t0) = y0_k for k < ceil(a), 0 < a <= 2,
is solved as the equivalent Volterra equation y = T + I^a f(., y), T the
Taylor polynomial of the initial values (Diethelm, The Analysis of
Fractional Differential Equations, Springer 2010), by the library's product
rules applied to f along the solution (the C solver in ``csrc/solver.c``).
The history sums of the f values are kept by the library's streams, exact
or compressed. On a given grid (``solve(..., t=grid)``) the explicit
rectangle rule and the predictor-corrector run in Python over the weights
of :mod:`pyfracconv.grid` (:mod:`pyfracconv.solve_grid`).
"""

from __future__ import annotations

import math
import struct
import sys
import threading

import numpy as np

from ._checks import in_range, order_range, range_text
from ._core import (
    SIZE_MAX,
    as_float_array,
    check_bytes,
    check_compressed,
    check_count,
    check_real,
    check_step,
    show,
)
from ._errors import (
    ArgumentError,
    BusyError,
    FracconvError,
    HorizonError,
    NewtonError,
    RhsError,
    SolverError,
    InputTypeError,
    OutOfMemory,
    StateError,
    raise_for_status,
)
from ._files import (
    DEFAULT_MAX_SIZE,
    check_max_size,
    check_path,
    check_write_path,
    read_file,
    state_error,
    write_file,
)
from ._fracconv import ffi, lib

__all__ = ["solve", "Stepper", "SolveResult", "SolverError", "RhsError", "NewtonError"]

METHODS = {
    "rectangle": lib.FC_METHOD_RECTANGLE,
    "predictor-corrector": lib.FC_METHOD_PC,
    "trapezoid": lib.FC_METHOD_TRAPEZOID,
    "implicit-rectangle": lib.FC_METHOD_IMPLICIT_RECTANGLE,
}
IMPLICIT = ("trapezoid", "implicit-rectangle")
_METHOD_NAMES = {v: k for k, v in METHODS.items()}
MEMORIES = {"exact": lib.FC_MODE_EXACT, "compressed": lib.FC_MODE_COMPRESSED}
_MEMORY_NAMES = {v: k for k, v in MEMORIES.items()}

# Envelope of saved steppers: magic, 0x5A for a scalar problem or 0xA5 for a
# vector one, a zero byte; then the C bytes (csrc/solver.c).
_ENV_MAGIC = b"pyfcV1"
_ENV_SCALAR = 0x5A
_ENV_ARRAY = 0xA5
_ENV_LEN = 8


# ------------------------------------------------------------ exceptions

# SolverError, RhsError and NewtonError live in _errors (the status table
# maps the solver's statuses to them) and are re-exported here.


# ------------------------------------------------------------ result


class SolveResult:
    """The solution on the grid: ``t`` of shape (n+1,), ``y`` of shape
    (n+1,) for a scalar problem or (n+1, m); ``rhs_evals`` and
    ``jac_evals`` count the calls of the right-hand side (difference
    Jacobians included) and of the Jacobian. Unpacks as ``t, y``."""

    def __init__(self, t, y, rhs_evals, jac_evals, method, memory):
        self.t = t
        self.y = y
        self.rhs_evals = int(rhs_evals)
        self.jac_evals = int(jac_evals)
        self.method = method
        self.memory = memory

    def __iter__(self):
        return iter((self.t, self.y))

    def __len__(self):
        return 2

    def __repr__(self):
        return (
            f"SolveResult(steps={len(self.t) - 1}, shape={self.y.shape}, "
            f"method={self.method!r}, memory={self.memory!r}, "
            f"rhs_evals={self.rhs_evals}, jac_evals={self.jac_evals})"
        )


# ------------------------------------------------------------ callbacks


class _Run:
    """What the C callbacks need: the user functions, the problem shape and
    one NumPy view of each C buffer (bound on the first call)."""

    __slots__ = (
        "fn",
        "jac",
        "m",
        "shape",
        "jshape",
        "scalar",
        "yptr",
        "yview",
        "fview",
        "jptr",
        "jview",
        "fail",
    )

    def __init__(self, fn, jac, m, scalar):
        self.fn = fn
        self.jac = jac
        self.m = m
        self.scalar = scalar
        self.shape = (m,)
        self.jshape = (m, m)
        self.yptr = None
        self.yview = None
        self.fview = None
        self.jptr = None
        self.jview = None
        self.fail = None

    def bind(self, y, f):
        m = self.m
        yv = np.frombuffer(ffi.buffer(y, 8 * m), dtype=np.float64)
        yv.flags.writeable = False
        self.yview = yv
        self.fview = np.frombuffer(ffi.buffer(f, 8 * m), dtype=np.float64)
        self.yptr = y


_NAN = float("nan")


@ffi.def_extern()
def _fc_py_rhs1(t, y, user):
    # scalar problems: returns f; NaN after recording a failure
    run = ffi.from_handle(user)
    try:
        v = run.fn(t, y)
    except BaseException as exc:
        run.fail = ("raised", exc, t)
        return _NAN
    if type(v) is float:
        return v
    try:
        return float(v) if np.ndim(v) == 0 else _bad(run, v, t)
    except Exception:
        return _bad(run, v, t)


def _bad(run, v, t):
    run.fail = ("shape", v, t)
    return _NAN


def _rhs1_slow(run):
    """The rest of _fc_py_rhs1 for the direct C path (_fc_py_rhs1_direct,
    setup_build.py), which handles a float result itself: a recorded
    exception, or another type converted or refused, as _fc_py_rhs1."""

    def slow(t, v, raised):
        if raised:
            run.fail = ("raised", v, t)
            return _NAN
        try:
            return float(v) if np.ndim(v) == 0 else _bad(run, v, t)
        except Exception:
            return _bad(run, v, t)

    return slow


# The scalar rhs called straight from C with the Python C API: CPython
# only (object addresses are id()); elsewhere the cffi callback.
_DIRECT = sys.implementation.name == "cpython"


@ffi.def_extern()
def _fc_py_rhs(t, y, f, user):
    run = ffi.from_handle(user)
    if run.yview is None:  # the solver passes the same buffers on every call
        run.bind(y, f)
    try:
        v = run.fn(t, run.yview)
    except BaseException as exc:
        run.fail = ("raised", exc, t)
        return 1
    try:
        if type(v) is not np.ndarray:
            v = np.asarray(v, dtype=np.float64)
        if v.shape != run.shape:
            run.fail = ("shape", v, t)
            return 1
        run.fview[:] = v
    except Exception:
        run.fail = ("shape", v, t)
        return 1
    return 0


@ffi.def_extern()
def _fc_py_jac(t, y, jac, user):
    run = ffi.from_handle(user)
    m = run.m
    if jac != run.jptr:
        run.jview = np.frombuffer(ffi.buffer(jac, 8 * m * m), dtype=np.float64).reshape(m, m)
        run.jptr = jac
    if y != run.yptr:
        yv = np.frombuffer(ffi.buffer(y, 8 * m), dtype=np.float64)
        yv.flags.writeable = False
        yarg = yv
    else:
        yarg = run.yview
    try:
        v = run.jac(t, yarg[0] if run.scalar else yarg)
    except BaseException as exc:
        run.fail = ("jac raised", exc, t)
        return 1
    try:
        a = np.asarray(v, dtype=np.float64)
        if run.scalar and a.size == 1:
            a = a.reshape(1, 1)
        if a.shape != run.jshape:
            run.fail = ("jac shape", v, t)
            return 1
        run.jview[...] = a
    except Exception:
        run.fail = ("jac shape", v, t)
        return 1
    return 0


# ------------------------------------------------------------ checks


def _check_method(method):
    if not isinstance(method, str) or method not in METHODS:
        expected = ", ".join(repr(k) for k in METHODS)
        raise ArgumentError(f"method={show(method)}: unknown; expected one of {expected}")
    return str(method)


def _check_memory(memory):
    if not isinstance(memory, str) or memory not in MEMORIES:
        raise ArgumentError(f"memory={show(memory)}: unknown; expected one of 'exact', 'compressed'")
    return str(memory)


def _values(name, value, m=None):
    """A real scalar or a 1-D array of finite reals as (array, scalar?)."""
    arr = as_float_array(name, value)
    if arr.ndim == 1 and arr.size == 1 and np.ndim(value) == 0:
        arr = arr.reshape(())  # np.ascontiguousarray makes scalars 1-D
    if arr.ndim > 1:
        raise ArgumentError(f"{name}: expected a number or a 1-D array, got shape {arr.shape}")
    if arr.ndim == 1 and arr.size == 0:
        raise ArgumentError(f"{name}: empty; expected at least one component")
    if m is not None and arr.ndim == 1 and arr.size != m:
        raise ArgumentError(
            f"{name}: {arr.size} values for {m} components (shape {arr.shape}); "
            f"expected a number or shape ({m},)"
        )
    bad = np.flatnonzero(~np.isfinite(arr.ravel()))
    if bad.size:
        i = int(bad[0])
        where = f"[{i}]" if arr.ndim else ""
        raise ArgumentError(f"{name}{where}={show(arr.ravel()[i])}: must be finite")
    return arr, arr.ndim == 0


def _setup(
    rhs,
    y0,
    order,
    step,
    dy0,
    t0,
    method,
    memory,
    tol,
    horizon,
    jacobian,
    corrections,
    newton_tol,
    newton_maxiter,
):
    """Every argument checked; returns the keyword set for _make."""
    if not callable(rhs):
        raise InputTypeError(f"rhs={show(rhs)}: expected a callable f(t, y)")
    if jacobian is not None and not callable(jacobian):
        raise InputTypeError(f"jacobian={show(jacobian)}: expected None or a callable J(t, y)")
    y0a, scalar = _values("y0", y0)
    m = 1 if scalar else int(y0a.size)
    oa, _ = _values("order", order, m)
    orders = np.broadcast_to(oa, (m,)).astype(np.float64)
    for i, a in enumerate(orders):
        if not (0.0 < a <= 2.0):
            where = "" if oa.ndim == 0 else f"[{i}]"
            raise ArgumentError(f"order{where}={show(float(a))}: must be in (0, 2]")
    h = check_step(step)
    t0f = check_real("t0", t0)
    if not math.isfinite(t0f):
        raise ArgumentError(f"t0={show(t0)}: must be finite")
    meth = _check_method(method)
    mem = _check_memory(memory)
    need_d = bool(np.any(orders > 1.0))
    if dy0 is None:
        if need_d:
            i = int(np.argmax(orders > 1.0))
            raise ArgumentError(
                f"dy0=None: required when an order exceeds 1 (order"
                f"{'' if oa.ndim == 0 else f'[{i}]'}={show(float(orders[i]))}: "
                "the Caputo problem needs y'(t0) too)"
            )
        init = np.ascontiguousarray(np.broadcast_to(y0a, (m,)), dtype=np.float64)
    else:
        if not need_d:
            raise ArgumentError(
                f"dy0={show(dy0)}: given, but every order is <= 1, where only y(t0) is an initial condition"
            )
        da, dscalar = _values("dy0", dy0, m)
        if scalar and not dscalar:
            raise ArgumentError(f"dy0: expected a number for a scalar y0, got shape {da.shape}")
        dfull = np.broadcast_to(da, (m,))
        for i in range(m):
            if orders[i] <= 1.0 and dfull[i] != 0.0:
                name = "dy0" if dscalar else f"dy0[{i}]"
                raise ArgumentError(
                    f"{name}={show(float(dfull[i]))}: component {i} has order "
                    f"{show(float(orders[i]))} <= 1, where y'(t0) is not an initial "
                    "condition; pass 0 there"
                )
        init = np.concatenate([np.broadcast_to(y0a, (m,)), np.broadcast_to(da, (m,))])
        init = np.ascontiguousarray(init, dtype=np.float64)
    corr = check_count("corrections", corrections, 1, 100)
    if corr != 1 and meth != "predictor-corrector":
        raise ArgumentError(
            f"corrections={corr}: only used by method='predictor-corrector' (method={meth!r})"
        )
    if jacobian is not None and meth not in IMPLICIT:
        raise ArgumentError(
            f"jacobian: only used by the implicit methods 'trapezoid' and "
            f"'implicit-rectangle' (method={meth!r})"
        )
    ntol = check_real("newton_tol", newton_tol)
    if not (1e-15 <= ntol <= 1e-2):
        raise ArgumentError(f"newton_tol={show(newton_tol)}: must be in [1e-15, 1e-2]")
    nmax = check_count("newton_maxiter", newton_maxiter, 1, 1000)
    # exact memory has no horizon (every method's history grows with the
    # steps): a horizon given with it is not used
    tolf, hz = 0.0, 0.0
    if mem == "compressed":
        if horizon is None:
            raise ArgumentError(
                "horizon=None: required for memory='compressed' (the number of "
                "steps the tolerance is promised for)"
            )
        tolf, hz = check_compressed(tol, horizon)
        cmode = int(lib.FC_MODE_COMPRESSED)
        for i, a in enumerate(orders):
            where = "" if oa.ndim == 0 else f"[{i}]"
            a = float(a)
            # the streams each method keeps (csrc/solver.c): the rectangle
            # method the product rectangle rule; the implicit rectangle
            # method the rectangle rule and, for its weight differences,
            # the L1 rule of order 1 - a (a < 1) or the trapezoid rule of
            # order a - 1 (a > 1); the others the rectangle and trapezoid rules
            if meth == "rectangle":
                needs = [("rectangle", a, "rectangle rule")]
            elif meth == "implicit-rectangle":
                needs = [("rectangle", a, "rectangle rule")]
                if a < 1.0:
                    needs.append(("l1", 1.0 - a, "L1 rule of order 1 - a"))
                elif a > 1.0:
                    needs.append(("trapezoid", a - 1.0, "trapezoid rule of order a - 1"))
            else:
                needs = [("rectangle", a, "rectangle rule"), ("trapezoid", a, "trapezoid rule")]
            for rule, b, what in needs:
                rng = order_range(rule, cmode)
                if not in_range(rng, b):
                    raise ArgumentError(
                        f"order{where}={show(a)}, method={meth!r}: memory='compressed' "
                        f"serves this method ({what}) for {range_text(rng)}"
                        + ("" if b == a else f" (here {show(b)})")
                        + "; use memory='exact'"
                    )
    return dict(
        m=m,
        scalar=scalar,
        orders=np.ascontiguousarray(orders),
        h=h,
        t0=t0f,
        init=init,
        method=meth,
        memory=mem,
        tol=tolf,
        horizon=hz,
        corr=corr,
        ntol=ntol,
        nmax=nmax,
        rhs=rhs,
        jacobian=jacobian,
    )


def _status_error(st, what):
    if st == lib.FC_ERR_HORIZON:
        return HorizonError(what)
    try:
        raise_for_status(st, what)
    except FracconvError as exc:
        return exc
    return FracconvError(what)  # pragma: no cover


# ------------------------------------------------------------ stepper


class Stepper:
    """A Caputo initial value problem advanced step by step (co-simulation,
    checkpoints). Arguments as for :func:`solve`; ``horizon`` (in steps) is
    required for ``memory='compressed'`` (with exact memory it is not used).

    ``advance(n)`` returns the n new times and states; :attr:`t`, :attr:`y`,
    :attr:`steps`, :attr:`rhs_evals`, :attr:`jac_evals` tell where it is;
    :meth:`save` and :meth:`load` checkpoint and resume bit for bit.

    The ``y`` passed to a vector right-hand side is a read-only view of the
    solver's buffer, reused on every call: copy it to keep it.

    Threads: one stepper must not be used by two threads at once; a call
    that finds it in use raises :class:`BusyError` and changes nothing. It
    is in use for the whole of :meth:`advance`, its callbacks included (the
    C library's busy guard, fc_solver_*: FC_ERR_BUSY), so a right-hand side
    that reads its own stepper's :attr:`t` or :attr:`y` is refused too.
    """

    def __init__(
        self,
        rhs,
        y0,
        order,
        step,
        *,
        dy0=None,
        t0=0.0,
        method="predictor-corrector",
        memory="exact",
        tol=1e-12,
        horizon=None,
        jacobian=None,
        corrections=1,
        newton_tol=1e-12,
        newton_maxiter=50,
    ):
        p = _setup(
            rhs,
            y0,
            order,
            step,
            dy0,
            t0,
            method,
            memory,
            tol,
            horizon,
            jacobian,
            corrections,
            newton_tol,
            newton_maxiter,
        )
        pp = ffi.new("fc_solver **")
        st = lib.fc_solver_create(
            p["m"],
            ffi.from_buffer("double[]", p["orders"]),
            p["h"],
            p["t0"],
            ffi.from_buffer("double[]", p["init"]),
            METHODS[p["method"]],
            MEMORIES[p["memory"]],
            p["tol"],
            p["horizon"],
            pp,
        )
        if st:
            raise _status_error(
                st,
                f"Stepper(order={show(order)}, step={show(step)}, "
                f"method={p['method']!r}, memory={p['memory']!r})",
            )
        s = ffi.gc(pp[0], lib.fc_solver_free)
        raise_for_status(lib.fc_solver_set_newton(s, p["ntol"], p["nmax"]), "newton_tol")
        raise_for_status(lib.fc_solver_set_corrections(s, p["corr"]), "corrections")
        self._init(s, p["m"], p["scalar"], p["method"], p["memory"], rhs, jacobian, p["horizon"])

    def _init(self, s, m, scalar, method, memory, rhs, jacobian, horizon):
        self._s = s
        self._hz = horizon
        self._m = m
        self._scalar = scalar
        self._method = method
        self._memory = memory
        self._lock = threading.Lock()
        self._set_callbacks(rhs, jacobian)
        # step()'s buffers and their C views, made once
        self._t1 = np.empty(1)
        self._y1 = np.empty((1, m))
        self._c1 = (ffi.from_buffer("double[]", self._t1), ffi.from_buffer("double[]", self._y1))

    def _set_callbacks(self, rhs, jacobian):
        self._run = _Run(rhs, jacobian, self._m, self._scalar)
        self._handle = ffi.new_handle(self._run)
        user = self._handle
        if self._scalar and _DIRECT:
            # the C bridge calls rhs itself (one C-to-Python crossing less
            # per call); the objects whose addresses it holds are kept here
            slow = _rhs1_slow(self._run)
            call = ffi.new("_fc_py_call1 *")
            call.fn = ffi.cast("void *", id(rhs))
            call.slow = ffi.cast("void *", id(slow))
            self._direct = (rhs, slow, call)
            fn, user = lib._fc_py_rhs1_direct, call
        else:
            self._direct = None
            fn = lib._fc_py_rhs1_bridge if self._scalar else lib._fc_py_rhs
        raise_for_status(lib.fc_solver_set_rhs(self._s, fn, user), "rhs")
        raise_for_status(
            lib.fc_solver_set_jacobian(
                self._s, lib._fc_py_jac if jacobian is not None else ffi.NULL, self._handle
            ),
            "jacobian",
        )

    # -------------------------------------------------------- queries

    def _get(self, fn, ctype):
        p = ffi.new(ctype)
        raise_for_status(fn(self._s, p), fn.__name__)
        return p[0]

    @property
    def t(self):
        """Current time t0 + steps * step.

        See Also
        --------
        y, steps

        Examples
        --------
        >>> import pyfracconv
        >>> s = pyfracconv.Stepper(lambda t, y: -y, 1.0, 1.0, 0.5, method="rectangle")
        >>> _ = s.advance(3)
        >>> s.t
        1.5
        """
        return float(self._get(lib.fc_solver_time, "double *"))

    @property
    def y(self):
        """Current state (a float, or a copy of shape (m,)).

        See Also
        --------
        t, advance

        Examples
        --------
        At order 1 the rectangle method is explicit Euler: y_n = (1 - h)^n
        (common practice).

        >>> import pyfracconv
        >>> s = pyfracconv.Stepper(lambda t, y: -y, 1.0, 1.0, 0.5, method="rectangle")
        >>> _ = s.advance(3)
        >>> s.y == 0.5**3
        True
        >>> pyfracconv.Stepper(lambda t, y: -y, [1.0, 2.0], 0.5, 0.1).y
        array([1., 2.])
        """
        out = np.empty(self._m)
        raise_for_status(lib.fc_solver_state(self._s, ffi.from_buffer("double[]", out)), "y")
        return float(out[0]) if self._scalar else out

    @property
    def steps(self):
        """Steps taken since t0.

        See Also
        --------
        t, advance, step

        Examples
        --------
        >>> import pyfracconv
        >>> s = pyfracconv.Stepper(lambda t, y: -y, 1.0, 1.0, 0.5, method="rectangle")
        >>> _ = s.advance(3)
        >>> s.steps
        3
        """
        return int(self._get(lib.fc_solver_steps, "uint64_t *"))

    def _counts(self):
        a = ffi.new("uint64_t *")
        b = ffi.new("uint64_t *")
        raise_for_status(lib.fc_solver_counts(self._s, a, b), "counts")
        return int(a[0]), int(b[0])

    @property
    def rhs_evals(self):
        """Calls of the right-hand side so far.

        See Also
        --------
        jac_evals, steps

        Examples
        --------
        The predictor-corrector with one correction evaluates the right-hand
        side twice a step (predict, evaluate, correct, evaluate: common
        practice), after one evaluation at t0:

        >>> import pyfracconv
        >>> s = pyfracconv.Stepper(lambda t, y: -y, 1.0, 0.5, 0.1)
        >>> _ = s.advance(3)
        >>> s.rhs_evals
        7
        """
        return self._counts()[0]

    @property
    def jac_evals(self):
        """Calls of the Jacobian so far (implicit methods with ``jacobian``;
        0 otherwise).

        See Also
        --------
        rhs_evals

        Examples
        --------
        >>> import pyfracconv
        >>> s = pyfracconv.Stepper(lambda t, y: -y, 1.0, 0.5, 0.1, method="trapezoid",
        ...                        jacobian=lambda t, y: -1.0)
        >>> _ = s.advance(3)
        >>> s.jac_evals
        3
        >>> pyfracconv.Stepper(lambda t, y: -y, 1.0, 0.5, 0.1).jac_evals
        0
        """
        return self._counts()[1]

    @property
    def nbytes(self):
        """Bytes of memory the solver holds (its streams included).

        See Also
        --------
        memory

        Examples
        --------
        >>> import pyfracconv
        >>> s = pyfracconv.Stepper(lambda t, y: -y, 1.0, 1.0, 0.5, method="rectangle")
        >>> _ = s.advance(3)
        >>> s.nbytes > 0
        True
        """
        return int(self._get(lib.fc_solver_nbytes, "size_t *"))

    @property
    def method(self):
        """The method name.

        See Also
        --------
        memory

        Examples
        --------
        >>> import pyfracconv
        >>> s = pyfracconv.Stepper(lambda t, y: -y, 1.0, 1.0, 0.5, method="rectangle")
        >>> _ = s.advance(3)
        >>> s.method
        'rectangle'
        """
        return self._method

    @property
    def memory(self):
        """'exact' or 'compressed'.

        See Also
        --------
        method, nbytes

        Examples
        --------
        >>> import pyfracconv
        >>> s = pyfracconv.Stepper(lambda t, y: -y, 1.0, 1.0, 0.5, method="rectangle")
        >>> _ = s.advance(3)
        >>> s.memory
        'exact'
        """
        return self._memory

    def __repr__(self):
        return (
            f"Stepper(m={self._m}, method={self._method!r}, memory={self._memory!r}, "
            f"steps={self.steps}, t={self.t!r})"
        )

    # -------------------------------------------------------- stepping

    def _advance_into(self, n, tbuf, ybuf, make_partial, cbufs=None):
        """Advance n steps writing into tbuf (n,) and ybuf (n, m) (cbufs:
        their C views when the caller holds them already); on a failure
        raise with make_partial(done) as the partial result."""
        done = ffi.new("size_t *")
        self._run.fail = None
        tc, yc = (
            cbufs
            if cbufs is not None
            else (ffi.from_buffer("double[]", tbuf), ffi.from_buffer("double[]", ybuf))
        )
        st = lib._fc_py_advance(self._s, n, tc, yc, done)
        if st == 0:
            return
        k = int(done[0])
        if st in (lib.FC_ERR_CALLBACK, lib.FC_ERR_NONFINITE, lib.FC_ERR_NEWTON):
            raise self._failure(st, make_partial(k))
        if st == lib.FC_ERR_HORIZON:
            hz = self._horizon()
            raise HorizonError(
                f"n={n}: past the horizon (horizon={hz:g} steps: {self.steps} done, "
                f"{max(int(hz) - self.steps, 0)} left); nothing was done. Create the "
                "stepper with a larger horizon"
            )
        raise _status_error(st, f"advance(n={n})")

    def _horizon(self):
        return self._hz

    def _failure(self, st, partial):
        sp = ffi.new("uint64_t *")
        tp = ffi.new("double *")
        lib.fc_solver_failure(self._s, sp, tp)
        step, t = int(sp[0]), float(tp[0])
        at = f"at step {step}, t={t!r}"
        fail, self._run.fail = self._run.fail, None
        keep = (
            f"; the solution up to step {step - 1 if step else 0} is in .partial"
            if step
            else "; nothing was computed"
        )
        if st == lib.FC_ERR_NEWTON:
            return NewtonError(
                f"Newton's method did not converge {at} (newton_maxiter reached or a "
                "singular iteration matrix); try a smaller step, a larger "
                f"newton_maxiter or newton_tol{keep}",
                step,
                t,
                partial,
            )
        if st == lib.FC_ERR_NONFINITE and fail is None:
            which = "rhs or jacobian" if self._method in IMPLICIT and self._run.jac is not None else "rhs"
            return RhsError(f"{which} returned a NaN or infinite value {at}{keep}", step, t, partial)
        kind, obj, _ = fail if fail is not None else ("raised", None, t)
        if kind in ("raised", "jac raised") and isinstance(obj, (KeyboardInterrupt, SystemExit)):
            return obj
        name = "jacobian" if kind.startswith("jac") else "rhs"
        if kind.endswith("raised"):
            err = RhsError(f"{name} raised {type(obj).__name__}: {obj} {at}{keep}", step, t, partial)
            err.__cause__ = obj
            return err
        want = "(m, m)" if name == "jacobian" else ("a number" if self._scalar else f"shape ({self._m},)")
        got = np.asarray(obj).shape if not isinstance(obj, (str, bytes)) else type(obj).__name__
        return RhsError(
            f"{name} returned a value of shape {got}, expected {want}, {at}{keep}", step, t, partial
        )

    def advance(self, n):
        """Advance by n >= 0 steps; returns (t, y) of the new steps: t of
        shape (n,), y of shape (n,) (scalar problem) or (n, m).

        Parameters
        ----------
        n : int
            Number of steps, >= 0 (0 returns empty arrays).

        Returns
        -------
        t : numpy.ndarray
            The n new times, shape (n,).
        y : numpy.ndarray
            The n new states, shape (n,) (scalar problem) or (n, m).

        Raises
        ------
        RhsError, NewtonError
            The run stopped at a step; ``.partial`` holds the steps of this
            call that completed (the stepper keeps them too).
        HorizonError
            memory='compressed' and the step count would pass the horizon
            (nothing done).
        ArgumentError, InputTypeError
            n negative or not an integer (nothing done).
        OutOfMemory
            The result cannot be allocated (nothing done).
        BusyError
            Another call is using the stepper (nothing done).

        See Also
        --------
        step : one step, without the per-call allocations.
        solve : the whole grid at once.

        Examples
        --------
        At order 1 the rectangle method is the explicit Euler method, so
        y' = -y, y(0) = 1 gives y_n = (1 - h)^n (common practice):

        >>> import numpy as np
        >>> import pyfracconv
        >>> s = pyfracconv.Stepper(lambda t, y: -y, 1.0, 1.0, 0.1, method="rectangle")
        >>> t, y = s.advance(3)
        >>> np.round(t, 12), np.round(y, 12)
        (array([0.1, 0.2, 0.3]), array([0.9  , 0.81 , 0.729]))
        >>> t, y = s.advance(2)
        >>> s.steps, round(s.t, 12), bool(np.isclose(y[-1], 0.9**5, rtol=1e-12))
        (5, 0.5, True)
        """
        n = check_count("n", n, 0, SIZE_MAX)
        m = self._m
        check_bytes(f"n={n}", 8 * n * (m + 1))
        try:
            tb = np.empty(n)
            yb = np.empty((n, m))
        except MemoryError:
            raise OutOfMemory(f"n={n}: could not allocate the result") from None
        if not self._lock.acquire(False):
            raise BusyError("advance: the stepper is being used by another call")
        try:

            def partial(k):
                return SolveResult(
                    tb[:k].copy(), self._shape(yb[:k].copy()), *self._counts(), self._method, self._memory
                )

            self._advance_into(n, tb, yb, partial)
        finally:
            self._lock.release()
        return tb, self._shape(yb)

    def step(self):
        """Advance by one step and return the new state: a float for a
        scalar problem, else a new array of shape (m,). The same step as
        ``advance(1)`` (bit for bit), without its per-call allocations:
        for loops that feed each new state back, such as a simulated
        plant in a control loop.

        Returns
        -------
        float or numpy.ndarray
            The new state y(t) at the new time :attr:`t`.

        Raises
        ------
        RhsError, NewtonError
            The step failed (``.partial`` is empty; nothing was advanced).
        HorizonError
            memory='compressed' and the step would pass the horizon.
        BusyError
            Another call is using the stepper (nothing done).

        See Also
        --------
        advance : n steps with their times.

        Examples
        --------
        >>> import pyfracconv
        >>> s = pyfracconv.Stepper(lambda t, y: -y, 1.0, 1.0, 0.01,
        ...                        method="rectangle")
        >>> y1 = s.step()      # explicit Euler for order 1: 1 - 0.01
        >>> round(y1, 12), s.steps
        (0.99, 1)
        """
        if not self._lock.acquire(False):
            raise BusyError("step: the stepper is being used by another call")
        try:
            self._advance_into(1, self._t1, self._y1, self._no_steps, self._c1)
        finally:
            self._lock.release()
        return float(self._y1[0, 0]) if self._scalar else self._y1[0].copy()

    def _no_steps(self, k):
        return SolveResult(
            np.empty(0), self._shape(np.empty((0, self._m))), *self._counts(), self._method, self._memory
        )

    def _shape(self, yb):
        return yb[:, 0] if self._scalar else yb

    # -------------------------------------------------------- save/load

    def save(self):
        """The state as bytes (versioned, checksummed, little-endian; not
        pickle). The callbacks are not saved: :meth:`load` takes them.

        Returns
        -------
        bytes

        Raises
        ------
        BusyError
            Another call is using the stepper.
        OutOfMemory
            The bytes cannot be allocated.

        See Also
        --------
        load, save_file

        Examples
        --------
        A loaded stepper resumes bit for bit (Caputo D^0.5 y = -y, whose
        solution is E_{1/2}(-sqrt t) = exp(t) erfc(sqrt t): Gorenflo,
        Kilbas, Mainardi and Rogosin 2014, docs/references.md):

        >>> import math
        >>> import numpy as np
        >>> import pyfracconv
        >>> def f(t, y):
        ...     return -y
        >>> s = pyfracconv.Stepper(f, 1.0, 0.5, 0.01)
        >>> _ = s.advance(50)
        >>> r = pyfracconv.Stepper.load(s.save(), f)
        >>> t, y = r.advance(50)
        >>> bool(np.array_equal(y, s.advance(50)[1]))
        True
        >>> bool(abs(y[-1] - math.exp(1) * math.erfc(1)) < 1e-4)
        True
        """
        if not self._lock.acquire(False):
            raise BusyError("save: the stepper is being used by another call")
        try:
            sp = ffi.new("size_t *")
            raise_for_status(lib.fc_solver_save_size(self._s, sp), "save()")
            size = int(sp[0])
            out = bytearray(_ENV_LEN + size)
            out[:_ENV_LEN] = _ENV_MAGIC + bytes([_ENV_SCALAR if self._scalar else _ENV_ARRAY, 0])
            view = memoryview(out)[_ENV_LEN:]
            raise_for_status(
                lib.fc_solver_save(
                    self._s, ffi.from_buffer("unsigned char[]", view, require_writable=True), size, sp
                ),
                "save()",
            )
            return bytes(out[: _ENV_LEN + int(sp[0])])
        finally:
            self._lock.release()

    @classmethod
    def load(cls, data, rhs, jacobian=None):
        """A stepper from :meth:`save` output, with its callbacks set again.

        Parameters
        ----------
        data : bytes-like
            What :meth:`save` returned (untrusted input: checked).
        rhs : callable
            The right-hand side ``rhs(t, y)``, as given to the saved
            stepper (not saved).
        jacobian : callable, optional
            ``jacobian(t, y)`` of the implicit methods (not saved).

        Returns
        -------
        Stepper

        Raises
        ------
        StateError
            data truncated, corrupted, forged, or of another format.
        InputTypeError
            data not bytes-like, rhs or jacobian not callable.
        ArgumentError
            A jacobian for an explicit method.

        See Also
        --------
        save, load_file

        Examples
        --------
        At order 1 the rectangle method is the explicit Euler method:
        y' = -y gives y_n = (1 - h)^n (common practice), also after a load:

        >>> import pyfracconv
        >>> s = pyfracconv.Stepper(lambda t, y: -y, 1.0, 1.0, 0.5, method="rectangle")
        >>> s.step()
        0.5
        >>> r = pyfracconv.Stepper.load(s.save(), lambda t, y: -y)
        >>> r.steps, r.method, r.step()
        (1, 'rectangle', 0.25)
        >>> pyfracconv.Stepper.load(s.save()[:-1], lambda t, y: -y)
        Traceback (most recent call last):
        ...
        pyfracconv._errors.StateError: data (... bytes): ...
        """
        if not isinstance(data, (bytes, bytearray, memoryview)):
            raise InputTypeError(f"data: expected bytes, got {type(data).__name__}")
        if not callable(rhs):
            raise InputTypeError(f"rhs={show(rhs)}: expected a callable f(t, y)")
        if jacobian is not None and not callable(jacobian):
            raise InputTypeError(f"jacobian={show(jacobian)}: expected None or a callable")
        b = bytes(data)
        if len(b) < _ENV_LEN + 8 or b[:6] != _ENV_MAGIC or b[6] not in (_ENV_SCALAR, _ENV_ARRAY) or b[7] != 0:
            raise StateError(
                f"data ({len(b)} bytes): not a saved pyfracconv stepper (wrong magic or truncated)"
            )
        blob = memoryview(b)[_ENV_LEN:]
        pp = ffi.new("fc_solver **")
        st = lib.fc_solver_load(ffi.from_buffer("unsigned char[]", blob), len(blob), pp)
        if st == lib.FC_ERR_FORMAT:
            raise StateError(
                f"data ({len(b)} bytes): truncated, corrupted or not a "
                "saved stepper of this version; nothing was loaded"
            )
        raise_for_status(st, "load")
        s = ffi.gc(pp[0], lib.fc_solver_free)
        mp = ffi.new("size_t *")
        raise_for_status(lib.fc_solver_dim(s, mp), "load")
        m = int(mp[0])
        scalar = b[6] == _ENV_SCALAR
        if scalar and m != 1:
            raise StateError(f"data: marked scalar but holds {m} components")
        # method and memory from the C bytes the loader accepted
        method = _METHOD_NAMES[int.from_bytes(b[_ENV_LEN + 12 : _ENV_LEN + 16], "little")]
        memory = _MEMORY_NAMES[int.from_bytes(b[_ENV_LEN + 16 : _ENV_LEN + 20], "little")]
        if jacobian is not None and method not in IMPLICIT:
            raise ArgumentError(f"jacobian: only used by the implicit methods (method={method!r})")
        # the horizon, bytes 56..64 of the C format (csrc/solver.c; exact
        # memory has none, though an older exact 'implicit-rectangle' blob
        # holds the horizon its creation required)
        horizon = struct.unpack_from("<d", b, _ENV_LEN + 56)[0] if memory == "compressed" else 0.0
        self = cls.__new__(cls)
        self._init(s, m, scalar, method, memory, rhs, jacobian, horizon)
        return self

    def save_file(self, path):
        """Write :meth:`save` to the file ``path`` atomically (temporary
        file in the same directory, fsync, rename over ``path``, directory
        sync; see :meth:`pyfracconv.Stream.save_file`). The callbacks are
        not saved.

        Parameters
        ----------
        path : str, bytes or os.PathLike
            The checkpoint file; its directory must exist.

        Returns
        -------
        None

        Raises
        ------
        FileError
            The file could not be written; the old file (if any) and the
            stepper are unchanged.
        ArgumentError, InputTypeError
            path is empty, ends in '/', contains NUL or is not a path.
        BusyError
            Another call is using the stepper.

        See Also
        --------
        load_file, save, Stream.save_file

        Examples
        --------
        At order 1 the rectangle method is the explicit Euler method:
        y' = -y gives y_n = (1 - h)^n (common practice), across a file:

        >>> import os, tempfile
        >>> import pyfracconv
        >>> s = pyfracconv.Stepper(lambda t, y: -y, 1.0, 1.0, 0.5, method="rectangle")
        >>> _ = s.advance(2)
        >>> with tempfile.TemporaryDirectory() as d:
        ...     path = os.path.join(d, "solver.ckpt")
        ...     s.save_file(path)
        ...     r = pyfracconv.Stepper.load_file(path, lambda t, y: -y)
        >>> r.step()
        0.125
        """
        p = check_write_path(path)
        write_file("save_file", p, self.save(), "the stepper")

    @classmethod
    def load_file(cls, path, rhs, jacobian=None, *, max_size=DEFAULT_MAX_SIZE):
        """A stepper from a file written by :meth:`save_file` (or by the C
        library's ``fc_solver_save_file``: it comes back with an explicit
        component axis), with its callbacks set again. The file is
        untrusted input: at most ``max_size`` bytes are read and they go
        through :meth:`load`.

        Parameters
        ----------
        path : str, bytes or os.PathLike
            The checkpoint file.
        rhs : callable
            The right-hand side ``rhs(t, y)`` (not saved).
        jacobian : callable, optional
            ``jacobian(t, y)`` of the implicit methods (not saved).
        max_size : int, optional
            Longest file accepted, in bytes (default 2**30).

        Returns
        -------
        Stepper

        Raises
        ------
        FileError
            The file could not be read.
        StateError
            The file is truncated, corrupted, forged, of another format or
            longer than max_size.
        InputTypeError, ArgumentError
            As for :meth:`load`; path not a path.

        See Also
        --------
        save_file, load

        Examples
        --------
        At order 1 the rectangle method is the explicit Euler method:
        y' = -y gives y_n = (1 - h)^n (common practice); a file that is not
        a checkpoint is refused:

        >>> import os, tempfile
        >>> import pyfracconv
        >>> s = pyfracconv.Stepper(lambda t, y: -y, 1.0, 1.0, 0.5, method="rectangle")
        >>> with tempfile.TemporaryDirectory() as d:
        ...     path = os.path.join(d, "solver.ckpt")
        ...     s.save_file(path)
        ...     r = pyfracconv.Stepper.load_file(path, lambda t, y: -y)
        ...     with open(os.path.join(d, "other"), "wb") as fh:
        ...         _ = fh.write(b"not a checkpoint")
        ...     try:
        ...         pyfracconv.Stepper.load_file(os.path.join(d, "other"), lambda t, y: -y)
        ...     except pyfracconv.StateError:
        ...         print("refused")
        refused
        >>> r.step(), r.step()
        (0.5, 0.25)
        """
        p = check_path("path", path)
        data = read_file("load_file", p, check_max_size(max_size))
        if data[:8] == b"FCSOLVE1":  # written by fc_solver_save_file
            data = _ENV_MAGIC + bytes([_ENV_ARRAY, 0]) + data
        try:
            return cls.load(data, rhs, jacobian)
        except StateError as exc:
            raise state_error("load_file", p, exc) from None


# ------------------------------------------------------------ solve


def _tqdm():
    try:
        from tqdm import tqdm
    except ImportError:
        raise ImportError(
            "progress=True needs the optional dependency tqdm: install it with "
            "pip install 'pyfracconv[progress]' (or pip install tqdm)"
        ) from None
    return tqdm


def solve(
    rhs,
    y0,
    order,
    step=None,
    n_steps=None,
    *,
    t=None,
    dy0=None,
    t0=None,
    method="predictor-corrector",
    memory="exact",
    tol=1e-12,
    horizon=None,
    jacobian=None,
    corrections=1,
    progress=False,
    newton_tol=1e-12,
    newton_maxiter=50,
):
    """Solve the Caputo initial value problem D^a y = f(t, y) on
    t_n = t0 + n*step, n = 0 .. n_steps, or on a given grid ``t``.

    Parameters
    ----------
    rhs : callable
        ``rhs(t, y)``: y a float for a scalar ``y0`` (return a number), else
        a read-only array of shape (m,) reused on every call (return shape
        (m,)).
    y0 : float or array_like of shape (m,)
        y(t0).
    order : float or array_like of shape (m,)
        The order a, 0 < a <= 2, one for all components or one per
        component.
    step : float
        Grid step h > 0 (with ``n_steps``; not with ``t``).
    n_steps : int
        Number of steps, >= 0.
    t : array_like, optional
        The grid instead of ``step`` and ``n_steps``: times t_0 < t_1 <
        ... (finite, strictly increasing; graded meshes from
        :func:`pyfracconv.grid.graded_mesh`); the problem starts at t[0].
        Every method: ``'rectangle'`` and ``'predictor-corrector'`` in
        their non-uniform forms (Liu, Roberts and Yan, Int. J. Comput.
        Math. 95 (2018) and Numer. Algorithms 78 (2018)), ``'trapezoid'``
        and ``'implicit-rectangle'`` with the same weights and the newest
        value implicit (Newton's method as on a uniform grid); exact
        memory, a direct O(N^2) engine in Python over the weights of
        :func:`pyfracconv.grid.grid_weights` (fine up to about 2e4 steps).
    dy0 : float or array_like, optional
        y'(t0); required when some order exceeds 1, refused otherwise.
    t0 : float, optional
        Start time (default 0) of the uniform grid; not with ``t``.
    method : {'predictor-corrector', 'rectangle', 'trapezoid', 'implicit-rectangle'}, optional
        Explicit product rectangle rule (order 1); the predictor-corrector
        of Diethelm, Ford and Freed 2002 (order min(2, 1+a) for smooth
        solutions); the implicit product trapezoidal rule with Newton's
        method (Garrappa 2015), order 2, for stiff problems with smooth
        solutions; the implicit product rectangle rule (right end points,
        order 1), strongly damped, for stiff problems whose solution is not
        smooth at t0.
    memory : {'exact', 'compressed'}, optional
        Exact history sums (O(N log^2 N) work in all, memory grows with N)
        or compressed ones (bounded memory, relative tolerance ``tol`` over
        ``horizon`` steps; orders < 2 for every method; for
        ``'implicit-rectangle'`` orders above 2**-54).
    tol : float, optional
        Tolerance of the compressed history sums, in [1e-15, 1e-2].
    horizon : float, optional
        Steps the compressed tolerance is promised for (default n_steps);
        not used with exact memory.
    jacobian : callable, optional
        ``jacobian(t, y)`` -> df/dy, shape (m, m) (a number for a scalar
        problem); implicit methods only; default forward differences.
    corrections : int, optional
        Corrector passes of ``'predictor-corrector'`` (1 .. 100).
    progress : bool, optional
        A progress bar (needs the optional ``progress`` extra, tqdm).
    newton_tol, newton_maxiter : optional
        Newton's method of the implicit methods: relative residual tolerance and
        iteration limit per step.

    Returns
    -------
    SolveResult
        ``t`` (n_steps+1,), ``y`` (n_steps+1,) or (n_steps+1, m),
        ``rhs_evals``, ``jac_evals``; unpacks as ``t, y``.

    Raises
    ------
    ArgumentError, InputTypeError
        Bad arguments, before any work.
    RhsError
        rhs (or jacobian) raised, returned a wrong shape or a NaN or
        infinite value; ``.partial`` holds the solution up to the last good
        step, ``.step`` and ``.time`` say where.
    NewtonError
        Newton's method did not converge (with ``.partial``).
    HorizonError
        memory='compressed' with more steps than ``horizon``.
    OutOfMemory
        The result cannot be allocated.

    See Also
    --------
    Stepper : the same problem step by step, with checkpoints.
    pyfracconv.grid.graded_mesh : a grid for solutions not smooth at t0.
    pyfracconv.dask.solve_many : many parameter sets on a Dask cluster.

    Examples
    --------
    D^a y = -y, y(0) = 1 has the solution E_a(-t^a): at a = 1 exp(-t), at
    a = 1/2 exp(t) erfc(sqrt t) (Gorenflo, Kilbas, Mainardi and Rogosin
    2014, docs/references.md):

    >>> import math
    >>> import pyfracconv
    >>> t, y = pyfracconv.solve(lambda t, y: -y, 1.0, 1.0, 0.01, 100)
    >>> float(t[-1]), bool(abs(y[-1] - math.exp(-1)) < 1e-5)
    (1.0, True)
    >>> r = pyfracconv.solve(lambda t, y: -y, 1.0, 0.5, 0.001, 1000)
    >>> bool(abs(r.y[-1] - math.exp(1) * math.erfc(1)) < 1e-5)
    True

    Bad arguments are refused before any work:

    >>> pyfracconv.solve(lambda t, y: -y, 1.0, 0.5, 0.01)
    Traceback (most recent call last):
    ...
    pyfracconv._errors.ArgumentError: n_steps=None: give step and n_steps ...
    """
    if t is not None:
        if step is not None or n_steps is not None:
            given = ", ".join(
                f"{k}={show(v)}" for k, v in (("step", step), ("n_steps", n_steps)) if v is not None
            )
            raise ArgumentError(f"t and {given}: give either the grid t or step and n_steps, not both")
        return _solve_grid(
            rhs,
            y0,
            order,
            t,
            dy0,
            t0,
            method,
            memory,
            tol,
            horizon,
            jacobian,
            corrections,
            progress,
            newton_tol,
            newton_maxiter,
        )
    if step is None or n_steps is None:
        missing = " and ".join(k for k, v in (("step", step), ("n_steps", n_steps)) if v is None)
        raise ArgumentError(
            f"{missing}=None: give step and n_steps (a uniform grid) or t= (the grid's times)"
        )
    if t0 is None:
        t0 = 0.0
    n = check_count("n_steps", n_steps, 0, SIZE_MAX - 1)
    if not isinstance(progress, (bool, np.bool_)):
        raise InputTypeError(f"progress={show(progress)}: expected True or False")
    bar_cls = _tqdm() if progress else None
    if horizon is None and memory == "compressed":
        horizon = max(n, 1)
    st = Stepper(
        rhs,
        y0,
        order,
        step,
        dy0=dy0,
        t0=t0,
        method=method,
        memory=memory,
        tol=tol,
        horizon=horizon,
        jacobian=jacobian,
        corrections=corrections,
        newton_tol=newton_tol,
        newton_maxiter=newton_maxiter,
    )
    m = st._m
    last = st.t + n * check_step(step)
    if not math.isfinite(last):
        raise ArgumentError(
            f"t0={show(t0)}, step={show(step)}, n_steps={n}: the last time is beyond the double range"
        )
    check_bytes(f"n_steps={n}", 8 * (n + 1) * (m + 1))
    try:
        t = np.empty(n + 1)
        y = np.empty((n + 1, m))
    except MemoryError:
        raise OutOfMemory(f"n_steps={n}: could not allocate the result") from None
    t[0] = st.t
    y[0] = st.y
    shape = (lambda a: a[:, 0]) if st._scalar else (lambda a: a)

    def partial(k):
        return SolveResult(t[: k + 1].copy(), shape(y[: k + 1].copy()), *st._counts(), st._method, st._memory)

    with st._lock:
        if bar_cls is None:
            st._advance_into(n, t[1:], y[1:], lambda k: partial(k))
        else:
            chunk = max(1, n // 200)
            with bar_cls(total=n, unit="step") as bar:
                j = 0
                while j < n:
                    c = min(chunk, n - j)
                    st._advance_into(
                        c, t[1 + j : 1 + j + c], y[1 + j : 1 + j + c], lambda k, j=j: partial(j + k)
                    )
                    j += c
                    bar.update(c)
    rc, jc = st._counts()
    return SolveResult(t, shape(y), rc, jc, st._method, st._memory)


def _solve_grid(
    rhs,
    y0,
    order,
    t,
    dy0,
    t0,
    method,
    memory,
    tol,
    horizon,
    jacobian,
    corrections,
    progress,
    newton_tol,
    newton_maxiter,
):
    """solve() with t=: the arguments checked, then the grid engine."""
    from .grid import check_times
    from .solve_grid import check_grid_memory, solve_on_grid

    times = check_times(t)
    if times.size == 0:
        raise ArgumentError("t: empty; expected at least the start time t[0]")
    if t0 is not None:
        raise ArgumentError(
            f"t0={show(t0)}: not used with t= (the problem starts at t[0]={show(float(times[0]))})"
        )
    meth = _check_method(method)
    mem = _check_memory(memory)
    check_grid_memory(meth, mem)
    if horizon is not None:
        raise ArgumentError(
            f"horizon={show(horizon)}: not used with t= (the grid's span "
            "t[-1] - t[0] is the horizon of compressed memory there)"
        )
    tolf = 0.0
    if mem == "compressed":
        tolf, _ = check_compressed(tol, 1.0)
    if not isinstance(progress, (bool, np.bool_)):
        raise InputTypeError(f"progress={show(progress)}: expected True or False")
    bar_cls = _tqdm() if progress else None
    p = _setup(
        rhs,
        y0,
        order,
        1.0,
        dy0,
        float(times[0]),
        meth,
        "exact",  # compressed memory on a grid: checked here and by the streams
        tol,
        None,
        jacobian,
        corrections,
        newton_tol,
        newton_maxiter,
    )
    p["memory"], p["tol"] = mem, tolf
    n = times.size - 1
    check_bytes(f"t ({n + 1} times)", 8 * (n + 1) * (2 * p["m"] + 1))
    if bar_cls is None:
        return solve_on_grid(p, times, None, SolveResult)
    with bar_cls(total=n, unit="step") as bar:
        return solve_on_grid(p, times, bar, SolveResult)
