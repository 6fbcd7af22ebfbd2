"""Stepper.step(): one step, the same as advance(1) bit for bit.

The reference for the values is the solver's own advance() (bit for bit)
and, for the relaxation problem D^a y = -y, y(0) = 1, the Mittag-Leffler
solution y(t) = E_a(-t^a) (Diethelm, The Analysis of Fractional
Differential Equations, Springer 2010, Theorem 7.2), computed with mpmath
from its power series.
"""

import threading

import mpmath
import numpy as np
import pytest

import pyfracconv
from pyfracconv import HorizonError, RhsError, Stepper


def _ml(a, z):
    """E_a(z) = sum_k z^k / Gamma(a k + 1), 40 digits (mpmath)."""
    with mpmath.workdps(40):
        return float(mpmath.nsum(lambda k: mpmath.mpf(z) ** k / mpmath.gamma(a * k + 1), [0, mpmath.inf]))


# every method with every memory
@pytest.mark.parametrize(
    "method, memory",
    [
        (m, mem)
        for m in ("rectangle", "predictor-corrector", "trapezoid", "implicit-rectangle")
        for mem in ("exact", "compressed")
    ],
)
def test_step_equals_advance_one(method, memory):
    kw = dict(method=method, memory=memory, horizon=400)
    a = Stepper(lambda t, y: -y, 1.0, 0.7, 0.01, **kw)
    b = Stepper(lambda t, y: -y, 1.0, 0.7, 0.01, **kw)
    ys = np.array([a.step() for _ in range(300)])
    tb, yb = b.advance(300)
    assert isinstance(ys[0], float)
    assert np.array_equal(ys, yb)
    assert a.steps == b.steps == 300 and a.t == b.t and a.rhs_evals == b.rhs_evals
    # and within the method's error of E_a(-t^a) at t = 3 (first order or
    # better at this step: 1e-2 is a loose bound, common practice)
    assert abs(ys[-1] - _ml(0.7, -(3.0**0.7))) < 1e-2


def test_step_vector_returns_a_new_array():
    st = Stepper(lambda t, y: -y, [1.0, 2.0], [0.5, 0.9], 0.1)
    first = st.step()
    second = st.step()
    assert first.shape == (2,) and not np.shares_memory(first, second)
    again = Stepper(lambda t, y: -y, [1.0, 2.0], [0.5, 0.9], 0.1)
    _, y = again.advance(2)
    assert np.array_equal(np.stack([first, second]), y)


def test_step_failure_changes_nothing_and_has_empty_partial():
    calls = []

    def rhs(t, y):
        calls.append(t)
        if len(calls) > 3:
            raise ValueError("sensor lost")
        return -y

    st = Stepper(rhs, 1.0, 0.5, 0.1, method="rectangle")
    st.step()
    st.step()
    y, steps = st.y, st.steps
    with pytest.raises(RhsError, match="sensor lost") as info:
        st.step()
    assert len(info.value.partial.t) == 0 and info.value.partial.y.shape == (0,)
    assert st.steps == steps and st.y == y


def test_step_past_horizon_refused():
    st = Stepper(lambda t, y: -y, 1.0, 0.5, 0.1, memory="compressed", horizon=3)
    for _ in range(3):
        st.step()
    with pytest.raises(HorizonError, match="horizon=3"):
        st.step()
    assert st.steps == 3


def test_step_while_busy_is_refused():
    inside, release = threading.Event(), threading.Event()
    st = None

    def rhs(t, y):
        if t > 0:
            inside.set()
            release.wait(10)
        return -y

    st = Stepper(rhs, 1.0, 0.5, 0.1, method="rectangle")
    worker = threading.Thread(target=lambda: st.advance(2))
    worker.start()
    assert inside.wait(10)
    try:
        with pytest.raises(pyfracconv.BusyError, match="step"):
            st.step()
    finally:
        release.set()
        worker.join()
    assert st.steps == 2
