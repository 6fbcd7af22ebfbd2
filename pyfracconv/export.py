"""Export a compressed-mode operator as self-contained C99 source for
embedded targets.

The generated code is the library's compressed engine for one channel
(``csrc/stream_compressed.c``, cs_step) with the stream's coefficients written in as
constants: a band of 64 exact lags, a dot product of the sum-of-exponentials
states, and the compensated one-pole recursions S <- (1 - q) S + u. The
state is a caller-owned struct; the update allocates nothing, does no I/O,
calls no library function (only + - * on the chosen floating type).

The coefficients are read from the compressed stream's saved state (the
payload layout documented in ``csrc/stream_compressed.c``: header, q[L], beta[L],
inj[L], cb[B], c0, ctab[B], then the per-channel state).
"""

import struct

import numpy as np

from ._core import check_compressed, check_order, check_rule, check_step, show, RULES
from ._errors import ArgumentError, raise_for_status
from ._fracconv import ffi, lib

__all__ = ["export_c", "ExportedOperator", "export_controller_c", "ExportedController"]

BAND = 64
_S_HDR = 80  # stream header (csrc/stream.c, save format)
_CS_HDR = 72  # compressed payload header (csrc/stream_compressed.c)
_MEASURE_LEN = 2000
# The rules whose compressed engine the generated code reproduces (each
# has its own branches below); a rule added to the library's table is
# refused here until its generated form is written and tested.
_EXPORTABLE = ("rectangle", "trapezoid", "grunwald", "l1")
_MEASURE_SEED = 20260


class ExportedOperator:
    """The generated files: ``header`` (``<prefix>.h``), ``source``
    (``<prefix>.c``) and ``test_vector`` (``<prefix>_testvec.h``), as text,
    and what the single-precision measurement found."""

    def __init__(self, prefix, header, source, test_vector, info):
        self.prefix = prefix
        self.header = header
        self.source = source
        self.test_vector = test_vector
        #: dict: rule, order, step, tol, horizon, precision, terms,
        #: measured (the largest error measured at export relative to each
        #: output's error scale: single precision against the library's
        #: double stream; double precision, the multiply-add build's
        #: deviation), stated (single precision: the bound written into
        #: the header; None for double)
        self.info = info

    @property
    def files(self):
        """{file name: text} of the three files."""
        p = self.prefix
        return {f"{p}.h": self.header, f"{p}.c": self.source, f"{p}_testvec.h": self.test_vector}

    def write(self, directory):
        """Write the three files into ``directory``; returns their paths."""
        import os

        paths = []
        for name, text in self.files.items():
            path = os.path.join(directory, name)
            with open(path, "w", encoding="ascii") as f:
                f.write(text)
            paths.append(path)
        return paths


# ----------------------------------------------------------------- blob


def _compressed_blob(code, order, step, tol, horizon):
    pp = ffi.new("fc_stream **")
    st = lib.fc_stream_create(code, order, step, 1, lib.FC_MODE_COMPRESSED, tol, horizon, pp)
    raise_for_status(
        st,
        f"compressed stream (order={show(order)}, step={show(step)}, "
        f"tol={show(tol)}, horizon={show(horizon)})",
    )
    s = ffi.gc(pp[0], lib.fc_stream_free)
    size = ffi.new("size_t *")
    raise_for_status(lib.fc_stream_save_size(s, size), "save size")
    buf = ffi.new("unsigned char[]", size[0])
    written = ffi.new("size_t *")
    raise_for_status(lib.fc_stream_save(s, buf, size[0], written), "save")
    return s, bytes(ffi.buffer(buf, written[0]))


def _parse(blob):
    """Coefficients of a one-channel compressed stream from its saved bytes."""
    if blob[:8] != b"FCSTREAM" or struct.unpack_from("<I", blob, 12)[0] != lib.FC_MODE_COMPRESSED:
        raise ArgumentError("not a compressed stream's saved state")
    p = blob[_S_HDR:]
    if p[:4] != b"FCCS" or struct.unpack_from("<I", p, 4)[0] != 1:
        raise ArgumentError("unknown compressed payload version")
    rule, band = struct.unpack_from("<II", p, 8)
    C, L, n = struct.unpack_from("<QQQ", p, 16)
    order, step, tol, horizon = struct.unpack_from("<dddd", p, 40)
    if band != BAND or C != 1 or n != 0:
        raise ArgumentError("unexpected compressed payload (band, channels or count)")
    off = _CS_HDR

    def take(k):
        nonlocal off
        v = np.frombuffer(p, dtype="<f8", count=k, offset=off).astype(np.float64)
        off += 8 * k
        return v

    q, beta, inj = take(L), take(L), take(L)
    cb = take(BAND)
    c0 = float(take(1)[0])
    ctab = take(BAND)
    return dict(
        rule=rule,
        L=L,
        order=order,
        step=step,
        tol=tol,
        horizon=horizon,
        q=q,
        beta=beta,
        inj=inj,
        cb=cb,
        c0=c0,
        ctab=ctab,
    )


# ------------------------------------------------------ reference runs


def _library_outputs(s, x):
    raise_for_status(lib.fc_stream_reset(s), "reset")
    x = np.ascontiguousarray(x, dtype=np.float64)
    y = np.empty_like(x)
    st = lib.fc_stream_push_block(s, ffi.from_buffer("double[]", x), len(x), ffi.from_buffer("double[]", y))
    raise_for_status(st, "push_block")
    return y


def _scale(rule_name, order, step, x):
    """sum_k |c_{n-k} u_k| (+ |corr_n x_0|): the size of the terms of each
    output, the quantity the library's compressed promise is relative to
    (fc_stream_create in fracconv.h). For the rectangle rule at order >= 1
    the rule's own terms bound the engine's (soe_build.c)."""
    from ._core import weights

    n = len(x)
    ax = np.abs(x)
    if rule_name == "rectangle":
        c = np.concatenate(([0.0], np.abs(weights("rectangle", order, n - 1, step))))
        return np.convolve(ax, c)[:n]
    if rule_name == "grunwald":
        return np.convolve(ax, np.abs(weights("grunwald", order, n, step)))[:n]
    if rule_name == "l1":
        # y_n = sum_{m<n} d_m u_{n-m}, u_j = x_j - x_(j-1), u_0 = 0
        u = np.abs(np.diff(x, prepend=x[0]))
        return np.convolve(u, np.abs(weights("l1", order, n, step)))[:n]
    # trapezoid: K (A_n x_0 + sum_{1<=k<=n} a_{n-k} x_k)
    w = np.abs(weights("trapezoid", order, n, step))
    ax1 = ax.copy()
    ax1[0] = 0.0
    st = np.empty(n)
    raise_for_status(
        lib.fc_trapezoid_start(order, step, 0, n, ffi.from_buffer("double[]", st)), "trapezoid start"
    )
    return np.convolve(ax1, w)[:n] + np.abs(st) * ax[0]


def _simulate(co, x, dtype, fused):
    """The exported update in NumPy arithmetic of type dtype (float32 for
    the measurement): the same lanes and order of operations. fused: the
    products of the fma() calls rounded once (emulated through float64, a
    double rounding that may differ from a true fma in the last bit), else
    multiply then add."""
    op = _OpSim(co, dtype, fused)
    y = np.empty(len(x), dtype)
    with np.errstate(all="ignore"):
        for n, xv in enumerate(np.asarray(x, dtype)):
            y[n] = op.out(xv, True)
    return y.astype(np.float64)


