"""``pyfracconv demo``: a built-in scenario of our own, with INVENTED data.

The scenario: a viscoelastic damper test rig (invented data). A specimen is
strained along a ramp-and-hold history, sampled at 1 kHz; its half-order
integral and derivative are what a fractional (springpot) model of the
damper would need. Every number here is made up for the demonstration and
describes no real rig or material.

What is checked, and against what (outside the project):

* Riemann-Liouville integral of a power, I^a t^b = Gamma(b+1)/Gamma(b+1+a)
  t^(b+a) (Podlubny, Fractional Differential Equations, 1999; Kilbas,
  Srivastava, Trujillo, Theory and Applications of Fractional Differential
  Equations, 2006).
* Caputo derivative of a power, D^a t^b = Gamma(b+1)/Gamma(b+1-a) t^(b-a),
  b > 0, 0 < a < 1 (Diethelm, The Analysis of Fractional Differential
  Equations, 2010); for such b with f(0) = 0 the Riemann-Liouville
  derivative is the same.
* The exponential: I^a e^t = e^t P(a, t) and Caputo D^a e^t = e^t P(1-a, t),
  P the regularised lower incomplete gamma function (scipy.special.gammainc;
  Abramowitz and Stegun 6.5); the Riemann-Liouville derivative adds
  f(0) t^(-a)/Gamma(1-a) (Diethelm 2010).
* A ramp-and-hold strain is s*(t - (t-T)_+); both operators start at t = 0
  and commute with a delay of a function that is zero before the delay
  (substitution in the defining integral: common practice), so their values
  are the power-function formulas with b = 1, applied twice.
* Observed orders of convergence when the step is halved: rectangle 1,
  trapezoid 2 (Diethelm, Ford, Freed, Numer. Algorithms 36, 2004),
  Grunwald-Letnikov 1 (Lubich, SIAM J. Math. Anal. 17, 1986), L1 2-a (Lin
  and Xu, J. Comput. Phys. 225, 2007).
* The product trapezoidal rule and the L1 scheme are exact on functions
  that are linear between grid points (they integrate/differentiate the
  piecewise-linear interpolant exactly: common practice), so on the
  ramp-and-hold with its corner on the grid they must agree with the
  closed form to rounding.
"""

from __future__ import annotations

import math
import sys
import time

import numpy as np
from scipy.special import gamma, gammainc

__all__ = ["run"]

# ------------------------------------------------------------- the scenario
# All invented.
ORDER = 0.5  # half-order operators (springpot of order 1/2)
RATE = 1000.0  # sampling rate, Hz
DURATION = 3.0  # record length, s
RAMP_TIME = 0.5  # end of the ramp, s (on the sampling grid)
PEAK_STRAIN = 2.0e-3  # strain held after the ramp (0.2 %)
MODULUS = 40.0e6  # springpot coefficient E, Pa (invented)
TAU = 0.2  # springpot time constant, s (invented)
TABLE_TIMES = (0.1, 0.25, 0.5, 0.501, 0.75, 1.0, 2.0, 3.0)
T_MIN = 0.1  # relative errors are taken over t >= T_MIN

# Pass thresholds on the scenario (h = 1 ms).
# First-order rules (rectangle, Grunwald-Letnikov): on a ramp the leading
# relative error behaves like C h / t with C of order one (our own estimate:
# for f = t the left-end-point rectangle rule acts like a delay of h/2,
# giving C = (1 + a)/2), i.e. about 1e-2 at t = 0.1 s with h = 1 ms; the
# threshold 2e-2 allows C = 2.
# Trapezoid / L1: exact on piecewise-linear data up to rounding; 1e-10
# leaves room for the rounding of a few thousand-term sums.
SCENARIO_TOL = {"rectangle": 2e-2, "trapezoid": 1e-10, "grunwald": 2e-2, "l1": 1e-10}

# Convergence study: grids on [0, 1] with N, 2N, 4N steps.
CONV_STEPS = (200, 400, 800)
CONV_T_MIN = 0.5  # max relative error over t in [0.5, 1]
ORDER_TOL = 0.15  # |observed - expected| allowed for the last halving


def _pos(x):
    return np.maximum(x, 0.0)


def ramp_hold(t):
    """The invented strain history: ramp to PEAK_STRAIN by RAMP_TIME, hold."""
    s = PEAK_STRAIN / RAMP_TIME
    return s * (t - _pos(t - RAMP_TIME))


