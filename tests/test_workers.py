"""workers= on the batch functions (issue 12, item 2).

- The convention is SciPy's (scipy.fft, ``workers``): None is 1, a
  negative count counts back from os.cpu_count() (-1 every CPU), 0 is
  refused; checked here against os.cpu_count() and by the error messages.
- The result is the same bit for bit for every workers value: one long
  signal (the segment products split), odd channel counts, one channel,
  short signals, every engine and rule, time along either axis. The
  reference is workers=1, itself checked against the plain NumPy sums in
  tests/test_batch.py; one threaded case is also checked against a closed
  form here.
- The C call releases the GIL (cffi's API mode releases it around every
  call into the compiled module; cffi documentation, "Thread-safety"
  / common practice of cffi): another Python thread runs during a long
  batch call.
"""

import os
import threading

import numpy as np
import pytest
from scipy.special import gamma

import pyfracconv as pf
from pyfracconv import ArgumentError, InputTypeError

CPUS = os.cpu_count() or 1
RULES = [
    ("integral", "rectangle", 0.6),
    ("integral", "trapezoid", 1.4),
    ("derivative", "grunwald", 0.5),
    ("derivative", "l1", 0.3),
]
# (signals, samples): one long signal, odd counts, one channel, short
# (2**17 samples or more are split over the threads when there are fewer
# signals than threads or a count that is not a multiple of them)
SHAPES = [
    (1, 140000),
    (3, 50000),
    (5, 30000),
    (7, 2500),
    (2, 40000),
    (1, 1),
    (1, 2),
    (3, 130),
    (1, 300),
    (4, 4100),
    (1, 70000),
]


def same_bits(a, b):
    return a.shape == b.shape and a.dtype == b.dtype and a.tobytes() == b.tobytes()


def signal(rng, shape):
    x = rng.standard_normal(shape)
    x[..., ::97] += 50.0  # spikes: outputs of very different sizes
    return x


@pytest.mark.parametrize("kind,rule,order", RULES)
@pytest.mark.parametrize("shape", SHAPES)
def test_every_workers_value_gives_the_same_bits(kind, rule, order, shape):
    rng = np.random.default_rng(hash((kind, rule, shape)) % 2**32)
    x = signal(rng, shape)
    f = getattr(pf, kind)
    engines = ["auto", "blocked", "fft"] + (["direct"] if shape[1] <= 10000 else [])
    for engine in engines:
        ref = f(x, order, 0.01, rule=rule, engine=engine)
        for w in (2, 3, 4, -1, 16):
            y = f(x, order, 0.01, rule=rule, engine=engine, workers=w)
            assert same_bits(y, ref), (engine, w)


@pytest.mark.parametrize("shape", [(1, 140000), (3, 50000), (6, 5000), (1, 200)])
def test_lagged_sum_workers_same_bits(shape):
    rng = np.random.default_rng(7)
    x = signal(rng, shape)
    kernel = 1.0 / (np.arange(1, 4001) ** 1.3)
    for engine in ("auto", "direct", "blocked", "fft"):
        if engine == "direct" and shape[1] > 10000:
            continue
        ref = pf.lagged_sum(x, kernel, engine=engine)
        for w in (2, 3, -1):
            assert same_bits(pf.lagged_sum(x, kernel, engine=engine, workers=w), ref)


def test_time_along_axis_0_and_3d_same_bits():
    rng = np.random.default_rng(3)
    x = signal(rng, (30000, 3))
    ref = pf.integral(x, 0.5, 0.1, axis=0)
    assert same_bits(pf.integral(x, 0.5, 0.1, axis=0, workers=2), ref)
    x3 = signal(rng, (3, 5, 4000))
    ref3 = pf.derivative(x3, 0.7, 0.1)
    assert same_bits(pf.derivative(x3, 0.7, 0.1, workers=-1), ref3)


