"""Plain NumPy references for the tests: the rules exactly as written in
docs/design.md section 1, summed directly (O(N) per output, in extended precision
where the platform has it), with the componentwise error scale
sum_k |c_{n-k} x_k| of every output."""

from __future__ import annotations

import numpy as np

import pyfracconv
from pyfracconv._core import trapezoid_start

LD = np.longdouble


def lag_reference(x, c, idx):
    """y_n = sum_{k<=n} c_{n-k} x_k and sum_k |c_{n-k} x_k| for n in idx."""
    x = np.asarray(x, dtype=LD)
    c = np.asarray(c, dtype=LD)
    y = np.empty(len(idx))
    s = np.empty(len(idx))
    for j, n in enumerate(idx):
        m = min(n + 1, len(c))
        terms = c[:m] * x[n::-1][:m]
        y[j] = float(np.sum(terms))
        s[j] = float(np.sum(np.abs(terms)))
    return y, s


def rule_reference(rule, a, h, x, idx):
    """The rule's value at t_n, n in idx, straight from the table (weights
    from pyfracconv.weights, which test_weights checks against mpmath), and
    the error scale sum of |terms|."""
    x = np.asarray(x, dtype=float)
    N = len(x)
    xl = x.astype(LD)
    w = pyfracconv.weights(rule, a, N, step=h).astype(LD)
    if rule == "trapezoid":
        A = trapezoid_start(a, N, step=h).astype(LD)
    y = np.empty(len(idx))
    s = np.empty(len(idx))
    for j, n in enumerate(idx):
        if rule == "rectangle":  # u sum_{k<n} b_{n-1-k} x_k
            terms = w[:n][::-1] * xl[:n]
        elif rule == "trapezoid":  # A_n x_0 + sum_{1<=k<=n} a_{n-k} x_k
            terms = (
                np.concatenate(([A[n] * xl[0]], w[:n][::-1] * xl[1 : n + 1]))
                if n > 0
                else np.zeros(1, dtype=LD)
            )
        elif rule == "grunwald":  # sum_{k<=n} g_{n-k} x_k
            terms = w[: n + 1][::-1] * xl[: n + 1]
        elif rule == "l1":  # sum_{k<n} d_k (x_{n-k} - x_{n-k-1})
            k = np.arange(n)
            terms = w[:n] * (xl[n - k] - xl[n - k - 1])
        else:
            raise ValueError(rule)
        y[j] = float(np.sum(terms)) if len(terms) else 0.0
        s[j] = float(np.sum(np.abs(terms))) if len(terms) else 0.0
    return y, s


def check_indices(N, rng, head=2000, random=200):
    """All of the first `head` outputs (where a single big FFT loses digits),
    a random sample of the rest, and the last one."""
    idx = set(range(min(N, head)))
    if N > head:
        idx.update(int(i) for i in rng.integers(head, N, size=random))
        idx.add(N - 1)
    return np.array(sorted(idx))


def componentwise_error(y, ref, scale):
    """max_n |y_n - ref_n| / scale_n (with 0/0 taken as 0)."""
    err = np.abs(np.asarray(y) - ref)
    with np.errstate(invalid="ignore", divide="ignore"):
        r = np.where(scale > 0, err / np.where(scale > 0, scale, 1.0), np.where(err > 0, np.inf, 0.0))
    return float(np.max(r)) if len(r) else 0.0