def ramp_hold_integral(t, a):
    """I^a of ramp_hold: Podlubny 1999 with b = 1, plus the delay rule."""
    s = PEAK_STRAIN / RAMP_TIME
    return s / gamma(2.0 + a) * (t ** (1.0 + a) - _pos(t - RAMP_TIME) ** (1.0 + a))


def ramp_hold_derivative(t, a):
    """D^a of ramp_hold (Caputo = Riemann-Liouville since it starts at 0):
    Diethelm 2010 with b = 1, plus the delay rule."""
    s = PEAK_STRAIN / RAMP_TIME
    return s / gamma(2.0 - a) * (t ** (1.0 - a) - _pos(t - RAMP_TIME) ** (1.0 - a))


# ----------------------------------------------------- convergence test cases
# (rule, label, f, exact, expected order); a = ORDER.


def _cases(a):
    return [
        (
            "rectangle",
            "t^2",
            lambda t: t**2,
            # Podlubny 1999 / Kilbas et al. 2006, b = 2
            lambda t: gamma(3.0) / gamma(3.0 + a) * t ** (2.0 + a),
            1.0,
        ),
        (
            "rectangle",
            "e^t",
            np.exp,
            # I^a e^t = e^t P(a, t), A&S 6.5 (scipy gammainc)
            lambda t: np.exp(t) * gammainc(a, t),
            1.0,
        ),
        ("trapezoid", "t^2", lambda t: t**2, lambda t: gamma(3.0) / gamma(3.0 + a) * t ** (2.0 + a), 2.0),
        ("trapezoid", "e^t", np.exp, lambda t: np.exp(t) * gammainc(a, t), 2.0),
        (
            "grunwald",
            "t^2",
            lambda t: t**2,
            # Diethelm 2010, b = 2 (Riemann-Liouville = Caputo here)
            lambda t: gamma(3.0) / gamma(3.0 - a) * t ** (2.0 - a),
            1.0,
        ),
        (
            "grunwald",
            "e^t",
            np.exp,
            # Riemann-Liouville: Caputo e^t P(1-a, t) + f(0) t^-a / Gamma(1-a)
            lambda t: np.exp(t) * gammainc(1.0 - a, t) + t ** (-a) / gamma(1.0 - a),
            1.0,
        ),
        ("l1", "t^2", lambda t: t**2, lambda t: gamma(3.0) / gamma(3.0 - a) * t ** (2.0 - a), 2.0 - a),
        (
            "l1",
            "e^t",
            np.exp,
            # Caputo D^a e^t = e^t P(1-a, t), A&S 6.5 (scipy gammainc)
            lambda t: np.exp(t) * gammainc(1.0 - a, t),
            2.0 - a,
        ),
    ]


def _max_rel(y, exact):
    return float(np.max(np.abs(y - exact) / np.abs(exact)))


