/*
 * stream_timed.c -- the compressed stream with a time per sample
 * (fc_stream_create_timed, fc_stream_push_timed): the rules of the grid
 * engine (grid_soe.c) one sample at a time, on times that arrive with the
 * samples. Rules: RECTANGLE and TRAPEZOID (I^a, 0 < a < 2), L1 (Caputo,
 * 0 < a < 1). The stream is defined by a smallest step h_min and a horizon
 * stated in time: it promises, for every output whose time t_n satisfies
 * t_n - t_0 <= horizon,
 *     |y_n - y_n(exact)| <= (tol + (L + 64) eps) S_n,
 * the promise of fc_grid_apply on the same times (y_n(exact) the rule in
 * exact arithmetic with the exact weights of the grid, S_n the sum of the
 * absolute values of its terms). A push whose step t - t_prev is below
 * h_min (hence also a time not after the previous one) is refused with
 * FC_ERR_ARG; a push past the horizon with FC_ERR_HORIZON under
 * FC_HORIZON_REFUSE (FC_HORIZON_CONTINUE: it proceeds without the
 * promise). Every refusal leaves the stream as it was.
 *
 * METHOD (as grid_soe.c). Times are measured in units d2 = 2^k2 <= h_min
 * (exact scaling), R = horizon / d2; the kernel on [1, R] is the sum of
 * exponentials of fc__soe_power (soe_build.c), built once at creation and
 * rebuilt (and compared bit for bit) at load. Per push of (t, x): the step
 * h = t - t_prev, one coefficient evaluation per term (fc__gs_phi), then
 * per channel the decay of every term over h (S + Sc as an exact TwoSum
 * pair), the output sum_l w_l G_l + the exact last interval, and the
 * injection of the last interval. Work O(L) per sample and channel,
 * memory fixed at creation (2 L + 1 doubles per channel, 5 L shared).
 *
 * RANGE. Samples (L1: increments x_n - x_{n-1}) up to U = DBL_MAX / (4 G),
 * G = (sum_l w_l m_l + 2 c R^(+a)) max(1, d2^(+-a)) + 1 with
 * m_l = min(1/s_l, R) (L1: min(1 + 1/s_l, R + 1)) and c the local weight
 * factor, are accepted and never give inf or NaN within the horizon (the
 * history of term l is at most U m_l); larger ones are refused with
 * FC_ERR_RANGE. Past the horizon a block is first run on a copy of the
 * state and refused with FC_ERR_RANGE if an output or a state would not be
 * finite.
 *
 * ORDERS 1 < a < 2 (RECTANGLE, TRAPEZOID; ts_run_cum): the recursion of
 * grid_soe.c's gs_cum (the rule of order a - 1 on the running integral
 * X = I^1 x~, kept per channel as a double-double, the kernel of order
 * a - 1, phi3 for the trapezoid), step by step in the same order of
 * operations, so that the pushes give the bits of fc_grid_apply on the
 * same times when both use the same d2 and R (smallest step in the same
 * binade as min_step, horizon = t_{n-1} - t_0) and no sample is scaled
 * into or out of the subnormal range there. Same promise (S'_n <= S_n,
 * grid_soe.c). RANGE: |X| <= R U, a state <= m_l R U and an injection
 * <= R^2 U, so G = (R sum_l w_l m_l + R^2 + 2 (c0 + c) R^a) max(1, d2^a)
 * + 1, c0 = 1/Gamma(a). A save carries X (format version 2; version 1
 * blobs, every order up to 1 and L1, are unchanged); the loader checks X
 * as a double-double, 0 before the first interval and within the horizon
 * |X| <= U (t_prev - t_0)/d2 and |S_l| <= 2 U m_l R.
 */
#include <stdlib.h>
#include <string.h>
#include <math.h>
#include <float.h>
#include "internal.h"
#include "serial.h"

enum { TS_RECT = 0, TS_TRAP = 1, TS_L1 = 2 };

typedef struct {
    int rule, kind;
    int cum;                /* integral rule at 1 < a < 2: on X = I^1 x~ */
    double a, minstep, tol, horizon;
    size_t C, L;
    int k2;                 /* d2 = 2^k2 <= minstep */
    double R;               /* horizon / d2 (with a margin) */
    double Fm;              /* output factor d2^(+-a) = Fm 2^Fe */
    int Fe;
    double cloc, pexp;      /* local weight cloc h'^pexp */
    double c0, b;           /* cum: 1/Gamma(a), b = a - 1 */
    double U;               /* largest accepted |u| (RANGE) */
    double *s, *w;          /* L terms */
    double *E, *P, *Q, *W;  /* L: coefficients of the current step */
    double *S, *Sc;         /* C*L: the states */
    double *xprev;          /* C */
    double *X;              /* cum: 2C, X_n as a double-double (hi, lo) */
    double *bS, *bSc, *bx, *bX;  /* a copy for the dry run past the horizon */
    uint64_t n;
    double t0, tprev;
    int past;
} ts_engine;

