/*
 * grid_soe.c -- the fast engine of the rules on any strictly increasing
 * grid t_0 < t_1 < ... < t_{n-1} (fc_grid_apply): the product rectangle
 * and trapezoid rules for I^a (0 < a < 2) and the L1 scheme for the
 * Caputo derivative (0 < a < 1), in O(n L) work for L exponential terms.
 *
 * The rules (pyfracconv/grid.py gives the weights and the direct engine):
 * with the kernel k(tau) = tau^(a-1)/Gamma(a) (integrals) or
 * tau^(-a)/Gamma(1-a) (L1), interval j = [t_j, t_{j+1}], h_j = t_{j+1} - t_j,
 *   rectangle  y_n = sum_{j<n} x_j int_j k(t_n - s) ds,
 *   trapezoid  y_n = sum_{j<n} int_j k(t_n - s) (x_j (t_{j+1}-s) + x_{j+1} (s-t_j)) / h_j ds,
 *   L1         y_n = sum_{j<n} (x_{j+1} - x_j) / h_j int_j k(t_n - s) ds,
 * y_0 = 0 (the product rules of Diethelm, Ford and Freed 2002 and the L1
 * scheme on a non-uniform mesh, Stynes, O'Riordan and Gracia 2017).
 *
 * METHOD. Times are measured in units of d2 = 2^floor(log2 h_min) (an
 * exact scaling), so every scaled step is >= 1 and the span is
 * R = (t_{n-1} - t_0) / d2. The last interval j = n-1 is computed exactly
 * (closed forms: h^a/Gamma(a+1) x_{n-1}; h^a/Gamma(a+2) (a x_{n-1} + x_n);
 * h^-a/Gamma(2-a) (x_n - x_{n-1})). On every earlier interval
 * t_n - s >= h_{n-1} >= 1 and <= R, where the kernel is replaced by its
 * sum of exponentials sum_l w_l e^(-s_l tau) (soe_build.c, fc__soe_power,
 * relative error <= 0.6 tol + 16 eps on [1, R], checked at creation). Each
 * term is a one-pole recursion advanced over any step exactly:
 *     G_l <- e^(-z) G_l + (injection of interval j),   z = s_l h_j,
 * with the injections h phi1(z) x_j (rectangle), h (phi1 - phi2)(z) x_j
 * + h phi2(z) x_{j+1} (trapezoid: phi2(z) = int_0^1 e^(-z v) (1-v) dv)
 * and phi1(z) (x_{j+1} - x_j) (L1), phi1(z) = (1 - e^-z)/z; these are the
 * exact integrals of e^(-s_l (t_{j+1} - s)) against the interval's
 * interpolant. phi1, phi2 and e^(-z) - 1 come from a Taylor series
 * without cancellation for z < 1 (phi2 = sum (-z)^i/(i+2)!, phi1 = 1 - z
 * phi2) and from expm1 otherwise.
 *
 * PROMISE (componentwise). Every kernel value is approximated with
 * relative error <= tol and every weight is a positive integral of the
 * kernel, so for every n
 *     |y_n - y_n(direct)| <= (tol + (L + 64) eps) S_n,
 *     S_n = sum of |terms| (sum_k |w_{n,k} x_k|; L1: sum_k |c_{n,k} (x_{k+1} - x_k)|),
 * y_n(direct) the rule in exact arithmetic with the exact weights, L the
 * number of terms, eps = 2^-52. Rounding: each state is an unevaluated sum
 * S + Sc updated by an exact TwoSum (Knuth 1997), and the decay is applied
 * as G + G (e^-z - 1), so that the rounding of a term's history does not
 * grow with the number of steps but with sum_j s_l h_j over the span where
 * the term still matters (a few tens); the final sum of L terms adds at
 * most L eps S_n. Signals are scaled by a power of two each before the
 * recursion (the largest |x| to just below 2^target, as large as the
 * bounds of the states allow, so that the small samples of a signal with
 * large ones, and their products with small e^-z - 1, stay normal
 * numbers), the time scale d2^(+-a) applied last as a mantissa and a
 * power of two, so large samples (near 1e300) and extreme times neither
 * overflow nor lose digits on the way; FC_ERR_RANGE exactly when an output
 * is beyond the double range. Outputs in or near the subnormal range get
 * an absolute error instead; states below DBL_MIN are set to zero
 * (fc__ftz), so a signal that falls silent does not slow the engine down
 * (subnormal arithmetic is many times slower).
 *
 * ORDERS 1 < a < 2 (rectangle, trapezoid; gs_cum). The rule at order a
 * is I^a applied to the interpolant x~ of the samples (piecewise constant
 * x_j on interval j, or piecewise linear), so y_n = (I^(a-1) X)(t_n) with
 * X = I^1 x~ (X(t_0) = 0), and the kernel k_b(tau) = tau^(b-1)/Gamma(b),
 * b = a - 1 in (0, 1), is completely monotone: fc__soe_power builds its
 * sum of exponentials (gm1 = a - 2). On interval j, with v = (t_{j+1} -
 * s)/h_j and X_j the nodal values,
 *     X(s) = X_j + h_j x_j (1 - v)                              (rectangle),
 *     X(s) = X_j + h_j x_j (1 - v) + h_j (x_{j+1} - x_j) (1 - v)^2 / 2  (trapezoid),
 * X_{j+1} = X_j + h_j x_j or X_j + h_j (x_j + x_{j+1}) / 2, carried as a
 * double-double (exact product by fma, TwoSum), so that its rounding does
 * not grow with n. The injection of interval j into term l is the exact
 * integral of e^(-s_l (t_{j+1} - s)) X(s):
 *     h phi1 X_j + h^2 phi2 x_j                                 (rectangle),
 *     h phi1 X_j + h^2 (phi2 - phi3) x_j + h^2 phi3 x_{j+1}     (trapezoid),
 * phi3(z) = int_0^1 e^(-z v) (1 - v)^2/2 dv (fc__gs_phi4: below z = 1
 * one series for phi3 and from it phi2 = 1/2 - z phi3, phi1 = 1 - z phi2,
 * e^-z - 1 = -z phi1; above, fc__gs_phi and phi3 by its series below
 * z = 2, (1/2 - phi2)/z above; phi2 - phi3 = int e^(-z v) (1 - v^2)/2 dv
 * >= phi2/2, no cancellation). The last interval is exact:
 *     h^(a-1) X_{n-1} / Gamma(a) + h^a x_{n-1} / Gamma(a+1)     (rectangle),
 *     h^(a-1) X_{n-1} / Gamma(a) + h^a (a x_{n-1} + x_n) / Gamma(a+2),
 * (the rule at order a on that interval plus the history X_{n-1} held
 * constant). a = 1 exactly stays on the path above (g = 1, one term).
 * PROMISE at 1 < a < 2: the same bound
 *     |y_n - y_n(direct)| <= (tol + (L + 64) eps) S_n,  S_n = sum_k |w_{n,k} x_k|,
 * with the constant c = 1 in S'_n <= c S_n. Derivation: with xi the
 * interpolant of |x_k| (of the same kind) and Xi = I^1 xi, |X(s)| <= Xi(s)
 * (|x~| <= xi, convexity of |.|); every coefficient of the injections and
 * of the last interval is positive, so the sum of the absolute values of
 * the terms of the X form, S'_n, is at most int k_b(t_n - s) Xi(s) ds =
 * (I^a xi)(t_n) = sum_k w_{n,k} |x_k| = S_n (the weights w_{n,k} > 0 are
 * the integrals of the interpolation basis against k_a). The kernel error
 * (relative <= tol on t_n - s >= 1) then adds at most tol S'_n <= tol S_n,
 * and the rounding of the states as above at most (L + 64) eps S'_n; X_j
 * enters rounded to double once (eps/2 |X_j|, within S'_n) and its
 * double-double sum errs by at most about 2 n eps^2 sum h_k |x_k|.
 * RANGE at 1 < a < 2: for max |x| <= 1 in scaled units, |X| <= R, every
 * state and injection <= R^2 and every output <= R^a / Gamma(a+1); the
 * signals are scaled by powers of two below 2^(1000 - 2 - 2 log2 R) (R <=
 * 2^100), so nothing overflows on the way and FC_ERR_RANGE comes exactly
 * when an output is beyond the double range (computed into a copy first).
 *
 * Work: per interval and term one coefficient evaluation (shared by the
 * signals) and per signal about 12 flops; memory O(L (256 + nsig)).
 */