def run(out=None, integral=None, derivative=None):
    """Run the demonstration, printing to ``out`` (default sys.stdout).

    ``integral`` and ``derivative`` default to pyfracconv's own; they can be
    replaced (tests do, to see that a wrong operator makes the checks fail).
    Returns 0 if every check passes, 1 otherwise.
    """
    if out is None:
        out = sys.stdout
    if integral is None or derivative is None:
        from ._core import derivative as _der, integral as _int

        integral = integral or _int
        derivative = derivative or _der
    ops = {
        "rectangle": lambda x, h: integral(x, ORDER, h, rule="rectangle"),
        "trapezoid": lambda x, h: integral(x, ORDER, h, rule="trapezoid"),
        "grunwald": lambda x, h: derivative(x, ORDER, h, rule="grunwald"),
        "l1": lambda x, h: derivative(x, ORDER, h, rule="l1"),
    }

    def say(text=""):
        print(text, file=out)

    start = time.perf_counter()
    a = ORDER
    h = 1.0 / RATE
    n = int(round(DURATION * RATE)) + 1
    t = np.arange(n) * h
    strain = ramp_hold(t)
    checks = []  # (name, passed, detail)

    say("pyfracconv demo - SCENARIO WITH INVENTED DATA")
    say("=" * 62)
    say("A viscoelastic damper test rig (invented data): every number below")
    say("is made up for this demonstration and describes no real rig.")
    say(f"Strain: ramp from 0 to {PEAK_STRAIN:g} over {RAMP_TIME:g} s, then hold to {DURATION:g} s;")
    say(f"sampled at {RATE:g} Hz ({n} samples, step h = {h:g} s). Operators of order a = {a:g}.")
    say("Invented springpot model of the damper: stress = E tau^a D^a strain,")
    say(f"E = {MODULUS / 1e6:g} MPa, tau = {TAU:g} s.")
    say()

    results = {rule: np.asarray(op(strain, h), dtype=float) for rule, op in ops.items()}
    ex_int = ramp_hold_integral(t, a)
    ex_der = ramp_hold_derivative(t, a)
    stress_scale = MODULUS * TAU**a

    say("Computed values at a few times (closed forms: Podlubny 1999, Diethelm 2010):")
    say(
        f"{'t [s]':>7} {'strain':>10} {'I^a trapez.':>13} {'I^a exact':>13} "
        f"{'D^a L1':>13} {'D^a exact':>13} {'stress [kPa]':>13}"
    )
    for tt in TABLE_TIMES:
        k = int(round(tt / h))
        say(
            f"{t[k]:7.3f} {strain[k]:10.6f} {results['trapezoid'][k]:13.6e} "
            f"{ex_int[k]:13.6e} {results['l1'][k]:13.6e} {ex_der[k]:13.6e} "
            f"{stress_scale * results['l1'][k] / 1e3:13.4f}"
        )
    say("(I^a strain in s^a, D^a strain in s^-a; stress from the L1 values.)")
    say()

    mask = t >= T_MIN - 0.5 * h
    say(f"Scenario: max relative error against the closed form, t >= {T_MIN:g} s:")
    for rule in ("rectangle", "trapezoid", "grunwald", "l1"):
        exact = ex_int if rule in ("rectangle", "trapezoid") else ex_der
        err = _max_rel(results[rule][mask], exact[mask])
        tol = SCENARIO_TOL[rule]
        ok = bool(np.isfinite(err) and err <= tol)
        say(f"  {rule:<10} {err:10.3e}   (threshold {tol:.0e})")
        checks.append((f"scenario {rule}", ok, f"max rel. error {err:.3e} <= {tol:.0e}"))
    say()

    say(
        f"Convergence when the step is halved (t in [0, 1], N = "
        f"{', '.join(str(m) for m in CONV_STEPS)} steps;"
    )
    say(f"max relative error over t in [{CONV_T_MIN:g}, 1]; a = {a:g}):")
    say(
        f"  {'rule':<10} {'f':<4} "
        + " ".join(f"{'err N=' + str(m):>12}" for m in CONV_STEPS)
        + f" {'orders':>13} {'expected':>8}"
    )
    for rule, label, f, exact_fn, expected in _cases(a):
        errs = []
        for m in CONV_STEPS:
            hh = 1.0 / m
            tg = np.arange(m + 1) * hh
            y = np.asarray(ops[rule](f(tg), hh), dtype=float)
            sel = tg >= CONV_T_MIN - 0.5 * hh
            errs.append(_max_rel(y[sel], exact_fn(tg[sel])))
        orders = [math.log2(e0 / e1) if e0 > 0 and e1 > 0 else float("nan") for e0, e1 in zip(errs, errs[1:])]
        last = orders[-1]
        ok = bool(np.isfinite(last) and abs(last - expected) <= ORDER_TOL)
        say(
            f"  {rule:<10} {label:<4} "
            + " ".join(f"{e:12.3e}" for e in errs)
            + " "
            + " ".join(f"{p:6.3f}" for p in orders)
            + f" {expected:8.3f}"
        )
        checks.append(
            (f"order {rule} on {label}", ok, f"observed {last:.3f}, expected {expected:.3f} +- {ORDER_TOL:g}")
        )
    say()

    failed = 0
    for name, ok, detail in checks:
        say(f"{'PASS' if ok else 'FAIL'}  {name}: {detail}")
        failed += not ok
    elapsed = time.perf_counter() - start
    say()
    say(f"{len(checks) - failed} of {len(checks)} checks passed ({elapsed:.2f} s). Data: invented.")
    say("Reminder: validate any controller using these operators on the actual")
    say("plant, with actuator limits, rate limits and an emergency stop that do")
    say("not depend on this software.")
    return 0 if failed == 0 else 1
