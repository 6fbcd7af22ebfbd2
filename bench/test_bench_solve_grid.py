"""The solver on a given grid (solve(..., t=)): O(N^2) in Python over the
weights of pyfracconv.grid, on the graded mesh t_k = (k/N)^2 of [0, 1],
D^0.6 y = -y (a scalar Python rhs), the explicit methods with exact
memory, the predictor-corrector with compressed memory (up to 10^5 steps),
and the uniform C solver at the same step count for comparison.

    python -m pytest bench/test_bench_solve_grid.py --benchmark-group-by=param:N

Each run is checked against E_0.6(-t^0.6) at t = 1 (Gorenflo, Kilbas,
Mainardi and Rogosin 2014; the mpmath series of tests/solver_reference.py
is not imported here: the value is summed below with mpmath).
"""

import mpmath
import pytest

import pyfracconv
from pyfracconv.grid import graded_mesh

A = 0.6


def _ml_at_one():
    with mpmath.workdps(30):
        return float(mpmath.nsum(lambda k: (-1) ** k / mpmath.gamma(A * k + 1), [0, mpmath.inf]))


E1 = _ml_at_one()


def rhs(t, y):
    return -y


@pytest.mark.parametrize("method", ["rectangle", "predictor-corrector"])
@pytest.mark.parametrize("N", [2000, 10000, 20000], ids=lambda n: f"N={n}")
def test_grid_solver(benchmark, method, N):
    benchmark.group = f"solve on a grid N={N}"
    t = graded_mesh(1.0, N, 2.0)
    res = benchmark.pedantic(
        pyfracconv.solve, args=(rhs, 1.0, A), kwargs=dict(t=t, method=method), rounds=1, iterations=1
    )
    assert abs(res.y[-1] - E1) < (1e-3 if method == "rectangle" else 1e-5)


@pytest.mark.parametrize("N", [2000, 10000, 20000, 100000], ids=lambda n: f"N={n}")
def test_grid_solver_compressed(benchmark, N):
    # memory='compressed': the sums in streams with a time per sample, O(L)
    # per step (the exact-memory rows above are O(N^2))
    benchmark.group = f"solve on a grid N={N}"
    t = graded_mesh(1.0, N, 2.0)
    res = benchmark.pedantic(
        pyfracconv.solve,
        args=(rhs, 1.0, A),
        kwargs=dict(t=t, method="predictor-corrector", memory="compressed"),
        rounds=1,
        iterations=1,
    )
    assert abs(res.y[-1] - E1) < 1e-5


@pytest.mark.parametrize("N", [2000, 10000, 20000], ids=lambda n: f"N={n}")
def test_uniform_solver_same_steps(benchmark, N):
    benchmark.group = f"solve on a grid N={N}"
    res = benchmark(pyfracconv.solve, rhs, 1.0, A, 1.0 / N, N)
    assert abs(res.y[-1] - E1) < 1e-4
