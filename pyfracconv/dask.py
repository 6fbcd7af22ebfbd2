"""Many records on many machines: the operators and the solver on Dask
arrays (the optional extra ``dask``: ``pip install 'pyfracconv[dask]'``).

:func:`integral` and :func:`derivative` take a Dask array of signals whose
channel axes may be chunked any way; the time axis must be whole in each
block, and is rechunked to one chunk when it is not. They return a lazy
Dask array, block for block the NumPy function on that block, so the
computed result equals :func:`pyfracconv.integral` (or
:func:`pyfracconv.derivative`) on the whole array bit for bit: each signal
is computed on its own. :func:`solve_many` solves one problem for many
independent parameter sets, one row of ``params`` each, and returns the
solutions as a lazy Dask array.

Nothing here depends on where Dask runs the tasks: the threaded scheduler
(the batch functions release the GIL), worker processes on this machine
(``dask.distributed.LocalCluster``), or a cluster of many machines
(``dask.distributed.Client("tcp://scheduler:8786")``).

Arguments are checked when the function is called, with the messages of
the NumPy functions; a NaN or infinite sample (or a failing right-hand
side) can only be found when its block is computed, and the exception then
names the element's index in the whole array (or the parameter set).
"""

from __future__ import annotations

import math
from typing import Any, Callable, Optional, Tuple, Union

import numpy as np

from ._checks import (
    DERIVATIVE_RULES,
    INTEGRAL_RULES,
    check_axis,
    check_count,
    check_engine,
    check_order,
    check_real,
    check_rule,
    check_step,
    refuse_masked,
)
from ._core import derivative as _np_derivative
from ._core import integral as _np_integral
from ._errors import (
    ArgumentError,
    FracconvError,
    InputTypeError,
    SampleError,
    show,
)

try:
    import dask
    import dask.array as da
except ImportError:  # pragma: no cover - exercised without the extra
    raise ImportError(
        "pyfracconv.dask needs the optional dependency dask: install it with "
        "pip install 'pyfracconv[dask]' (or pip install 'dask[array,distributed]')"
    ) from None

__all__ = ["integral", "derivative", "solve_many"]

FloatArray = np.ndarray[Any, np.dtype[np.float64]]


# ------------------------------------------------------------ operators


def _as_dask(name: str, x: object) -> Any:
    refuse_masked(name, x)
    if not isinstance(x, da.Array):
        try:
            x = da.asarray(x)
        except Exception as exc:
            raise InputTypeError(f"{name}: cannot be read as an array ({exc})") from None
    assert isinstance(x, da.Array)
    if x.dtype.kind not in "biuf":
        raise InputTypeError(f"{name}: expected real numbers, got an array of dtype {x.dtype}")
    if x.ndim == 0:
        raise ArgumentError(f"{name}: expected an array of samples, got a scalar")
    return x


def _block_op(
    block: Any,
    op: str,
    order: float,
    step: Optional[float],
    rule: str,
    axis: int,
    engine: str,
    block_info: Any = None,
    t: Any = None,
    tol: Optional[float] = None,
) -> FloatArray:
    fn = _np_integral if op == "integral" else _np_derivative
    try:
        if t is not None:
            return fn(block, order, rule=rule, axis=axis, engine=engine, t=t, tol=tol)
        return fn(block, order, step, rule=rule, axis=axis, engine=engine)
    except SampleError:
        starts = [0] * block.ndim
        if block_info is not None and 0 in block_info:
            starts = [lo for lo, _ in block_info[0]["array-location"]]
        bad = np.argwhere(~np.isfinite(np.asarray(block, dtype=np.float64)))
        if not len(bad):
            raise
        where = tuple(int(i) + s for i, s in zip(bad[0], starts))
        text = ", ".join(str(i) for i in where)
        value = np.asarray(block)[tuple(bad[0])]
        raise SampleError(f"x[{text}]={show(value)}: sample is NaN or infinite") from None


