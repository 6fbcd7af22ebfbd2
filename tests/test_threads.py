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

RULES = [
    ("integral", "rectangle", 0.6),
    ("integral", "trapezoid", 1.4),
    ("derivative", "grunwald", 0.5),
    ("derivative", "l1", 0.3),
]


def _job(i):
    kind, rule, order = RULES[i % len(RULES)]
    rng = np.random.default_rng(1000 + i)
    x = rng.standard_normal(3000) + (i % 3)
    batch = getattr(pf, kind)(x, order, 0.01, rule=rule)
    make = getattr(pf.Stream, kind)
    exact = make(order, 0.01, rule=rule)
    ye = np.array([exact.push(v) for v in x[:500]] + list(exact.push_many(x[500:])))
    comp = make(min(order, 0.9), 0.01, rule=rule, mode="compressed", tol=1e-10, horizon=1e5)
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


# ------------------------------------------------ solvers and controllers


def _solver_job(i):
    methods = ["rectangle", "predictor-corrector", "trapezoid", "implicit-rectangle"]
    method = methods[i % 4]
    memory = "compressed" if (i // 4) % 2 and method != "implicit-rectangle" else "exact"
    k = 1.0 + 0.1 * i

    def rhs(t, y):
        return np.array([-k * y[0] + np.cos(t) * y[1], -y[1] + 0.5 * np.sin(3 * t)])

    kw = dict(method=method, memory=memory)
    if memory == "compressed":
        kw.update(tol=1e-9, horizon=1000)
    elif method == "implicit-rectangle":
        kw.update(horizon=1000)
    st = pf.Stepper(rhs, [1.0, 0.5], [0.6, 0.8], 0.02, **kw)
    t1, y1 = st.advance(120)
    blob = st.save()
    st2 = pf.Stepper.load(blob, rhs)
    t2, y2 = st2.advance(180)
    return t1, y1, t2, y2, blob, st2.save()


def _controller_job(i):
    rng = np.random.default_rng(2000 + i)
    r = np.where((np.arange(2000) // 400) % 2 == 1, 1.0, -0.5)
    y = 0.3 * np.sin(0.01 * np.arange(2000)) + 0.05 * rng.standard_normal(2000)
    c = pf.Controller(
        1.2,
        0.4 + 0.01 * i,
        0.15,
        integral_order=0.7,
        derivative_order=0.4,
        step=0.01,
        output_limits=(-1.0, 1.0),
        rate_limit=50.0,
        derivative_filter=0.02,
        integral_rule="rectangle" if (i // 2) % 2 else "trapezoid",
        derivative_rule="l1" if (i // 4) % 2 else "grunwald",
        memory="compressed" if i % 2 else "exact",
        **({"tol": 1e-10, "horizon": 1e5} if i % 2 else {}),
    )
    u1 = c.update_block(r[:500], y[:500])
    c.manual(0.25)
    u2 = c.update_block(r[500:1000], y[500:1000])
    c.automatic()
    blob = c.save()
    c2 = pf.Controller.load(blob)
    u3 = np.array([c2.update(a, b) for a, b in zip(r[1000:], y[1000:])])
    return u1, u2, u3, blob, c2.save()


def _object_job(i):
    return _controller_job(i // 2) if i % 2 else _solver_job(i // 2)


def test_many_solvers_and_controllers_in_many_threads_match_serial_work():
    # 12 steppers (every method, both memories, a save/load in the middle)
    # and 12 controllers (both memories, every rule pair, manual mode, a
    # save/load in the middle) on 4 threads: bit for bit the serial results
    n = 24
    serial = [_object_job(i) for i in range(n)]
    with ThreadPoolExecutor(max_workers=4) as pool:
        threaded = list(pool.map(_object_job, range(n)))
    for s, t in zip(serial, threaded):
        for a, b in zip(s, t):
            if isinstance(a, bytes):
                assert a == b
            else:
                assert np.array_equal(a, b)


def test_a_stepper_held_by_one_thread_is_refused_to_another():
    # the first thread is held inside advance: its right-hand side waits on
    # an event at its 30th call, while the stepper (and the C solver under
    # it) is in use
    entered, release = threading.Event(), threading.Event()
    calls = [0]

    def rhs(t, y):
        calls[0] += 1
        if calls[0] == 30:
            entered.set()
            release.wait(10)
        return -y + np.sin(t)

    def plain(t, y):
        return -y + np.sin(t)

    st = pf.Stepper(rhs, 1.0, 0.7, 0.01)
    out = {}

    def first():
        try:
            out["ty"] = st.advance(100)
        except Exception as e:  # pragma: no cover - reported below
            out["err"] = e

    th = threading.Thread(target=first)
    th.start()
    assert entered.wait(10)
    refused = []
    try:
        for name, call in [
            ("advance", lambda: st.advance(1)),
            ("save", st.save),
            ("t", lambda: st.t),
            ("y", lambda: st.y),
            ("steps", lambda: st.steps),
            ("rhs_evals", lambda: st.rhs_evals),
            ("nbytes", lambda: st.nbytes),
        ]:
            try:
                call()
            except pf.BusyError:
                refused.append(name)
    finally:
        release.set()
        th.join(10)
    assert refused == ["advance", "save", "t", "y", "steps", "rhs_evals", "nbytes"]
    assert "err" not in out, out.get("err")
    ref = pf.Stepper(plain, 1.0, 0.7, 0.01)
    t_ref, y_ref = ref.advance(100)
    assert np.array_equal(out["ty"][0], t_ref) and np.array_equal(out["ty"][1], y_ref)
    assert st.save() == ref.save()


def test_a_controller_held_by_one_thread_is_refused_to_another():
    # the first thread is held inside update_block: its setpoints are an
    # object whose NumPy conversion (done while the block holds the
    # controller) waits on an event
    def make():
        return pf.Controller(
            1.0, 0.5, 0.1, integral_order=0.6, derivative_order=0.4, step=0.1, output_limits=(-2.0, 2.0)
        )

    c = make()
    c.update_block(np.ones(10), np.zeros(10))
    before = c.save()
    entered, release = threading.Event(), threading.Event()

    class Slow:
        def __array__(self, dtype=None, copy=None):
            entered.set()
            release.wait(10)
            return np.array([1.0, 1.0, 0.5])

    out = {}

    def first():
        try:
            out["u"] = c.update_block(Slow(), np.array([0.2, 0.3, 0.4]))
        except Exception as e:  # pragma: no cover - reported below
            out["err"] = e

    th = threading.Thread(target=first)
    th.start()
    assert entered.wait(10)
    refused = []
    try:
        for name, call in [
            ("update", lambda: c.update(1.0, 0.0)),
            ("update_block", lambda: c.update_block([1.0], [0.0])),
            ("manual", lambda: c.manual(0.5)),
            ("automatic", c.automatic),
            ("reset", c.reset),
            ("save", c.save),
        ]:
            try:
                call()
            except pf.BusyError:
                refused.append(name)
    finally:
        release.set()
        th.join(10)
    assert refused == ["update", "update_block", "manual", "automatic", "reset", "save"]
    assert "err" not in out, out.get("err")
    # the refused calls changed nothing; the held block went through
    ref = make()
    ref.update_block(np.ones(10), np.zeros(10))
    assert ref.save() == before
    assert np.array_equal(ref.update_block([1.0, 1.0, 0.5], [0.2, 0.3, 0.4]), out["u"])
    assert c.save() == ref.save()