class _OpSim:
    """One exported operator's state and update, step by step, in NumPy
    arithmetic of type dtype (see _simulate); out(x, commit=False) is the
    output for sample x without changing the state (the library's
    fc_stream_preview), out(x, True) pushes it."""

    def __init__(self, co, dtype, fused):
        T = self.T = dtype
        self.co = co
        self.fused = fused
        self.Lp = co["Lp"]
        self.q, self.beta, self.inj = (np.asarray(co[k], T) for k in ("qp", "betap", "injp"))
        self.cb, self.ctab = np.asarray(co["cb"], T), np.asarray(co["ctab"], T)
        self.c0 = T(co["c0"])
        self.trap = co["rule"] == lib.FC_RULE_TRAPEZOID
        self.l1 = co["rule"] == lib.FC_RULE_L1
        self.cum = co["cum"]
        self.ring = np.zeros(2 * BAND, T)
        self.S = np.zeros(self.Lp, T)
        self.Sc = np.zeros(self.Lp, T)
        self.xprev, self.x0s = T(0), T(0)
        self.n = 0

    def _fma(self, a, b, c):
        T = self.T
        if self.fused:
            return (np.asarray(a, np.float64) * np.asarray(b, np.float64) + np.asarray(c, np.float64)).astype(
                T
            )
        return (a * b).astype(T) + c

    def out(self, xv, commit=False):
        T, fma, n = self.T, self._fma, self.n
        xv = T(xv)
        pos = n % BAND
        Xhi = Xlo = T(0)
        if self.l1:
            u = T(0) if n == 0 else T(xv - self.xprev)
        elif self.cum:
            h, lo = self.xprev, self.x0s
            s_ = T(h + xv)
            z = T(s_ - h)
            e = T(T(h - T(s_ - z)) + T(xv - z))
            t = T(lo + e)
            H = T(s_ + t)
            z = T(H - s_)
            Xlo = T(T(s_ - T(H - z)) + T(t - z))
            Xhi = H
            u = Xhi
        else:
            u = xv
        ring = self.ring
        d = ring[pos]
        terms = T(0)
        S = Sc = None
        if self.co["L"]:
            dd = (self.inj * d).astype(T) if (self.trap and n == BAND) else np.full(self.Lp, d, T)
            t = fma(-self.q, self.S, dd)
            t3 = (t + self.Sc).astype(T)
            s = (self.S + t3).astype(T)
            z = (s - self.S).astype(T)
            e = ((self.S - (s - z)) + (t3 - z)).astype(T)
            tiny = np.finfo(T).tiny  # the flush of the generated C code
            s = np.where(np.abs(s) >= tiny, s, T(0)).astype(T)
            e = np.where(np.abs(e) >= tiny, e, T(0)).astype(T)
            acc = np.zeros(8, T)
            for blk in range(0, self.Lp, 8):
                acc = fma(self.beta[blk : blk + 8], s[blk : blk + 8], acc)
            S, Sc = s, e
            terms = _reduce8(acc, T)
        w = ring[pos + 1 : pos + 1 + BAND]
        acc16 = np.zeros(16, T)
        for j in range(0, BAND, 16):
            acc16 = fma(self.cb[j : j + 16], w[j : j + 16], acc16)
        band = _reduce8((acc16[:8] + acc16[8:]).astype(T), T)
        x0 = xv if n == 0 else self.x0s
        corr = self.ctab[n] if (self.trap and n < BAND) else T(0)
        y = T(T(T(terms + band) + T(self.c0 * u)) + T(corr * x0))
        if commit:
            if S is not None:
                self.S, self.Sc = S, Sc
            ring[pos] = u
            ring[pos + BAND] = u
            if self.cum:
                self.xprev, self.x0s = Xhi, Xlo
            else:
                self.xprev = xv
                if n == 0:
                    self.x0s = xv
            self.n = n + 1
        return y


def _reduce8(a, T):
    v0, v1 = T(a[0] + a[4]), T(a[1] + a[5])
    v2, v3 = T(a[2] + a[6]), T(a[3] + a[7])
    return T(T(v0 + v1) + T(v2 + v3))


