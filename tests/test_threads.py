"""Python objects in many threads (issue: hardening, threads).

Many independent objects driven from many threads at once give, bit for
bit, the results of the same work done serially; one stream used by a
second thread while a first holds it is refused with BusyError and left
unchanged. The batch functions and stream pushes release the GIL during
the C call (cffi's API mode releases it around every call into the
compiled module, common practice of cffi), which is what lets the threads
below overlap at all.
"""

import threading
from concurrent.futures import ThreadPoolExecutor

import numpy as np
import pytest

import pyfracconv as pf

RULES = [("integral", "rectangle", 0.6), ("integral", "trapezoid", 1.4),
         ("derivative", "grunwald", 0.5), ("derivative", "l1", 0.3)]


def _job(i):
    kind, rule, order = RULES[i % len(RULES)]
    rng = np.random.default_rng(1000 + i)
    x = rng.standard_normal(3000) + (i % 3)
    batch = getattr(pf, kind)(x, order, 0.01, rule=rule)
    make = getattr(pf.Stream, kind)
    exact = make(order, 0.01, rule=rule)
    ye = np.array([exact.push(v) for v in x[:500]] + list(exact.push_many(x[500:])))
    comp = make(min(order, 0.9), 0.01, rule=rule, mode="compressed", tol=1e-10,
                horizon=1e5)
    yc = comp.push_many(x)
    return batch, ye, yc, exact.save(), comp.save()


def test_many_objects_in_many_threads_match_serial_work():
    n = 16
    serial = [_job(i) for i in range(n)]
    with ThreadPoolExecutor(max_workers=4) as pool:
        threaded = list(pool.map(_job, range(n)))
    for s, t in zip(serial, threaded):
        for a, b in zip(s, t):
            if isinstance(a, bytes):
                assert a == b
            else:
                assert np.array_equal(a, b)


def test_a_stream_held_by_one_thread_is_refused_to_another():
    # the first thread is held inside a push: its sample is an object whose
    # NumPy conversion (done while the push holds the stream) waits on an
    # event, so the second thread's push meets a stream in use
    s = pf.Stream.integral(0.5, 0.1, channels=2)
    s.push_many(np.ones((10, 2)))
    before = s.save()
    entered, release = threading.Event(), threading.Event()

    class Slow:
        def __array__(self, dtype=None, copy=None):
            entered.set()
            release.wait(10)
            return np.array([1.0, 2.0])

    out = {}

    def first():
        try:
            out["y"] = s.push(Slow())
        except Exception as e:  # pragma: no cover - reported below
            out["err"] = e

    t = threading.Thread(target=first)
    t.start()
    assert entered.wait(10)
    try:
        held = True
        try:
            s.push(np.array([5.0, 5.0]))
        except pf.BusyError:
            pass
        else:
            held = False
    finally:
        release.set()
        t.join(10)
    if not held:
        pytest.fail("a second thread pushed while the first held the stream")
    # the refused push changed nothing; the first push went through
    assert "err" not in out, out.get("err")
    ref = pf.Stream.integral(0.5, 0.1, channels=2)
    ref.push_many(np.ones((10, 2)))
    assert np.array_equal(ref.push([1.0, 2.0]), out["y"])
    assert s.save() == ref.save() and s.save() != before
