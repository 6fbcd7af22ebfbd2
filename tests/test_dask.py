"""pyfracconv.dask on a dask.distributed local cluster of two worker
processes on the loopback interface, started here, and on the threaded
scheduler.

The Dask layer must add nothing: every result is held bit for bit to the
NumPy function of this package on the whole array (pyfracconv.integral,
pyfracconv.derivative, pyfracconv.solve), which the other test files hold
to closed forms and extended-precision references; and once to a closed
form directly (order 1 rectangle rule = left rectangle sum, and explicit
Euler for D^1 y = -p y: common practice).
"""

import os

import numpy as np
import pytest

import pyfracconv
from pyfracconv._errors import ArgumentError, InputTypeError, RhsError, SampleError

da = pytest.importorskip("dask.array")
distributed = pytest.importorskip("dask.distributed")
pfd = pytest.importorskip("pyfracconv.dask")


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
    c = distributed.Client(cluster)
    try:
        yield c
    finally:
        c.close()
        cluster.close()


def signals(shape, seed=0):
    """Invented test signals (seeded noise plus a slow sine)."""
    rng = np.random.default_rng(seed)
    t = 0.01 * np.arange(shape[-1])
    return rng.standard_normal(shape) + np.sin(t)


def decay(t, y, p):
    """D^a y = -p y (invented test problem)."""
    return -p * y


def pair(t, y, p):
    """A two-component invented test system with a parameter row p."""
    return np.array([-p[0] * y[0] + 0.1 * y[1], np.cos(t) - p[1] * y[1]])


# ------------------------------------------------------------ the cluster


def test_cluster_runs_separate_worker_processes(client):
    pids = client.run(os.getpid)
    assert len(pids) == 2 and os.getpid() not in pids.values()
    assert all(addr.startswith("tcp://127.0.0.1:") for addr in pids)


def test_operators_on_the_cluster_equal_numpy(client):
    x = signals((12, 6000))
    X = da.from_array(x, chunks=(3, 1500))  # time axis in 4 chunks
    Y = pfd.integral(X, 0.5, 0.01)
    assert isinstance(Y, da.Array) and Y.chunks == ((3, 3, 3, 3), (6000,))
    D = pfd.derivative(X.T, 0.7, 0.01, rule="l1", axis=0)  # time along axis 0
    y, d = client.compute([Y, D], sync=True)
    assert np.array_equal(y, pyfracconv.integral(x, 0.5, 0.01))
    assert np.array_equal(d, pyfracconv.derivative(x.T, 0.7, 0.01, rule="l1", axis=0))


def test_three_dimensional_and_every_rule_on_the_cluster(client):
    x = signals((2, 5, 3000), seed=1)
    X = da.from_array(x, chunks=(1, 2, 1000))
    cases = [
        ("integral", "rectangle", 1.4),
        ("integral", "trapezoid", 0.3),
        ("derivative", "grunwald", 1.5),
        ("derivative", "l1", 0.4),
    ]
    lazy = [getattr(pfd, op)(X, a, 0.02, rule=rule) for op, rule, a in cases]
    got = client.compute(lazy, sync=True)
    for (op, rule, a), g in zip(cases, got):
        assert np.array_equal(g, getattr(pyfracconv, op)(x, a, 0.02, rule=rule)), (op, rule)


def test_order_one_is_the_left_rectangle_sum(client):
    # common practice: the order-1 rectangle rule is h (x_0 + ... + x_{n-1})
    x = np.arange(40.0).reshape(4, 10)
    y = pfd.integral(da.from_array(x, chunks=(1, 5)), 1.0, 0.5).compute()
    want = 0.5 * np.concatenate([np.zeros((4, 1)), np.cumsum(x, axis=1)[:, :-1]], axis=1)
    assert np.array_equal(y, want)


def test_nan_found_on_a_worker_is_named_by_its_index(client):
    x = signals((6, 2000))
    x[4, 1234] = np.nan
    Y = pfd.integral(da.from_array(x, chunks=(2, 2000)), 0.5, 0.01)
    with pytest.raises(SampleError, match=r"x\[4, 1234\]=nan"):
        client.compute(Y, sync=True)