static void ts_free(void *eng)
{
    ts_engine *ts = eng;
    if (!ts) return;
    free(ts->s); free(ts->w); free(ts->E); free(ts->S); free(ts->xprev);
    free(ts);
}

/* The checks of a definition (fc_stream_create_timed's, repeated here for
   a saved header, which is untrusted). */
int fc__timed_params_check(int rule, double order, double minstep,
                           size_t channels, double tol, double horizon)
{
    if (rule != FC_RULE_RECTANGLE && rule != FC_RULE_TRAPEZOID && rule != FC_RULE_L1)
        return FC_ERR_RULE;
    if (!(order > 0.0) || !(rule == FC_RULE_L1 ? order < 1.0 : order < 2.0))
        return FC_ERR_ORDER;
    if (!(minstep > 0.0) || !isfinite(minstep)) return FC_ERR_STEP;
    if (channels == 0) return FC_ERR_ARG;
    if (channels > FC__STREAM_CHANNELS_MAX) return FC_ERR_SIZE;
    if (!(tol >= FC__CS_TOL_MIN && tol <= FC__CS_TOL_MAX)) return FC_ERR_TOL;
    if (!(horizon >= minstep) || !isfinite(horizon)) return FC_ERR_TOL;
    int k2;
    (void)frexp(minstep, &k2);
    k2 -= 1;
    if (!(ldexp(horizon, -k2) <= FC__GRID_RATIO_MAX / 2)) return FC_ERR_TOL;
    return FC_OK;
}

static int ts_build(const fc__stream_def *d, ts_engine **out)
{
    ts_engine *ts = calloc(1, sizeof *ts);
    if (!ts) return FC_ERR_NOMEM;
    ts->rule = d->rule;
    ts->kind = d->rule == FC_RULE_RECTANGLE ? TS_RECT
             : d->rule == FC_RULE_TRAPEZOID ? TS_TRAP : TS_L1;
    ts->a = d->order;
    ts->minstep = d->step;
    ts->tol = d->tol;
    ts->horizon = d->horizon;
    ts->C = d->channels;
    ts->cum = ts->kind != TS_L1 && ts->a > 1.0;
    (void)frexp(ts->minstep, &ts->k2);
    ts->k2 -= 1;
    ts->R = ldexp(ts->horizon, -ts->k2) * (1.0 + 1e-12);
    const long double al = ts->a;
    const long double gm1 = ts->kind == TS_L1 ? -al : ts->cum ? al - 2.0L : al - 1.0L;
    fc__soe_pow soe;
    int st = fc__soe_power(gm1, ts->tol, ts->R, &soe);
    if (st != FC_OK) { free(ts); return st; }
    ts->L = soe.L;
    ts->s = soe.s;
    ts->w = soe.w;
    const size_t L = ts->L, C = ts->C;
    size_t CL, n1, n2;
    if (fc__mul_size(C, L, &CL) || fc__mul_size(CL, 4, &n1) ||
        fc__mul_size(C, 2, &n2) || fc__add_size(n1, n2, &n1) ||
        fc__mul_size(n1, sizeof(double), &n1)) {
        ts_free(ts);
        return FC_ERR_SIZE;
    }
    ts->E = malloc(4 * L * sizeof(double));
    ts->S = calloc(1, n1);          /* S, Sc, bS, bSc */
    ts->xprev = calloc(6 * C, sizeof(double));   /* xprev, bx, X, bX */
    if (!ts->E || !ts->S || !ts->xprev) { ts_free(ts); return FC_ERR_NOMEM; }
    ts->P = ts->E + L;
    ts->Q = ts->P + L;
    ts->W = ts->Q + L;
    ts->Sc = ts->S + CL;
    ts->bS = ts->Sc + CL;
    ts->bSc = ts->bS + CL;
    ts->bx = ts->xprev + C;
    ts->X = ts->bx + C;
    ts->bX = ts->X + 2 * C;
    int Fe;
    const long double Fl = exp2l((long double)ts->k2 * (ts->kind == TS_L1 ? -al : al));
    ts->Fm = (double)frexpl(Fl, &Fe);
    ts->Fe = Fe;
    ts->cloc = ts->kind == TS_RECT ? (double)(1.0L / tgammal(al + 1.0L))
             : ts->kind == TS_TRAP ? (double)(1.0L / tgammal(al + 2.0L))
             : (double)(1.0L / tgammal(2.0L - al));
    ts->pexp = ts->kind == TS_L1 ? -ts->a : ts->a;
    ts->c0 = (double)(1.0L / tgammal(al));
    ts->b = ts->a - 1.0;
    /* RANGE */
    double G = 0.0;
    for (size_t l = 0; l < L; l++) {
        double m;
        if (ts->kind == TS_L1) m = ts->s[l] > 0 ? 1.0 + 1.0 / ts->s[l] : ts->R + 1.0;
        else m = ts->s[l] > 0 ? 1.0 / ts->s[l] : ts->R;
        if (ts->kind == TS_L1 ? m > ts->R + 1.0 : m > ts->R) m = ts->kind == TS_L1 ? ts->R + 1.0 : ts->R;
        G += ts->w[l] * m;
    }
    if (ts->cum) {
        /* |X| <= R U, a state <= m_l R U, an injection <= R^2 U, the last
           interval <= (c0 + 2 cloc) R^a U */
        G = G * ts->R + ts->R * ts->R + 2.0 * ts->c0 * pow(ts->R, ts->a);
    }
    G += 2.0 * ts->cloc * (ts->kind == TS_L1 ? 1.0 : pow(ts->R, ts->a));
    G = G * fmax(1.0, ldexp(ts->Fm, ts->Fe)) + 1.0;
    ts->U = DBL_MAX / (4.0 * G);
    if (!(ts->U >= 1.0)) { ts_free(ts); return FC_ERR_RANGE; }
    *out = ts;
    return FC_OK;
}

