"""pyfracconv.dask against the NumPy run, every contender in the same run:
the integral of 16 signals of 2^18 samples with NumPy (one call), with
Dask's threaded scheduler and on a local cluster of two worker processes
(started here, on 127.0.0.1, not timed); and the solver on 32 parameter
sets, a loop of solve() against solve_many on threads and on the cluster.
Every Dask result is checked equal to the NumPy one.

    python -m pytest bench/test_bench_dask.py --benchmark-group-by=group

On a 2-core machine the cluster can at best halve the time of work that
holds the GIL (the solver's Python right-hand side); the batch integral
releases the GIL, so threads already use both cores. The cluster pays for
moving the data to the workers and back: its place is many records on
many machines, where the data is read by the workers themselves.
"""

import numpy as np
import pytest

import pyfracconv

da = pytest.importorskip("dask.array")
distributed = pytest.importorskip("dask.distributed")
pfd = pytest.importorskip("pyfracconv.dask")

C, N = 16, 2**18
SETS, STEPS = 32, 2000


@pytest.fixture(scope="module")
def client():
    cluster = distributed.LocalCluster(
        n_workers=2,
        threads_per_worker=1,
        processes=True,
        host="127.0.0.1",
        dashboard_address=None,
        silence_logs=40,
    )
    c = distributed.Client(cluster, set_as_default=False)
    try:
        yield c
    finally:
        c.close()
        cluster.close()


@pytest.fixture(scope="module")
def signals():
    return np.random.default_rng(0).standard_normal((C, N))


@pytest.fixture(scope="module")
def reference(signals):
    return pyfracconv.integral(signals, 0.5, 1e-3)


def test_integral_numpy(benchmark, signals, reference):
    benchmark.group = f"integral, {C} x 2^18 samples"
    y = benchmark.pedantic(pyfracconv.integral, args=(signals, 0.5, 1e-3), rounds=5)
    assert np.array_equal(y, reference)


def test_integral_dask_threads(benchmark, signals, reference):
    benchmark.group = f"integral, {C} x 2^18 samples"
    X = da.from_array(signals, chunks=(C // 4, N))
    y = benchmark.pedantic(lambda: pfd.integral(X, 0.5, 1e-3).compute(scheduler="threads"), rounds=5)
    assert np.array_equal(y, reference)


# the point of this contender: the client's array travels in the graph
@pytest.mark.filterwarnings("ignore:Sending large graph")
def test_integral_dask_cluster(benchmark, client, signals, reference):
    benchmark.group = f"integral, {C} x 2^18 samples"
    X = da.from_array(signals, chunks=(C // 4, N))
    y = benchmark.pedantic(lambda: client.compute(pfd.integral(X, 0.5, 1e-3), sync=True), rounds=5)
    assert np.array_equal(y, reference)


def test_integral_dask_cluster_data_on_workers(benchmark, client, reference):
    """The data made on the workers (as when each worker reads its own
    records): only the results travel."""
    benchmark.group = f"integral, {C} x 2^18 samples"
    X = da.random.default_rng(0).standard_normal((C, N), chunks=(C // 4, N))
    X = client.persist(X)
    x = client.compute(X, sync=True)
    y = benchmark.pedantic(lambda: client.compute(pfd.integral(X, 0.5, 1e-3), sync=True), rounds=5)
    assert np.array_equal(y, pyfracconv.integral(x, 0.5, 1e-3))


def rhs(t, y, p):
    """D^0.6 y = -p y + sin t (invented test problem)."""
    return -p * y + np.sin(t)


GAINS = np.linspace(0.5, 3.0, SETS)


def loop():
    return np.array(
        [pyfracconv.solve(lambda t, y, g=g: rhs(t, y, g), 1.0, 0.6, 0.005, STEPS).y for g in GAINS]
    )


@pytest.fixture(scope="module")
def solved():
    return loop()


def test_solve_loop(benchmark, solved):
    benchmark.group = f"solver, {SETS} parameter sets x {STEPS} steps"
    y = benchmark.pedantic(loop, rounds=3)
    assert np.array_equal(y, solved)


def test_solve_many_threads(benchmark, solved):
    benchmark.group = f"solver, {SETS} parameter sets x {STEPS} steps"
    t, Y = pfd.solve_many(rhs, GAINS, 1.0, 0.6, 0.005, STEPS, chunk=8)
    y = benchmark.pedantic(lambda: Y.compute(scheduler="threads"), rounds=3)
    assert np.array_equal(y, solved)


def test_solve_many_cluster(benchmark, client, solved):
    benchmark.group = f"solver, {SETS} parameter sets x {STEPS} steps"
    t, Y = pfd.solve_many(rhs, GAINS, 1.0, 0.6, 0.005, STEPS, chunk=8)
    y = benchmark.pedantic(lambda: client.compute(Y, sync=True), rounds=3)
    assert np.array_equal(y, solved)
    if benchmark.stats is not None:
        benchmark.extra_info["us_per_step"] = benchmark.stats.stats.median / (SETS * STEPS) * 1e6
