"""Long runs (issue 14, item 7): ten million samples through the exact and
the compressed streams, a million solver steps.

These are marked ``long_run`` (and ``slow``); the default test command
leaves them out (pyproject.toml: ``-m "not long_run"``) and ``.ci/run``
runs them in a step of their own:

    .venv/bin/python -m pytest -q -m long_run tests/test_long_runs.py

Measured on the 2-core machine (2026-12): about 12 s for the exact stream
(it holds about 650 MB at 10^7 samples), 1 s for the compressed one,
about 7 s for the solver runs.

Streams. The Riemann-Liouville integral of a constant c is
I^a c (t) = c t^a / Gamma(a+1) (the power rule, I^a t^b =
Gamma(b+1)/Gamma(a+b+1) t^(a+b), at b = 0: Podlubny, Fractional
Differential Equations, Academic Press 1999, chapter 2; Diethelm, The
Analysis of Fractional Differential Equations, Springer 2010, chapter 2).
The product rectangle rule is exact on constants: its weights telescope,
sum_{m<n} ((m+1)^a - m^a) = n^a, so y_n = c h^a n^a / Gamma(a+1) exactly
(common practice; Diethelm, Ford and Freed 2004). Every one of the 10^7
outputs is compared with that closed form, within the error each stream
states in csrc/fracconv.h: exact streams equal fc_apply to rounding, whose
componentwise bound is 1e-13 sum_k |c_{n-k} x_k| (for a positive constant,
1e-13 times the value itself), plus the 1e-14 relative accuracy of the
weights (fc_weights); compressed streams are within (tol + 64 eps) of the
same sum, plus the same weight accuracy. The pushes go in blocks
(push_many): the requirement is the number of samples through the stream.

Solver. The relaxation problem D^a y = -y, y(0) = 1 (Caputo) has the
solution y(t) = E_a(-t^a), the Mittag-Leffler function (Podlubny 1999,
chapter 3; Gorenflo, Kilbas, Mainardi and Rogosin, Mittag-Leffler
Functions, Springer 2014). It is evaluated with mpmath: the defining
series at 60 and 120 digits for t <= 100 and the asymptotic expansion
E_a(-x) ~ sum_{k>=1} (-1)^(k+1) x^-k / Gamma(1 - a k) (Podlubny 1999,
Theorem 1.4) for t = 1000, the two checked against each other at t = 100.
The predictor-corrector of Diethelm, Ford and Freed (Nonlinear Dynamics
29, 2002; error analysis: Numer. Algorithms 36, 2004) converges with
order 1 + a for 0 < a < 1. After 10^6 steps (h = 1e-3, t = 1000) the
error at t = 1, 10, 100, 1000 must be the method's error: it falls by
2^(1+a) (within 20 %) from the run with twice the step, so nothing is left
over from a million steps of rounding or drift; exact and compressed
memory alike.
"""

import math

import mpmath
import numpy as np
import pytest

import pyfracconv as pf

pytestmark = [pytest.mark.long_run, pytest.mark.slow]

EPS = 2.0**-52
N_STREAM = 10**7
BLOCK = 2**16
ORDER = 0.5
STEP = 1e-3
C = 0.75


def closed_form(n):
    """c (h n)^a / Gamma(a+1) in float64 (about 4 eps of rounding)."""
    return C * (STEP * np.asarray(n, dtype=np.float64)) ** ORDER / math.gamma(ORDER + 1)


def test_closed_form_in_float64_matches_mpmath():
    # the float64 reference against 40 digits, at a spread of indices
    n = np.array([1, 2, 3, 10, 12345, 999999, 5 * 10**6 + 7, N_STREAM - 1])
    got = closed_form(n)
    with mpmath.workdps(40):
        want = [
            float(
                mpmath.mpf(C)
                * (mpmath.mpf(STEP) * int(k)) ** mpmath.mpf(ORDER)
                / mpmath.gamma(mpmath.mpf(ORDER) + 1)
            )
            for k in n
        ]
    np.testing.assert_allclose(got, want, rtol=8 * EPS, atol=0)


def _run_constant(stream, bound):
    """Push 10^7 copies of C through ``stream`` in blocks; every output
    must be within bound * closed form; returns the largest relative
    error seen."""
    x = np.full(BLOCK, C)
    worst = 0.0
    n0 = 0
    while n0 < N_STREAM:
        b = min(BLOCK, N_STREAM - n0)
        y = stream.push_many(x[:b])
        ref = closed_form(np.arange(n0, n0 + b))
        err = np.abs(y - ref)
        if n0 == 0:
            assert y[0] == 0.0  # y_0: the empty sum
            err, ref = err[1:], ref[1:]
        rel = err / ref
        k = int(np.argmax(rel))
        assert rel[k] <= bound, (n0 + k + (n0 == 0), rel[k], bound)
        worst = max(worst, float(rel[k]))
        n0 += b
    assert stream.count == N_STREAM
    return worst