static int ts_create(const fc__stream_def *d, void **eng)
{
    ts_engine *ts;
    int st = ts_build(d, &ts);
    if (st == FC_OK) *eng = ts;
    return st;
}

/* Run count steps (t, x) on the states S, Sc, xp (a copy or the stream's
   own); y may be NULL (dry run). Returns 1 if an output or a state is not
   finite. n, t0 and tprev are the stream's before the block. */
static int ts_run_cum(ts_engine *ts, double *S, double *Sc, double *xp, double *X,
                      uint64_t n, double tprev, const double *t, const double *x,
                      size_t count, double *y);

static int ts_run(ts_engine *ts, double *S, double *Sc, double *xp, double *X,
                  uint64_t n, double t0, double tprev,
                  const double *t, const double *x, size_t count, double *y)
{
    const size_t C = ts->C, L = ts->L;
    const double *sv = ts->s, *wv = ts->w;
    double *E = ts->E, *P = ts->P, *Q = ts->Q;
    const int kind = ts->kind;
    const double a = ts->a;
    int bad = 0;
    (void)t0;
    if (ts->cum) return ts_run_cum(ts, S, Sc, xp, X, n, tprev, t, x, count, y);
    for (size_t j = 0; j < count; j++) {
        const double *xj = x + j * C;
        double *yj = y ? y + j * C : NULL;
        if (n == 0) {
            for (size_t c = 0; c < C; c++) {
                xp[c] = xj[c];
                if (yj) yj[c] = 0.0;
            }
            tprev = t[j];
            n = 1;
            continue;
        }
        const double h = ldexp(t[j] - tprev, -ts->k2);
        const double loc = ts->cloc * pow(h, ts->pexp);
        for (size_t l = 0; l < L; l++) {
            double em1, p1, f2;
            fc__gs_phi(sv[l] * h, &em1, &p1, &f2);
            E[l] = em1;
            if (kind == TS_RECT) P[l] = h * p1;
            else if (kind == TS_L1) P[l] = p1;
            else { P[l] = h * (p1 - f2); Q[l] = h * f2; }
        }
        for (size_t c = 0; c < C; c++) {
            double *Ss = S + c * L, *Scs = Sc + c * L;
            const double x0 = xp[c], x1 = xj[c];
            double u0, lv;
            if (kind == TS_RECT) { u0 = x0; lv = loc * x0; }
            else if (kind == TS_L1) { u0 = x1 - x0; lv = loc * u0; }
            else { u0 = x0; lv = loc * (a * x0 + x1); }
            double d0 = 0.0, d1 = 0.0;
            size_t l = 0;
            for (; l + 2 <= L; l += 2) {
                double s0 = Ss[l], s1 = Ss[l + 1];
                double t0_ = Scs[l] + s0 * E[l], t1_ = Scs[l + 1] + s1 * E[l + 1];
                d0 += wv[l] * (s0 + t0_);
                d1 += wv[l + 1] * (s1 + t1_);
                double i0 = P[l] * u0, i1 = P[l + 1] * u0;
                if (kind == TS_TRAP) { i0 += Q[l] * x1; i1 += Q[l + 1] * x1; }
                double u_0 = t0_ + i0, u_1 = t1_ + i1;
                double n0 = s0 + u_0, n1 = s1 + u_1;
                double b0 = n0 - s0, b1 = n1 - s1;
                Scs[l] = fc__ftz((s0 - (n0 - b0)) + (u_0 - b0));
                Scs[l + 1] = fc__ftz((s1 - (n1 - b1)) + (u_1 - b1));
                Ss[l] = fc__ftz(n0);
                Ss[l + 1] = fc__ftz(n1);
            }
            for (; l < L; l++) {
                double s0 = Ss[l], tt = Scs[l] + s0 * E[l];
                d0 += wv[l] * (s0 + tt);
                double ii = P[l] * u0;
                if (kind == TS_TRAP) ii += Q[l] * x1;
                double uu = tt + ii, s1 = s0 + uu, bb = s1 - s0;
                Scs[l] = fc__ftz((s0 - (s1 - bb)) + (uu - bb));
                Ss[l] = fc__ftz(s1);
            }
            double out = ldexp(((d0 + d1) + lv) * ts->Fm, ts->Fe);
            if (!isfinite(out)) bad = 1;
            if (yj) yj[c] = out;
            xp[c] = x1;
        }
        if (!y) {
            for (size_t i = 0; i < C * L; i++)
                if (!isfinite(S[i]) || !isfinite(Sc[i])) bad = 1;
        }
        tprev = t[j];
        n++;
    }
    return bad;
}