def _measure_inputs(n, seed):
    rng = np.random.default_rng(seed)
    spikes = np.zeros(n)
    spikes[0] = 1.0
    spikes[rng.choice(np.arange(1, n), size=max(1, n // 100), replace=False)] = rng.choice(
        [-1.0, 1.0], size=max(1, n // 100)
    )
    return {"random": rng.standard_normal(n), "step": np.ones(n), "spike": spikes}


# ----------------------------------------------------------- C text


def _lit(v, single):
    v = float(v)
    if v == 0.0:
        s = "-0.0" if np.signbit(v) else "0.0"
    else:
        s = v.hex() if not single else float(np.float32(v)).hex()
    return s + ("f" if single else "")


def _array(name, ctype, vals, single):
    items = [_lit(v, single) for v in vals]
    lines = []
    for i in range(0, len(items), 3):
        lines.append("    " + ", ".join(items[i : i + 3]) + ",")
    return f"static const {ctype} {name}[{len(items)}] = {{\n" + "\n".join(lines) + "\n};\n"


_CAUTION = """\
 * CAUTION. An operator inside a controller moves machinery. This file is a
 * numerical building block, not a safety function:
 *   - validate the complete controller on the plant (or a faithful model
 *     of it) before use;
 *   - enforce actuator and rate limits outside this code;
 *   - keep an independent safe stop that does not depend on this code or
 *     on the processor running it.
 * Local codes, standards and licensed engineering practice take precedence
 * over anything said here."""


def export_c(
    rule, order, step, tol=1e-9, horizon=1e6, precision="double", prefix="fcop", test_length=300, seed=0
):
    """Export a compressed-mode operator as one C99 source and header.

    Parameters
    ----------
    rule : {'rectangle', 'trapezoid', 'grunwald', 'l1'}
        The rule, as for :class:`pyfracconv.Stream` (integrals: rectangle,
        trapezoid; derivatives: grunwald, l1).
    order, step : float
        As for a compressed stream: 0 < order < 1, or 1 <= order < 2 with
        ``rule='rectangle'``.
    tol, horizon : float
        The compressed stream's tolerance and horizon; the exported update
        refuses (returns 1) an output beyond floor(horizon), like the
        library's default policy.
    precision : {'double', 'single'}
        The floating type of the generated code. Single precision: the
        error against the library's double-precision stream is measured
        here (random, step and spike inputs) and written into the header.
    prefix : str
        C identifier prefix of every generated name and the file names.
    test_length : int
        Samples in the generated test vector (inputs and the library's
        outputs, with each output's error scale).
    seed : int
        Seed of the test vector's random inputs.

    Returns
    -------
    ExportedOperator
        The three files as text (``header``, ``source``, ``test_vector``;
        ``files``, ``write``) and ``info``.

    Raises
    ------
    ArgumentError
        A rule not exportable, order, step, tol, horizon, precision, prefix
        or test_length out of range, the trapezoid rule at order >= 1, or a
        coefficient outside the single-precision range (nothing is
        generated).
    InputTypeError
        A parameter of the wrong type.

    See Also
    --------
    export_controller_c : a whole controller.
    Stream : ``mode='compressed'``, the library's stream the code follows.

    Examples
    --------
    The generated code includes only its own header and makes no library
    calls; in double precision the measured deviation from the library's
    stream is within the 64 * 2**-52 of the error scale that the header
    states:

    >>> import pyfracconv
    >>> e = pyfracconv.export_c("rectangle", 0.5, 0.1, tol=1e-6, horizon=1000,
    ...                         test_length=10)
    >>> sorted(e.files)
    ['fcop.c', 'fcop.h', 'fcop_testvec.h']
    >>> [ln for ln in e.source.splitlines() if ln.startswith("#include")]
    ['#include "fcop.h"']
    >>> e.info["precision"], e.info["terms"] > 0, e.info["measured"] <= 64 * 2.0**-52
    ('double', True, True)
    >>> pyfracconv.export_c("trapezoid", 1.5, 0.1)
    Traceback (most recent call last):
    ...
    pyfracconv._errors.ArgumentError: order=1.5, rule='trapezoid': export_c serves ...
    """
    code = check_rule(rule, tuple(r for r in RULES if r in _EXPORTABLE))
    a = check_order(order, rule, lib.FC_MODE_COMPRESSED)
    if rule == "trapezoid" and a >= 1.0:
        # the compressed trapezoid rule at 1 <= order < 2 reads its x_0
        # correction from the library's weights at run time
        # (csrc/stream_compressed.c); the generated code has no such table
        raise ArgumentError(
            f"order={show(order)}, rule='trapezoid': export_c serves the trapezoid "
            "rule for 0 < order < 1 only; use rule='rectangle' (also 1 <= order < 2) "
            "or a compressed Stream"
        )
    h = check_step(step)
    t, hz = check_compressed(tol, horizon)
    if precision not in ("double", "single"):
        raise ArgumentError(f"precision={show(precision)}: must be 'double' or 'single'")
    if not (isinstance(prefix, str) and prefix.isidentifier() and prefix.isascii()):
        raise ArgumentError(f"prefix={show(prefix)}: must be a C identifier")
    if not (isinstance(test_length, int) and 1 <= test_length <= 100000):
        raise ArgumentError(f"test_length={show(test_length)}: must be an int in [1, 100000]")
    single = precision == "single"
    s, blob = _compressed_blob(code, a, h, t, hz)
    co = _parse(blob)
    L = co["L"]
    Lp = (L + 7) // 8 * 8
    pad = Lp - L
    co["Lp"] = Lp
    co["qp"] = np.concatenate((co["q"], np.full(pad, 0.5)))
    co["betap"] = np.concatenate((co["beta"], np.zeros(pad)))
    co["injp"] = np.concatenate((co["inj"], np.ones(pad)))
    co["cum"] = rule == "rectangle" and a >= 1.0
    last = int(np.floor(hz))

    if single:
        for k in ("qp", "betap", "injp", "cb", "ctab"):
            v = co[k]
            f = v.astype(np.float32)
            if np.any(~np.isfinite(f)) or np.any((f == 0) & (v != 0)):
                raise ArgumentError(
                    f"step={show(step)}, order={show(order)}: a coefficient leaves "
                    "the single-precision range; use precision='double' or a step "
                    "nearer 1"
                )

    # the test vector: the library's stream on random inputs
    rng = np.random.default_rng(seed)
    nt = min(test_length, last + 1)
    xt = rng.standard_normal(nt)
    if single:  # inputs representable in float: the bound is for the arithmetic
        xt = xt.astype(np.float32).astype(np.float64)
    yt = _library_outputs(s, xt)
    st = _scale(rule, a, h, xt)

    measured = stated = None
    method = ""
    P = prefix
    if single:
        nm = min(_MEASURE_LEN, last + 1)
        worst = 0.0
        for fused in (False, True):
            for xm in _measure_inputs(nm, _MEASURE_SEED).values():
                xm = xm.astype(np.float32).astype(np.float64)
                ref = _library_outputs(s, xm)
                sc = _scale(rule, a, h, xm)
                got = _simulate(co, xm, np.float32, fused)
                ok = sc > 0
                err = np.abs(got - ref)
                if np.any(err[~ok] != 0):
                    worst = max(worst, float(np.max(err[~ok])))
                if np.any(ok):
                    worst = max(worst, float(np.max(err[ok] / sc[ok])))
        measured = worst
        # the statement: twice the measured figure, and never below 16
        # single-precision units
        stated = max(2.0 * measured, 16 * 2.0**-24)
        method = (
            f" * Measured at export: the single-precision update emulated in NumPy\n"
            f" * float32 arithmetic (same lanes and order; once with multiply-add,\n"
            f" * once with fused products) against the library's double-precision\n"
            f" * compressed stream on {nm} samples each of three inputs: standard\n"
            f" * normal noise (seed {_MEASURE_SEED}), a unit step, and unit spikes of\n"
            f" * random sign at 1% of the samples. Error measure: |y_single - y_lib|\n"
            f" * divided by the output's error scale sum_k |c_(n-k) u_k| (+ |corr_n x_0|),\n"
            f" * the quantity of the library's compressed-mode promise.\n"
            f" * Largest measured: {measured:.3e}. Stated bound (twice that, at least\n"
            f" * 16 * 2^-24): {stated:.3e} of the error scale against the library's\n"
            f" * stream; against the exact operator add the stream's own tol + 64 eps.\n"
            f" * The inputs were single-precision numbers (what {P}_step receives):\n"
            f" * rounding a double input to float is not included (for the L1 rule\n"
            f" * it can be large relative to small differences x_n - x_(n-1)).\n"
            f" * Inputs much longer than {nm} samples or of a very different shape were\n"
            f" * not measured: check them on the target.\n"
        )
    if not single:
        # the multiply-add build (no hardware fma): its arithmetic is exactly
        # NumPy's float64, so its deviation from the library is measured here
        nm = min(_MEASURE_LEN, last + 1)
        worst = 0.0
        for xm in _measure_inputs(nm, _MEASURE_SEED).values():
            ref = _library_outputs(s, xm)
            sc = _scale(rule, a, h, xm)
            dev = np.abs(_simulate(co, xm, np.float64, False) - ref)
            ok = sc > 0
            if np.any(dev[~ok] != 0):
                worst = max(worst, float(np.inf))
            if np.any(ok):
                worst = max(worst, float(np.max(dev[ok] / sc[ok])))
        measured = worst
        method = (
            f" * Measured at export for the multiply-add build (its arithmetic run in\n"
            f" * NumPy float64) against the library's stream on {nm} samples each of\n"
            f" * normal noise, a unit step and unit spikes: largest deviation\n"
            f" * {measured:.3e} of the error scale, i.e. {measured / 2.0**-52:.2f} * 2^-52.\n"
        )
    texts = _generate(prefix, rule, a, h, t, hz, last, co, single, measured, stated, method, xt, yt, st)
    info = dict(
        rule=rule,
        order=a,
        step=h,
        tol=t,
        horizon=hz,
        precision=precision,
        terms=L,
        measured=measured,
        stated=stated,
    )
    return ExportedOperator(prefix, *texts, info)


def _generate(P, rule, a, h, tol, hz, last, co, single, measured, stated, method, xt, yt, st):
    U = P.upper()
    R = "float" if single else "double"
    L, Lp = co["L"], co["Lp"]
    trap = rule == "trapezoid"
    l1 = rule == "l1"
    cum = co["cum"]
    desc = {
        "rectangle": "Riemann-Liouville integral, product rectangle rule",
        "trapezoid": "Riemann-Liouville integral, product trapezoidal rule",
        "grunwald": "Riemann-Liouville derivative, Grunwald-Letnikov",
        "l1": "Caputo derivative, L1 scheme",
    }[rule]
    if cum:
        desc += "\n *   (order >= 1: the engine runs on the running sum of the input)"
    if single:
        acc_note = " * PRECISION: single (float). See ERROR below.\n"
    else:
        acc_note = (
            " * PRECISION: double. Built where the compiler defines __FP_FAST_FMA\n"
            " * (a hardware fused multiply-add: e.g. -mfma on x86-64, AArch64 by\n"
            " * default), the products use __builtin_fma and the outputs equal the\n"
            " * library's compressed stream bit for bit. Elsewhere each fma of the\n"
            " * library becomes a multiply and an add (two roundings, no libm): the\n"
            " * outputs then differ from the library's by a few units in the last\n"
            " * place of the error scale (the tests measure and bound the deviation\n"
            " * by 64 * 2^-52 of the error scale sum_k |c_(n-k) u_k|). Compile in an\n"
            " * ISO mode (-std=c99) so that the compiler does not contract on its own.\n" + method
        )
    err = ""
    if single:
        err = " *\n * ERROR (single precision).\n" + method
    xnote = "running sum, high and low parts" if cum else "previous sample, first sample"
    fma_macro = "__builtin_fmaf" if single else "__builtin_fma"
    fast = "__FP_FAST_FMAF" if single else "__FP_FAST_FMA"
    header = f"""\
/*
 * {P}.h -- generated by pyfracconv.export_c: a fixed fractional operator
 * for embedded targets, one channel, no allocation, no I/O, no library calls.
 *
 * Operator: {desc},
 *   order {a!r}, step {h!r}, tolerance {tol!r}, horizon {hz!r}
 *   ({L} exponential terms, band of {BAND} exact lags).
 * Output n approximates the operator at t_n = n * step for the samples
 * x_0 .. x_n pushed so far; outputs 0 .. {last} (floor(horizon)) are within
 * the library's compressed-mode promise: |y_n - exact| <= (tol + 64 eps)
 * times the output's error scale (see the library's documentation of
 * compressed streams). {P}_step refuses (returns 1, state unchanged) an
 * output past the horizon and a non-finite sample (returns 2).
 * Samples must be of moderate size: the library refuses engine inputs
 * beyond about 1e290 (double) and this code does not check; in single
 * precision keep |inputs| and outputs well inside 1e38.
 *
{acc_note}{err} *
 * Use: {P}_state st; {P}_init(&st); then for each sample
 *   {R} y; if ({P}_step(&st, x, &y) != 0) {{ ...refused... }}
 * One state per signal; states may be copied (plain struct) to save and
 * restore. Memory per state: {(2 * BAND + 2 * max(Lp, 1) + 2)} values of {R} and a counter.
 *
{_CAUTION}
 */
#ifndef {U}_H
#define {U}_H

#define {U}_TERMS {L}
#define {U}_TERMS_PADDED {Lp}
#define {U}_BAND {BAND}
#define {U}_LAST_INDEX {last}ULL

typedef {R} {P}_real;

typedef struct {{
    {P}_real ring[2 * {BAND}];       /* mirrored ring of the engine input */
    {P}_real S[{max(Lp, 1)}], Sc[{max(Lp, 1)}];   /* one-pole states, compensated */
    {P}_real xprev, x0;              /* {xnote} */
    unsigned long long n;             /* samples pushed */
}} {P}_state;

/* Zero the state (no samples yet). */
void {P}_init({P}_state *st);
/* Push sample x: *y gets the next output. Returns 0, 1 (past the horizon,
   nothing changed) or 2 (x not finite, nothing changed). */
int {P}_step({P}_state *st, {P}_real x, {P}_real *y);

#endif /* {U}_H */
"""
    consts = []
    if L:
        consts.append(_array(f"{P}_q", R, co["qp"], single))
        consts.append(_array(f"{P}_beta", R, co["betap"], single))
        if trap:
            consts.append(_array(f"{P}_inj", R, co["injp"], single))
    consts.append(_array(f"{P}_cb", R, co["cb"], single))
    consts.append(f"static const {R} {P}_c0 = {_lit(co['c0'], single)};\n")
    if trap:
        consts.append(_array(f"{P}_ctab", R, co["ctab"], single))
    z = "0.0f" if single else "0.0"
    TN = "1.17549435082228751e-38f" if single else "2.2250738585072014e-308"
    if l1:
        u_code = f"u = n == 0 ? {z} : x - st->xprev;"
    elif cum:
        u_code = (
            "{\n"
            "        /* X_n = X_(n-1) + x_n in a pair of " + R + "s (two exact TwoSums) */\n"
            f"        {P}_real hs = st->xprev, ls = st->x0, s = hs + x, z = s - hs;\n"
            f"        {P}_real e = (hs - (s - z)) + (x - z), t = ls + e, H = s + t;\n"
            "        z = H - s;\n"
            "        Xlo = (s - (H - z)) + (t - z);\n"
            "        Xhi = H;\n"
            "        u = Xhi;\n"
            "    }"
        )
    else:
        u_code = "u = x;"
    if L:
        dsrc = f"(inject ? {P}_inj[l + k] * d : d)" if trap else "d"
        terms_code = f"""\
    {{
        {P}_real acc[8] = {{{", ".join([z] * 8)}}};
        for (l = 0; l < {Lp}; l += 8) {{
            for (k = 0; k < 8; k++) {{
                {P}_real qq = {P}_q[l + k], s0 = st->S[l + k], c0 = st->Sc[l + k];
                {P}_real t = {U}_FMA(-qq, s0, {dsrc});
                {P}_real t3 = t + c0;
                {P}_real s = s0 + t3;
                {P}_real zz = s - s0;
                {P}_real e = (s0 - (s - zz)) + (t3 - zz);
                /* below the smallest normal number: zero, as the library
                   does, so the work per sample stays the same (subnormal
                   arithmetic is slow or trapped on many processors) */
                if (s < {TN} && s > -{TN}) s = {z};
                if (e < {TN} && e > -{TN}) e = {z};
                acc[k] = {U}_FMA({P}_beta[l + k], s, acc[k]);
                nS[l + k] = s;
                nSc[l + k] = e;
            }}
        }}
        terms = {P}_reduce8(acc);
    }}
"""
        commit_terms = f"""\
    for (l = 0; l < {Lp}; l++) {{
        st->S[l] = nS[l];
        st->Sc[l] = nSc[l];
    }}
"""
        decl_terms = f"    {P}_real nS[{Lp}], nSc[{Lp}];\n    unsigned l, k;\n"
    else:
        terms_code = commit_terms = ""
        decl_terms = "    unsigned k;\n"
    if trap:
        corr_code = f"corr = n < {BAND} ? {P}_ctab[n] : {z};"
        inject_decl = f"    const int inject = n == {BAND};\n"
    else:
        corr_code = f"corr = {z};"
        inject_decl = ""
    if cum:
        commit_x = "    st->xprev = Xhi;\n    st->x0 = Xlo;\n"
    else:
        commit_x = "    st->xprev = x;\n    if (n == 0) st->x0 = x;\n"
    source = f"""\
/*
 * {P}.c -- generated by pyfracconv.export_c; see {P}.h (operator, accuracy,
 * cautions). The arithmetic is the library's compressed update for one
 * channel: the products of {U}_FMA are the library's fma() calls, the lanes
 * and the order of every addition are the library's.
 */
#include "{P}.h"

#ifndef {U}_USE_FMA
#if defined({fast}) && (defined(__GNUC__) || defined(__clang__))
#define {U}_USE_FMA 1
#else
#define {U}_USE_FMA 0
#endif
#endif
#if {U}_USE_FMA
#define {U}_FMA(a, b, c) {fma_macro}((a), (b), (c))
#else
#define {U}_FMA(a, b, c) ((a) * (b) + (c))
#endif

{"".join(consts)}
static {P}_real {P}_reduce8(const {P}_real a[8])
{{
    {P}_real v0 = a[0] + a[4], v1 = a[1] + a[5];
    {P}_real v2 = a[2] + a[6], v3 = a[3] + a[7];
    return (v0 + v1) + (v2 + v3);
}}

void {P}_init({P}_state *st)
{{
    unsigned i;
    for (i = 0; i < 2 * {BAND}; i++) st->ring[i] = {z};
    for (i = 0; i < {max(Lp, 1)}; i++) {{
        st->S[i] = {z};
        st->Sc[i] = {z};
    }}
    st->xprev = {z};
    st->x0 = {z};
    st->n = 0;
}}

int {P}_step({P}_state *st, {P}_real x, {P}_real *y)
{{
    const unsigned long long n = st->n;
    const unsigned pos = (unsigned)(n % {BAND}u);
{inject_decl}{decl_terms}    {P}_real u, d, terms = {z}, band, x0, corr, yc;
    {P}_real Xhi = {z}, Xlo = {z};
    {P}_real acc16[16], v[8];
    const {P}_real *w;
    (void)Xhi;
    (void)Xlo;
    if (n > {U}_LAST_INDEX) return 1;
    if (!(x - x == {z})) return 2;       /* NaN or infinite */
    {u_code}
    d = st->ring[pos];                    /* u_(n-B), 0 while n < B */
{terms_code}    /* band: u_(n-B+1) .. u_(n-1), u_(n-B) (weight 0), 16 lanes */
    w = st->ring + pos + 1;
    for (k = 0; k < 16; k++) acc16[k] = {z};
    for (k = 0; k < {BAND}; k += 16) {{
        unsigned j;
        for (j = 0; j < 16; j++) acc16[j] = {U}_FMA({P}_cb[k + j], w[k + j], acc16[j]);
    }}
    for (k = 0; k < 8; k++) v[k] = acc16[k] + acc16[k + 8];
    band = {P}_reduce8(v);
    x0 = n == 0 ? x : st->x0;
    {corr_code}
    yc = ((terms + band) + {P}_c0 * u) + corr * x0;
    *y = yc;
{commit_terms}    st->ring[pos] = u;
    st->ring[pos + {BAND}] = u;
{commit_x}    st->n = n + 1;
    return 0;
}}
"""
    n = len(xt)
    relnote = (
        "the stated single-precision bound"
        if single
        else "64 * 2^-52, the rounding allowance; with hardware fma the outputs are equal"
    )
    tv = f"""\
/*
 * {P}_testvec.h -- generated by pyfracconv.export_c: a test vector for
 * {P}.c. {n} standard normal inputs and the outputs of the library's
 * double-precision compressed stream on them ({U}_TV_Y), with each output's
 * error scale sum_k |c_(n-k) u_k| (+ |corr_n x_0|) ({U}_TV_SCALE).
 * Accept when |y - {U}_TV_Y[n]| <= {U}_TV_REL * {U}_TV_SCALE[n] for every n
 * ({U}_TV_REL: {relnote}).
 */
#ifndef {U}_TESTVEC_H
#define {U}_TESTVEC_H

#define {U}_TV_N {n}
#define {U}_TV_REL {repr(float(stated)) if single else "(64.0 / 4503599627370496.0)"}

{_array(f"{P}_tv_x", "double", xt, False)}
{_array(f"{P}_tv_y", "double", yt, False)}
{_array(f"{P}_tv_scale", "double", st, False)}
#endif /* {U}_TESTVEC_H */
"""
    return header, source, tv


# ===================================================== controller export
#
# export_controller_c: the library's controller (csrc/controller.c,
# update1) as C99 for one loop: its integral and derivative operators are
# the compressed engines above, written as static functions whose
# commit = 0 call is the library's fc_stream_preview (nothing changes) and
# commit = 1 its push; the controller's arithmetic (setpoint weights,
# filter, limits, rate limit, conditional integration, manual mode with
# output tracking) is the library's, operation for operation.

_CTL_CAUTION = """\
 * CAUTION. A controller moves machinery. This file is a numerical
 * building block, not a safety function:
 *   - validate the complete control system in simulation and then on the
 *     plant (or a faithful model of it), under supervision, before use;
 *   - keep the actuator limits and rate limits in the hardware (or a
 *     separate protective layer) as well as the limits coded here;
 *   - keep an independent safe stop (interlock, emergency stop) that does
 *     not depend on this code, on the processor running it, or on its
 *     inputs;
 *   - the code starts from rest (P_init): bring it into the loop in
 *     manual mode at the actuator's present value, then switch to
 *     automatic, for a bumpless start.
 * Local codes, standards and licensed engineering practice take precedence
 * over anything said here."""

_CTL_MEASURE_LEN = 2000
_CTL_SEED = 20261


class ExportedController(ExportedOperator):
    """The generated files of :func:`export_controller_c`: ``header``
    (``<prefix>.h``), ``source`` (``<prefix>.c``) and ``test_vector``
    (``<prefix>_testvec.h``), and ``info`` (the parameters, precision,
    exponential terms of each operator, ``measured`` and ``stated``
    errors relative to each run's action scale)."""


def _ctl_params(controller):
    from .control import Controller

    if isinstance(controller, Controller):
        return dict(controller.params)
    if isinstance(controller, dict):
        return dict(Controller(**controller).params)
    raise ArgumentError(
        f"controller={show(controller)}: expected a pyfracconv.Controller or a dict of its keyword arguments"
    )


def _op_coeffs(rule, order, step, tol, horizon):
    code = RULES[rule]
    s, blob = _compressed_blob(code, order, step, tol, horizon)
    co = _parse(blob)
    L = co["L"]
    Lp = (L + 7) // 8 * 8
    pad = Lp - L
    co["Lp"] = Lp
    co["qp"] = np.concatenate((co["q"], np.full(pad, 0.5)))
    co["betap"] = np.concatenate((co["beta"], np.zeros(pad)))
    co["injp"] = np.concatenate((co["inj"], np.ones(pad)))
    co["cum"] = rule == "rectangle" and order >= 1.0
    return co


class _CtlSim:
    """The exported controller's update in NumPy arithmetic of type T
    (the C text of _ctl_source, line for line)."""

    def __init__(self, k, ops, T, fused):
        self.k, self.T = k, T
        self.opi = _OpSim(ops["i"], T, fused) if "i" in ops else None
        self.opd = _OpSim(ops["d"], T, fused) if "d" in ops else None
        self.c = {n: T(k[n]) for n in ("kp", "ki", "kd", "b", "c", "step", "tf", "rate", "lo", "hi")}
        self.u_prev = self.dfilt = self.bias = self.u_manual = T(0)
        self.have_prev = self.manual = False

    def _clamp_out(self, v):
        lo, hi = self.k["lo"], self.k["hi"]
        if lo != -np.inf and v < self.c["lo"]:
            return self.c["lo"]
        if hi != np.inf and v > self.c["hi"]:
            return self.c["hi"]
        return v

    def _limit(self, v):
        T = self.T
        u = self._clamp_out(v)
        if self.have_prev and self.k["rate"] != np.inf:
            d = T(self.c["rate"] * self.c["step"])
            lo, hi = T(self.u_prev - d), T(self.u_prev + d)
            u = lo if u < lo else (hi if u > hi else u)
            u = self._clamp_out(u)
        return u

    def update(self, r, y):
        T, c, k = self.T, self.c, self.k
        r, y = T(r), T(y)
        e = T(r - y)
        ep = T(T(c["b"] * r) - y)
        ed = T(T(c["c"] * r) - y)
        P = T(c["kp"] * ep)
        draw = iv = T(0)
        xi = T(0) if self.manual else e
        if self.opd:
            draw = self.opd.out(ed)
        if self.opi:
            iv = self.opi.out(xi)
        D = T(c["kd"] * draw)
        if k["tf"] > 0:
            D = T(T(T(c["tf"] * self.dfilt) + T(c["step"] * D)) / T(c["tf"] + c["step"]))
        Ia = T(c["ki"] * iv)
        bias = self.bias
        if self.manual:
            u = self._clamp_out(self.u_manual)
            bias = T(u - T(T(P + Ia) + D))
            v = u
        else:
            v = T(T(T(P + Ia) + D) + bias)
            u = self._limit(v)
            if u != v and self.opi and k["aw"] and xi != 0:
                push = T(c["ki"] * xi)
                if (v > u and push > 0) or (v < u and push < 0):
                    ve, ue, e0 = v, u, xi
                    xi = T(0)
                    iv = self.opi.out(xi)
                    Ia = T(c["ki"] * iv)
                    v = T(T(T(P + Ia) + D) + bias)
                    u = self._limit(v)
                    if (ve > ue and v < ue) or (ve < ue and v > ue):
                        f = T(T(ue - v) / T(ve - v))
                        if f > 0 and f < 1:
                            xi = T(e0 * f)
                            iv = self.opi.out(xi)
                            Ia = T(c["ki"] * iv)
                            v = T(T(T(P + Ia) + D) + bias)
                            u = self._limit(v)
        if self.opd:
            self.opd.out(ed, True)
        if self.opi:
            self.opi.out(xi, True)
        self.dfilt, self.bias, self.u_prev, self.have_prev = D, bias, u, True
        return u


def _ctl_inputs(k, n, seed, kind):
    """Setpoint and measurement records for the measurement and the test
    vector. kind 'loop': the library's controller holding a first-order
    plant y' = (u - y)/tau, tau = 20 steps, through setpoint steps to
    random levels across the output range (the limits and the rate limit
    are reached in the transients), plus measurement noise; kind 'noise':
    random setpoint levels and a noisy measurement, open loop."""
    from .control import Controller

    rng = np.random.default_rng(seed)
    lo, hi = k["lo"], k["hi"]
    if np.isfinite(lo) and np.isfinite(hi):
        mid, half = (lo + hi) / 2, (hi - lo) / 2
    elif np.isfinite(hi):
        mid, half = hi - 1.0, 1.0
    elif np.isfinite(lo):
        mid, half = lo + 1.0, 1.0
    else:
        mid, half = 0.0, 1.0
    seg = 150
    levels = mid + half * rng.uniform(-1.1, 1.1, size=n // seg + 1)
    r = np.repeat(levels, seg)[:n]
    noise = 0.01 * half * rng.standard_normal(n)
    if kind == "noise":
        return r, r + 0.3 * half * rng.standard_normal(n)
    ctl = Controller(**k["params"])
    y = np.empty(n)
    yv = mid
    a = 1.0 / 20
    for i in range(n):
        y[i] = yv + noise[i]
        u = ctl.update(r[i], y[i])
        yv = yv + a * (u - yv)
    return r, y


def _ctl_library(params, r, y):
    """The library's outputs and each run's action scale max_n (|P| + |I| +
    |D| + |bias|)."""
    from .control import Controller

    ctl = Controller(**params)
    u = np.empty(len(r))
    scale = 0.0
    for i in range(len(r)):
        u[i] = ctl.update(r[i], y[i])
        t = ctl.terms
        scale = max(
            scale, abs(t["proportional"]) + abs(t["integral"]) + abs(t["derivative"]) + abs(t["bias"])
        )
    return u, scale


def export_controller_c(controller, precision="double", prefix="fcpid", test_length=600, seed=0):
    """Export a controller as one self-contained C99 source and header.

    The generated update is the library's controller (the law, setpoint
    weights, derivative filter, output limits, rate limit, conditional
    integration against windup, manual mode with bumpless return) with its
    integral and derivative as compressed operators (the code of
    :func:`export_c`): coefficients as constants, the state a struct the
    caller owns, no allocation, no I/O, no library calls (+ - * / and
    comparisons).

    Parameters
    ----------
    controller : pyfracconv.Controller or dict
        The controller whose parameters are exported (its ``params``; the
        generated code starts from rest, whatever samples the object has
        seen), or the keyword arguments of one. Served: compressed memory
        (``memory='exact'`` is refused: the exact history grows without
        bound), every integral and derivative rule and order the
        compressed controller takes except the trapezoid rule at
        integral_order >= 1 (use ``integral_rule='rectangle'``); every
        other option.
    precision : {'double', 'single'}
        The floating type of the generated code. The error against the
        library's controller is measured here (the update emulated in
        NumPy arithmetic of that type, on a closed loop and on noisy
        open-loop records) and written into the header with a stated
        bound.
    prefix : str
        C identifier prefix of every generated name and of the file names.
    test_length : int
        Samples in the generated test vector (setpoints, measurements, the
        library's outputs).
    seed : int
        Seed of the test vector's records.

    Returns
    -------
    ExportedController
        The three files as text and ``info`` (the parameters, the terms of
        each operator, the measured and stated errors).

    Raises
    ------
    ArgumentError
        Exact memory, the trapezoid rule at integral_order >= 1, precision,
        prefix or test_length out of range, a parameter or coefficient
        outside the single-precision range, or controller not a
        Controller or a dict (nothing is generated).
    InputTypeError
        A parameter of the wrong type (in the dict of keyword arguments).

    See Also
    --------
    export_c : one operator.
    Controller : the library's controller the code follows.

    Examples
    --------
    The generated controller includes only its own header and keeps one
    set of exponential terms per fractional action (compressed memory):

    >>> import pyfracconv
    >>> c = pyfracconv.Controller(1.0, 0.5, 0.1, integral_order=0.5,
    ...                           derivative_order=0.5, step=0.01, horizon=1000)
    >>> e = pyfracconv.export_controller_c(c, test_length=10)
    >>> sorted(e.files)
    ['fcpid.c', 'fcpid.h', 'fcpid_testvec.h']
    >>> [ln for ln in e.source.splitlines() if ln.startswith("#include")]
    ['#include "fcpid.h"']
    >>> sorted(e.info["terms"])
    ['d', 'i']
    >>> exact = pyfracconv.Controller(1.0, 0.5, 0.1, integral_order=0.5,
    ...                               derivative_order=0.5, step=0.01, memory="exact")
    >>> pyfracconv.export_controller_c(exact)
    Traceback (most recent call last):
    ...
    pyfracconv._errors.ArgumentError: memory='exact': export_controller_c exports compressed memory only ...

    SAFETY: a controller moves real machinery. Validate the exported code in
    simulation and on the plant; keep actuator and rate limits in the
    hardware too; keep an independent safe stop that does not depend on
    this code; follow local codes, standards and licensed engineering
    practice.
    """
    p = _ctl_params(controller)
    if p["memory"] != "compressed":
        raise ArgumentError(
            f"memory={show(p['memory'])}: export_controller_c exports compressed memory "
            "only (an exact history grows without bound); use memory='compressed'"
        )
    if precision not in ("double", "single"):
        raise ArgumentError(f"precision={show(precision)}: must be 'double' or 'single'")
    if not (isinstance(prefix, str) and prefix.isidentifier() and prefix.isascii()):
        raise ArgumentError(f"prefix={show(prefix)}: must be a C identifier")
    if not (
        isinstance(test_length, int) and not isinstance(test_length, bool) and 1 <= test_length <= 100000
    ):
        raise ArgumentError(f"test_length={show(test_length)}: must be an int in [1, 100000]")
    if p["ki"] != 0 and p["integral_rule"] == "trapezoid" and p["integral_order"] >= 1.0:
        raise ArgumentError(
            f"integral_rule='trapezoid', integral_order={show(p['integral_order'])}: "
            "export_controller_c serves the trapezoid rule for integral_order < 1 only "
            "(its compressed stream reads starting weights at run time); use "
            "integral_rule='rectangle'"
        )
    single = precision == "single"
    lo, hi = p["output_limits"]
    k = dict(
        kp=p["kp"],
        ki=p["ki"],
        kd=p["kd"],
        b=p["setpoint_weight"],
        c=p["derivative_weight"],
        step=p["step"],
        tf=p["derivative_filter"],
        rate=p["rate_limit"],
        lo=lo,
        hi=hi,
        aw=p["anti_windup"],
        params=p,
    )
    if single:
        for name, v in (
            ("kp", p["kp"]),
            ("ki", p["ki"]),
            ("kd", p["kd"]),
            ("setpoint_weight", p["setpoint_weight"]),
            ("derivative_weight", p["derivative_weight"]),
            ("step", p["step"]),
            ("derivative_filter", p["derivative_filter"]),
            ("rate_limit", p["rate_limit"]),
            ("output_limits[0]", lo),
            ("output_limits[1]", hi),
        ):
            if np.isfinite(v) and (abs(v) > 1e37 or (v != 0 and abs(v) < 1e-37)):
                raise ArgumentError(
                    f"{name}={show(v)}: outside the single-precision range; use precision='double'"
                )
    ops = {}
    if p["ki"] != 0:
        ops["i"] = _op_coeffs(p["integral_rule"], p["integral_order"], p["step"], p["tol"], p["horizon"])
    if p["kd"] != 0:
        ops["d"] = _op_coeffs(p["derivative_rule"], p["derivative_order"], p["step"], p["tol"], p["horizon"])
    if single:
        for co in ops.values():
            for key in ("qp", "betap", "injp", "cb", "ctab"):
                v = co[key]
                f = v.astype(np.float32)
                if np.any(~np.isfinite(f)) or np.any((f == 0) & (v != 0)):
                    raise ArgumentError(
                        f"step={show(p['step'])}: a coefficient of the controller's "
                        "operators leaves the single-precision range; use "
                        "precision='double' or a step nearer 1"
                    )
    last = int(np.floor(p["horizon"]))
    T = np.float32 if single else np.float64

    def rnd(x):
        return x.astype(np.float32).astype(np.float64) if single else x

    # measurement: the update emulated in T against the library
    nm = min(_CTL_MEASURE_LEN, last + 1)
    worst = 0.0
    runs = 0
    for kind in ("loop", "noise"):
        r, y = _ctl_inputs(k, nm, _CTL_SEED, kind)
        r, y = rnd(r), rnd(y)
        ref, scale = _ctl_library(p, r, y)
        for fused in (False, True) if single else (False,):
            sim = _CtlSim(k, ops, T, fused)
            with np.errstate(all="ignore"):
                got = np.array([float(sim.update(a, b)) for a, b in zip(r, y)])
            err = float(np.max(np.abs(got - ref)))
            worst = max(worst, err / scale if scale > 0 else (np.inf if err else 0.0))
            runs += 1
    measured = worst
    floor_ = 16 * 2.0**-24 if single else 64 * 2.0**-52
    stated = max(2.0 * measured, floor_)
    # the test vector: a closed loop of another seed
    nt = min(test_length, last + 1)
    rt, yt = _ctl_inputs(k, nt, seed, "loop")
    rt, yt = rnd(rt), rnd(yt)
    ut, st = _ctl_library(p, rt, yt)
    texts = _ctl_generate(prefix, p, k, ops, single, last, nm, measured, stated, rt, yt, ut, st)
    info = dict(
        params=p, precision=precision, terms={n: ops[n]["L"] for n in ops}, measured=measured, stated=stated
    )
    return ExportedController(prefix, *texts, info)


def _op_static(P, N, co, single):
    """The C text of one operator for the controller: its state type
    (header) and, in the source, its constants and
    static R N_out(N_state *st, R x, int commit)."""
    R = P + "_real"
    L, Lp = co["L"], co["Lp"]
    rule = co["rule"]
    trap, l1, cum = rule == lib.FC_RULE_TRAPEZOID, rule == lib.FC_RULE_L1, co["cum"]
    z = "0.0f" if single else "0.0"
    TN = "1.17549435082228751e-38f" if single else "2.2250738585072014e-308"
    F = P.upper() + "_FMA"
    stype = f"""\
typedef struct {{
    {R} ring[2 * {BAND}];
    {R} S[{max(Lp, 1)}], Sc[{max(Lp, 1)}];
    {R} xprev, x0;
    unsigned long long n;
}} {N}_state;
"""
    consts = []
    if L:
        consts.append(_array(f"{N}_q", R, co["qp"], single))
        consts.append(_array(f"{N}_beta", R, co["betap"], single))
        if trap:
            consts.append(_array(f"{N}_inj", R, co["injp"], single))
    consts.append(_array(f"{N}_cb", R, co["cb"], single))
    consts.append(f"static const {R} {N}_c0 = {_lit(co['c0'], single)};\n")
    if trap:
        consts.append(_array(f"{N}_ctab", R, co["ctab"], single))
    if l1:
        u_code = f"u = n == 0 ? {z} : x - st->xprev;"
    elif cum:
        u_code = (
            "{\n"
            f"        {R} hs = st->xprev, ls = st->x0, s = hs + x, z = s - hs;\n"
            f"        {R} e = (hs - (s - z)) + (x - z), t = ls + e, H = s + t;\n"
            "        z = H - s;\n"
            "        Xlo = (s - (H - z)) + (t - z);\n"
            "        Xhi = H;\n"
            "        u = Xhi;\n"
            "    }"
        )
    else:
        u_code = "u = x;"
    if L:
        dsrc = f"(inject ? {N}_inj[l + k] * d : d)" if trap else "d"
        terms_code = f"""\
    {{
        {R} acc[8] = {{{", ".join([z] * 8)}}};
        for (l = 0; l < {Lp}; l += 8) {{
            for (k = 0; k < 8; k++) {{
                {R} qq = {N}_q[l + k], s0 = st->S[l + k], c0 = st->Sc[l + k];
                {R} t = {F}(-qq, s0, {dsrc});
                {R} t3 = t + c0;
                {R} s = s0 + t3;
                {R} zz = s - s0;
                {R} e = (s0 - (s - zz)) + (t3 - zz);
                /* below the smallest normal number: zero, as the library
                   does, so the work per sample stays the same (subnormal
                   arithmetic is slow or trapped on many processors) */
                if (s < {TN} && s > -{TN}) s = {z};
                if (e < {TN} && e > -{TN}) e = {z};
                acc[k] = {F}({N}_beta[l + k], s, acc[k]);
                nS[l + k] = s;
                nSc[l + k] = e;
            }}
        }}
        terms = {P}_reduce8(acc);
    }}
"""
        commit_terms = f"""\
        for (l = 0; l < {Lp}; l++) {{
            st->S[l] = nS[l];
            st->Sc[l] = nSc[l];
        }}
"""
        decl_terms = f"    {R} nS[{Lp}], nSc[{Lp}];\n    unsigned l, k;\n"
    else:
        terms_code = commit_terms = ""
        decl_terms = "    unsigned k;\n"
    corr_code = f"corr = n < {BAND} ? {N}_ctab[n] : {z};" if trap else f"corr = {z};"
    inject_decl = f"    const int inject = n == {BAND};\n" if trap else ""
    if cum:
        commit_x = "        st->xprev = Xhi;\n        st->x0 = Xlo;\n"
    else:
        commit_x = "        st->xprev = x;\n        if (n == 0) st->x0 = x;\n"
    func = f"""\
{"".join(consts)}
/* The operator's next output for sample x; commit = 0 changes nothing
   (the library's preview), commit = 1 pushes x. */
static {R} {N}_out({N}_state *st, {R} x, int commit)
{{
    const unsigned long long n = st->n;
    const unsigned pos = (unsigned)(n % {BAND}u);
{inject_decl}{decl_terms}    {R} u, d, terms = {z}, band, x0, corr, yc;
    {R} Xhi = {z}, Xlo = {z};
    {R} acc16[16], v[8];
    const {R} *w;
    (void)Xhi;
    (void)Xlo;
    {u_code}
    d = st->ring[pos];
{terms_code}    w = st->ring + pos + 1;
    for (k = 0; k < 16; k++) acc16[k] = {z};
    for (k = 0; k < {BAND}; k += 16) {{
        unsigned j;
        for (j = 0; j < 16; j++) acc16[j] = {F}({N}_cb[k + j], w[k + j], acc16[j]);
    }}
    for (k = 0; k < 8; k++) v[k] = acc16[k] + acc16[k + 8];
    band = {P}_reduce8(v);
    x0 = n == 0 ? x : st->x0;
    {corr_code}
    yc = ((terms + band) + {N}_c0 * u) + corr * x0;
    if (commit) {{
{commit_terms}        st->ring[pos] = u;
        st->ring[pos + {BAND}] = u;
{commit_x}        st->n = n + 1;
    }}
    return yc;
}}

static void {N}_init({N}_state *st)
{{
    unsigned i;
    for (i = 0; i < 2 * {BAND}; i++) st->ring[i] = {z};
    for (i = 0; i < {max(Lp, 1)}; i++) {{
        st->S[i] = {z};
        st->Sc[i] = {z};
    }}
    st->xprev = {z};
    st->x0 = {z};
    st->n = 0;
}}
"""
    return stype, func


_OP_DESC = {
    "rectangle": "Riemann-Liouville integral, product rectangle rule",
    "trapezoid": "Riemann-Liouville integral, product trapezoidal rule",
    "grunwald": "Riemann-Liouville derivative, Grunwald-Letnikov",
    "l1": "Caputo derivative, L1 scheme",
}


def _ctl_generate(P, p, k, ops, single, last, nm, measured, stated, rt, yt, ut, st):
    U = P.upper()
    R = "float" if single else "double"
    Rr = P + "_real"
    z = "0.0f" if single else "0.0"

    def lit(v):
        return _lit(v, single)

    lo, hi = k["lo"], k["hi"]
    has_lo, has_hi = bool(np.isfinite(lo)), bool(np.isfinite(hi))
    has_rate = bool(np.isfinite(k["rate"]))
    lines = [
        f" *   kp {p['kp']!r}, ki {p['ki']!r}, kd {p['kd']!r}, step {p['step']!r}",
        f" *   setpoint weights b {p['setpoint_weight']!r} (proportional), "
        f"c {p['derivative_weight']!r} (derivative)",
        f" *   output limits [{lo!r}, {hi!r}], rate limit {p['rate_limit']!r} per unit time",
        f" *   derivative filter time {p['derivative_filter']!r}, conditional integration "
        f"{'on' if k['aw'] else 'off'}",
        f" *   compressed memory: tol {p['tol']!r}, horizon {p['horizon']!r} samples",
    ]
    if "i" in ops:
        lines.append(
            f" *   integral: {_OP_DESC[p['integral_rule']]}, order "
            f"{p['integral_order']!r} ({ops['i']['L']} exponential terms)"
        )
    else:
        lines.append(" *   integral: none (ki = 0)")
    if "d" in ops:
        lines.append(
            f" *   derivative: {_OP_DESC[p['derivative_rule']]}, order "
            f"{p['derivative_order']!r} ({ops['d']['L']} exponential terms)"
        )
    else:
        lines.append(" *   derivative: none (kd = 0)")
    settings = "\n".join(lines)
    if single:
        prec = " * PRECISION: single (float): every constant and operation.\n"
        fl = "16 * 2^-24"
    else:
        prec = (
            " * PRECISION: double. Where the compiler defines __FP_FAST_FMA (a\n"
            " * hardware fused multiply-add: -mfma on x86-64, AArch64 by default)\n"
            " * the operators' products use __builtin_fma, as the library's fma()\n"
            " * calls, and the outputs equal the library's controller bit for bit;\n"
            " * elsewhere each fused product is a multiply and an add. Compile in an\n"
            " * ISO mode (-std=c99) so that the compiler does not contract on its own.\n"
        )
        fl = "64 * 2^-52"
    kinds = "unfused and fused (fma) products" if single else "multiply-add products"
    err = (
        f" * ERROR. Measured at export: this update emulated in NumPy {R}\n"
        f" * arithmetic (same operations in the same order; {kinds}) against the\n"
        f" * library's double-precision controller on {nm} samples each of two\n"
        f" * records (seed {_CTL_SEED}): the library's controller holding a first-order\n"
        f" * plant (time constant 20 steps) through setpoint steps to random levels\n"
        f" * across the output range, and noisy open-loop records. Error measure:\n"
        f" * max_n |u_n - u_lib,n| divided by the run's action scale\n"
        f" * max_n (|P_n| + |I_n| + |D_n| + |bias_n|) of the library's terms.\n"
        f" * Largest measured: {measured:.3e}. Stated bound (twice that, at least\n"
        f" * {fl}): {stated:.3e} of the action scale. The inputs were numbers of\n"
        f" * the generated type (what {P}_update receives). Records much longer\n"
        f" * than {nm} samples or of a very different shape were not measured:\n"
        f" * check them on the target (the test vector is one such check).\n"
    )
    types = []
    fields = []
    funcs = []
    for key, field in (("i", "integral"), ("d", "derivative")):
        if key in ops:
            stype, func = _op_static(P, f"{P}_{key}op", ops[key], single)
            types.append(stype)
            fields.append(f"    {P}_{key}op_state {field};")
            funcs.append(func)
    fma_macro = "__builtin_fmaf" if single else "__builtin_fma"
    fast = "__FP_FAST_FMAF" if single else "__FP_FAST_FMA"
    in_max = "1e30f" if single else "1e280"
    header = f"""\
/*
 * {P}.h -- generated by pyfracconv.export_controller_c: a fractional PID
 * controller (Podlubny, IEEE Trans. Automatic Control 44, 1999) for one
 * loop, with the library's setpoint weighting, derivative filter, output
 * and rate limits, conditional integration against windup and bumpless
 * manual/automatic transfer (Astrom and Hagglund, Advanced PID Control,
 * ISA 2006); no allocation, no I/O, no library calls.
 *
 *   u = Kp (b r - y) + Ki I^lambda (r - y) + D_f + bias,
 *   D_f[n] = (Tf D_f[n-1] + h Kd D^mu (c r - y)[n]) / (Tf + h)  (Tf = 0: none)
 *
 * Settings:
{settings}
 *
 * {P}_update(&st, r, y, &u): setpoint r, measurement y, output u. Returns
 * 0; 2 (nothing changed) for a NaN or infinite r or y or one beyond
 * +-{U}_INPUT_MAX; 3 (nothing changed) when a term of the law would not be
 * finite. Past the horizon ({last} samples) the controller keeps running,
 * as the library's does (stopping a controller mid-run is the greater
 * hazard), and {P}_status reports {U}_PAST_HORIZON: the compressed
 * memory's tolerance is no longer promised.
 * {P}_set_manual(&st, u): manual mode with output u (clamped to the
 * limits); the operators keep receiving the signals (the integral 0) and
 * the bias tracks the output, so {P}_set_auto returns without a jump.
 * {P}_init(&st): rest, automatic mode. The state is a plain struct: copy it
 * to save and restore. One state per loop.
 *
{prec} *
{err} *
{_CTL_CAUTION.replace("P_init", P + "_init")}
 */
#ifndef {U}_H
#define {U}_H

#define {U}_LAST_INDEX {last}ULL
#define {U}_INPUT_MAX {in_max}
/* bits of {P}_status (the library's FC_CTRL_* values) */
#define {U}_LIMITED 1
#define {U}_PAST_HORIZON 2
#define {U}_MANUAL 4

typedef {R} {Rr};

{"".join(types)}
typedef struct {{
{chr(10).join(fields) if fields else "    int no_operators;"}
    {Rr} u_prev, dfilt, bias, u_manual;
    {Rr} terms[6];        /* P, I, filtered D, bias, unlimited sum, output */
    unsigned long long count;
    int have_prev, manual, limited;
}} {P}_state;

void {P}_init({P}_state *st);
int {P}_update({P}_state *st, {Rr} r, {Rr} y, {Rr} *u);
/* 0, or 2 (u not finite; nothing changed) */
int {P}_set_manual({P}_state *st, {Rr} u);
void {P}_set_auto({P}_state *st);
/* {U}_LIMITED | {U}_PAST_HORIZON | {U}_MANUAL */
int {P}_status(const {P}_state *st);

#endif /* {U}_H */
"""

    def clamp_out(v):
        code = v
        if has_hi:
            code = f"({v} > {U}_OUT_MAX ? {U}_OUT_MAX : {v})"
        if has_lo:
            code = f"({v} < {U}_OUT_MIN ? {U}_OUT_MIN : {code})"
        return code

    consts = [
        f"#define {U}_KP {lit(p['kp'])}",
        f"#define {U}_KI {lit(p['ki'])}",
        f"#define {U}_KD {lit(p['kd'])}",
        f"#define {U}_B {lit(p['setpoint_weight'])}",
        f"#define {U}_C {lit(p['derivative_weight'])}",
        f"#define {U}_STEP {lit(p['step'])}",
    ]
    if has_lo:
        consts.append(f"#define {U}_OUT_MIN {lit(lo)}")
    if has_hi:
        consts.append(f"#define {U}_OUT_MAX {lit(hi)}")
    if has_rate:
        consts.append(f"#define {U}_RATE {lit(p['rate_limit'])}")
    if p["derivative_filter"] > 0:
        consts.append(f"#define {U}_TF {lit(p['derivative_filter'])}")
    rate_code = ""
    if has_rate:
        rate_code = f"""\
    if (st->have_prev) {{
        const {Rr} d = {U}_RATE * {U}_STEP, lo = st->u_prev - d, hi = st->u_prev + d;
        u = u < lo ? lo : (u > hi ? hi : u);
        u = {clamp_out("u")};
    }}
"""
    hi_ = "i" in ops
    hd_ = "d" in ops
    filt = (
        f"    D = ({U}_TF * st->dfilt + {U}_STEP * D) / ({U}_TF + {U}_STEP);\n"
        if p["derivative_filter"] > 0
        else ""
    )
    aw = ""
    if hi_ and k["aw"]:
        aw = f"""\
        if (u != v && xi != {z}) {{
            const {Rr} push = {U}_KI * xi;
            if ((v > u && push > {z}) || (v < u && push < {z})) {{
                /* conditional integration: only the part of e that takes
                   the unlimited output to the limit (0 if it is there
                   without e); the integral is affine in the new sample */
                const {Rr} ve = v, ue = u, e0 = xi;
                xi = {z};
                iv = {P}_iop_out(&st->integral, xi, 0);
                I = {U}_KI * iv;
                v = P + I + D + bias;
                u = {P}_limit(st, v);
                if ((ve > ue && v < ue) || (ve < ue && v > ue)) {{
                    const {Rr} f = (ue - v) / (ve - v);
                    if (f > {z} && f < 1) {{
                        xi = e0 * f;
                        iv = {P}_iop_out(&st->integral, xi, 0);
                        I = {U}_KI * iv;
                        v = P + I + D + bias;
                        u = {P}_limit(st, v);
                    }}
                }}
            }}
        }}
"""
    ph = []
    if hi_:
        ph.append(f"st->integral.n > {U}_LAST_INDEX + 1")
    if hd_:
        ph.append(f"st->derivative.n > {U}_LAST_INDEX + 1")
    past = " || ".join(ph) if ph else "0"
    init_ops = "".join(
        f"    {P}_{key}op_init(&st->{field});\n"
        for key, field in (("i", "integral"), ("d", "derivative"))
        if key in ops
    )
    fin = "(X) - (X) == " + z
    reduce8 = (
        f"""\
static {Rr} {P}_reduce8(const {Rr} a[8])
{{
    {Rr} v0 = a[0] + a[4], v1 = a[1] + a[5];
    {Rr} v2 = a[2] + a[6], v3 = a[3] + a[7];
    return (v0 + v1) + (v2 + v3);
}}

"""
        if ops
        else ""
    )
    source = f"""\
/*
 * {P}.c -- generated by pyfracconv.export_controller_c; see {P}.h
 * (settings, accuracy, cautions). The arithmetic is the library's
 * controller (csrc/controller.c) and compressed engine
 * (csrc/stream_compressed.c) for one loop: the products of {U}_FMA are
 * the library's fma() calls, every other operation is the library's in
 * the library's order.
 */
#include "{P}.h"

#ifndef {U}_USE_FMA
#if defined({fast}) && (defined(__GNUC__) || defined(__clang__))
#define {U}_USE_FMA 1
#else
#define {U}_USE_FMA 0
#endif
#endif
#if {U}_USE_FMA
#define {U}_FMA(a, b, c) {fma_macro}((a), (b), (c))
#else
#define {U}_FMA(a, b, c) ((a) * (b) + (c))
#endif
#define {U}_FINITE(X) ({fin})

{chr(10).join(consts)}

{reduce8}{"".join(funcs)}
/* The output limits and the rate limit applied to v. */
static {Rr} {P}_limit(const {P}_state *st, {Rr} v)
{{
    {Rr} u = {clamp_out("v")};
{rate_code}    (void)st;
    return u;
}}

void {P}_init({P}_state *st)
{{
    unsigned i;
{init_ops}    st->u_prev = {z};
    st->dfilt = {z};
    st->bias = {z};
    st->u_manual = {z};
    for (i = 0; i < 6; i++) st->terms[i] = {z};
    st->count = 0;
    st->have_prev = 0;
    st->manual = 0;
    st->limited = 0;
}}

int {P}_update({P}_state *st, {Rr} r, {Rr} y, {Rr} *uout)
{{
    {Rr} e, ep, ed, P, D, I, v, u, bias, xi;
    {Rr} draw = {z}, iv = {z};
    int limited = 0;
    if (!{U}_FINITE(r) || !{U}_FINITE(y)) return 2;
    if (r > {U}_INPUT_MAX || r < -{U}_INPUT_MAX || y > {U}_INPUT_MAX || y < -{U}_INPUT_MAX)
        return 2;
    e = r - y;
    ep = {U}_B * r - y;
    ed = {U}_C * r - y;
    if (!{U}_FINITE(e) || !{U}_FINITE(ep) || !{U}_FINITE(ed)) return 3;
    P = {U}_KP * ep;
    xi = st->manual ? {z} : e;
    (void)xi;
{f"    draw = {P}_dop_out(&st->derivative, ed, 0);" + chr(10) if hd_ else ""}\
{f"    iv = {P}_iop_out(&st->integral, xi, 0);" + chr(10) if hi_ else ""}\
    D = {U}_KD * draw;
{filt}    I = {U}_KI * iv;
    bias = st->bias;
    if (st->manual) {{
        u = {clamp_out("st->u_manual")};
        bias = u - (P + I + D);
        v = u;
    }} else {{
        v = P + I + D + bias;
        u = {P}_limit(st, v);
{aw}        limited = u != v;
    }}
    if (!{U}_FINITE(P) || !{U}_FINITE(I) || !{U}_FINITE(D) || !{U}_FINITE(v)
        || !{U}_FINITE(bias) || !{U}_FINITE(u))
        return 3;
{f"    (void){P}_dop_out(&st->derivative, ed, 1);" + chr(10) if hd_ else ""}\
{f"    (void){P}_iop_out(&st->integral, xi, 1);" + chr(10) if hi_ else ""}\
    st->dfilt = D;
    st->bias = bias;
    st->u_prev = u;
    st->have_prev = 1;
    st->count++;
    st->limited = limited;
    st->terms[0] = P;
    st->terms[1] = I;
    st->terms[2] = D;
    st->terms[3] = bias;
    st->terms[4] = v;
    st->terms[5] = u;
    *uout = u;
    return 0;
}}

int {P}_set_manual({P}_state *st, {Rr} u)
{{
    if (!{U}_FINITE(u)) return 2;
    st->manual = 1;
    st->u_manual = u;
    return 0;
}}

void {P}_set_auto({P}_state *st)
{{
    st->manual = 0;
}}

int {P}_status(const {P}_state *st)
{{
    int s = 0;
    if (st->limited) s |= {U}_LIMITED;
    if ({past}) s |= {U}_PAST_HORIZON;
    if (st->manual) s |= {U}_MANUAL;
    return s;
}}
"""
    n = len(rt)
    tv = f"""\
/*
 * {P}_testvec.h -- generated by pyfracconv.export_controller_c: a test
 * vector for {P}.c. {n} samples of a closed loop (the library's controller
 * holding a first-order plant through setpoint steps; seed of the
 * records in the export call): setpoints {U}_TV_R, measurements
 * {U}_TV_Y and the library's double-precision outputs {U}_TV_U, all in
 * automatic mode from rest. Accept when |u - {U}_TV_U[n]| <= {U}_TV_REL *
 * {U}_TV_SCALE for every n ({U}_TV_SCALE: the run's action scale
 * max_n (|P| + |I| + |D| + |bias|); {U}_TV_REL: the stated bound of {P}.h).
 */
#ifndef {U}_TESTVEC_H
#define {U}_TESTVEC_H

#define {U}_TV_N {n}
#define {U}_TV_REL {float(stated)!r}
#define {U}_TV_SCALE {float(st)!r}

{_array(f"{P}_tv_r", "double", rt, False)}
{_array(f"{P}_tv_y", "double", yt, False)}
{_array(f"{P}_tv_u", "double", ut, False)}
#endif /* {U}_TESTVEC_H */
"""
    return header, source, tv
