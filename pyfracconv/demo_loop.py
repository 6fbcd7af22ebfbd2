"""``pyfracconv demo``: a closed-loop scenario of our own, with INVENTED data.

The scenario (invented; it describes no real installation): the face of a
thick steel slab is heated by a flux-controlled heater to hold its surface
temperature 50 K above the starting temperature, with convective loss to the
room. Every number below is made up for the demonstration.

The plant. The surface temperature rise of a semi-infinite solid under a
surface heat flux q(t) is, by Duhamel's principle on the constant-flux
solution T_s - T_0 = 2 q sqrt(alpha t / pi) / k (Carslaw and Jaeger,
Conduction of Heat in Solids, 1959; Incropera et al., Fundamentals of Heat
and Mass Transfer, the semi-infinite solid with constant surface flux),

    T_s(t) - T_0 = (1/k) sqrt(alpha/pi) int_0^t q(s) (t - s)^(-1/2) ds
                 = (sqrt(alpha)/k) I^(1/2) q,

since I^(1/2) q = (1/Gamma(1/2)) int q(s) (t-s)^(-1/2) ds and
Gamma(1/2) = sqrt(pi); check: for constant q, I^(1/2) q = 2 q sqrt(t/pi),
which gives the constant-flux solution back. Hence
D^(1/2) theta = (sqrt(alpha)/k) q_net with theta = T_s - T_0 (Caputo,
theta(0) = 0). The net flux is the heater flux minus the convective loss
h_c theta. The plant is simulated by the solver, a pyfracconv.Stepper
with the explicit product rectangle method (theta_n = c sum_{k<n}
b_{n-1-k} (q_k - h_c theta_k): theta_n needs only the fluxes before n),
which evaluates the right-hand side once per step, at (t_n, theta_n):
that is the sampling instant, where the controller reads theta_n and sets
the heater flux q_n held over [t_n, t_n+1) (zero-order hold, as a digital
controller's output is), so the controller update sits in the right-hand
side and the loop is one call of Stepper.advance.

The controller: pyfracconv.Controller, a fractional PI^lambda D^mu with
heater limits [0, Q_MAX], a rate limit, derivative on the measurement with
a first-order filter; run once with compressed memory and once with exact
memory on the same loop, and compared.
"""

from __future__ import annotations

import math
import os
import sys
import time

import numpy as np

from .control import Controller
from .frequency import controller_response
from .solve import Stepper

__all__ = ["run", "simulate", "DEFAULT_OUT_DIR"]

# ---------------------------------------------------------- the scenario
# All invented.
K_COND = 40.0  # thermal conductivity, W/(m K)
ALPHA = 1.0e-5  # thermal diffusivity, m^2/s
H_CONV = 500.0  # convective loss coefficient, W/(m^2 K)
SETPOINT = 50.0  # surface temperature rise to hold, K
Q_MAX = 60.0e3  # heater flux limit, W/m^2
Q_RATE = 2.0e3  # heater rate limit, W/m^2 per s
STEP = 0.02  # sampling period, s
STEPS = 100_000  # 2000 s
# Controller (tuned on this invented plant by simulation only).
KP, KI, KD = 1000.0, 500.0, 20.0
LAMBDA, MU = 1.2, 0.3
TF = 0.5  # derivative filter time constant, s
BAND = 0.02  # settling band, fraction of the setpoint

DEFAULT_OUT_DIR = "pyfracconv-demo"


def make_controller(memory):
    return Controller(
        KP,
        KI,
        KD,
        integral_order=LAMBDA,
        derivative_order=MU,
        step=STEP,
        integral_rule="rectangle",
        output_limits=(0.0, Q_MAX),
        rate_limit=Q_RATE,
        derivative_weight=0.0,
        derivative_filter=TF,
        memory=memory,
        horizon=2 * STEPS,
    )


def simulate(memory, steps=STEPS):
    """The loop with the controller's memory ``memory``; returns
    (t, theta, q, controller, seconds)."""
    c = make_controller(memory)
    gain = math.sqrt(ALPHA) / K_COND
    theta = np.empty(steps)
    q = np.empty(steps)
    upd = c.update
    n = 0

    def rhs(t, th):
        # the sampling instant t_n: the controller reads theta_n and sets
        # q_n, held until t_n+1; then D^(1/2) theta = c (q_n - h_c theta)
        nonlocal n
        if t != n * STEP:  # pragma: no cover - one evaluation per step
            raise RuntimeError(f"plant rhs at t={t!r}, expected step {n}")
        if n == 1:
            c.automatic()
        qn = upd(SETPOINT, th)
        theta[n] = th
        q[n] = qn
        n += 1
        return gain * (qn - H_CONV * th)

    plant = Stepper(rhs, 0.0, 0.5, STEP, method="rectangle")
    # a bumpless start: the first output is the heater's present value (0,
    # manual), so the rate limit holds from the first step on
    c.manual(0.0)
    t0 = time.perf_counter()
    # steps - 1 steps evaluate the rhs at t_0 .. t_(steps-1)
    plant.advance(steps - 1)
    secs = time.perf_counter() - t0
    return np.arange(steps) * STEP, theta, q, c, secs


def metrics(t, theta, q):
    err = np.abs(theta - SETPOINT)
    outside = np.flatnonzero(err > BAND * SETPOINT)
    settle = (
        t[outside[-1] + 1]
        if outside.size and outside[-1] + 1 < t.size
        else (0.0 if not outside.size else math.inf)
    )
    overshoot = max(0.0, (theta.max() - SETPOINT) / SETPOINT)
    energy = float(np.sum(q) * STEP)  # J/m^2
    return settle, overshoot, energy