/* Double-double X += p + pe (as grid_soe.c). */
static inline void ts_dd_add(double *Xh, double *Xl, double p, double pe)
{
    double s = *Xh + p, bb = s - *Xh;
    double err = ((*Xh - (s - bb)) + (p - bb)) + (*Xl + pe);
    double hi = s + err;
    *Xl = err - (hi - s);
    *Xh = hi;
}

/* ts_run for the integral rules at 1 < a < 2: the recursion of gs_cum
   (grid_soe.c) one step at a time, in the same order of operations. */
static int ts_run_cum(ts_engine *ts, double *S, double *Sc, double *xp, double *X,
                      uint64_t n, double tprev, const double *t, const double *x,
                      size_t count, double *y)
{
    const size_t C = ts->C, L = ts->L;
    const double *sv = ts->s, *wv = ts->w;
    double *E = ts->E, *P = ts->P, *Q = ts->Q, *W = ts->W;
    const int trap = ts->kind == TS_TRAP;
    const double a = ts->a, c0 = ts->c0, c1 = ts->cloc;
    int bad = 0;
    for (size_t j = 0; j < count; j++) {
        const double *xj = x + j * C;
        double *yj = y ? y + j * C : NULL;
        if (n == 0) {
            for (size_t c = 0; c < C; c++) {
                xp[c] = xj[c];
                X[2 * c] = X[2 * c + 1] = 0.0;
                if (yj) yj[c] = 0.0;
            }
            tprev = t[j];
            n = 1;
            continue;
        }
        const double h = ldexp(t[j] - tprev, -ts->k2);
        const double hb = pow(h, ts->b), ha = hb * h, h2 = h * h;
        if (!trap) {
            for (size_t l = 0; l < L; l++) {
                double em1, p1, f2;
                fc__gs_phi(sv[l] * h, &em1, &p1, &f2);
                E[l] = em1;
                P[l] = h * p1;
                Q[l] = h2 * f2;
            }
        } else {
            for (size_t l = 0; l < L; l++) {
                double em1, p1, f2, f3;
                fc__gs_phi4(sv[l] * h, &em1, &p1, &f2, &f3);
                E[l] = em1;
                P[l] = h * p1;
                Q[l] = h2 * (f2 - f3);
                W[l] = h2 * f3;
            }
        }
        for (size_t c = 0; c < C; c++) {
            double *Ss = S + c * L, *Scs = Sc + c * L;
            const double x0 = xp[c], x1 = xj[c];
            double Xh = X[2 * c], Xl = X[2 * c + 1];
            double d0 = 0.0, d1 = 0.0, lv, p, pe;
            if (!trap) {
                lv = c0 * hb * Xh + c1 * ha * x0;
                for (size_t l = 0; l < L; l++) {
                    double s0 = Ss[l], tt = Scs[l] + s0 * E[l];
                    if (l & 1) d1 += wv[l] * (s0 + tt); else d0 += wv[l] * (s0 + tt);
                    double uu = tt + (P[l] * Xh + Q[l] * x0);
                    double s1 = s0 + uu, bb = s1 - s0;
                    Scs[l] = fc__ftz((s0 - (s1 - bb)) + (uu - bb));
                    Ss[l] = fc__ftz(s1);
                }
                p = h * x0;
                pe = fma(h, x0, -p);
            } else {
                lv = c0 * hb * Xh + c1 * ha * (a * x0 + x1);
                for (size_t l = 0; l < L; l++) {
                    double s0 = Ss[l], tt = Scs[l] + s0 * E[l];
                    if (l & 1) d1 += wv[l] * (s0 + tt); else d0 += wv[l] * (s0 + tt);
                    double uu = tt + ((P[l] * Xh + Q[l] * x0) + W[l] * x1);
                    double s1 = s0 + uu, bb = s1 - s0;
                    Scs[l] = fc__ftz((s0 - (s1 - bb)) + (uu - bb));
                    Ss[l] = fc__ftz(s1);
                }
                double sm = x0 + x1, bv = sm - x0;
                double se = (x0 - (sm - bv)) + (x1 - bv);
                p = h * sm;
                pe = fma(h, sm, -p) + h * se;
                p *= 0.5;
                pe *= 0.5;
            }
            double out = ldexp(((d0 + d1) + lv) * ts->Fm, ts->Fe);
            if (!isfinite(out)) bad = 1;
            if (yj) yj[c] = out;
            ts_dd_add(&Xh, &Xl, p, pe);
            if (!isfinite(Xh) || !isfinite(Xl)) bad = 1;
            X[2 * c] = Xh;
            X[2 * c + 1] = Xl;
            xp[c] = x1;
        }
        if (!y) {
            for (size_t i = 0; i < C * L; i++)
                if (!isfinite(S[i]) || !isfinite(Sc[i])) bad = 1;
        }
        tprev = t[j];
        n++;
    }
    return bad;
}