def test_solve_many_on_the_cluster_equals_solve(client):
    gains = np.linspace(0.5, 3.0, 9)
    t, Y = pfd.solve_many(decay, gains, 1.0, 0.6, 0.01, 300, chunk=2)
    assert isinstance(Y, da.Array) and Y.shape == (9, 301)
    y = client.compute(Y, sync=True)
    for i, g in enumerate(gains):
        ref = pyfracconv.solve(lambda t, y: -g * y, 1.0, 0.6, 0.01, 300)
        assert np.array_equal(y[i], ref.y), i
        assert np.array_equal(t, ref.t)


def test_solve_many_systems_order_sweep_compressed_on_the_cluster(client):
    rows = np.array([[1.0, 2.0, 0.5], [0.5, 1.0, 0.8], [2.0, 0.3, 0.3]])
    P = da.from_array(rows, chunks=(2, 1))  # the parameter axis split too
    t, Y = pfd.solve_many(
        pair, P, [1.0, 0.0], lambda p: p[2], 0.005, 200, memory="compressed", tol=1e-10, method="rectangle"
    )
    assert Y.shape == (3, 201, 2)
    y = client.compute(Y, sync=True)
    for i, p in enumerate(rows):
        ref = pyfracconv.solve(
            lambda t, y: pair(t, y, p),
            [1.0, 0.0],
            p[2],
            0.005,
            200,
            memory="compressed",
            tol=1e-10,
            method="rectangle",
        )
        assert np.array_equal(y[i], ref.y), i


# ------------------------------------------------------------ threads


def test_threaded_scheduler_equals_numpy():
    x = signals((7, 4000), seed=2)
    X = da.from_array(x, chunks=(2, 3000))
    y = pfd.integral(X, 0.3, 0.01, rule="trapezoid").compute(scheduler="threads")
    assert np.array_equal(y, pyfracconv.integral(x, 0.3, 0.01, rule="trapezoid"))
    d = pfd.derivative(x, 0.5, 0.01).compute(scheduler="threads")  # a NumPy input
    assert np.array_equal(d, pyfracconv.derivative(x, 0.5, 0.01))


def test_results_are_lazy():
    import dask

    calls = []

    def make():
        calls.append(1)
        return np.ones((2, 100))

    X = da.from_delayed(dask.delayed(make)(), shape=(2, 100), dtype=float)
    Y = pfd.integral(X, 0.5, 0.1)
    t, S = pfd.solve_many(decay, np.ones(3), 1.0, 0.5, 0.1, 10)
    assert calls == []
    assert np.array_equal(Y.compute(scheduler="threads"), pyfracconv.integral(np.ones((2, 100)), 0.5, 0.1))
    assert calls == [1]


def test_explicit_euler_closed_form_threads():
    # D^1 y = -p y by the product rectangle rule is explicit Euler:
    # y_n = (1 - p h)^n (common practice)
    p = np.array([1.0, 2.0, 4.0])
    t, Y = pfd.solve_many(decay, p, 1.0, 1.0, 0.125, 8, method="rectangle")
    y = Y.compute(scheduler="threads")
    want = (1.0 - p[:, None] * 0.125) ** np.arange(9)[None, :]
    assert np.allclose(y, want, rtol=1e-14, atol=0)
    assert np.array_equal(t, 0.125 * np.arange(9))
    t, Y = pfd.solve_many(decay, p, 1.0, 1.0, 0.125, 8, method="rectangle", t0=0.3)
    assert np.array_equal(Y.compute(scheduler="threads"), y)
    assert np.array_equal(
        t, pyfracconv.solve(lambda t, y: -y, 1.0, 1.0, 0.125, 8, method="rectangle", t0=0.3).t
    )


def test_per_set_value_that_raises_is_named():
    t, Y = pfd.solve_many(decay, np.array([1.0, 0.0]), lambda p: {1.0: 1.0}[float(p)], 0.5, 0.1, 5, chunk=1)
    with pytest.raises(
        ArgumentError,
        match=r"params\[1\]=0\.0: y0, order or dy0 raised "
        r"KeyError",
    ):
        Y.compute(scheduler="threads")


def test_failing_set_is_named():
    def rhs(t, y, p):
        if p > 2.5 and t > 0.05:
            raise ValueError("invented failure")
        return -p * y

    t, Y = pfd.solve_many(rhs, np.array([1.0, 2.0, 3.0]), 1.0, 0.5, 0.01, 20, chunk=1)
    with pytest.raises(RhsError, match=r"params\[2\]=3\.0: rhs raised ValueError") as info:
        Y.compute(scheduler="threads")
    assert info.value.partial is not None and info.value.step is not None


