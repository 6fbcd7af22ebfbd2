"""Rules on a grid of sample times (t=): the direct O(N^2) engine against
the fast engine (sums of exponentials, O(N K)) on a jittered grid
(steps uniform in [0.5, 1.5] times 1 ms, seed 0), rectangle rule, a = 0.5.

    python -m pytest bench/test_bench_grid.py --benchmark-group-by=param:N

The direct engine runs at 10^4 samples only (about 6 s there on the 2-core
machine; 10^5 would take about ten minutes); the fast one at 10^4, 10^5
and 10^6 (the target of issue 11: under 2 s at 10^6), and at a = 1.5
both integral rules at 10^5 and 10^6. Each fast run is
checked against the direct engine on its first 2000 outputs (which the
direct engine gives in a fraction of a second), within the promised
(tol + (K + 64) 2**-52) times the sum of the absolute terms.
"""

import numpy as np
import pytest

import pyfracconv
from pyfracconv import grid

A = 0.5
TOL = 1e-12


def jittered(N):
    rng = np.random.default_rng(0)
    t = np.concatenate([[0.0], np.cumsum(rng.uniform(0.5e-3, 1.5e-3, N - 1))])
    x = np.sin(40.0 * t) + rng.standard_normal(N)
    return t, x


def check_head(y, t, x, m=2000, a=A, rule="rectangle"):
    yd = grid.apply_on_grid(rule, a, x[None, :m], t[:m])[0]
    s = grid.apply_on_grid(rule, a, np.abs(x[None, :m]), t[:m])[0]
    assert np.all(np.abs(y[:m] - yd) <= (TOL + 200 * 2.0**-52 + 2e-14) * s + 1e-300)


@pytest.mark.parametrize("N", [10**4, 10**5, 10**6], ids=lambda n: f"N=1e{int(np.log10(n))}")
def test_fast(benchmark, N):
    benchmark.group = f"grid N={N}"
    t, x = jittered(N)
    y = benchmark.pedantic(
        pyfracconv.integral,
        args=(x, A),
        kwargs=dict(t=t, engine="fast", tol=TOL),
        rounds=3 if N <= 10**5 else 2,
        iterations=1,
    )
    check_head(y, t, x)


@pytest.mark.parametrize("N", [10**4], ids=lambda n: f"N=1e{int(np.log10(n))}")
def test_direct(benchmark, N):
    benchmark.group = f"grid N={N}"
    t, x = jittered(N)
    benchmark.pedantic(
        pyfracconv.integral, args=(x, A), kwargs=dict(t=t, engine="direct"), rounds=1, iterations=1
    )


# Order 1.5 (the running integral path of csrc/grid_soe.c, issue 11 at
# 1 <= a < 2): both integral rules at 10^5 and 10^6 jittered samples.
@pytest.mark.parametrize("rule", ["rectangle", "trapezoid"])
@pytest.mark.parametrize("N", [10**5, 10**6], ids=lambda n: f"N=1e{int(np.log10(n))}")
def test_fast_order_1_5(benchmark, N, rule):
    benchmark.group = f"grid a=1.5 N={N}"
    t, x = jittered(N)
    y = benchmark.pedantic(
        pyfracconv.integral,
        args=(x, 1.5),
        kwargs=dict(t=t, rule=rule, engine="fast", tol=TOL),
        rounds=3 if N <= 10**5 else 2,
        iterations=1,
    )
    check_head(y, t, x, a=1.5, rule=rule)
