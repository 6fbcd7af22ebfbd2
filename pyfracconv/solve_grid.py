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
solver (csrc/solver.c) runs. The implicit methods use the same quadrature
weights with the newest f value at the unknown y_{n+1}:

- the implicit product trapezoidal rule: the corrector equation above with
  f(t_{n+1}, y_{n+1}) in place of f(t_{n+1}, y^P), solved by Newton's
  method (on a uniform grid, Garrappa, Math. Comput. Simul. 110 (2015));
- the implicit product rectangle rule (right end points):
  y_{n+1} = T(t_{n+1}) + sum_{k<=n} b_{n+1,k} f_{k+1}, the rectangle
  weights applied to the value at the right end of each interval (the
  fractional backward Euler method on a non-uniform mesh, first order).

Newton's method is the uniform solver's (csrc/solver.c, newton): start at
y_n, converged when |r_i| <= newton_tol (|y_i| + |c_i| + |w_i f_i|) for
the residual r = y - c - w f(t, y) of every component, the Jacobian from
``jacobian`` or forward differences with increments 2^-26 max(1, |y_j|).
The weights are those of :func:`pyfracconv.grid.grid_weights` (computed
without cancellation).

Memory: ``memory='exact'`` recomputes every history sum at each step from
the weights of that row in NumPy, O(N^2) work and O(N) memory per row
(fine up to about 2e4 steps); ``memory='compressed'`` keeps the sums in
streams with a time per sample (:class:`pyfracconv.TimedStream`, sums of
exponentials: O(L) work per step, memory fixed apart from the returned
trajectory), for the rectangle, predictor-corrector and trapezoid methods.
"""

from __future__ import annotations

import math

import numpy as np

from ._errors import ArgumentError, NewtonError, RhsError, SolverError
from .grid import _trap_parts

# Terms of the series of J_L(s) = int_0^1 (1 - s u)^(a-1) (1 - u) du and
# J_R(s) = int_0^1 (1 - s u)^(a-1) u du used for s = h_k / (t_n - t_k) below
# _SERIES_S: with (1 - z)^(a-1) = sum_j c_j z^j, c_0 = 1,
# c_{j+1} = c_j (j + 1 - a) / (j + 1) (the binomial series), J_L = sum_j
# c_j s^j / ((j+1)(j+2)) and J_R = sum_j c_j s^j / (j+2). For 0 < a <= 2,
# |c_j| <= 1, so the terms left out are below s^_TERMS < 2^-64 of the sum,
# and no cancellation occurs (the c_j, j >= 1, have one sign).
_SERIES_S = 1.0 / 256.0
_TERMS = 8


def _series_coefficients(a):
    c = [1.0]
    for j in range(_TERMS - 1):
        c.append(c[-1] * (j + 1.0 - a) / (j + 1.0))
    cl = [cj / ((j + 1.0) * (j + 2.0)) for j, cj in enumerate(c)]
    cr = [cj / (j + 2.0) for j, cj in enumerate(c)]
    return cl, cr


def _horner(coef, s):
    out = np.full_like(s, coef[-1])
    for cj in coef[-2::-1]:
        out *= s
        out += cj
    return out


def _row_weights(a, coef, d, e, h, trap):
    """The rectangle weights of f_0..f_n at t_{n+1} and, if ``trap``, the
    trapezoid parts (left, right) of each interval, as grid.grid_weights
    computes them (the same formulas, without cancellation) but sharing
    d^a between them and, for the intervals far from t_{n+1} (s < 1/256),
    the trapezoid integrals from their binomial series instead of a Gauss
    rule (cheaper; both agree with mpmath to rounding)."""
    s = h / d
    da = np.power(d, a)
    near = s >= 0.5
    lg = np.log1p(-np.minimum(s, 0.5))
    if np.any(near):
        lg[near] = np.log(e[near] / d[near])
    rect = da * -np.expm1(a * lg) / math.gamma(a + 1.0)
    if not trap:
        return rect, None, None
    g = math.gamma(a)
    far = s < _SERIES_S
    left = np.empty_like(d)
    right = np.empty_like(d)
    sf = s[far]
    scale = da[far] * sf / g
    left[far] = scale * _horner(coef[0], sf)
    right[far] = scale * _horner(coef[1], sf)
    rest = ~far
    if np.any(rest):
        lr, rr = _trap_parts(a, d[rest], e[rest], h[rest])
        left[rest] = lr / g
        right[rest] = rr / g
    return rect, left, right


#: The solver methods defined on any grid.
GRID_METHODS = ("rectangle", "predictor-corrector", "trapezoid", "implicit-rectangle")


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
    if scalar and type(v) is float:  # the common case, without NumPy's checks
        if not math.isfinite(v):
            raise _Fail("nonfinite", v)
        return np.array((v,))
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


def _eval_jac(jac, t, y, scalar, m):
    """df/dy at (t, y) as an (m, m) float array; _Fail (kinds prefixed
    "jac ") on a raise, a wrong shape or a non-finite value."""
    try:
        v = jac(float(t), float(y[0]) if scalar else _readonly(y))
    except (KeyboardInterrupt, SystemExit):
        raise
    except BaseException as exc:
        raise _Fail("jac raised", exc) from None
    try:
        a = np.asarray(v, dtype=np.float64)
    except Exception:
        raise _Fail("jac shape", v) from None
    if scalar and a.shape in ((), (1,), (1, 1)):
        a = a.reshape(1, 1)
    elif a.shape != (m, m):
        raise _Fail("jac shape", v)
    if not np.all(np.isfinite(a)):
        raise _Fail("jac nonfinite", v)
    return a


def _readonly(y):
    v = y.copy()
    v.flags.writeable = False
    return v


def check_grid_memory(method, memory):
    """Refuse the one pair a grid does not serve (names checked)."""
    if memory == "compressed" and method == "implicit-rectangle":
        raise ArgumentError(
            "memory='compressed', method='implicit-rectangle': not available with t= "
            "(its history weighs each f value by the interval to its left, which a "
            "stream with a time per sample does not keep); use memory='exact' or "
            "method='trapezoid'"
        )


class _ExactSums:
    """The history sums of step n -> n+1 from the weights of row n+1,
    every sum recomputed over all f values (O(n) per step)."""

    def __init__(self, t, groups, method, f0, m):
        self.F = np.empty((m, t.size))  # f values, one contiguous row per component
        self.F[:, 0] = f0
        self.t, self.groups, self.m = t, groups, m
        self.dt = np.diff(t)
        self.rect = method in ("rectangle", "predictor-corrector")
        self.trap = method in ("predictor-corrector", "trapezoid")  # trapezoid weights
        self.right = method == "implicit-rectangle"  # rectangle weights on f_{k+1}

    def row(self, n):
        """(sum_k b f_k, the trapezoid or right-end history, the weight of
        the unknown value), each of shape (m,), for y_{n+1}."""
        t, F, m = self.t, self.F, self.m
        tn = t[n + 1]
        d = tn - t[: n + 1]
        e = tn - t[1 : n + 2]
        h = self.dt[: n + 1]
        rsum = np.zeros(m)
        hist = np.zeros(m)
        last = np.zeros(m)
        for a, ix, coef in self.groups:
            b, left, rt = _row_weights(a, coef, d, e, h, self.trap)
            # pairwise sums of the products (NumPy's sum, no BLAS: the
            # same bits whatever the threads, and componentwise accurate)
            if self.right:
                # f_1 .. f_n on intervals 0 .. n-1; f_{n+1} (interval n) is the unknown
                hist[ix] = np.sum(b[:n] * F[ix, 1 : n + 1], axis=1)
                last[ix] = b[n]
                continue
            if self.rect:
                rsum[ix] = np.sum(b * F[ix, : n + 1], axis=1)
            if self.trap:
                assert left is not None and rt is not None
                w = np.concatenate([left, [0.0]])
                w[1:] += rt
                hist[ix] = np.sum(w[: n + 1] * F[ix, : n + 1], axis=1)
                last[ix] = w[n + 1]
        return rsum, hist, last

    def push(self, n, fn):
        self.F[:, n] = fn


class _CompressedSums:
    """The history sums from TimedStream objects (sums of exponentials,
    O(L) per step, memory fixed): one per order group and rule, fed
    (t_k, f_k); before step n+1 the rectangle stream's preview at t_{n+1}
    is sum_k b_{n+1,k} f_k (the rule does not use the sample there) and
    the trapezoid stream's preview with a sample of 0 is the history
    without the newest value, whose weight is h^a / Gamma(a+2),
    h = t_{n+1} - t_n (the exact last interval of the stream,
    csrc/stream_timed.c). Each sum is within tol of the exact rule's,
    relative to the sum of the magnitudes of its terms (the stream's
    promise), over the grid's span (the streams' horizon)."""

    def __init__(self, t, groups, method, tol, f0, m):
        from .stream_timed import TimedStream

        self.t, self.m = t, m
        self.rect = []
        self.trap = []
        self.wfac = []
        self.tl = t.tolist()
        if t.size < 2:  # no step: no sums
            return
        span = float(t[-1] - t[0])
        hmin = float(np.min(np.diff(t)))
        rules = []
        if method in ("rectangle", "predictor-corrector"):
            rules.append("rectangle")
        if method in ("predictor-corrector", "trapezoid"):
            rules.append("trapezoid")
        for a, ix, _ in groups:
            for rule in rules:
                # a group of one component: the scalar stream (floats, the
                # fast path of push and preview)
                ch = None if len(ix) == 1 else len(ix)
                try:
                    st = TimedStream(a, min_step=hmin, horizon=span, rule=rule, tol=tol, channels=ch)
                except ArgumentError as exc:
                    raise ArgumentError(
                        f"memory='compressed' with t= (order={a!r}, smallest step {hmin!r}, "
                        f"span {span!r}): the {rule} rule's stream with a time per sample "
                        f"refuses this order or grid ({exc}); use memory='exact'"
                    ) from None
                key = int(ix[0]) if ch is None else ix
                zero = 0.0 if ch is None else np.zeros(ch)  # the sample of a preview
                st.push(float(t[0]), f0[key])
                (self.rect if rule == "rectangle" else self.trap).append((key, st, zero))
            self.wfac.append((ix, a, 1.0 / math.gamma(a + 2.0)))

    def row(self, n):
        tn = self.tl[n + 1]
        h = tn - self.tl[n]
        m = self.m
        rsum = np.zeros(m)
        hist = np.zeros(m)
        last = np.zeros(m)
        for key, st, zero in self.rect:
            rsum[key] = st.preview(tn, zero)
        for key, st, zero in self.trap:
            hist[key] = st.preview(tn, zero)
        if self.trap:
            for ix, a, g in self.wfac:
                last[ix] = h**a * g
        return rsum, hist, last

    def push(self, n, fn):
        tn = self.tl[n]
        for key, st, _ in self.rect + self.trap:
            st.push(tn, fn[key])


def solve_on_grid(p, times, progress_bar, result_cls):
    """Run the method of the checked arguments ``p`` (solve.py's _setup)
    on the checked grid ``times`` (N+1,); returns a SolveResult."""
    rhs, jac = p["rhs"], p["jacobian"]
    m, scalar, method, corr = p["m"], p["scalar"], p["method"], p["corr"]
    ntol, nmax = p["ntol"], p["nmax"]
    memory = p["memory"]
    orders = p["orders"]
    init = p["init"]
    y0 = init[:m]
    dy0 = init[m:] if init.size > m else np.zeros(m)
    t = times
    N = t.size - 1
    y = np.empty((N + 1, m))
    y[0] = y0
    groups = {}
    for i, a in enumerate(orders.tolist()):
        groups.setdefault(a, []).append(i)
    groups_idx = [(a, np.array(ix), _series_coefficients(a)) for a, ix in groups.items()]
    pc = method == "predictor-corrector"
    evals = 0
    jevals = 0

    def shape(arr):
        return arr[:, 0] if scalar else arr

    def fail(exc, step):
        k = max(step - 1, 0)
        partial = result_cls(t[: k + 1].copy(), shape(y[: k + 1].copy()), evals, jevals, method, memory)
        ts = float(t[step])
        at = f"at step {step}, t={ts!r}"
        keep = f"; the solution up to step {step - 1} is in .partial" if step else "; nothing was computed"
        name = "jacobian" if exc.kind.startswith("jac") else "rhs"
        kind = exc.kind[4:] if name == "jacobian" else exc.kind
        if kind == "newton":
            return NewtonError(
                f"Newton's method did not converge {at} (newton_maxiter reached or a "
                "singular iteration matrix); try a finer grid, a larger "
                f"newton_maxiter or newton_tol{keep}",
                step,
                float(t[step]),
                partial,
            )
        if kind == "raised":
            err = RhsError(
                f"{name} raised {type(exc.obj).__name__}: {exc.obj} {at}{keep}", step, float(t[step]), partial
            )
            err.__cause__ = exc.obj
            return err
        if kind == "overflow":
            return SolverError(
                f"the solution is beyond the double range {at}{keep}", step, float(t[step]), partial
            )
        if kind == "nonfinite":
            return RhsError(f"{name} returned a NaN or infinite value {at}{keep}", step, ts, partial)
        if name == "jacobian":
            want = "(m, m)" if not scalar else "a number"
        else:
            want = "a number" if scalar else f"shape ({m},)"
        obj = exc.obj
        got = np.asarray(obj).shape if not isinstance(obj, (str, bytes)) else type(obj).__name__
        return RhsError(
            f"{name} returned a value of shape {got}, expected {want}, {at}{keep}", step, ts, partial
        )

    def f(step, yv):
        nonlocal evals
        evals += 1
        try:
            return _eval(rhs, t[step], yv, scalar, m)
        except _Fail as exc:
            raise fail(exc, step) from None

    def jacobian(step, yv, fv):
        """df/dy at (t_step, yv), fv = f there: the user's or forward differences."""
        nonlocal jevals
        if jac is not None:
            jevals += 1
            try:
                return _eval_jac(jac, t[step], yv, scalar, m)
            except _Fail as exc:
                raise fail(exc, step) from None
        J = np.empty((m, m))
        for j in range(m):
            yp = yv.copy()
            d = 1.4901161193847656e-08 * max(1.0, abs(yv[j]))
            yp[j] = yv[j] + d
            d = yp[j] - yv[j]  # the increment as represented
            J[:, j] = (f(step, yp) - fv) / d
        return J

    def newton(step, c, w, start):
        """y = c + w f(t_step, y) by Newton's method from ``start``;
        returns (y, f(t_step, y))."""
        yc = start.copy()
        eye = np.eye(m)
        for it in range(nmax + 1):
            fc = f(step, yc)
            wf = w * fc
            r = yc - c - wf
            if np.all(np.abs(r) <= ntol * (np.abs(yc) + np.abs(c) + np.abs(wf))):
                return yc, fc
            if it >= nmax:
                break
            A = eye - w[:, None] * jacobian(step, yc, fc)
            try:
                d = np.linalg.solve(A, r)
            except np.linalg.LinAlgError:
                break
            if not np.all(np.isfinite(d)):
                break
            yc = yc - d
            if not np.all(np.isfinite(yc)):
                break
        raise fail(_Fail("newton", None), step)

    # y'(t0) enters where an order exceeds 1 (dy0 is 0 elsewhere: solve.py)
    any_slope = bool(np.any(orders > 1.0))
    f0 = f(0, y0)
    if memory == "compressed":
        sums = _CompressedSums(t, groups_idx, method, p["tol"], f0, m)
    else:
        sums = _ExactSums(t, groups_idx, method, f0, m)
    with np.errstate(over="ignore", invalid="ignore", divide="ignore"):
        for n in range(N):
            tn = t[n + 1]
            base = y0 + dy0 * (tn - t[0]) if any_slope else y0
            rsum, hist, last = sums.row(n)
            if method in ("trapezoid", "implicit-rectangle"):
                c = base + hist
                if not np.isfinite(c).all():
                    raise fail(_Fail("overflow", c), n + 1)
                yn, fn = newton(n + 1, c, last, y[n])
            else:
                yn = base + rsum
                if not np.isfinite(yn).all():
                    raise fail(_Fail("overflow", yn), n + 1)
                if pc:
                    for _ in range(corr):
                        yn = base + hist + last * f(n + 1, yn)
                    if not np.isfinite(yn).all():
                        raise fail(_Fail("overflow", yn), n + 1)
                fn = f(n + 1, yn)
            y[n + 1] = yn
            sums.push(n + 1, fn)
            if progress_bar is not None:
                progress_bar.update(1)
    return result_cls(t.copy(), shape(y), evals, jevals, method, memory)


__all__ = ["GRID_METHODS", "check_grid_memory", "solve_on_grid"]