def _plots(out_dir, t, runs, files):
    try:
        import matplotlib

        matplotlib.use("Agg")
        import matplotlib.pyplot as plt
    except ImportError:
        return (
            "plots: matplotlib is not installed; for the PNG plots run "
            "pip install 'pyfracconv[plot]' (or pip install matplotlib)"
        )
    fig, ax = plt.subplots(2, 1, sharex=True, figsize=(8, 6))
    for name, (theta, q) in runs.items():
        ax[0].plot(t, theta, label=f"{name} memory")
        ax[1].plot(t, q / 1e3, label=f"{name} memory")
    ax[0].axhline(SETPOINT, color="k", lw=0.5)
    ax[0].set_ylabel("surface rise, K")
    ax[1].set_ylabel("heater flux, kW/m^2")
    ax[1].set_xlabel("time, s")
    ax[0].legend()
    ax[0].set_title("Invented scenario: heated slab (demonstration data)")
    p1 = os.path.join(out_dir, "response.png")
    fig.savefig(p1 + ".tmp.png", dpi=100)
    os.replace(p1 + ".tmp.png", p1)
    plt.close(fig)
    # from 1e-2 rad/s: below, the 65536-lag series' bound is no longer small
    w = np.logspace(-2, math.log10(math.pi / STEP), 200)
    r = controller_response(make_controller("exact"), w)
    fig, ax = plt.subplots(2, 1, sharex=True, figsize=(8, 6))
    ax[0].loglog(w, r.magnitude, label="discrete controller")
    ax[0].loglog(w, r.ideal_magnitude, "--", label="ideal")
    ax[1].semilogx(w, np.degrees(r.phase))
    ax[1].semilogx(w, np.degrees(r.ideal_phase), "--")
    ax[0].set_ylabel("|C|")
    ax[1].set_ylabel("phase, deg")
    ax[1].set_xlabel("angular frequency, rad/s")
    ax[0].legend()
    p2 = os.path.join(out_dir, "bode.png")
    fig.savefig(p2 + ".tmp.png", dpi=100)
    os.replace(p2 + ".tmp.png", p2)
    plt.close(fig)
    files += [p1, p2]
    return None


def run(out=sys.stdout, out_dir=DEFAULT_OUT_DIR, steps=STEPS):
    """Run the scenario, print the summary, write the files; returns 0 if
    the loop settled with both memories, 1 otherwise."""
    w = out.write
    w(
        "pyfracconv demo: closed loop on an INVENTED scenario (demonstration data,\n"
        "no real installation): a heated slab, surface temperature rise\n"
        "theta = (sqrt(alpha)/k) I^(1/2) [q - h_c theta] (semi-infinite conduction,\n"
        "Carslaw and Jaeger 1959), held at 50 K by a fractional PI^lambda D^mu\n"
        "controller with heater limits and a rate limit.\n\n"
    )
    runs, res = {}, {}
    for memory in ("compressed", "exact"):
        t, theta, q, c, secs = simulate(memory, steps)
        runs[memory] = (theta, q)
        res[memory] = (metrics(t, theta, q), secs, c.nbytes, c.past_horizon)
    dev_theta = float(np.max(np.abs(runs["compressed"][0] - runs["exact"][0])))
    dev_q = float(np.max(np.abs(runs["compressed"][1] - runs["exact"][1])))
    w(
        f"{steps} steps of {STEP} s ({steps * STEP:g} s); controller "
        f"Kp={KP:g} Ki={KI:g} Kd={KD:g} lambda={LAMBDA} mu={MU}\n"
    )
    w(
        f"{'memory':<11}{'settling s':>11}{'overshoot %':>13}{'energy MJ/m2':>14}"
        f"{'loop s':>9}{'ctrl bytes':>12}\n"
    )
    ok = True
    for memory, ((settle, over, energy), secs, nbytes, past) in res.items():
        w(f"{memory:<11}{settle:>11.1f}{100 * over:>13.2f}{energy / 1e6:>14.3f}{secs:>9.2f}{nbytes:>12d}\n")
        ok &= math.isfinite(settle) and not past
    w(f"largest deviation between memories: {dev_theta:.3g} K in theta, {dev_q:.3g} W/m^2 in heater flux\n")
    os.makedirs(out_dir, exist_ok=True)
    files = []
    path = os.path.join(out_dir, "trajectory.csv")
    tmp = path + ".tmp"
    with open(tmp, "w", encoding="utf-8", newline="") as fh:
        fh.write("# invented demonstration data (pyfracconv demo)\n")
        fh.write("t,setpoint,theta_compressed,q_compressed,theta_exact,q_exact\n")
        data = np.column_stack(
            [
                t,
                np.full(t.size, SETPOINT),
                runs["compressed"][0],
                runs["compressed"][1],
                runs["exact"][0],
                runs["exact"][1],
            ]
        )
        np.savetxt(fh, data, delimiter=",", fmt="%.17g")
    os.replace(tmp, path)
    files.append(path)
    note = _plots(out_dir, t, runs, files)
    w("files: " + ", ".join(files) + "\n")
    if note:
        w(note + "\n")
    w(
        "\nCAUTION: a controller moves real machinery. Validate in simulation and\n"
        "on the plant, keep actuator and rate limits, keep an independent safe\n"
        "stop that does not depend on this software, and follow local codes,\n"
        "standards and licensed engineering practice.\n"
    )
    w("loop settled with both memories\n" if ok else "FAIL: the loop did not settle\n")
    return 0 if ok else 1