def _apply_times(
    op: str, x: object, order: object, t: object, rule: object, axis: object, engine: object, tol: object
) -> Any:
    """The operators with sample times: every argument checked now (by the
    NumPy function on the first two times, whose messages are the ones of
    a whole call), then each block through the NumPy function."""
    from .grid import check_times

    arr = _as_dask("x", x)
    ax = check_axis(axis, arr.ndim)
    tt = check_times(t, int(arr.shape[ax]))
    fn = _np_integral if op == "integral" else _np_derivative
    # fmt: off
    fn(np.zeros(min(2, tt.size)), order, rule=rule, engine=engine, t=tt[:2],  # type: ignore[arg-type]
       tol=tol)  # type: ignore[arg-type]
    # fmt: on
    if len(arr.chunks[ax]) > 1:
        arr = arr.rechunk({ax: -1})
    return arr.map_blocks(
        _block_op,
        op,
        check_real("order", order),
        None,
        str(rule),
        ax,
        str(engine),
        t=tt,
        tol=None if tol is None else check_real("tol", tol),
        dtype=np.float64,
        meta=np.empty((0,) * arr.ndim),
    )


def _apply(
    op: str,
    x: object,
    order: object,
    step: object,
    rule: object,
    axis: object,
    engine: object,
    t: object = None,
    tol: object = None,
) -> Any:
    if step is not None and t is not None:
        raise ArgumentError(
            f"step={show(step)} and t: give exactly one of step (a uniform grid "
            "t_k = k*step) or t (the sample times), not both"
        )
    if step is None and t is None:
        raise InputTypeError(
            "step=None and t=None: give exactly one of step (a uniform grid "
            "t_k = k*step) or t (the sample times)"
        )
    if t is not None:
        return _apply_times(op, x, order, t, rule, axis, engine, tol)
    if tol is not None:
        raise ArgumentError(
            f"tol={show(tol)}: a tolerance is taken only with t= (the fast "
            "engine on a grid of times); the uniform engines are accurate to "
            "rounding"
        )
    allowed = INTEGRAL_RULES if op == "integral" else DERIVATIVE_RULES
    check_rule(rule, allowed)
    a = check_order(order, rule)
    h = check_step(step)
    check_engine(engine)
    arr = _as_dask("x", x)
    ax = check_axis(axis, arr.ndim)
    if len(arr.chunks[ax]) > 1:
        arr = arr.rechunk({ax: -1})  # the time axis whole in every block
    return arr.map_blocks(
        _block_op, op, a, h, str(rule), ax, str(engine), dtype=np.float64, meta=np.empty((0,) * arr.ndim)
    )


def integral(
    x: Any,
    order: float,
    step: Optional[float] = None,
    rule: str = "rectangle",
    axis: int = -1,
    engine: str = "auto",
    *,
    t: Any = None,
    tol: Optional[float] = None,
) -> Any:
    """:func:`pyfracconv.integral` of a Dask array, lazily.

    Parameters
    ----------
    x : dask.array.Array or array_like
        Real samples, time along ``axis``; the other axes (channels) may be
        chunked any way. A time axis in several chunks is rechunked to one
        (each block then holds whole signals: plan chunks of channels so
        that a block fits in a worker's memory). An array that is not a
        Dask array is wrapped as one block.
    order, step, rule, axis, engine
        As for :func:`pyfracconv.integral`.
    t, tol : optional
        Sample times instead of ``step`` (one per sample along ``axis``,
        finite, strictly increasing) and the fast engine's tolerance, as
        for :func:`pyfracconv.integral`; checked at the call. Each block
        goes through ``pyfracconv.integral(block, ..., t=t)``; the engine
        chosen by ``'auto'`` depends on the number of times only, the same
        for every block.

    Returns
    -------
    dask.array.Array
        float64, the shape and channel chunks of ``x``; computed, equal bit
        for bit to ``pyfracconv.integral(x.compute(), ...)``.

    Raises
    ------
    ArgumentError, InputTypeError
        At the call, as for :func:`pyfracconv.integral`.
    SampleError
        When computed: a NaN or infinite sample, named by its index in
        ``x``.

    See Also
    --------
    pyfracconv.integral : the NumPy function applied to each block.
    derivative, solve_many

    Examples
    --------
    At order 1 the rectangle rule is the left rectangle sum (common
    practice):

    >>> import dask.array as da
    >>> import pyfracconv.dask as pfd
    >>> x = da.ones((4, 3), chunks=(2, 3))
    >>> pfd.integral(x, 1.0, 0.5).compute(scheduler="threads")
    array([[0. , 0.5, 1. ],
           [0. , 0.5, 1. ],
           [0. , 0.5, 1. ],
           [0. , 0.5, 1. ]])
    """
    return _apply("integral", x, order, step, rule, axis, engine, t, tol)


