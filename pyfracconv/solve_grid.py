"""The solver on a given grid t_0 < t_1 < ... < t_N (``solve(..., t=grid)``).

The Caputo problem D^a y = f(t, y) is the Volterra equation
y = T + I^a f(., y) (Diethelm, The Analysis of Fractional Differential
Equations, Springer 2010); on a non-uniform grid the methods with
published non-uniform forms are

- the explicit product rectangle rule (fractional Euler method)
  y_{n+1} = T(t_{n+1}) + sum_{k<=n} b_{n+1,k} f_k,
  b_{n+1,k} = ((t_{n+1} - t_k)^a - (t_{n+1} - t_{k+1})^a) / Gamma(a+1);
- the predictor-corrector (the fractional Adams method): that rectangle
  rule as predictor, then the product trapezoidal rule as corrector,
  y_{n+1} = T(t_{n+1}) + sum_{k<=n} a_{n+1,k} f_k + a_{n+1,n+1} f(t_{n+1}, y^P),
  a_{n+1,k} the integrals of (t_{n+1} - s)^(a-1)/Gamma(a) against the
  hat functions of the nodes,

both as in Liu, Roberts and Yan, Int. J. Comput. Math. 95 (2018) ("A note
on finite difference methods for nonlinear fractional differential
equations with non-uniform meshes") and Liu, Roberts and Yan, Numer.
Algorithms 78 (2018) ("Detailed error analysis for a fractional Adams
method with graded meshes"); on a uniform grid they are the methods of
Diethelm, Ford and Freed, Nonlinear Dynamics 29 (2002), which the uniform
solver (csrc/solver.c) runs. The weights are those of
:func:`pyfracconv.grid.grid_weights` (computed without cancellation).

Engine: Python over NumPy, every history sum recomputed at each step from
the weights of that row, O(N^2) work and O(N) memory per row (fine up to
about 2e4 steps); no compressed memory on a grid yet.
"""

from __future__ import annotations

import numpy as np

from ._errors import ArgumentError, RhsError, SolverError
from .grid import _row_parts

#: The solver methods defined on any grid.
GRID_METHODS = ("rectangle", "predictor-corrector")


class _Fail(Exception):
    def __init__(self, kind, obj):
        super().__init__(kind)
        self.kind = kind
        self.obj = obj


def _eval(rhs, t, y, scalar, m):
    """f(t, y) as a float array of shape (m,); _Fail on a raise, a wrong
    shape or a non-finite value."""
    try:
        v = rhs(float(t), float(y[0]) if scalar else _readonly(y))
    except (KeyboardInterrupt, SystemExit):
        raise
    except BaseException as exc:
        raise _Fail("raised", exc) from None
    try:
        a = np.asarray(v, dtype=np.float64)
    except Exception:
        raise _Fail("shape", v) from None
    if scalar:
        if a.ndim != 0:
            raise _Fail("shape", v)
        a = a.reshape(1)
    elif a.shape != (m,):
        raise _Fail("shape", v)
    if not np.all(np.isfinite(a)):
        raise _Fail("nonfinite", v)
    return a


def _readonly(y):
    v = y.copy()
    v.flags.writeable = False
    return v


def solve_on_grid(p, times, progress_bar, result_cls):
    """Run the method of the checked arguments ``p`` (solve.py's _setup)
    on the checked grid ``times`` (N+1,); returns a SolveResult."""
    rhs = p["rhs"]
    m, scalar, method, corr = p["m"], p["scalar"], p["method"], p["corr"]
    orders = p["orders"]
    init = p["init"]
    y0 = init[:m]
    dy0 = init[m:] if init.size > m else np.zeros(m)
    t = times
    N = t.size - 1
    y = np.empty((N + 1, m))
    F = np.empty((N + 1, m))
    y[0] = y0
    groups = {}
    for i, a in enumerate(orders.tolist()):
        groups.setdefault(a, []).append(i)
    groups_idx = [(a, np.array(ix)) for a, ix in groups.items()]
    evals = 0

    def shape(arr):
        return arr[:, 0] if scalar else arr

    def fail(exc, step):
        k = max(step - 1, 0)
        partial = result_cls(t[:k + 1].copy(), shape(y[:k + 1].copy()), evals, 0,
                             method, "exact")
        at = f"at step {step}, t={float(t[step])!r}"
        keep = (f"; the solution up to step {step - 1} is in .partial" if step
                else "; nothing was computed")
        if exc.kind == "raised":
            err = RhsError(f"rhs raised {type(exc.obj).__name__}: {exc.obj} {at}{keep}",
                           step, float(t[step]), partial)
            err.__cause__ = exc.obj
            return err
        if exc.kind == "overflow":
            return SolverError(f"the solution is beyond the double range {at}{keep}",
                               step, float(t[step]), partial)
        if exc.kind == "nonfinite":
            return RhsError(f"rhs returned a NaN or infinite value {at}{keep}",
                            step, float(t[step]), partial)
        want = "a number" if scalar else f"shape ({m},)"
        obj = exc.obj
        got = np.asarray(obj).shape if not isinstance(obj, (str, bytes)) \
            else type(obj).__name__
        return RhsError(f"rhs returned a value of shape {got}, expected {want}, {at}{keep}",
                        step, float(t[step]), partial)

    def f(step, yv):
        nonlocal evals
        evals += 1
        try:
            return _eval(rhs, t[step], yv, scalar, m)
        except _Fail as exc:
            raise fail(exc, step) from None

    slope = orders > 1.0
    F[0] = f(0, y0)
    dt = np.diff(t)
    with np.errstate(over="ignore", invalid="ignore", divide="ignore"):
        for n in range(N):
            tn = t[n + 1]
            d = tn - t[:n + 1]
            e = tn - t[1:n + 2]
            h = dt[:n + 1]
            base = y0 + np.where(slope, dy0 * (tn - t[0]), 0.0)
            pred = base.copy()
            hist = np.empty(m)
            last = np.empty(m)
            for a, ix in groups_idx:
                b, _ = _row_parts("rectangle", a, d, e, h)
                pred[ix] += b @ F[:n + 1, ix]
                if method == "predictor-corrector":
                    left, right = _row_parts("trapezoid", a, d, e, h)
                    assert right is not None
                    w = np.concatenate([left, [0.0]])
                    w[1:] += right
                    hist[ix] = w[:n + 1] @ F[:n + 1, ix]
                    last[ix] = w[n + 1]
            if not np.all(np.isfinite(pred)):
                raise fail(_Fail("overflow", pred), n + 1)
            yn = pred
            if method == "predictor-corrector":
                for _ in range(corr):
                    yn = base + hist + last * f(n + 1, yn)
                if not np.all(np.isfinite(yn)):
                    raise fail(_Fail("overflow", yn), n + 1)
            y[n + 1] = yn
            F[n + 1] = f(n + 1, yn)
            if progress_bar is not None:
                progress_bar.update(1)
    return result_cls(t.copy(), shape(y), evals, 0, method, "exact")


def grid_method_error(method):
    """The message refusing a method without a published non-uniform form."""
    works = " or ".join(repr(x) for x in GRID_METHODS)
    return ArgumentError(
        f"method={method!r}: not available with t= (no published form on a "
        f"non-uniform grid is implemented); on a grid use method={works}, or give "
        "a uniform grid as step= and n_steps=")


__all__ = ["GRID_METHODS", "solve_on_grid", "grid_method_error"]