def test_exact_stream_ten_million_constant_samples():
    s = pf.Stream.integral(ORDER, STEP, rule="rectangle")
    # fc_apply's componentwise bound plus the weights' accuracy, and the
    # float64 closed form's own rounding
    bound = 1e-13 + 1e-14 + 8 * EPS
    worst = _run_constant(s, bound)
    # measured: 1.1e-15 (the closed form's own rounding is about 9e-16)
    assert worst < bound


@pytest.mark.parametrize("tol", [1e-12, 1e-8])
def test_compressed_stream_ten_million_constant_samples(tol):
    s = pf.Stream.integral(ORDER, STEP, rule="rectangle", mode="compressed", tol=tol, horizon=N_STREAM)
    assert s.remaining == N_STREAM + 1
    bound = (tol + 64 * EPS) * (1 + 1e-14) + 1e-14 + 8 * EPS
    worst = _run_constant(s, bound)
    assert worst < bound
    assert s.remaining == 1


# ------------------------------------------------------------ the solver

A = 0.6
H = 1e-3
N_STEPS = 10**6
TIMES = (1.0, 10.0, 100.0, 1000.0)


def ml_series(a, z, dps):
    """E_a(z) = sum_k z^k / Gamma(a k + 1) at dps digits (the defining
    series; Gorenflo, Kilbas, Mainardi and Rogosin 2014)."""
    with mpmath.workdps(dps):
        z = mpmath.mpf(z)
        A_ = mpmath.mpf(a)
        s = mpmath.mpf(0)
        k = 0
        while True:
            term = z**k * mpmath.rgamma(A_ * k + 1)
            s += term
            if (
                k > 10
                and abs(term) < mpmath.mpf(10) ** (-(dps - 5)) * abs(s)
                and abs(term) < mpmath.mpf(10) ** -30
            ):
                break
            k += 1
        return float(s)


def ml_asymptotic(a, x, terms=12):
    """E_a(-x) ~ sum_{k=1}^{terms} (-1)^(k+1) x^-k / Gamma(1 - a k), large x
    (Podlubny 1999, Theorem 1.4); 1/Gamma through rgamma (zero at the
    poles 1 - a k = 0, -1, ...)."""
    with mpmath.workdps(40):
        s = mpmath.mpf(0)
        for k in range(1, terms + 1):
            s += (-1) ** (k + 1) * mpmath.mpf(x) ** (-k) * mpmath.rgamma(1 - a * k)
        return float(s)


@pytest.fixture(scope="module")
def exact_solution():
    ref = {t: ml_series(A, -(t**A), 60 if t < 100 else 120) for t in TIMES[:3]}
    ref[1000.0] = ml_asymptotic(A, 1000.0**A)
    # the two evaluations agree where both converge (t = 100: x = 15.8)
    assert abs(ml_asymptotic(A, 100.0**A) - ref[100.0]) <= 1e-10 * ref[100.0]
    # positive and decreasing: E_a(-t^a) is completely monotone for
    # 0 < a <= 1 (Gorenflo, Kilbas, Mainardi and Rogosin 2014)
    vals = [ref[t] for t in TIMES]
    assert all(v > 0 for v in vals) and vals == sorted(vals, reverse=True)
    return ref


def _errors(memory, h, ref):
    n = round(TIMES[-1] / h)
    kw = dict(tol=1e-12, horizon=n) if memory == "compressed" else {}
    res = pf.solve(lambda t, y: -y, 1.0, A, h, n, method="predictor-corrector", memory=memory, **kw)
    assert res.t[-1] == pytest.approx(TIMES[-1], rel=1e-12)
    return {t: abs(res.y[round(t / h)] - ref[t]) for t in TIMES}, res


@pytest.mark.parametrize("memory", ["exact", "compressed"])
def test_a_million_solver_steps_on_the_relaxation_problem(memory, exact_solution):
    fine, res = _errors(memory, H, exact_solution)
    assert len(res.t) == N_STEPS + 1
    coarse, _ = _errors(memory, 2 * H, exact_solution)
    expected = 2.0 ** (1 + A)  # order 1 + a (Diethelm, Ford and Freed 2004)
    for t in TIMES:
        ratio = coarse[t] / fine[t]
        # measured: 3.05 at every t (2^1.6 = 3.03); errors 5.5e-7 at t = 1,
        # 3.5e-11 at t = 1000
        assert expected / 1.2 <= ratio <= expected * 1.2, (t, fine[t], coarse[t], ratio)
        # and small: measured relative errors 1.3e-6 (t = 1) .. 4.9e-9
        # (t = 1000); the bound is ten times the largest
        assert fine[t] <= 1.3e-5 * exact_solution[t], (t, fine[t])