#include <stdlib.h>
#include <string.h>
#include <math.h>
#include <float.h>
#include "internal.h"

#define GS_BLOCK 256            /* intervals per block of coefficients */

static int gs_overlaps(const double *a, size_t na, const double *b, size_t nb)
{
    uintptr_t pa = (uintptr_t)a, pb = (uintptr_t)b;
    return pa < pb + nb * sizeof(double) && pb < pa + na * sizeof(double);
}

enum { GS_RECT = 0, GS_TRAP = 1, GS_L1 = 2 };

/* Double-double X += p + pe (p + pe: an exact or nearly exact increment);
   TwoSum (Knuth 1997) then a fast renormalisation. */
static inline void gs_dd_add(double *Xh, double *Xl, double p, double pe)
{
    double s = *Xh + p, bb = s - *Xh;
    double err = ((*Xh - (s - bb)) + (p - bb)) + (*Xl + pe);
    double hi = s + err;
    *Xl = err - (hi - s);
    *Xh = hi;
}

/* The integral rules at 1 < a < 2 on the running integral X (see the
   header comment, "ORDERS 1 < a < 2"). Arguments checked by the caller;
   k2 and R as there. */
static int gs_cum(int kind, double a, const double *t, const double *x,
                  size_t nsig, size_t n, double tol, double *y, size_t *terms,
                  int k2, double R)
{
    const size_t total = nsig * n;
    const long double al = a;
    const double b = a - 1.0;                   /* exact for 1 < a < 2 */
    fc__soe_pow soe;
    int st = fc__soe_power(al - 2.0L, tol, R < 1.0 ? 1.0 : R, &soe);
    if (st != FC_OK) return st;
    const size_t L = soe.L;
    int Fe;
    const long double Fl = exp2l((long double)k2 * al);
    const double Fm = (double)frexpl(Fl, &Fe);
    /* last interval: c0 h^b X_{n-1} + c1 h^a (x_{n-1} | a x_{n-1} + x_n) */
    const double c0 = (double)(1.0L / tgammal(al));
    const double c1 = kind == GS_RECT ? (double)(1.0L / tgammal(al + 1.0L))
                                      : (double)(1.0L / tgammal(al + 2.0L));
    /* log2 of bounds for max |x| <= 1 (scaled steps >= 1, span R): an
       output <= R^a / Gamma(a+1); |X| <= R; a state <= R^2; an injection
       <= h^2 <= R^2 */
    const double lout = 1.0 + a * log2(R) - log2((double)tgammal(al + 1.0L));
    const double lstate = 2.0 + 2.0 * log2(R);
    const double lmax = lout > lstate ? lout : lstate;
    const int target = (int)floor(1000.0 - lmax);
    const size_t ncoef = kind == GS_TRAP ? 4 : 3;
    size_t per = (size_t)GS_BLOCK * L, nbuf, nstate, nsg = nsig ? nsig : 1;
    double *work = NULL, *tmp = NULL, *Sall = NULL;
    int *ex = NULL;
    st = FC_ERR_SIZE;
    if (fc__mul_size(per, ncoef, &nbuf) != FC_OK || fc__add_size(nbuf, 3 * GS_BLOCK, &nbuf) != FC_OK ||
        fc__mul_size(nbuf, sizeof(double), &nbuf) != FC_OK)
        goto fail;
    /* per signal: S, Sc (L each) and Xh, Xl */
    if (fc__mul_size(nsg, 2 * L + 2, &nstate) != FC_OK || fc__mul_size(nstate, sizeof(double), &nstate) != FC_OK)
        goto fail;
    st = FC_ERR_NOMEM;
    work = malloc(nbuf);
    Sall = calloc(1, nstate);
    ex = malloc(nsg * sizeof *ex);
    if (!work || !Sall || !ex) goto fail;
    double *cE = work, *cP = cE + per, *cQ = cP + per, *cW = kind == GS_TRAP ? cQ + per : NULL;
    double *hs = cQ + per * (ncoef - 2), *hb = hs + GS_BLOCK, *ha = hb + GS_BLOCK;
    int safe = 1;
    for (size_t sg = 0; sg < nsig; sg++) {
        double m = fc__max_abs(x + sg * n, n);
        int e = target;
        if (m > 0.0) (void)frexp(m, &e);
        ex[sg] = e - target;
        if (ex[sg] < -1000) ex[sg] = -1000;  /* 2^-ex finite (subnormal signals) */
        if (m > 0.0 && lout + (double)target + (double)Fe + (double)ex[sg] > 1020.0) safe = 0;
    }
    double *dst = y;
    if (!safe) {
        size_t bytes;
        if (fc__mul_size(total, sizeof(double), &bytes) != FC_OK) { st = FC_ERR_SIZE; goto fail; }
        tmp = malloc(bytes);
        if (!tmp) goto fail;
        dst = tmp;
    }
    /* everything is allocated: nothing fails before the outputs are done */
    for (size_t sg = 0; sg < nsig; sg++) dst[sg * n] = 0.0;
    const double *sv = soe.s, *wv = soe.w;
    for (size_t j0 = 0; j0 + 1 < n; j0 += GS_BLOCK) {
        size_t nb = n - 1 - j0 < GS_BLOCK ? n - 1 - j0 : GS_BLOCK;
        for (size_t i = 0; i < nb; i++) {
            size_t j = j0 + i;
            double h = ldexp(t[j + 1] - t[j], -k2);    /* exact, >= 1 */
            hs[i] = h;
            hb[i] = pow(h, b);
            ha[i] = hb[i] * h;
            const double h2 = h * h;
            double *E = cE + i * L, *P = cP + i * L, *Q = cQ + i * L;
            if (kind == GS_RECT) {
                for (size_t l = 0; l < L; l++) {
                    double em1, p1, f2;
                    fc__gs_phi(sv[l] * h, &em1, &p1, &f2);
                    E[l] = em1;
                    P[l] = h * p1;
                    Q[l] = h2 * f2;
                }
            } else {
                double *W = cW + i * L;
                for (size_t l = 0; l < L; l++) {
                    double em1, p1, f2, f3;
                    fc__gs_phi4(sv[l] * h, &em1, &p1, &f2, &f3);
                    E[l] = em1;
                    P[l] = h * p1;
                    Q[l] = h2 * (f2 - f3);
                    W[l] = h2 * f3;
                }
            }
        }
        for (size_t sg = 0; sg < nsig; sg++) {
            const double *xs = x + sg * n;
            double *ys = dst + sg * n;
            double *Ss = Sall + sg * (2 * L + 2), *Scs = Ss + L, *Xs = Scs + L;
            double Xh = Xs[0], Xl = Xs[1];
            const double sc = ldexp(1.0, -ex[sg]);
            const int oe = Fe + ex[sg];
            for (size_t i = 0; i < nb; i++) {
                size_t j = j0 + i;
                const double xj = xs[j] * sc, xj1 = xs[j + 1] * sc, h = hs[i];
                const double *E = cE + i * L, *P = cP + i * L, *Q = cQ + i * L;
                double d0 = 0.0, d1 = 0.0, lv, p, pe;
                if (kind == GS_RECT) {
                    lv = c0 * hb[i] * Xh + c1 * ha[i] * xj;
                    for (size_t l = 0; l < L; l++) {
                        double s0 = Ss[l], tt = Scs[l] + s0 * E[l];
                        if (l & 1) d1 += wv[l] * (s0 + tt); else d0 += wv[l] * (s0 + tt);
                        double uu = tt + (P[l] * Xh + Q[l] * xj);
                        double s1 = s0 + uu, bb = s1 - s0;
                        Scs[l] = fc__ftz((s0 - (s1 - bb)) + (uu - bb));
                        Ss[l] = fc__ftz(s1);
                    }
                    p = h * xj;
                    pe = fma(h, xj, -p);
                } else {
                    const double *W = cW + i * L;
                    lv = c0 * hb[i] * Xh + c1 * ha[i] * (a * xj + xj1);
                    for (size_t l = 0; l < L; l++) {
                        double s0 = Ss[l], tt = Scs[l] + s0 * E[l];
                        if (l & 1) d1 += wv[l] * (s0 + tt); else d0 += wv[l] * (s0 + tt);
                        double uu = tt + ((P[l] * Xh + Q[l] * xj) + W[l] * xj1);
                        double s1 = s0 + uu, bb = s1 - s0;
                        Scs[l] = fc__ftz((s0 - (s1 - bb)) + (uu - bb));
                        Ss[l] = fc__ftz(s1);
                    }
                    /* h (x_j + x_{j+1}) / 2: the sum by TwoSum, the halving
                       exact (normal numbers) */
                    double sm = xj + xj1, bv = sm - xj;
                    double se = (xj - (sm - bv)) + (xj1 - bv);
                    p = h * sm;
                    pe = fma(h, sm, -p) + h * se;
                    p *= 0.5;
                    pe *= 0.5;
                }
                double yn = (d0 + d1) + lv;
                ys[j + 1] = ldexp(yn * Fm, oe);
                gs_dd_add(&Xh, &Xl, p, pe);
            }
            Xs[0] = Xh;
            Xs[1] = Xl;
        }
    }
    if (tmp) {
        for (size_t i = 0; i < total; i++)
            if (!isfinite(tmp[i])) { st = FC_ERR_RANGE; goto fail; }
        memcpy(y, tmp, total * sizeof(double));
    }
    if (terms) *terms = L;
    st = FC_OK;
fail:
    free(tmp);
    free(ex);
    free(Sall);
    free(work);
    free(soe.s);
    free(soe.w);
    return st;
}