/* The checks of a block of pushes (every time and sample, before anything
   changes); *past = 1 if an output would be past the horizon (allowed). */
static int ts_check(const ts_engine *ts, const double *t, const double *x,
                    size_t count, int refuse_past, int *past_out)
{
    const size_t C = ts->C;
    if ((uint64_t)count >= FC_INDEX_LIMIT - ts->n) return FC_ERR_SIZE;
    double t0 = ts->n ? ts->t0 : t[0], tp = ts->tprev;
    uint64_t n = ts->n;
    int past = 0;
    for (size_t j = 0; j < count; j++) {
        if (n > 0) {
            double h = t[j] - tp;
            if (!(h >= ts->minstep)) return FC_ERR_ARG;
        }
        if (t[j] - t0 > ts->horizon) {
            if (refuse_past) return FC_ERR_HORIZON;
            past = 1;
        }
        for (size_t c = 0; c < C; c++) {
            double xv = x[j * C + c];
            double u = ts->kind == TS_L1 ? (n > 0 ? xv - (j ? x[(j - 1) * C + c] : ts->xprev[c]) : 0.0) : xv;
            if (!(fabs(u) <= ts->U) || !(fabs(xv) <= DBL_MAX / 4)) return FC_ERR_RANGE;
        }
        tp = t[j];
        n++;
    }
    *past_out = past;
    return FC_OK;
}

static int ts_push_timed(void *eng, const double *t, const double *x,
                         size_t count, double *y, int refuse_past)
{
    ts_engine *ts = eng;
    const size_t C = ts->C;
    double t0 = ts->n ? ts->t0 : t[0];
    int past, st = ts_check(ts, t, x, count, refuse_past, &past);
    if (st != FC_OK) return st;
    if (past) {
        const size_t CL = C * ts->L;
        memcpy(ts->bS, ts->S, CL * sizeof(double));
        memcpy(ts->bSc, ts->Sc, CL * sizeof(double));
        memcpy(ts->bx, ts->xprev, C * sizeof(double));
        memcpy(ts->bX, ts->X, 2 * C * sizeof(double));
        if (ts_run(ts, ts->bS, ts->bSc, ts->bx, ts->bX, ts->n, t0, ts->tprev, t, x, count, NULL))
            return FC_ERR_RANGE;
    }
    (void)ts_run(ts, ts->S, ts->Sc, ts->xprev, ts->X, ts->n, t0, ts->tprev, t, x, count, y);
    if (ts->n == 0) ts->t0 = t[0];
    ts->tprev = t[count - 1];
    ts->n += count;
    if (past) ts->past = 1;
    return FC_OK;
}

