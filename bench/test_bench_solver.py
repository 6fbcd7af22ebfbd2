"""Benchmarks of the solver (pyfracconv.solve), every contender in the same run.

    python -m pytest bench/test_bench_solver.py -s --benchmark-group-by=group

Invented test problems: D^a y = -y + 0.1 sin(t), a = 0.6, step 1e-4,
scalar and a vectorised system of 100 components, solved by the
predictor-corrector with exact and compressed memory (and, scalar, by the
implicit product rectangle rule with exact memory), against

  - a plain NumPy O(N^2) loop of the same method (every history sum a dot
    product over the whole history), at 1e4 steps and at 1e5 (scalar);
  - the bare calls of the same Python rhs, as many as the solver makes
    (2 per step plus one), with nothing else: the floor a Python rhs sets.

The 1e6-step scalar run and the C right-hand side (cost per step without
Python) are measured by bench/solver_1e6.py and bench/c/bench_solver.c.
"""

import math

import numpy as np
import pytest

import pyfracconv
from pyfracconv import solve

A, H = 0.6, 1e-4
M = 100


def rhs_scalar(t, y):
    return -y + 0.1 * math.sin(t)


def rhs_vector(t, y):
    return -y + 0.1 * np.sin(t)


def numpy_pc(rhs, y0, n, scalar):
    """The predictor-corrector of Diethelm, Ford and Freed 2002 as a plain
    NumPy loop: both history sums recomputed by a dot product every step."""
    b = pyfracconv.weights("rectangle", A, n + 1, step=H)  # u b_m
    a = pyfracconv.weights("trapezoid", A, n + 2, step=H)  # v a_m
    As = pyfracconv._core.trapezoid_start(A, n + 2, step=H)  # v A_n
    w0 = a[0]
    m = 1 if scalar else len(y0)
    F = np.empty((n + 1, m))
    y = np.empty((n + 1, m))
    y[0] = y0
    F[0] = rhs(0.0, y0)
    y0 = np.asarray(y0, dtype=float)
    for k in range(n):
        t = (k + 1) * H
        hr = b[k::-1] @ F[: k + 1]
        ht = As[k + 1] * F[0] + a[k:0:-1] @ F[1 : k + 1]
        yp = y0 + hr
        if scalar:
            yc = y0 + ht + w0 * rhs(t, float(yp[0]))
            F[k + 1] = rhs(t, float(yc[0]))
        else:
            yc = y0 + ht + w0 * rhs(t, yp)
            F[k + 1] = rhs(t, yc)
        y[k + 1] = yc
    return y[:, 0] if scalar else y


def bare_calls(rhs, y0, n_calls, scalar):
    y = 1.0 if scalar else np.ones(M)
    for i in range(n_calls):
        rhs(i * H, y)


def _check(res, ref):
    assert np.max(np.abs(res - ref)) <= 1e-12 * np.max(np.abs(ref))


def _per_step(benchmark, n):
    """The median per step, when timing is on (--benchmark-disable leaves
    no statistics)."""
    if benchmark.stats is not None:
        benchmark.extra_info["us_per_step"] = benchmark.stats.stats.median / n * 1e6


# ------------------------------------------------------------ scalar


@pytest.mark.parametrize("n", [10**4, 10**5])
@pytest.mark.parametrize("memory", ["exact", "compressed"])
def test_scalar_solve(benchmark, n, memory):
    benchmark.group = f"scalar PC, {n} steps"
    res = benchmark.pedantic(
        solve,
        args=(rhs_scalar, 1.0, A, H, n),
        kwargs={"memory": memory, "tol": 1e-12},
        rounds=3,
        iterations=1,
    )
    _per_step(benchmark, n)
    assert res.rhs_evals == 2 * n + 1


@pytest.mark.parametrize("n", [10**4, 10**5])
def test_scalar_bare_rhs_calls(benchmark, n):
    benchmark.group = f"scalar PC, {n} steps"
    benchmark.pedantic(bare_calls, args=(rhs_scalar, 1.0, 2 * n + 1, True), rounds=3, iterations=1)


@pytest.mark.parametrize("n", [10**4, 10**5])
def test_scalar_numpy_loop(benchmark, n):
    benchmark.group = f"scalar PC, {n} steps"
    y = benchmark.pedantic(
        numpy_pc, args=(rhs_scalar, 1.0, n, True), rounds=1 if n > 10**4 else 3, iterations=1
    )
    _check(solve(rhs_scalar, 1.0, A, H, n).y, y)


# ------------------------------------------------------------ 100 components


@pytest.mark.parametrize("n", [10**4, 10**5])
@pytest.mark.parametrize("memory", ["exact", "compressed"])
def test_vector_solve(benchmark, n, memory):
    benchmark.group = f"{M} components PC, {n} steps"
    y0 = np.linspace(0.5, 1.5, M)
    benchmark.pedantic(
        solve,
        args=(rhs_vector, y0, A, H, n),
        kwargs={"memory": memory, "tol": 1e-12},
        rounds=3 if n <= 10**4 else 1,
        iterations=1,
    )
    _per_step(benchmark, n)


@pytest.mark.parametrize("n", [10**4, 10**5])
def test_vector_bare_rhs_calls(benchmark, n):
    benchmark.group = f"{M} components PC, {n} steps"
    benchmark.pedantic(
        bare_calls, args=(rhs_vector, None, 2 * n + 1, False), rounds=3 if n <= 10**4 else 1, iterations=1
    )


def test_vector_numpy_loop(benchmark):
    n = 10**4
    benchmark.group = f"{M} components PC, {n} steps"
    y0 = np.linspace(0.5, 1.5, M)
    y = benchmark.pedantic(numpy_pc, args=(rhs_vector, y0, n, False), rounds=3, iterations=1)
    _check(solve(rhs_vector, y0, A, H, n).y, y)


def jac_scalar(t, y):
    return -1.0


@pytest.mark.parametrize("n", [10**4, 10**5])
def test_scalar_implicit_rectangle_exact(benchmark, n):
    """The implicit product rectangle rule with exact memory (creation
    included: the whole solve call)."""
    benchmark.group = f"scalar implicit rectangle, exact, {n} steps"
    res = benchmark.pedantic(
        solve,
        args=(rhs_scalar, 1.0, A, H, n),
        kwargs={"method": "implicit-rectangle", "jacobian": jac_scalar},
        rounds=3,
        iterations=1,
    )
    _per_step(benchmark, n)
    assert res.y.shape == (n + 1,)


# ------------------------------------------------------------ one step a call


def _step_loop(n, memory, one):
    st = pyfracconv.Stepper(rhs_scalar, 1.0, A, H, memory=memory, horizon=n + 1)
    step = st.step if one == "step" else (lambda: st.advance(1))
    for _ in range(n):
        step()
    return st


@pytest.mark.parametrize("one", ["step", "advance(1)"])
@pytest.mark.parametrize("memory", ["exact", "compressed"])
def test_scalar_one_step_per_call(benchmark, memory, one):
    """A plant fed back one step at a time: Stepper.step() against
    advance(1), 1e4 steps (per-call cost on top of solve's per-step cost)."""
    n = 10**4
    benchmark.group = f"scalar PC, one step a call, {n} steps"
    st = benchmark.pedantic(_step_loop, args=(n, memory, one), rounds=3, iterations=1)
    _per_step(benchmark, n)
    assert st.steps == n