def derivative(
    x: Any,
    order: float,
    step: Optional[float] = None,
    rule: str = "grunwald",
    axis: int = -1,
    engine: str = "auto",
    *,
    t: Any = None,
    tol: Optional[float] = None,
) -> Any:
    """:func:`pyfracconv.derivative` of a Dask array, lazily.

    Parameters
    ----------
    x : dask.array.Array or array_like
        As for :func:`integral`.
    order, step, rule, axis, engine
        As for :func:`pyfracconv.derivative`.
    t, tol : optional
        As for :func:`integral` (rule ``'l1'`` with ``t``).

    Returns
    -------
    dask.array.Array
        Computed, equal bit for bit to ``pyfracconv.derivative`` of the
        whole array.

    Raises
    ------
    ArgumentError, InputTypeError, SampleError
        As for :func:`integral`.

    See Also
    --------
    pyfracconv.derivative : the NumPy function applied to each block.
    integral, solve_many

    Examples
    --------
    Grunwald-Letnikov at order 1 is (x_n - x_{n-1}) / h (common practice):

    >>> import dask.array as da
    >>> import pyfracconv.dask as pfd
    >>> x = da.from_array([[0.0, 1.0, 4.0], [1.0, 1.0, 1.0]], chunks=(1, 2))
    >>> pfd.derivative(x, 1.0, 0.5).compute(scheduler="threads")
    array([[0., 2., 6.],
           [2., 0., 0.]])
    """
    return _apply("derivative", x, order, step, rule, axis, engine, t, tol)


# ------------------------------------------------------------ solver

Value = Union[float, "np.ndarray[Any, Any]", Callable[[Any], Any]]


def _per_set(value: Any, p: Any) -> Any:
    return value(p) if callable(value) else value


def _row(params: Any, i: int) -> Any:
    r = params[i]
    if isinstance(r, np.ndarray):
        r = r.copy()
        r.flags.writeable = False
    return r


def _solve_block(
    block: Any,
    first: int,
    rhs: Callable[..., Any],
    y0: Any,
    order: Any,
    dy0: Any,
    jacobian: Any,
    step: Optional[float],
    n_steps: int,
    m: int,
    scalar: bool,
    options: dict[str, Any],
) -> FloatArray:
    from .solve import solve

    block = np.asarray(block, dtype=np.float64)
    shape = (block.shape[0], n_steps + 1) + (() if scalar else (m,))
    out = np.empty(shape)
    for k in range(block.shape[0]):
        i = first + k
        p = _row(block, k)
        try:
            y0k = _per_set(y0, p)
            ok = _per_set(order, p)
            dk = _per_set(dy0, p)
        except Exception as exc:
            raise ArgumentError(
                f"params[{i}]={show(p)}: y0, order or dy0 raised {type(exc).__name__}: {exc}"
            ) from exc
        try:
            # options holds t= on a grid (step is then None)
            where: tuple[Any, ...] = () if step is None else (step, n_steps)
            res = solve(
                (lambda t, y, p=p: rhs(t, y, p)),
                y0k,
                ok,
                *where,
                dy0=dk,
                jacobian=(None if jacobian is None else (lambda t, y, p=p: jacobian(t, y, p))),
                **options,
            )
        except FracconvError as exc:
            exc.args = (f"params[{i}]={show(p)}: {exc.args[0] if exc.args else exc}",) + exc.args[1:]
            raise
        y = res.y
        if y.shape != shape[1:]:
            raise ArgumentError(
                f"params[{i}]={show(p)}: the solution has shape {y.shape}, the first "
                f"parameter set's has {shape[1:]} (y0 must give the same number of "
                "components for every set)"
            )
        out[k] = y
    return out


