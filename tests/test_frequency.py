"""Frequency responses of the rules and of a controller against closed
forms: the Grunwald generating function ((1 - z)/h)^a (Lubich, SIAM J. Math.
Anal. 17, 1986), the rectangle rule at order 1 (running sum delayed by one
sample: h z/(1 - z) = h/(e^{i w h} - 1), common practice) and the trapezoid
rule at order 1 (Tustin's rule h/2 (1 + z)/(1 - z), common practice), with
z = exp(-i w h)."""

import numpy as np
import pytest

import pyfracconv as pf
from pyfracconv import frequency as F

H = 0.01
W = np.array([0.05, 0.3, 1.0, 10.0, 100.0, np.pi / H])


def test_grunwald_closed_form_against_its_weight_series():
    # the closed form, against the truncated series of the library's
    # weights (independent code) within the series' stated bound
    r = F.operator_response("grunwald", 0.6, H, W)
    z = np.exp(-1j * W * H)
    np.testing.assert_allclose(r.response, ((1 - z) / H) ** 0.6, rtol=1e-14)
    s, b = F._series(pf.weights("grunwald", 0.6, 65536, H), z, 1)
    assert np.all(np.abs(s - r.response) <= b)
    assert np.all(b < 1e-3 * np.abs(r.response))


def test_rectangle_order_one_is_delayed_running_sum():
    r = F.operator_response("rectangle", 1.0, H, W)
    want = H / (np.exp(1j * W * H) - 1)
    assert np.all(np.abs(r.response - want) <= r.bound + 1e-13 * np.abs(want))


def test_trapezoid_order_one_is_tustin():
    r = F.operator_response("trapezoid", 1.0, H, W, memory="exact")
    z = np.exp(-1j * W * H)
    want = H / 2 * (1 + z) / (1 - z)
    assert np.all(np.abs(r.response - want) <= r.bound + 1e-13 * np.abs(want))


@pytest.mark.parametrize(
    "rule,order", [("rectangle", 0.5), ("trapezoid", 0.7), ("l1", 0.4), ("grunwald", 0.3)]
)
def test_low_frequency_approaches_ideal(rule, order):
    # well inside the band (w h = 5e-4) every rule is within 1% of (i w)^+-a
    r = F.operator_response(rule, order, H, [0.05])
    assert r.relative_error[0] < 1e-2
    assert r.magnitude.shape == r.phase.shape == (1,)


@pytest.mark.parametrize(
    "rule,order", [("rectangle", 0.5), ("trapezoid", 0.7), ("grunwald", 0.6), ("l1", 0.5)]
)
def test_compressed_within_tolerance_of_exact(rule, order):
    tol = 1e-8
    e = F.operator_response(rule, order, H, W)
    c = F.operator_response(rule, order, H, W, memory="compressed", tol=tol)
    # per lag within tol (the stream promise), so within tol * sum |h_j| over
    # the summed lags, plus the two stated bounds
    hsum = np.sum(np.abs(pf.weights(rule, order, 65536, H)))
    if rule == "l1":
        hsum *= 2
    assert np.all(np.abs(c.response - e.response) <= tol * hsum * 1.01 + c.bound + e.bound)
    assert np.any(c.response != e.response)


def test_controller_response_is_the_sum_of_its_actions():
    ctl = pf.Controller(
        2.0,
        0.5,
        0.1,
        integral_order=0.6,
        derivative_order=0.4,
        step=H,
        derivative_filter=0.05,
        memory="exact",
    )
    r = F.controller_response(ctl, W)
    i = F.operator_response("trapezoid", 0.6, H, W)
    d = F.operator_response("grunwald", 0.4, H, W)
    z = np.exp(-1j * W * H)
    want = 2.0 + 0.5 * i.response + 0.1 * d.response * H / (0.05 + H - 0.05 * z)
    np.testing.assert_allclose(r.response, want, rtol=1e-13)
    ideal = 2.0 + 0.5 * (1j * W) ** -0.6 + 0.1 * (1j * W) ** 0.4 / (1 + 0.05j * W)
    np.testing.assert_allclose(r.ideal, ideal, rtol=1e-13)


def test_controller_response_matches_a_simulated_sinusoid():
    # drive the (unlimited, exact) controller with e = cos(w t) and fit the
    # steady output to a cos + b sin: it must match |C| and arg C (the
    # transient of the starting samples decays; measured relative mismatch
    # 1.6e-6 at 20000 samples, asserted below 1e-4)
    w = 5.0
    ctl = pf.Controller(
        1.0,
        0.8,
        0.0,
        integral_order=0.5,
        derivative_order=0.5,
        step=H,
        memory="exact",
        integral_rule="rectangle",
    )
    n = 20000
    t = np.arange(n) * H
    u = ctl.update_block(np.cos(w * t), np.zeros(n))
    tail = slice(n - 2000, n)
    A = np.c_[np.cos(w * t[tail]), -np.sin(w * t[tail])]
    (a, b), *_ = np.linalg.lstsq(A, u[tail], rcond=None)
    got = a + 1j * b
    want = F.controller_response(ctl, [w]).response[0]
    assert abs(got - want) < 1e-4 * abs(want)


def test_refusals():
    with pytest.raises(pf.ArgumentError):
        F.operator_response("grunwald", 0.5, H, [0.0])
    with pytest.raises(pf.ArgumentError):
        F.operator_response("grunwald", 0.5, H, [2 * np.pi / H])
    with pytest.raises(pf.ArgumentError):
        F.operator_response("simpson", 0.5, H, [1.0])