/* What pushing (t, x) would return, into y, the state unchanged: the
   push's checks, then the same recursion (ts_run) on a copy of the state,
   so that the outputs are those of the push bit for bit. */
static int ts_preview_timed(void *eng, double t, const double *x, double *y,
                            int refuse_past)
{
    ts_engine *ts = eng;
    const size_t C = ts->C, CL = C * ts->L;
    int past, st = ts_check(ts, &t, x, 1, refuse_past, &past);
    if (st != FC_OK) return st;
    memcpy(ts->bS, ts->S, CL * sizeof(double));
    memcpy(ts->bSc, ts->Sc, CL * sizeof(double));
    memcpy(ts->bx, ts->xprev, C * sizeof(double));
    memcpy(ts->bX, ts->X, 2 * C * sizeof(double));
    double t0 = ts->n ? ts->t0 : t;
    if (ts_run(ts, ts->bS, ts->bSc, ts->bx, ts->bX, ts->n, t0, ts->tprev, &t, x, 1, y))
        return FC_ERR_RANGE; /* past the horizon only (RANGE) */
    return FC_OK;
}

/* The untimed pushes, previews and histories need a time: refused. */
static int ts_push_block(void *eng, const double *x, size_t count, double *y,
                         size_t threads)
{
    (void)eng; (void)x; (void)count; (void)y; (void)threads;
    return FC_ERR_ARG;
}
static int ts_push1(void *eng, double x, double *y)
{
    (void)eng; (void)x; (void)y;
    return FC_ERR_ARG;
}
static int ts_preview(void *eng, const double *x, double *y)
{
    (void)eng; (void)x; (void)y;
    return FC_ERR_ARG;
}
static int ts_history(void *eng, double *h)
{
    (void)eng; (void)h;
    return FC_ERR_ARG;
}

static void ts_reset(void *eng)
{
    ts_engine *ts = eng;
    memset(ts->S, 0, 2 * ts->C * ts->L * sizeof(double));
    memset(ts->xprev, 0, ts->C * sizeof(double));
    memset(ts->X, 0, 2 * ts->C * sizeof(double));
    ts->n = 0;
    ts->t0 = ts->tprev = 0.0;
    ts->past = 0;
}

static uint64_t ts_count(const void *eng) { return ((const ts_engine *)eng)->n; }
static uint64_t ts_remaining(const void *eng)
{
    return FC_INDEX_LIMIT - 1 - ((const ts_engine *)eng)->n;
}
static size_t ts_nbytes(const void *eng)
{
    const ts_engine *ts = eng;
    return sizeof *ts + (6 * ts->L + 4 * ts->C * ts->L + 6 * ts->C) * sizeof(double);
}
static size_t ts_terms(const void *eng) { return ((const ts_engine *)eng)->L; }
static int ts_past(const void *eng) { return ((const ts_engine *)eng)->past; }

/* ------------------------------------------------------------ save/load */

/*
 * Payload (after the common header of stream.c, whose kind is
 * FC__KIND_TIMED and whose step is the smallest step):
 *   0  magic "FCTS", u32 version (1; 2 for the integral rules at
 *      1 < a < 2), u32 rule, u32 0
 *  16  u64 channels C, u64 terms L, u64 count n
 *  40  f64 order, minstep, tol, horizon, t0, tprev
 *  88  u32 past, u32 0
 *  96  L f64 s, L f64 w
 *      per channel: f64 xprev, L f64 S, L f64 Sc
 *                   (version 2 only: f64 X hi, X lo, the running integral)
 *      u64 FNV-1a 64 of everything before it
 * Version 1 blobs (0 < a <= 1, L1) are unchanged.
 */
#define TS_HDR 96
#define TS_FMT_VERSION 1u
#define TS_FMT_VERSION_CUM 2u
static const unsigned char ts_magic[4] = {'F', 'C', 'T', 'S'};

static size_t ts_size_for(uint64_t C, uint64_t L, int cum)
{
    size_t per, tot, v;
    if (C > SIZE_MAX || L > SIZE_MAX) return 0;
    if (fc__mul_size((size_t)L, 2, &per) || fc__add_size(per, cum ? 3 : 1, &per) ||
        fc__mul_size(per, (size_t)C, &tot) || fc__mul_size((size_t)L, 2, &v) ||
        fc__add_size(tot, v, &tot) || fc__mul_size(tot, 8, &tot) ||
        fc__add_size(tot, TS_HDR + 8, &tot))
        return 0;
    return tot;
}

