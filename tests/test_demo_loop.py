"""The closed-loop demo's plant is the explicit product rectangle method.

The plant D^(1/2) theta = c (q - h_c theta), theta(0) = 0, in its Volterra
form theta = c I^(1/2)[q - h_c theta], discretized by the explicit product
rectangle rule (Diethelm, Ford and Freed, Nonlinear Dynamics 29 (2002),
the predictor's weights b_j = h^a ((j+1)^a - j^a) / Gamma(a+1)):

    theta_n = c sum_{k<n} b_{n-1-k} (q_k - h_c theta_k).

The test recomputes theta from the demo's own heater fluxes q_k by this
direct O(N^2) sum and requires agreement to rounding; a loop that feeds a
flux back one step late (theta_n from fluxes before n-1) fails it.
"""

import math

import numpy as np
from scipy.special import gamma

from pyfracconv import demo_loop


def test_demo_plant_is_the_explicit_rectangle_method():
    n = 400
    t, theta, q, _c, _secs = demo_loop.simulate("exact", steps=n)
    a, h = 0.5, demo_loop.STEP
    c = math.sqrt(demo_loop.ALPHA) / demo_loop.K_COND
    j = np.arange(n, dtype=float)
    b = h**a * ((j + 1) ** a - j**a) / gamma(a + 1)
    net = q - demo_loop.H_CONV * theta
    ref = np.array([c * np.dot(b[k - 1 :: -1], net[:k]) if k else 0.0 for k in range(n)])
    scale = np.array([c * np.dot(b[k - 1 :: -1], np.abs(net[:k])) if k else 0.0 for k in range(n)])
    assert theta[0] == 0.0
    assert np.max(q) > 0.0  # the heater did act
    assert np.all(np.abs(theta - ref) <= 1e-13 * scale + 1e-300)
    assert np.allclose(t, np.arange(n) * h)
