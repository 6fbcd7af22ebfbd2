"""Benchmarks of the exact stream (pyfracconv.Stream, mode="exact").

  python -m pytest bench/test_bench_stream.py -s --benchmark-group-by=group

- push_many of 2^20 samples against the batch integral of the same samples
  (the ratio is printed and stored in extra_info);
- push() from Python, per call, in one group: the bare cffi calls
  (lib.fc_stream_push1 with an output buffer, lib.fc_stream_push1_value
  returning the output), Stream.push on an exact and on a compressed rule
  stream at about 2^16 samples of history, and on a one-tap kernel
  stream (the pure call overhead); bench/push_cost.py breaks the cost
  down further;
- what a user would otherwise write: a per-sample NumPy loop, one dot
  product over the whole history, at 2^14 and 2^16 samples, against the
  stream on the same samples;
- the worst single push over 2^20 pushes (max and 99.9th percentile).
"""

import time

import numpy as np
import pytest

import pyfracconv
from pyfracconv import Stream
from pyfracconv._fracconv import ffi, lib

A, H = 0.5, 1e-3
N_BIG = 2**20


@pytest.fixture(scope="module")
def x_big():
    return np.random.default_rng(0).random(N_BIG)


def _quick(benchmark):
    """True under --benchmark-disable: the checks run on short inputs."""
    return bool(getattr(benchmark, "disabled", False))


def _best(fn, repeat=3):
    best = float("inf")
    for _ in range(repeat):
        t0 = time.perf_counter()
        fn()
        best = min(best, time.perf_counter() - t0)
    return best


# ------------------------------------------------- push_many versus batch


@pytest.mark.parametrize("rule", ["rectangle", "trapezoid"])
def test_push_many_2_20(benchmark, x_big, rule):
    benchmark.group = f"2^20 samples, {rule}"

    def run():
        s = Stream.integral(A, H, rule=rule)
        return s.push_many(x_big)

    y = benchmark.pedantic(run, rounds=3, iterations=1)
    yb = pyfracconv.integral(x_big, A, H, rule=rule)
    assert np.max(np.abs(y - yb)) <= 1e-12 * np.max(np.abs(yb))


@pytest.mark.parametrize("rule", ["rectangle", "trapezoid"])
def test_batch_integral_2_20(benchmark, x_big, rule):
    benchmark.group = f"2^20 samples, {rule}"
    benchmark.pedantic(pyfracconv.integral, args=(x_big, A, H), kwargs={"rule": rule}, rounds=3, iterations=1)


@pytest.mark.parametrize("rule", ["rectangle", "trapezoid"])
def test_ratio_push_many_over_batch(benchmark, x_big, rule):
    """Ratio (best of 3 each): push_many of 2^20 samples on a fresh stream /
    the batch integral of the same samples."""
    benchmark.group = f"2^20 samples, {rule}"
    benchmark.pedantic(lambda: None, rounds=1, iterations=1)
    if benchmark.stats is None:  # --benchmark-disable: no timing
        return
    t_batch = _best(lambda: pyfracconv.integral(x_big, A, H, rule=rule))
    t_stream = _best(lambda: Stream.integral(A, H, rule=rule).push_many(x_big))

    def reserved():
        s = Stream.integral(A, H, rule=rule)
        s.reserve(N_BIG)
        return s

    s = reserved()
    t0 = time.perf_counter()
    s.push_many(x_big)
    t_reserved = time.perf_counter() - t0
    ratio = t_stream / t_batch
    benchmark.extra_info.update(
        batch_s=t_batch, push_many_s=t_stream, push_many_reserved_s=t_reserved, ratio=ratio
    )
    print(
        f"\n[{rule}] 2^20: batch {t_batch:.3f} s, push_many {t_stream:.3f} s "
        f"({t_stream / N_BIG * 1e9:.0f} ns/sample), after reserve "
        f"{t_reserved:.3f} s; ratio push_many/batch = {ratio:.2f}"
    )


# ---------------------------------------------------- push() per call


def _rule_stream(mode="exact"):
    if mode == "compressed":
        s = Stream.integral(A, H, mode="compressed", horizon=1e12)
    else:
        s = Stream.integral(A, H)
    s.push_many(np.random.default_rng(1).random(2**16))
    return s


def test_push_bare_cffi(benchmark):
    """lib.fc_stream_push1 on the exact rule stream, every name bound."""
    benchmark.group = "push() per call"
    s = _rule_stream()
    y = ffi.new("double[1]")
    benchmark.pedantic(lib.fc_stream_push1, args=(s._s, 0.5, y), rounds=200, iterations=100, warmup_rounds=5)
    assert y[0] == y[0]


def test_push_bare_cffi_value(benchmark):
    """lib.fc_stream_push1_value (what Stream.push calls), exact stream."""
    benchmark.group = "push() per call"
    s = _rule_stream()
    cell = ffi.new("int[1]")
    y = benchmark.pedantic(
        lib.fc_stream_push1_value, args=(s._s, 0.5, cell), rounds=200, iterations=100, warmup_rounds=5
    )
    assert y == y and cell[0] == 0