int fc_grid_apply(int rule, double order, const double *t, const double *x,
                  size_t nsig, size_t n, double tol, double *y, size_t *terms)
{
    int kind;
    if (rule == FC_RULE_RECTANGLE) kind = GS_RECT;
    else if (rule == FC_RULE_TRAPEZOID) kind = GS_TRAP;
    else if (rule == FC_RULE_L1) kind = GS_L1;
    else return FC_ERR_RULE;
    if (!(order > 0.0) || !(kind == GS_L1 ? order < 1.0 : order < 2.0))
        return FC_ERR_ORDER;
    if (!(tol >= FC__CS_TOL_MIN && tol <= FC__CS_TOL_MAX)) return FC_ERR_TOL;
    size_t total;
    if (fc__mul_size(nsig, n, &total) != FC_OK) return FC_ERR_SIZE;
    /* byte sizes of t and x must be representable (refused before any
       buffer is read, nsig = 0 included) */
    if (n > SIZE_MAX / sizeof(double) || total > SIZE_MAX / sizeof(double)) return FC_ERR_SIZE;
    if (n > 0 && !t) return FC_ERR_NULL;
    if (total > 0 && (!x || !y)) return FC_ERR_NULL;
    if (total > 0 && (gs_overlaps(x, total, y, total) || gs_overlaps(t, n, y, total)))
        return FC_ERR_ARG;
    if (fc__check_finite(t, n) != FC_OK) return FC_ERR_NONFINITE;
    for (size_t j = 0; j + 1 < n; j++)
        if (!(t[j + 1] > t[j])) return FC_ERR_ARG;
    if (fc__check_finite(x, total) != FC_OK) return FC_ERR_NONFINITE;
    const double a = order;
    if (total == 0) {
        if (terms) *terms = 0;
        return FC_OK;
    }
    if (n < 2) {
        /* y_0 = 0: no history, no terms */
        for (size_t i = 0; i < total; i++) y[i] = 0.0;
        if (terms) *terms = 0;
        return FC_OK;
    }
    /* steps, the smallest, the span (all finite) */
    double hmin = HUGE_VAL;
    for (size_t j = 0; j + 1 < n; j++) {
        double h = t[j + 1] - t[j];
        if (!isfinite(h)) return FC_ERR_RANGE;
        if (h < hmin) hmin = h;
    }
    double span = t[n - 1] - t[0];
    if (!isfinite(span)) return FC_ERR_RANGE;
    int k2;
    (void)frexp(hmin, &k2);               /* hmin = m 2^k2, m in [1/2, 1) */
    k2 -= 1;                               /* d2 = 2^k2 <= hmin < 2^(k2+1) */
    const double R = ldexp(span, -k2) * (1.0 + 1e-12);
    if (!(R <= FC__GRID_RATIO_MAX)) return FC_ERR_TOL;

    if (kind != GS_L1 && a > 1.0)
        return gs_cum(kind, a, t, x, nsig, n, tol, y, terms, k2, R);
    const long double al = a;
    const long double gm1 = kind == GS_L1 ? -al : al - 1.0L;
    fc__soe_pow soe;
    int st = fc__soe_power(gm1, tol, R < 1.0 ? 1.0 : R, &soe);
    if (st != FC_OK) return st;
    const size_t L = soe.L;
    /* output factor d2^a (integrals) or d2^-a (L1) as Fm 2^Fe */
    int Fe;
    const long double Fl = exp2l((long double)k2 * (kind == GS_L1 ? -al : al));
    const double Fm = (double)frexpl(Fl, &Fe);
    /* local weights: c_loc h^(+-a) */
    const double cloc = kind == GS_RECT ? (double)(1.0L / tgammal(al + 1.0L))
                      : kind == GS_TRAP ? (double)(1.0L / tgammal(al + 2.0L))
                      : (double)(1.0L / tgammal(2.0L - al));
    const double pexp = kind == GS_L1 ? -a : a;
    /* log2 of bounds, for max |x| <= 1: on every output (the sum of the
       weights, R^a / Gamma(a+1) for the integrals; for L1
       sum_k c_k |dx_k| <= 2 (n-1) / Gamma(2-a), scaled steps >= 1) and on
       every state (sum_j h_j <= R for the integrals, sum_j |dx_j| <= 2n
       for L1) */
    const double lout = 1.0 + (kind == GS_L1 ? log2(2.0 * (double)n) + log2(cloc)
                               : a * log2(R) - log2((double)tgammal(al + 1.0L)));
    const double lstate = 2.0 + (kind == GS_L1 ? log2(2.0 * (double)n) : log2(R));
    /* each signal is scaled by a power of two to a largest |x| of
       2^target: as large as the states allow, so that small samples of a
       signal with large ones stay normal numbers */
    const double lmax = lout > lstate ? lout : lstate;
    const int target = (int)floor(1000.0 - lmax);
    size_t nbuf;
    double *work = NULL, *tmp = NULL;
    st = FC_ERR_SIZE;
    /* coefficients: E, P (and Q) per block of intervals and term; the
       state S, Sc per signal and term; scaled steps and local weights */
    size_t per = (size_t)GS_BLOCK * L, ncoef = kind == GS_TRAP ? 3 : 2;
    if (fc__mul_size(per, ncoef, &nbuf) != FC_OK) goto fail;
    size_t nstate;
    if (fc__mul_size(L, 2, &nstate) != FC_OK || fc__add_size(nbuf, nstate, &nbuf) != FC_OK ||
        fc__add_size(nbuf, 2 * GS_BLOCK, &nbuf) != FC_OK || fc__mul_size(nbuf, sizeof(double), &nbuf) != FC_OK)
        goto fail;
    st = FC_ERR_NOMEM;
    work = malloc(nbuf);
    if (!work) goto fail;
    double *cE = work, *cP = cE + per, *cQ = kind == GS_TRAP ? cP + per : NULL;
    double *S = cP + per * (ncoef - 1), *Sc = S + L;
    double *hs = Sc + L, *loc = hs + GS_BLOCK;

    /* signal scales */
    int *ex = malloc((nsig ? nsig : 1) * sizeof *ex);
    if (!ex) goto fail;
    int safe = 1;
    for (size_t sg = 0; sg < nsig; sg++) {
        double m = fc__max_abs(x + sg * n, n);
        int e = target;
        if (m > 0.0) (void)frexp(m, &e);
        ex[sg] = e - target;                 /* x 2^-ex[sg]: max below 2^target */
        if (ex[sg] < -1000) ex[sg] = -1000;  /* 2^-ex finite (subnormal signals) */
        if (m > 0.0 && lout + (double)target + (double)Fe + (double)ex[sg] > 1020.0) safe = 0;
    }
    double *dst = y;
    if (!safe) {
        size_t bytes;
        if (fc__mul_size(total, sizeof(double), &bytes) != FC_OK) { st = FC_ERR_SIZE; free(ex); goto fail; }
        tmp = malloc(bytes);
        if (!tmp) { free(ex); goto fail; }
        dst = tmp;
    }

    /* Each block of intervals j0 .. j1-1 gives outputs j0+1 .. j1; the
       signals run through the block one after the other with their own
       state (kept across blocks: one pass over all signals per block). */
    double *Sall = NULL, *Scall = NULL;
    if (nsig > 1) {
        size_t ns;
        if (fc__mul_size(nsig, L, &ns) != FC_OK || fc__mul_size(ns, 2 * sizeof(double), &ns) != FC_OK) {
            st = FC_ERR_SIZE; free(ex); goto fail;
        }
        Sall = calloc(1, ns);
        if (!Sall) { free(ex); goto fail; }
        Scall = Sall + nsig * L;
    }
    /* everything is allocated: from here on nothing fails before the
       outputs are complete; the first output of every signal is 0 */
    for (size_t sg = 0; sg < nsig; sg++) dst[sg * n] = 0.0;
    memset(S, 0, 2 * L * sizeof(double));
    const double *sv = soe.s, *wv = soe.w;
    for (size_t j0 = 0; j0 + 1 < n; j0 += GS_BLOCK) {
        size_t nb = n - 1 - j0 < GS_BLOCK ? n - 1 - j0 : GS_BLOCK;
        for (size_t i = 0; i < nb; i++) {
            size_t j = j0 + i;
            double h = ldexp(t[j + 1] - t[j], -k2);    /* exact, >= 1 */
            hs[i] = h;
            loc[i] = cloc * pow(h, pexp);
            double *E = cE + i * L, *P = cP + i * L, *Q = cQ ? cQ + i * L : NULL;
            for (size_t l = 0; l < L; l++) {
                double em1, p1, f2;
                fc__gs_phi(sv[l] * h, &em1, &p1, &f2);
                E[l] = em1;
                if (kind == GS_RECT) P[l] = h * p1;
                else if (kind == GS_L1) P[l] = p1;
                else { P[l] = h * (p1 - f2); Q[l] = h * f2; }
            }
        }
        for (size_t sg = 0; sg < nsig; sg++) {
            const double *xs = x + sg * n;
            double *ys = dst + sg * n;
            double *Ss = nsig > 1 ? Sall + sg * L : S, *Scs = nsig > 1 ? Scall + sg * L : Sc;
            const double sc = ldexp(1.0, -ex[sg]);
            const int oe = Fe + ex[sg];
            for (size_t i = 0; i < nb; i++) {
                size_t j = j0 + i;
                const double xj = xs[j] * sc, xj1 = xs[j + 1] * sc;
                const double *E = cE + i * L, *P = cP + i * L;
                double u0, lv;
                if (kind == GS_RECT) { u0 = xj; lv = loc[i] * xj; }
                else if (kind == GS_L1) { u0 = xj1 - xj; lv = loc[i] * u0; }
                else { u0 = xj; lv = loc[i] * (a * xj + xj1); }
                double d0 = 0.0, d1 = 0.0, d2 = 0.0, d3 = 0.0;
                size_t l = 0;
                /* decay over interval j (G <- G + G (e^-z - 1)), the
                   output, then the injection of interval j */
                if (kind == GS_TRAP) {
                    const double *Q = cQ + i * L;
                    for (; l < L; l++) {
                        double s0 = Ss[l], tt = Scs[l] + s0 * E[l];
                        d0 += wv[l] * (s0 + tt);
                        double uu = tt + (P[l] * u0 + Q[l] * xj1);
                        double s1 = s0 + uu, bb = s1 - s0;
                        Scs[l] = fc__ftz((s0 - (s1 - bb)) + (uu - bb));
                        Ss[l] = fc__ftz(s1);
                    }
                } else {
                    for (; l + 4 <= L; l += 4) {
                        double s0 = Ss[l], s1 = Ss[l + 1], s2 = Ss[l + 2], s3 = Ss[l + 3];
                        double t0 = Scs[l] + s0 * E[l], t1 = Scs[l + 1] + s1 * E[l + 1];
                        double t2 = Scs[l + 2] + s2 * E[l + 2], t3 = Scs[l + 3] + s3 * E[l + 3];
                        d0 += wv[l] * (s0 + t0);
                        d1 += wv[l + 1] * (s1 + t1);
                        d2 += wv[l + 2] * (s2 + t2);
                        d3 += wv[l + 3] * (s3 + t3);
                        double u_0 = t0 + P[l] * u0, u_1 = t1 + P[l + 1] * u0;
                        double u_2 = t2 + P[l + 2] * u0, u_3 = t3 + P[l + 3] * u0;
                        double n0 = s0 + u_0, n1 = s1 + u_1, n2 = s2 + u_2, n3 = s3 + u_3;
                        double b0 = n0 - s0, b1 = n1 - s1, b2 = n2 - s2, b3 = n3 - s3;
                        Scs[l] = fc__ftz((s0 - (n0 - b0)) + (u_0 - b0));
                        Scs[l + 1] = fc__ftz((s1 - (n1 - b1)) + (u_1 - b1));
                        Scs[l + 2] = fc__ftz((s2 - (n2 - b2)) + (u_2 - b2));
                        Scs[l + 3] = fc__ftz((s3 - (n3 - b3)) + (u_3 - b3));
                        Ss[l] = fc__ftz(n0); Ss[l + 1] = fc__ftz(n1); Ss[l + 2] = fc__ftz(n2); Ss[l + 3] = fc__ftz(n3);
                    }
                    for (; l < L; l++) {
                        double s0 = Ss[l], tt = Scs[l] + s0 * E[l];
                        d0 += wv[l] * (s0 + tt);
                        double uu = tt + P[l] * u0;
                        double s1 = s0 + uu, bb = s1 - s0;
                        Scs[l] = fc__ftz((s0 - (s1 - bb)) + (uu - bb));
                        Ss[l] = fc__ftz(s1);
                    }
                }
                double yn = ((d0 + d1) + (d2 + d3)) + lv;
                ys[j + 1] = ldexp(yn * Fm, oe);
            }
        }
    }
    free(Sall);
    free(ex);
    if (tmp) {
        for (size_t i = 0; i < total; i++)
            if (!isfinite(tmp[i])) { st = FC_ERR_RANGE; goto fail; }
        memcpy(y, tmp, total * sizeof(double));
    }
    if (terms) *terms = L;
    st = FC_OK;
fail:
    free(tmp);
    free(work);
    free(soe.s);
    free(soe.w);
    return st;
}