static int ts_save_size(const void *eng, size_t *size)
{
    const ts_engine *ts = eng;
    size_t s = ts_size_for(ts->C, ts->L, ts->cum);
    if (!s) return FC_ERR_SIZE;
    *size = s;
    return FC_OK;
}

static int ts_save(const void *eng, unsigned char *buf, size_t size)
{
    const ts_engine *ts = eng;
    const size_t L = ts->L;
    unsigned char *p = buf;
    memcpy(p, ts_magic, 4);
    fc__put32(p + 4, ts->cum ? TS_FMT_VERSION_CUM : TS_FMT_VERSION);
    fc__put32(p + 8, (uint32_t)ts->rule);
    fc__put32(p + 12, 0);
    fc__put64(p + 16, ts->C);
    fc__put64(p + 24, L);
    fc__put64(p + 32, ts->n);
    fc__putd(p + 40, ts->a);
    fc__putd(p + 48, ts->minstep);
    fc__putd(p + 56, ts->tol);
    fc__putd(p + 64, ts->horizon);
    fc__putd(p + 72, ts->t0);
    fc__putd(p + 80, ts->tprev);
    fc__put32(p + 88, (uint32_t)ts->past);
    fc__put32(p + 92, 0);
    p += TS_HDR;
    for (size_t l = 0; l < L; l++, p += 8) fc__putd(p, ts->s[l]);
    for (size_t l = 0; l < L; l++, p += 8) fc__putd(p, ts->w[l]);
    for (size_t c = 0; c < ts->C; c++) {
        fc__putd(p, ts->xprev[c]);
        p += 8;
        for (size_t l = 0; l < L; l++, p += 8) fc__putd(p, ts->S[c * L + l]);
        for (size_t l = 0; l < L; l++, p += 8) fc__putd(p, ts->Sc[c * L + l]);
        if (ts->cum) {
            fc__putd(p, ts->X[2 * c]);
            fc__putd(p + 8, ts->X[2 * c + 1]);
            p += 16;
        }
    }
    fc__put64(p, fc__fnv1a(FC__FNV_OFFSET, buf, size - 8));
    return FC_OK;
}

static int ts_same(double a, double b) { return memcmp(&a, &b, sizeof a) == 0; }

/* (hi, lo) as an exact TwoSum leaves it: hi + lo rounds to hi. */
static int ts_dd_ok(double hi, double lo)
{
    return hi + lo == hi && (hi != 0.0 || lo == 0.0);
}