def test_threaded_result_matches_the_closed_form():
    # I^a 1 = t^a / Gamma(a+1) (Podlubny 1999); the rectangle rule gives it
    # exactly at the grid points up to rounding (its weights telescope;
    # common practice): one long signal, split over the threads
    n, a, h = 200000, 0.35, 1e-3
    y = pf.integral(np.ones(n), a, h, workers=2)
    exact = (np.arange(n) * h) ** a / gamma(a + 1)
    assert np.allclose(y, exact, rtol=1e-12, atol=0)


def test_workers_convention_is_scipys():
    x = np.ones(10)
    for w in (None, 1, 2, -1, -CPUS, 10**6, np.int64(2)):
        assert same_bits(pf.integral(x, 0.5, 0.1, workers=w), pf.integral(x, 0.5, 0.1))
    with pytest.raises(ArgumentError, match=r"workers=0: must not be 0"):
        pf.integral(x, 0.5, 0.1, workers=0)
    with pytest.raises(ArgumentError, match=rf"workers={-CPUS - 1}: .* >= -{CPUS}"):
        pf.derivative(x, 0.5, 0.1, workers=-CPUS - 1)
    for bad in (1.5, True, "2", 2.0):
        with pytest.raises(InputTypeError, match=r"workers="):
            pf.lagged_sum(x, [1.0], workers=bad)
    # the t= path checks the value too
    with pytest.raises(ArgumentError, match=r"workers=0"):
        pf.integral(x, 0.5, t=np.arange(10.0), workers=0)
    t = np.cumsum(np.full(10, 0.1)) - 0.1
    assert same_bits(pf.integral(x, 0.5, t=t, workers=-1), pf.integral(x, 0.5, t=t))


def test_a_refused_call_leaves_the_next_call_unchanged():
    rng = np.random.default_rng(11)
    x = signal(rng, (3, 30000))
    ref = pf.integral(x, 0.5, 0.01, workers=2)
    with pytest.raises(ArgumentError):
        pf.integral(x, 0.5, 0.01, workers=0)
    with pytest.raises(ArgumentError):
        pf.integral(x, -0.5, 0.01, workers=2)
    assert same_bits(pf.integral(x, 0.5, 0.01, workers=2), ref)
    assert same_bits(pf.integral(x, 0.5, 0.01), ref)


def test_the_batch_call_releases_the_gil():
    # a counting thread advances while the main thread is inside one long
    # C call (the compiled fc_apply that integral() calls, nothing else
    # between the two readings); with the GIL held through the call it
    # could not run at all
    from pyfracconv import _core
    from pyfracconv._fracconv import ffi, lib

    x = np.random.default_rng(5).standard_normal((4, 2**19))
    y = np.empty_like(x)
    ctx = _core.context(1)
    xp, yp = ffi.from_buffer("double[]", x), ffi.from_buffer("double[]", y)

    def call():
        return lib.fc_apply(ctx, lib.FC_RULE_RECTANGLE, 0.5, 0.01, xp, 4, 2**19, lib.FC_ENGINE_BLOCKED, yp)

    assert call() == lib.FC_OK  # plans and work space made
    count = [0]
    stop = threading.Event()
    started = threading.Event()

    def counter():
        started.set()
        while not stop.is_set():
            count[0] += 1

    th = threading.Thread(target=counter)
    th.start()
    started.wait(10)
    try:
        best = 0
        for _ in range(3):
            c0 = count[0]
            st = call()
            best = max(best, count[0] - c0)
            assert st == lib.FC_OK
            if best > 1000:
                break
    finally:
        stop.set()
        th.join()
    assert best > 1000, best
    assert same_bits(y, pf.integral(x, 0.5, 0.01, engine="blocked"))


# ---------------------------------------------------------------- streams

STREAM_CASES = [
    ("integral", "rectangle", 0.6),
    ("integral", "trapezoid", 1.4),
    ("integral", "trapezoid", 0.5),
    ("integral", "rectangle", 1.5),
    ("derivative", "grunwald", 0.5),
    ("derivative", "l1", 0.3),
]