def test_inconsistent_component_counts_are_named():
    t, Y = pfd.solve_many(
        lambda t, y, p: -y, np.array([1.0, 2.0]), lambda p: np.ones(int(p)), 0.5, 0.1, 5, chunk=1
    )
    with pytest.raises(ArgumentError, match=r"params\[1\]=2\.0: the solution has shape"):
        Y.compute(scheduler="threads")


# ------------------------------------------------------------ errors at the call

X0 = da.ones((3, 50), chunks=(1, 50))


@pytest.mark.parametrize(
    "call,exc,text",
    [
        (lambda: pfd.integral(X0, -0.5, 0.1), ArgumentError, "order=-0.5"),
        (lambda: pfd.integral(X0, 0.5, 0.0), ArgumentError, "step=0.0"),
        (lambda: pfd.integral(X0, 0.5, 0.1, rule="l1"), ArgumentError, "rule='l1'"),
        (lambda: pfd.derivative(X0, 1.5, 0.1, rule="l1"), ArgumentError, "order=1.5"),
        (lambda: pfd.integral(X0, 0.5, 0.1, axis=2), ArgumentError, "axis=2"),
        (lambda: pfd.integral(X0, 0.5, 0.1, engine="gpu"), ArgumentError, "engine='gpu'"),
        (lambda: pfd.integral(da.from_array(np.array(["a", "b"])), 0.5, 0.1), InputTypeError, "dtype <U1"),
        (lambda: pfd.integral(da.from_array(np.float64(1.0)), 0.5, 0.1), ArgumentError, "scalar"),
        (lambda: pfd.integral(np.ma.masked_array([1.0, 2.0]), 0.5, 0.1), InputTypeError, "masked"),
        (lambda: pfd.solve_many("f", np.ones(2), 1.0, 0.5, 0.1, 5), InputTypeError, "rhs='f'"),
        (lambda: pfd.solve_many(decay, np.ones(0), 1.0, 0.5, 0.1, 5), ArgumentError, "shape (0,)"),
        (
            lambda: pfd.solve_many(decay, np.ones((2, 2, 2)), 1.0, 0.5, 0.1, 5),
            ArgumentError,
            "shape (2, 2, 2)",
        ),
        (lambda: pfd.solve_many(decay, ["a"], 1.0, 0.5, 0.1, 5), InputTypeError, "dtype <U1"),
        (lambda: pfd.solve_many(decay, np.ones(2), 1.0, 2.5, 0.1, 5), ArgumentError, "order=2.5"),
        (lambda: pfd.solve_many(decay, np.ones(2), 1.0, lambda p: -p, 0.1, 5), ArgumentError, "order=-1.0"),
        (lambda: pfd.solve_many(decay, np.ones(2), 1.0, 0.5, -0.1, 5), ArgumentError, "step=-0.1"),
        (lambda: pfd.solve_many(decay, np.ones(2), 1.0, 0.5, 0.1, -5), ArgumentError, "n_steps=-5"),
        (lambda: pfd.solve_many(decay, np.ones(2), 1.0, 0.5, 0.1, 5, chunk=0), ArgumentError, "chunk=0"),
        (
            lambda: pfd.solve_many(decay, np.ones(2), 1.0, 0.5, 0.1, 5, progress=True),
            ArgumentError,
            "progress",
        ),
        (
            lambda: pfd.solve_many(decay, np.ones(2), 1.0, 0.5, 0.1, 5, metod="rectangle"),
            ArgumentError,
            "metod='rectangle'",
        ),
        (
            lambda: pfd.solve_many(decay, np.ones(2), 1.0, 0.5, 0.1, 5, method="euler"),
            ArgumentError,
            "method='euler'",
        ),
        (
            lambda: pfd.solve_many(decay, np.ones(2), lambda p: 1 / 0, 0.5, 0.1, 5),
            ArgumentError,
            "ZeroDivisionError",
        ),
    ],
)
def test_bad_arguments_at_the_call(call, exc, text):
    with pytest.raises(exc) as info:
        call()
    assert text in str(info.value), str(info.value)


# ------------------------------------------------------------ sample times (t=)