def solve_many(
    rhs: Callable[..., Any],
    params: Any,
    y0: Value,
    order: Value,
    step: Optional[float] = None,
    n_steps: Optional[int] = None,
    *,
    t: Any = None,
    dy0: Optional[Value] = None,
    chunk: Optional[int] = None,
    jacobian: Optional[Callable[..., Any]] = None,
    **options: Any,
) -> Tuple[FloatArray, Any]:
    """:func:`pyfracconv.solve` for many independent parameter sets, lazily.

    Parameters
    ----------
    rhs : callable
        ``rhs(t, y, p)``: the right-hand side of set p, where ``p`` is one
        row of ``params`` (a float for 1-D ``params``, else a read-only 1-D
        array). Runs on the workers: it must be picklable by cloudpickle
        (functions, lambdas and closures are).
    params : array_like or dask.array.Array, shape (P,) or (P, k)
        One parameter set per row. A Dask array keeps its chunks along the
        first axis (the second is made whole); a NumPy array is split into
        blocks of ``chunk`` sets.
    y0, order, dy0 : as for :func:`pyfracconv.solve`, or callables
        A value shared by every set, or a function of the set ``p``
        returning it (``order=lambda p: p[0]`` sweeps the order). Every set
        must give the same number of components.
    step, n_steps : as for :func:`pyfracconv.solve`
    t : array_like, optional
        The grid instead of ``step`` and ``n_steps``, as for
        :func:`pyfracconv.solve` (``t0`` is ``t[0]``).
    chunk : int, optional
        Sets per task (default: P / 256 rounded up, at most 256 tasks, for
        NumPy ``params``; a Dask ``params`` keeps its chunks unless
        ``chunk`` is given).
    jacobian : callable, optional
        ``jacobian(t, y, p)`` for the implicit methods.
    **options
        The other keywords of :func:`pyfracconv.solve`: ``t0``, ``method``,
        ``memory``, ``tol``, ``horizon``, ``corrections``, ``newton_tol``,
        ``newton_maxiter`` (``progress`` is not available).

    Returns
    -------
    t : ndarray of shape (n_steps + 1,)
        The grid, ``solve(...).t`` of every set (``t0 + n * step``, or a
        copy of ``t``).
    y : dask.array.Array of shape (P, n_steps + 1) or (P, n_steps + 1, m)
        Row i is ``solve(...).y`` of set i, bit for bit, when computed.

    Raises
    ------
    ArgumentError, InputTypeError
        At the call: a bad argument, checked on the first parameter set
        (for a Dask ``params`` its first row is computed for that).
    RhsError, NewtonError, ArgumentError
        When computed: the failure of one set, its message starting with
        ``params[i]=...``.

    See Also
    --------
    pyfracconv.solve : what each parameter set goes through.

    Examples
    --------
    D^1 y = -p y, y(0) = 1, solved by the product rectangle rule at order
    1 is explicit Euler: y_n = (1 - p h)^n (common practice):

    >>> import numpy as np
    >>> import pyfracconv.dask as pfd
    >>> t, y = pfd.solve_many(lambda t, y, p: -p * y, np.array([1.0, 2.0]), 1.0,
    ...                       1.0, 0.25, 2, method="rectangle")
    >>> y.compute(scheduler="threads")
    array([[1.    , 0.75  , 0.5625],
           [1.    , 0.5   , 0.25  ]])
    """
    from .solve import _setup

    if not callable(rhs):
        raise InputTypeError(f"rhs={show(rhs)}: expected a callable f(t, y, p)")
    if jacobian is not None and not callable(jacobian):
        raise InputTypeError(f"jacobian={show(jacobian)}: expected None or a callable J(t, y, p)")
    if "progress" in options:
        raise ArgumentError(
            "progress: not available in solve_many (use Dask's own "
            "progress reporting, e.g. dask.diagnostics.ProgressBar)"
        )
    times = None
    if t is not None:
        from .grid import check_times

        if step is not None or n_steps is not None:
            given = ", ".join(
                f"{k}={show(v)}" for k, v in (("step", step), ("n_steps", n_steps)) if v is not None
            )
            raise ArgumentError(f"t and {given}: give either the grid t or step and n_steps, not both")
        times = check_times(t)
        if times.size == 0:
            raise ArgumentError("t: empty; expected at least the start time t[0]")
        for key, why in (
            ("t0", "the problem starts at t[0]"),
            ("horizon", "the grid's span t[-1] - t[0] is the horizon of compressed memory there"),
        ):
            if key in options:
                raise ArgumentError(f"{key}={show(options[key])}: not used with t= ({why})")
        n = int(times.size) - 1
        h = 1.0
    else:
        if step is None or n_steps is None:
            missing = " and ".join(k for k, v in (("step", step), ("n_steps", n_steps)) if v is None)
            raise ArgumentError(
                f"{missing}=None: give step and n_steps (a uniform grid) or t= (the grid's times)"
            )
        n = check_count("n_steps", n_steps, 0)
        h = check_step(step)
    refuse_masked("params", params)
    P_arr: Any
    if isinstance(params, da.Array):
        P_arr = params
    else:
        try:
            host = np.asarray(params)
        except Exception as exc:
            raise InputTypeError(f"params: cannot be read as an array ({exc})") from None
        if host.dtype.kind not in "biuf":
            raise InputTypeError(f"params: expected real numbers, got an array of dtype {host.dtype}")
        P_arr = host
    if P_arr.ndim not in (1, 2) or P_arr.shape[0] == 0:
        raise ArgumentError(
            f"params: expected shape (P,) or (P, k) with P >= 1 parameter sets, got shape {P_arr.shape}"
        )
    if P_arr.dtype.kind not in "biuf":
        raise InputTypeError(f"params: expected real numbers, got an array of dtype {P_arr.dtype}")
    P = int(P_arr.shape[0])
    if isinstance(P_arr, da.Array):
        if P_arr.ndim == 2 and len(P_arr.chunks[1]) > 1:
            P_arr = P_arr.rechunk({1: -1})
        if chunk is not None:
            P_arr = P_arr.rechunk({0: check_count("chunk", chunk, 1)})
        first = np.asarray(P_arr[:1].compute(), dtype=np.float64)
    else:
        if chunk is None:
            chunk = max(1, math.ceil(P / 256))
        chunk = check_count("chunk", chunk, 1)
        first = np.asarray(P_arr[:1], dtype=np.float64)
        P_arr = da.from_array(
            np.asarray(P_arr, dtype=np.float64), chunks=(chunk,) + ((-1,) if P_arr.ndim == 2 else ())
        )
    p0 = _row(first, 0)
    opts = dict(options)
    t0 = float(times[0]) if times is not None else check_real("t0", opts.get("t0", 0.0))
    known = {"t0", "method", "memory", "tol", "horizon", "corrections", "newton_tol", "newton_maxiter"}
    for key in opts:
        if key not in known:
            raise ArgumentError(
                f"{key}={show(opts[key])}: not a keyword of solve_many "
                f"(expected one of {', '.join(sorted(known))})"
            )
    # every argument checked on the first set (the messages of solve)
    try:
        y00 = _per_set(y0, p0)
        o0 = _per_set(order, p0)
        d0 = _per_set(dy0, p0)
    except Exception as exc:
        raise ArgumentError(
            f"params[0]={show(p0)}: y0, order or dy0 raised {type(exc).__name__}: {exc}"
        ) from exc
    method = opts.get("method", "predictor-corrector")
    memory = opts.get("memory", "exact")
    if times is not None:
        from .solve_grid import check_grid_memory

        check_grid_memory(method, memory)
    horizon = opts.get("horizon")
    if horizon is None and memory == "compressed":
        horizon = max(n, 1)
    chk = _setup(
        rhs,
        y00,
        o0,
        h,
        d0,
        t0,
        method,
        memory,
        opts.get("tol", 1e-12),
        horizon,
        None if jacobian is None else jacobian,
        opts.get("corrections", 1),
        opts.get("newton_tol", 1e-12),
        opts.get("newton_maxiter", 50),
    )
    m, scalar = int(chk["m"]), bool(chk["scalar"])
    tail = () if scalar else (m,)
    if times is not None:
        opts["t"] = times
    blocks = P_arr.to_delayed().ravel()
    starts = np.concatenate(([0], np.cumsum(P_arr.chunks[0])[:-1])).astype(int)
    parts = []
    task = dask.delayed(_solve_block, pure=False)
    for blk, s0, size in zip(blocks, starts, P_arr.chunks[0]):
        d = task(
            blk, int(s0), rhs, y0, order, dy0, jacobian, None if times is not None else h, n, m, scalar, opts
        )
        parts.append(
            da.from_delayed(
                d, shape=(int(size), n + 1) + tail, dtype=np.float64, meta=np.empty((0,) * (2 + len(tail)))
            )
        )
    y = da.concatenate(parts, axis=0)
    if times is not None:
        return times.copy(), y
    return t0 + np.arange(n + 1, dtype=np.float64) * h, y