static int ts_load(const fc__stream_def *d, const unsigned char *buf,
                   size_t size, void **eng)
{
    fc__rd r;
    if (d->kind != FC__KIND_TIMED) return FC_ERR_FORMAT;
    fc__rd_init(&r, buf, size);
    const unsigned char *magic = fc__rd_bytes(&r, 4);
    uint32_t version = fc__rd_u32(&r), rule = fc__rd_u32(&r), z0 = fc__rd_u32(&r);
    uint64_t C = fc__rd_u64(&r), L = fc__rd_u64(&r), n = fc__rd_u64(&r);
    double order = fc__rd_d(&r), minstep = fc__rd_d(&r), tol = fc__rd_d(&r);
    double horizon = fc__rd_d(&r), t0 = fc__rd_d(&r), tprev = fc__rd_d(&r);
    uint32_t past = fc__rd_u32(&r), z1 = fc__rd_u32(&r);
    if (r.bad || memcmp(magic, ts_magic, 4) != 0 ||
        (version != TS_FMT_VERSION && version != TS_FMT_VERSION_CUM) ||
        z0 != 0 || z1 != 0 || past > 1)
        return FC_ERR_FORMAT;
    /* version 2 exactly for the integral rules at 1 < a < 2 */
    const int cum = rule != (uint32_t)FC_RULE_L1 && order > 1.0;
    if ((version == TS_FMT_VERSION_CUM) != cum) return FC_ERR_FORMAT;
    if (C == 0 || L == 0 || L > 4096) return FC_ERR_FORMAT;
    size_t need = ts_size_for(C, L, cum);
    if (need == 0 || need != size) return FC_ERR_FORMAT;
    if (fc__get64(buf + size - 8) != fc__fnv1a(FC__FNV_OFFSET, buf, size - 8))
        return FC_ERR_FORMAT;
    if ((int)rule != d->rule || C != (uint64_t)d->channels ||
        !ts_same(order, d->order) || !ts_same(minstep, d->step) ||
        !ts_same(tol, d->tol) || !ts_same(horizon, d->horizon))
        return FC_ERR_FORMAT;
    if (fc__timed_params_check((int)rule, order, minstep, (size_t)C, tol, horizon) != FC_OK)
        return FC_ERR_FORMAT;
    if (n >= FC_INDEX_LIMIT || !isfinite(t0) || !isfinite(tprev)) return FC_ERR_FORMAT;
    ts_engine *ts;
    int st = ts_build(d, &ts);
    if (st != FC_OK) return st == FC_ERR_NOMEM ? st : FC_ERR_FORMAT;
    int bad = ts->L != L;
    for (size_t l = 0; !bad && l < L; l++) if (!ts_same(ts->s[l], fc__rd_d(&r))) bad = 1;
    for (size_t l = 0; !bad && l < L; l++) if (!ts_same(ts->w[l], fc__rd_d(&r))) bad = 1;
    for (size_t c = 0; !bad && c < C; c++) {
        ts->xprev[c] = fc__rd_d(&r);
        for (size_t l = 0; l < L; l++) ts->S[c * L + l] = fc__rd_d(&r);
        for (size_t l = 0; l < L; l++) ts->Sc[c * L + l] = fc__rd_d(&r);
        if (cum) {
            ts->X[2 * c] = fc__rd_d(&r);
            ts->X[2 * c + 1] = fc__rd_d(&r);
        }
    }
    /* a state that pushes could have produced */
    if (!bad && !r.bad) {
        const double span = tprev - t0;
        if (n == 0) {
            bad = !ts_same(t0, 0.0) || !ts_same(tprev, 0.0) || past;
        } else if (n == 1) {
            bad = !ts_same(t0, tprev) || past;
        } else {
            bad = !(span >= minstep) || !isfinite(span) ||
                  !(span >= (double)(n - 1) * minstep * (1.0 - 1e-9)) ||
                  (int)past != (span > horizon);
        }
        for (size_t i = 0; !bad && i < (size_t)C * L; i++) {
            double hi = ts->S[i], lo = ts->Sc[i];
            if (!isfinite(hi) || !isfinite(lo) || !ts_dd_ok(hi, lo)) bad = 1;
            if (n <= 1 && (!ts_same(hi, 0.0) || !ts_same(lo, 0.0))) bad = 1;
        }
        for (size_t c = 0; !bad && c < C; c++) {
            double xv = ts->xprev[c];
            if (!isfinite(xv) || (n == 0 && !ts_same(xv, 0.0)) ||
                (!past && ts->kind != TS_L1 && !(fabs(xv) <= ts->U)))
                bad = 1;
        }
        /* the running integral: a double-double, 0 before the first
           interval, within the horizon |X| <= U (tprev - t0) / d2 and
           every state |S_l| <= U m_l R (the RANGE bounds of ts_build) */
        for (size_t c = 0; !bad && cum && c < C; c++) {
            double hi = ts->X[2 * c], lo = ts->X[2 * c + 1];
            if (!isfinite(hi) || !isfinite(lo) || !ts_dd_ok(hi, lo)) bad = 1;
            else if (n <= 1 && (!ts_same(hi, 0.0) || !ts_same(lo, 0.0))) bad = 1;
            else if (!past && !(fabs(hi) <= ts->U * ldexp(span, -ts->k2) * (1.0 + 1e-9))) bad = 1;
            for (size_t l = 0; !bad && !past && l < L; l++) {
                double m = ts->s[l] > 0 ? 1.0 / ts->s[l] : ts->R;
                if (m > ts->R) m = ts->R;
                if (!(fabs(ts->S[c * L + l]) <= 2.0 * ts->U * m * ts->R)) bad = 1;
            }
        }
    }
    if (bad || r.bad) {
        ts_free(ts);
        return FC_ERR_FORMAT;
    }
    ts->n = n;
    ts->t0 = t0;
    ts->tprev = tprev;
    ts->past = (int)past;
    *eng = ts;
    return FC_OK;
}

const fc__stream_ops fc__timed_ops = {
    .has_horizon = 0,       /* a horizon in time: the engine checks it */
    .create = ts_create,
    .load = ts_load,
    .free = ts_free,
    .push_block = ts_push_block,
    .push1 = ts_push1,
    .preview = ts_preview,
    .history = ts_history,
    .reset = ts_reset,
    .reserve = NULL,        /* memory is fixed at creation */
    .count = ts_count,
    .remaining = ts_remaining,
    .nbytes = ts_nbytes,
    .terms = ts_terms,
    .save_size = ts_save_size,
    .save = ts_save,
    .push_timed = ts_push_timed,
    .preview_timed = ts_preview_timed,
    .past = ts_past,
};