def jittered_times(n, seed=2):
    """An invented logger's times: steps uniform in [0.5, 1.5] ms."""
    rng = np.random.default_rng(seed)
    return np.concatenate([[0.0], np.cumsum(rng.uniform(0.5e-3, 1.5e-3, n - 1))])


def test_sample_times_on_the_cluster_equal_numpy(client):
    t = jittered_times(3000)
    x = signals((6, 3000), seed=3)
    X = da.from_array(x, chunks=(2, 1000))  # time axis in 3 chunks
    cases = [
        (pfd.integral, pyfracconv.integral, dict(rule="rectangle"), 0.5),
        (pfd.integral, pyfracconv.integral, dict(rule="trapezoid", tol=1e-9), 0.8),
        (pfd.derivative, pyfracconv.derivative, dict(rule="l1"), 0.3),
    ]
    lazy = [f(X, a, t=t, **kw) for f, _, kw, a in cases]
    got = client.compute(lazy, sync=True)
    for (_, g, kw, a), y in zip(cases, got):
        assert np.array_equal(y, g(x, a, t=t, **kw)), kw


@pytest.mark.parametrize("engine", ["direct", "fast", "auto"])
def test_sample_times_threads_each_engine_bit_for_bit(engine):
    # the direct engine's sums do not depend on how many signals a block
    # holds, nor do the fast engine's: any channel chunks give the bits of
    # the whole array, and of each signal alone
    t = jittered_times(700)
    x = signals((9, 700), seed=4)
    y = pfd.integral(da.from_array(x, chunks=(2, 700)), 0.5, t=t, engine=engine, rule="trapezoid").compute(
        scheduler="threads"
    )
    whole = pyfracconv.integral(x, 0.5, t=t, engine=engine, rule="trapezoid")
    assert np.array_equal(y, whole)
    for i in range(9):
        assert np.array_equal(whole[i], pyfracconv.integral(x[i], 0.5, t=t, engine=engine, rule="trapezoid"))
    d = pfd.derivative(
        da.from_array(x.T, chunks=(350, 4)), 0.4, t=t, rule="l1", axis=0, engine=engine
    ).compute(scheduler="threads")
    assert np.array_equal(d, pyfracconv.derivative(x.T, 0.4, t=t, rule="l1", axis=0, engine=engine))


def test_sample_times_closed_form_threads():
    # I^a 1 = t^a / Gamma(a+1) (Podlubny 1999): the rectangle rule is exact
    # for constants on any grid
    import math

    t = 1.0 + jittered_times(50) * 100
    y = pfd.integral(da.ones((3, 50), chunks=(1, 50)), 0.7, t=t).compute(scheduler="threads")
    want = (t - t[0]) ** 0.7 / math.gamma(1.7)
    assert np.allclose(y, want[None, :], rtol=1e-13, atol=1e-15)


@pytest.mark.parametrize(
    "call,exc,text",
    [
        (lambda: pfd.integral(X0, 0.5, 0.1, t=np.arange(50.0)), ArgumentError, "give exactly one of step"),
        (lambda: pfd.integral(X0, 0.5), InputTypeError, "step=None and t=None"),
        (lambda: pfd.integral(X0, 0.5, t=np.arange(49.0)), ArgumentError, "t: has 49 times"),
        (
            lambda: pfd.integral(X0, 0.5, t=np.r_[0.0, 0.0, np.arange(2.0, 50.0)]),
            ArgumentError,
            "t[1]=0.0 after t[0]=0.0",
        ),
        (lambda: pfd.integral(X0, 0.5, t=np.r_[np.nan, np.arange(1.0, 50.0)]), ArgumentError, "t[0]=nan"),
        (lambda: pfd.derivative(X0, 0.5, t=np.arange(50.0)), ArgumentError, "rule='grunwald'"),
        (lambda: pfd.integral(X0, 0.5, t=np.arange(50.0), engine="fft"), ArgumentError, "engine='fft'"),
        (lambda: pfd.integral(X0, 0.5, t=np.arange(50.0), tol=1.0), ArgumentError, "tol=1.0"),
        (lambda: pfd.integral(X0, 0.5, 0.1, tol=1e-9), ArgumentError, "tol=1e-09"),
        (lambda: pfd.integral(X0, 2.5, t=np.arange(50.0), engine="fast"), ArgumentError, "engine='fast'"),
    ],
)
def test_sample_times_bad_arguments_at_the_call(call, exc, text):
    with pytest.raises(exc) as info:
        call()
    assert text in str(info.value), str(info.value)


