"""Compressed streams keep no subnormal state (csrc/stream_compressed.c).

A compressed stream fed zeros (a controller's integral held at a limit, a
signal that stops) decays its exponential states geometrically; left
alone they pass through the subnormal range, where arithmetic is many
times slower on common CPUs (IEEE 754 gradual underflow; its cost on x86
is common practice: a microcode assist per operation), so the work per
sample would no longer be the same on every step. The engine sets a new
state or compensation below DBL_MIN in magnitude to +0. The tests read
the states from the saved payload (layout in csrc/stream_compressed.c)
after every block of zeros, and hold the outputs to the stated bound:
tol times the terms plus an absolute Lp * DBL_MIN * max |beta_l|.
"""

import struct
import sys

import numpy as np
import pytest

from pyfracconv import Stream

TINY = sys.float_info.min  # DBL_MIN = 2^-1022


def _payload_arrays(blob):
    """(q, beta, S, Sc) of channel 0 from a saved compressed stream."""
    at = blob.index(b"FCCS")
    (band,) = struct.unpack_from("<I", blob, at + 12)
    (n_terms,) = struct.unpack_from("<Q", blob, at + 24)
    head = at + 72
    q = np.frombuffer(blob, "<f8", n_terms, head)
    beta = np.frombuffer(blob, "<f8", n_terms, head + 8 * n_terms)
    states = head + 8 * (3 * n_terms + 2 * band + 1) + 8 * band
    S = np.frombuffer(blob, "<f8", n_terms, states)
    Sc = np.frombuffer(blob, "<f8", n_terms, states + 8 * n_terms)
    return q, beta, S, Sc


def _subnormal(v):
    return int(np.count_nonzero((v != 0) & (np.abs(v) < TINY)))


@pytest.mark.parametrize(
    "rule, order", [("rectangle", 0.7), ("trapezoid", 0.3), ("grunwald", 0.5), ("l1", 0.6)]
)
def test_states_never_subnormal_while_fed_zeros(rule, order):
    make = Stream.integral if rule in ("rectangle", "trapezoid") else Stream.derivative
    s = make(order, 1e-3, rule=rule, mode="compressed", tol=1e-12, horizon=1e7)
    s.push_many(np.ones(100))  # a history, then silence
    decayed = 0
    for _ in range(40):
        s.push_many(np.zeros(500))
        q, beta, S, Sc = _payload_arrays(s.save())
        assert _subnormal(S) == 0 and _subnormal(Sc) == 0, (S, Sc)
        decayed = max(decayed, int(np.count_nonzero(S == 0)))
    # the test reached the range: some terms did decay all the way
    assert decayed > 0


def test_tiny_samples_within_the_absolute_allowance():
    """Samples of 1e-300 (terms in and near the subnormal range): the
    compressed outputs stay within tol * (sum of |terms|) of the exact
    stream's, plus Lp * DBL_MIN * max |beta_l| (Lp: terms padded to 8)."""
    rng = np.random.default_rng(20261203)
    x = rng.standard_normal(3000) * 1e-300
    x[rng.random(3000) < 0.7] = 0.0  # long runs of zeros between samples
    tol = 1e-10
    c = Stream.integral(0.6, 1.0, mode="compressed", tol=tol, horizon=1e4)
    e = Stream.integral(0.6, 1.0)
    yc, ye = c.push_many(x), e.push_many(x)
    ya = Stream.integral(0.6, 1.0).push_many(np.abs(x))  # sum of |terms|
    _q, beta, _S, _Sc = _payload_arrays(c.save())
    lp = -(-beta.size // 8) * 8
    allowance = (tol + 64 * np.finfo(float).eps) * ya + lp * TINY * np.max(np.abs(beta))
    assert np.all(np.abs(yc - ye) <= allowance)