def test_push_python_rule_stream(benchmark):
    benchmark.group = "push() per call"
    s = _rule_stream()
    benchmark.pedantic(s.push, args=(0.5,), rounds=200, iterations=100, warmup_rounds=5)


def test_push_python_compressed(benchmark):
    benchmark.group = "push() per call"
    s = _rule_stream("compressed")
    benchmark.pedantic(s.push, args=(0.5,), rounds=200, iterations=100, warmup_rounds=5)


def test_push_bare_cffi_compressed(benchmark):
    benchmark.group = "push() per call"
    s = _rule_stream("compressed")
    y = ffi.new("double[1]")
    benchmark.pedantic(lib.fc_stream_push1, args=(s._s, 0.5, y), rounds=200, iterations=100, warmup_rounds=5)


def test_push_python_overhead_one_tap(benchmark):
    benchmark.group = "push() per call"
    s = Stream.from_kernel([1.0])
    benchmark.pedantic(s.push, args=(0.5,), rounds=200, iterations=100, warmup_rounds=5)


def test_push_python_amortised_2_18(benchmark):
    """2^18 pushes from Python on a fresh stream, per call."""
    benchmark.group = "push() per call"
    x = np.random.default_rng(2).random(2**10 if _quick(benchmark) else 2**18).tolist()

    def run():
        s = Stream.integral(A, H)
        push = s.push
        for v in x:
            push(v)

    benchmark.pedantic(run, rounds=2, iterations=1)
    if benchmark.stats is None:  # --benchmark-disable: ran once, no timing
        return
    per = benchmark.stats.stats.min / len(x)
    benchmark.extra_info["per_push_us"] = per * 1e6
    print(f"\npush() amortised over 2^18 calls: {per * 1e6:.2f} us")


# ------------------------------------------- the naive per-sample loop


def _naive_loop(x, a=A, h=H):
    """What one might write: keep the history, one dot product per sample."""
    N = len(x)
    w = pyfracconv.weights("rectangle", a, N, step=h)[::-1].copy()
    hist = np.empty(N)
    out = np.empty(N)
    for n in range(N):
        hist[n] = x[n]
        # y_n = sum_{k<n} w_{n-1-k} x_k
        out[n] = w[N - n :] @ hist[:n] if n else 0.0
    return out


def _stream_loop(x):
    s = Stream.integral(A, H)
    push = s.push
    return np.array([push(v) for v in x.tolist()])


@pytest.mark.parametrize("N", [2**14, 2**16], ids=["2^14", "2^16"])
def test_naive_numpy_loop(benchmark, N):
    benchmark.group = f"per-sample loop N={N}"
    x = np.random.default_rng(3).random(N // 16 if _quick(benchmark) else N)
    y = benchmark.pedantic(_naive_loop, args=(x,), rounds=1, iterations=1)
    assert np.allclose(y, pyfracconv.integral(x, A, H), rtol=1e-12, atol=0)


@pytest.mark.parametrize("N", [2**14, 2**16], ids=["2^14", "2^16"])
def test_stream_push_loop(benchmark, N):
    benchmark.group = f"per-sample loop N={N}"
    x = np.random.default_rng(3).random(N // 16 if _quick(benchmark) else N)
    y = benchmark.pedantic(_stream_loop, args=(x,), rounds=3, iterations=1)
    assert np.allclose(y, pyfracconv.integral(x, A, H), rtol=1e-12, atol=0)


# ------------------------------------------------------ worst push


@pytest.mark.parametrize("reserved", [False, True], ids=["grow", "reserved"])
def test_worst_single_push_2_20(benchmark, x_big, reserved):
    """Latency of every one of 2^20 push() calls from Python (including the
    Python call); the worst is a push that completes frames of many levels
    and, without reserve(), creates a new level (FFT plan and kernel
    spectra)."""
    benchmark.group = "worst push"
    xs = (x_big[: 2**12] if _quick(benchmark) else x_big).tolist()

    def run():
        s = Stream.integral(A, H)
        if reserved:
            s.reserve(len(xs))
        push = s.push
        clock = time.perf_counter_ns
        lat = np.empty(len(xs), dtype=np.int64)
        for i, v in enumerate(xs):
            t0 = clock()
            push(v)
            lat[i] = clock() - t0
        return lat

    lat = benchmark.pedantic(run, rounds=1, iterations=1)
    worst = int(lat.max())
    at = int(lat.argmax())
    p999 = float(np.percentile(lat, 99.9))
    p50 = float(np.median(lat))
    benchmark.extra_info.update(worst_us=worst / 1e3, worst_at=at, p99_9_us=p999 / 1e3, median_us=p50 / 1e3)
    print(
        f"\nworst push over 2^20 ({'reserved' if reserved else 'growing'}): "
        f"{worst / 1e3:.0f} us at sample {at}; "
        f"99.9th percentile {p999 / 1e3:.1f} us; median {p50 / 1e3:.2f} us"
    )