def test_solve_many_on_a_grid_on_the_cluster_equals_solve(client):
    from pyfracconv.grid import graded_mesh

    t = graded_mesh(1.0, 60, 2.0)
    P = np.array([[0.5, 1.0], [1.5, 0.2], [2.0, 0.7]])
    tt, Y = pfd.solve_many(pair, P, [1.0, 0.0], [0.6, 0.9], t=t, chunk=2)
    y = client.compute(Y, sync=True)
    assert np.array_equal(tt, t) and y.shape == (3, 61, 2)
    for i, p in enumerate(P):
        want = pyfracconv.solve(lambda s, v, p=p: pair(s, v, p), [1.0, 0.0], [0.6, 0.9], t=t)
        assert np.array_equal(y[i], want.y)


def test_solve_many_on_a_grid_threads_rectangle():
    # D^1 y = -p y by the rectangle rule on a grid is explicit Euler with
    # the grid's steps: y_n = prod_k (1 - p h_k) (common practice)
    t = np.array([0.0, 0.1, 0.3, 0.35, 0.6])
    tt, Y = pfd.solve_many(decay, np.array([1.0, 2.0]), 1.0, 1.0, t=t, method="rectangle")
    y = Y.compute(scheduler="threads")
    for i, p in enumerate([1.0, 2.0]):
        want = np.concatenate([[1.0], np.cumprod(1.0 - p * np.diff(t))])
        assert np.allclose(y[i], want, rtol=1e-14, atol=1e-15)


def test_solve_many_on_a_grid_compressed_equals_solve():
    t = np.array([0.0, 0.1, 0.3, 0.35, 0.6, 1.0])
    tt, Y = pfd.solve_many(decay, np.array([1.0, 2.0]), 1.0, 0.5, t=t, memory="compressed")
    y = Y.compute(scheduler="threads")
    for i, p in enumerate([1.0, 2.0]):
        want = pyfracconv.solve(lambda s, v, p=p: decay(s, v, p), 1.0, 0.5, t=t, memory="compressed")
        assert np.array_equal(y[i], want.y)


def test_solve_many_on_a_grid_threads_implicit_rectangle():
    # D^1 y = -p y by the implicit rectangle rule on a grid is implicit
    # (backward) Euler with the grid's steps: y_n = prod_k 1 / (1 + p h_k)
    # (common practice)
    t = np.array([0.0, 0.1, 0.3, 0.35, 0.6])
    tt, Y = pfd.solve_many(decay, np.array([1.0, 2.0]), 1.0, 1.0, t=t, method="implicit-rectangle")
    y = Y.compute(scheduler="threads")
    for i, p in enumerate([1.0, 2.0]):
        want = np.concatenate([[1.0], np.cumprod(1.0 / (1.0 + p * np.diff(t)))])
        assert np.allclose(y[i], want, rtol=1e-11, atol=1e-15)


@pytest.mark.parametrize(
    "call,text",
    [
        (
            lambda: pfd.solve_many(decay, np.ones(2), 1.0, 0.5, 0.1, 5, t=[0.0, 1.0]),
            "t and step=0.1, n_steps=5: give either",
        ),
        (lambda: pfd.solve_many(decay, np.ones(2), 1.0, 0.5), "step and n_steps=None"),
        (
            lambda: pfd.solve_many(decay, np.ones(2), 1.0, 0.5, t=[0.0, 1.0], t0=1.0),
            "t0=1.0: not used with t=",
        ),
        (
            lambda: pfd.solve_many(
                decay, np.ones(2), 1.0, 0.5, t=[0.0, 1.0], memory="compressed", method="implicit-rectangle"
            ),
            "memory='compressed', method='implicit-rectangle': not available with t=",
        ),
        (lambda: pfd.solve_many(decay, np.ones(2), 1.0, 0.5, t=[0.0, 1.0, 1.0]), "t[2]=1.0 after t[1]=1.0"),
    ],
)
def test_solve_many_grid_refusals(call, text):
    with pytest.raises(ArgumentError) as info:
        call()
    assert text in str(info.value), str(info.value)