@pytest.mark.parametrize("mode", ["compressed", "exact"])
@pytest.mark.parametrize("channels", [1, 2, 3, 5, 16, 17, 24])
@pytest.mark.parametrize("kind,rule,order", STREAM_CASES)
def test_push_many_workers_same_outputs_and_state(mode, channels, kind, rule, order):
    rng = np.random.default_rng(channels * 31 + len(rule))
    x = signal(rng, (6000, channels))
    make = getattr(pf.Stream, kind)
    kw = dict(mode="compressed", tol=1e-10, horizon=1e6) if mode == "compressed" else {}
    if mode == "compressed" and rule == "grunwald":
        order = 0.5
    a = make(order, 0.01, rule=rule, channels=channels, **kw)
    b = make(order, 0.01, rule=rule, channels=channels, **kw)
    # blocks of several sizes (short ones run on one thread), both layouts
    ya = np.concatenate([a.push_many(x[:3]), a.push_many(x[3:700]), a.push_many(x[700:].T, axis=1).T])
    yb = np.concatenate(
        [
            b.push_many(x[:3], workers=2),
            b.push_many(x[3:700], workers=3),
            b.push_many(x[700:].T, axis=1, workers=-1).T,
        ]
    )
    assert same_bits(ya, yb)
    assert a.save() == b.save()
    assert same_bits(a.push(x[0]), b.push(x[0]))


def test_push_many_workers_refused_leaves_the_stream_unchanged():
    s = pf.Stream.integral(0.5, 0.1, channels=3, mode="compressed", tol=1e-9, horizon=1e6)
    s.push_many(np.ones((10, 3)))
    before = s.save()
    for bad, err in ((0, ArgumentError), (-CPUS - 1, ArgumentError), (1.5, InputTypeError)):
        with pytest.raises(err, match="workers="):
            s.push_many(np.ones((5000, 3)), workers=bad)
        assert s.save() == before
    assert s.count == 10


def test_compressed_stream_channels_match_the_batch_within_tol():
    # the threaded compressed stream against the batch integral (checked
    # against NumPy sums in tests/test_batch.py), within the compressed
    # mode's stated bound |y - exact| <= (tol + 64 eps) sum |c u| (README,
    # "Streaming"; Jiang et al. 2017 for the sum of exponentials)
    rng = np.random.default_rng(9)
    x = rng.random((20000, 4)) + 0.5  # positive: sum |terms| = the integral
    s = pf.Stream.integral(0.5, 0.01, channels=4, mode="compressed", tol=1e-9, horizon=1e6)
    y = s.push_many(x, workers=2)
    ref = pf.integral(x, 0.5, 0.01, axis=0)
    assert np.all(np.abs(y - ref) <= 1e-8 * np.abs(ref) + 1e-300)


@pytest.mark.parametrize("T,channels", [(20000, 16), (40000, 5), (9000, 33)])
@pytest.mark.parametrize(
    "kind,rule,order",
    [("integral", "trapezoid", 0.6), ("derivative", "grunwald", 2.7), ("derivative", "l1", 0.3)],
)
def test_exact_stream_large_frames_same_bits(T, channels, kind, rule, order):
    # long enough for frames of 2^10-2^12 samples, the ones shared by the
    # threads (block size times channels >= 2^14); spikes of 1e6 make the
    # scaled frame products run too
    rng = np.random.default_rng(T + channels)
    x = signal(rng, (T, channels))
    x[::501] *= 1e6
    make = getattr(pf.Stream, kind)
    a = make(order, 0.01, rule=rule, channels=channels)
    b = make(order, 0.01, rule=rule, channels=channels)
    cut = T // 3
    ya = np.concatenate([a.push_many(x[:cut]), a.push_many(x[cut:])])
    yb = np.concatenate([b.push_many(x[:cut], workers=2), b.push_many(x[cut:], workers=2)])
    assert same_bits(ya, yb)
    assert a.save() == b.save()
    # the second thread ran a frame: its plans and buffer are counted
    assert b.nbytes > a.nbytes
