/*
 * soe_build.c -- the construction of the sums of exponentials of
 * compressed streams (the offline design step; stream_compressed.c runs
 * the result).
 *
 * Every rule is a lagged sum y_n = sum_{k<=n} c_{n-k} u_k + corr_n x_0
 * (internal.h). A compressed stream sums the lags m < B (B = FC__CS_BAND)
 * exactly and carries every lag B <= m <= horizon by a sum of exponentials
 *
 *     c_m ~= sum_{l<L} beta_l (1 - q_l)^m,      0 < q_l < 1.
 *
 * fc__soe_build finds q and beta (and, for the trapezoid rule, the
 * injection factors inj), the exact band c_0 .. c_{B-1} and the trapezoid
 * start table, for arguments already checked (fc_stream_create, or the
 * loader of stream_compressed.c).
 *
 * GUARANTEE. The sum of exponentials is checked against the library's own
 * weights (fc__lag_kernel, fc__correction) at every lag
 * B <= m <= min(horizon, 10^4) and on a geometric grid of 64 lags per decade
 * beyond, up to the horizon itself; the construction fails with FC_ERR_TOL
 * unless the measured relative error is at most 0.6 tol + 16 eps at every
 * checked lag (the margin 0.6 covers the ripple of the error between grid
 * points, whose period is about 0.3 in log m, i.e. more than 8 grid points).
 * stream_compressed.c states what this gives for the outputs (the
 * guarantee with its rounding allowance).
 *
 * No verified construction (FC_ERR_TOL) is found only at the extreme
 * corner tol < 2e-15 with horizon > 1e14, and there only for the Grunwald
 * rule (measured over 30 orders per rule at tol 1e-15 .. 1e-14 and horizons
 * 1e12 .. 9e15). Orders below FC__CS_MIN_ORDER = 1e-280 are refused at
 * creation with FC_ERR_ORDER: the kernel beyond lag 0 is of size a/m and
 * would be subnormal at the largest horizons. Orders near the integers (a
 * near 1 from either side, a near 2, L1 with a near 0) need no special
 * path, but where the constants of format version 1 (sin(SOE_PI * a),
 * p + 1.0) lose too many digits for the check (relative errors of
 * eps / |1 - a| and, for L1, eps / a) the construction retries with the
 * constants computed exactly (soe_constants); the version-1 constants are
 * tried first so that the streams the earlier code could build, and their
 * saved blobs, are unchanged.
 *
 * CONSTRUCTION. For 0 < a < 1 each kernel is a Laplace transform with a
 * sign-definite density, c_m = K int_0^inf s^p phi(s) e^{-s m} ds:
 *   rectangle (c_m = b_{m-1}):  p = -a,  phi = expm1(s)/s,
 *   trapezoid (c_m = a_m):      p = -a,  phi = (2 sinh(s/2)/s)^2,
 *   trapezoid correction corr_n (n >= 1) = h^a/Gamma(a+2) (A_n - a_n)
 *                               = h^a/Gamma(a+2) ((n+1+a) n^a - (n+1)^(a+1)):
 *                               p = -a,  phi = -(expm1(-s) + s)/s^2,
 *   Grunwald (g_m, m >= 1):     p = a,   phi = e^{a s} ((1 - e^{-s})/s)^a,
 *   L1 (d_m):                   p = a-1, phi = (1 - e^{-s})/s,
 * with K = +-h^{+-a} sin(pi a)/pi (rectangle, trapezoid: from
 * b_m = a int_m^{m+1} t^{a-1} dt and t^{a-1} = int s^{-a} e^{-st} ds /
 * Gamma(1-a); Grunwald: the beta integral
 * g_m = int_0^1 r^{m-a-1} (1-r)^a dr / (Gamma(-a) Gamma(1+a)), r = e^{-s};
 * L1 like the rectangle rule with 1-a for a).
 * 1. Substituting s = e^tau, the integrand decays exponentially as
 *    tau -> -inf and doubly exponentially as tau -> +inf and is analytic in
 *    the strip |Im tau| < pi/2, so the trapezoidal rule in tau converges
 *    geometrically (Beylkin and Monzon, Appl. Comput. Harmon. Anal. 28
 *    (2010), where the same substitution yields sums of exponentials for
 *    power functions). The step is chosen from the error of the rule for the
 *    pure power, 2 |Gamma(p+1+i w)| / Gamma(p+1) with w = 2 pi / dtau
 *    (Poisson summation; common practice), set to kappa * tol.
 * 2. Nodes whose term W e^{-s B} is below 0.1 tol |c_B| (and s B > 1) are
 *    dropped (right truncation; each decays faster than c_m beyond B).
 * 3. The infinitely many nodes with s < s_L = X / horizon vary slowly over
 *    every lag up to the horizon; they form a positive discrete measure on
 *    (0, s_L) (plus the geometric remainder below 1e-20 s_L, lumped at 0),
 *    which is replaced by its Gauss rule of nG nodes computed by the Lanczos
 *    process on that measure (Golub and Welsch, Math. Comp. 23 (1969); the
 *    discrete-measure form is Gautschi, Orthogonal Polynomials: Computation
 *    and Approximation, Oxford 2004, sec. 2.2). This plays the role of the
 *    Gauss-Jacobi block on [0, 2^-M] of Jiang, Zhang, Zhang and Zhang,
 *    Commun. Comput. Phys. 21 (2017); Gauss weights are positive, so all
 *    weights keep the sign of the kernel (no cancellation between terms).
 * 4. Nodes are stored as q = 1 - r = -expm1(-s) (full relative precision
 *    even for r within 1e-16 of 1) and the verification uses exactly the
 *    stored q. Several (X, nG, kappa) are tried and the verified one with the
 *    fewest terms is kept.
 * 5. The trapezoid correction uses the same nodes with weights
 *    gamma_l = beta_l (inj_l - 1), inj_l = 1 + phi_corr(s_l)/phi_trap(s_l)
 *    (same singular power s^-a; inj in [1/2, 1), no cancellation), verified
 *    separately with the rounded inj. Since c_m + corr_m =
 *    sum_l beta_l inj_l (1-q_l)^m, the sample x_0 = u_0 simply enters term l
 *    as inj_l u_0 at the one step n = B: no extra state and no extra work on
 *    the other steps. For n < B the correction comes from a table.
 *
 * CONSTRUCTION, 1 <= a < 2 (rectangle rule only). Here c_m = b_{m-1} grows
 * like m^(a-1), but with e_0 = 1, e_j = b_j - b_{j-1} = (j+1)^a - 2 j^a +
 * (j-1)^a (j >= 1), b_m = sum_{j<=m} e_j, so
 *     y_n = sum_m f_m X_{n-m},  f_0 = 0, f_m = h^a/Gamma(a+1) e_{m-1},
 * X_i = sum_{k<=i} x_k: the engine runs unchanged on u = X with the kernel
 * f (flag cum, fc__soe.cum; stream_compressed.c carries X). e_j is the
 * second difference of t^a, e_j = int_{-1}^{1} (1-|v|) a(a-1) (j+v)^(a-2)
 * dv, and t^(a-2) = int s^(1-a) e^{-st} ds / Gamma(2-a), hence for m >= 2
 *     f_m = K int_0^inf s^(1-a) (expm1(s)/s)^2 e^{-s m} ds,
 *     K = -h^a sin(pi a)/pi > 0,
 * built and verified as above against f_m from soe_fcum (a cancellation-
 * free series in long double). Since f >= 0 and |X_i| <= sum_{k<=i} |x_k|,
 * sum_m f_m |X_{n-m}| <= sum_k c_{n-k} |x_k|: the guarantee holds as stated,
 * with the rounding of X (below 2 eps sum_{k<=i} |x_k| per value) inside the
 * eps term. For a = 1, f_m = 0 for m >= 2: no terms.
 *
 * CONSTRUCTION, 1 <= a < 2, trapezoid rule (flag cum with the x_0 column,
 * "tcum"). Likewise a_m = sum_{j<=m} e_j with e_0 = a_0 = 1 and
 * e_j = a_j - a_{j-1}, so y_n = sum_m f_m X_{n-m} + corr_n x_0 with
 * f_m = h^a/Gamma(a+2) e_m (soe_tcum): f_1 = h^a/Gamma(a+2) (2^(a+1) - 3)
 * and for m >= 2 e_m = (m+1)^(a+1) - 3 m^(a+1) + 3 (m-1)^(a+1) - (m-2)^(a+1),
 * the third difference of t^(a+1) at m - 2, e_m = int_0^3 M_3(v) (a+1) a
 * (a-1) (m-2+v)^(a-2) dv with M_3 the cubic B-spline on [0, 3]; with
 * int_0^3 M_3(v) e^{-s(x+v)} dv = e^{-sx} ((1 - e^{-s})/s)^3 and
 * (a+1) a (a-1) / Gamma(2-a) = -Gamma(a+2) sin(pi a)/pi, for m >= 2
 *     f_m = K int_0^inf s^(1-a) (expm1(s)/s)^2 ((1 - e^{-s})/s) e^{-s m} ds
 * with the same K = -h^a sin(pi a)/pi > 0 (density K_TCUM), built and
 * verified as above against soe_tcum. f >= 0, so the bound argument of the
 * rectangle rule applies. The x_0 correction corr_n = h^a/Gamma(a+2)
 * ((n+1+a) n^a - (n+1)^(a+1)) ~ -h^a a/(2 Gamma(a+1)) n^(a-1) grows and is
 * not carried by the terms (inj = 1): the runtime adds corr_n x_0 with
 * corr_n from fc__correction (its x_0 column), the library's own weights
 * (stream_compressed.c, cs_corr_at). fc__soe.corrmax is the larger |corr_n|
 * of n = B and n = 2^53 - 1 (the largest index a stream reaches, past the
 * horizon too), |corr_n| being increasing there (checked with mpmath for
 * a = 1 + 1e-7 .. 2 - 1e-7; for
 * a = 1, corr_n = -h/2 for every n >= 1); creation fails with the status
 * of the weights if either is beyond the double range.
 *
 * Cost: the weights at about 10^4 + 64 log10(horizon / 10^4) lags
 * (fc__lag_kernel) and a few candidate builds, each verified over the
 * whole grid in long double (x87 on x86-64; where long double is double the
 * check is correspondingly less sharp).
 */
#include <stdlib.h>
#include <string.h>
#include <math.h>
#include <float.h>
#include "internal.h"

#define SOE_BAND FC__CS_BAND          /* exact local band: lags 0 .. B-1 */
#define SOE_MAX_TERMS FC__CS_MAX_TERMS /* more than this: FC_ERR_TOL */
#define SOE_DENSE 10000               /* verified densely up to this lag */
#define SOE_PER_DECADE 64             /* then on a geometric grid */
#define SOE_PI 3.14159265358979323846


/* The density kinds: the rule table's (FC__DENS_*), and two derived
   ones: the trapezoid's x_0 correction and the rectangle rule on the
   running sum. */
enum { K_RECT = FC__DENS_RECT, K_TRAP = FC__DENS_TRAP, K_GRUN = FC__DENS_GRUN,
       K_L1 = FC__DENS_L1, K_CORR = 5, K_RCUM = 6, K_TCUM = 7 };

/* Rectangle rule, 1 <= a < 2: the kernel on the running sum X,
   f_0 = 0, f_1 = h^a/Gamma(a+1), f_m = h^a/Gamma(a+1) (m^a - 2(m-1)^a + (m-2)^a)
   (m >= 2), in long double without cancellation: m = 2 by expm1, m >= 3
   by the binomial series m^a sum_{k>=2} (-1)^k binom(a,k) (2^k - 2) m^-k,
   whose terms are all positive for 1 < a < 2 (and zero for a = 1). */
static long double soe_fcum_pre(double a, double h)
{
    return powl((long double)h, (long double)a) / tgammal((long double)a + 1.0L);
}
static double soe_fcum(double a, long double pre, uint64_t m)
{
    long double A = a;
    if (m == 0) return 0.0;
    if (m == 1) return (double)pre;
    if (a == 1.0) return 0.0;
    if (m == 2) return (double)(pre * 2.0L * expm1l((A - 1.0L) * logl(2.0L)));
    long double x = 1.0L / (long double)m, coef = A * (A - 1.0L) / 2.0L;
    long double xk = x * x, p2 = 4.0L, sum = 0.0L;
    for (int k = 2; k < 4000; k++) {
        long double term = coef * (p2 - 2.0L) * xk;
        sum += term;
        if (term <= 1e-22L * sum) break;
        coef *= ((long double)k - A) / (long double)(k + 1);
        xk *= x;
        p2 *= 2.0L;
    }
    return (double)(pre * powl((long double)m, A) * sum);
}

/* Trapezoid rule, 1 <= a < 2: the kernel on the running sum X,
   f_m = h^a/Gamma(a+2) e_m with e_0 = a_0 = 1, e_m = a_m - a_{m-1}:
   e_1 = 2^(a+1) - 3 = 1 + 4 expm1((a-1) ln 2),
   e_2 = 3^(a+1) - 3 2^(a+1) + 3 = 9 expm1((a-1) ln 3) - 12 expm1((a-1) ln 2),
   e_m = (m+1)^(a+1) - 3 m^(a+1) + 3 (m-1)^(a+1) - (m-2)^(a+1) (m >= 2),
   for m >= 3 by the binomial series
   m^(a+1) sum_{k>=3} binom(a+1,k) T_k m^-k, T_k = 1 + 3 (-1)^k - (-2)^k,
   whose terms are all positive for 1 < a < 2 (binom(a+1,k) and T_k both
   have the sign (-1)^(k+1) for k >= 3) and zero for a = 1; a - 1 is
   exact (Sterbenz). In long double without cancellation. */
static long double soe_tcum_pre(double a, double h)
{
    return powl((long double)h, (long double)a) / tgammal((long double)a + 2.0L);
}
static double soe_tcum(double a, long double pre, uint64_t m)
{
    long double A = a, b = (long double)(a - 1.0);
    if (m == 0) return (double)pre;
    if (m == 1) return (double)(pre * (1.0L + 4.0L * expm1l(b * logl(2.0L))));
    if (a == 1.0) return 0.0;
    if (m == 2)
        return (double)(pre * (9.0L * expm1l(b * logl(3.0L)) -
                               12.0L * expm1l(b * logl(2.0L))));
    long double x = 1.0L / (long double)m;
    /* binom(a+1, 3) */
    long double coef = (A + 1.0L) * A * (A - 1.0L) / 6.0L;
    long double xk = x * x * x, p2 = 8.0L, sum = 0.0L;
    for (int k = 3; k < 4000; k++) {
        long double T = (k & 1) ? p2 - 2.0L : 4.0L - p2;   /* T_k */
        long double term = coef * T * xk;
        sum += term;
        if (term <= 1e-22L * sum) break;
        coef *= (A + 1.0L - (long double)k) / (long double)(k + 1);
        xk *= x;
        p2 *= 2.0L;
    }
    return (double)(pre * powl((long double)m, A + 1.0L) * sum);
}

/* phi(s) of the densities above, without the constant K. */
static double soe_phi(int kind, double a, double s)
{
    switch (kind) {
    case K_RECT: return s > 0 ? expm1(s) / s : 1.0;
    case K_TRAP: {
        double v = s > 0 ? sinh(0.5 * s) / (0.5 * s) : 1.0;
        return v * v;
    }
    case K_CORR: {
        /* (expm1(-s) + s)/s^2 = sum_k (-s)^k/(k+2)!; series for s < 1 */
        if (s < 1.0) {
            double term = 0.5, sum = 0.0;
            for (int k = 0; k < 24; k++) {
                sum += term;
                term *= -s / (double)(k + 3);
            }
            return sum;
        }
        return (expm1(-s) + s) / (s * s);
    }
    case K_GRUN: {
        double v = s > 0 ? -expm1(-s) / s : 1.0;
        return exp(a * s) * pow(v, a);
    }
    case K_RCUM: {
        double v = s > 0 ? expm1(s) / s : 1.0;
        return v * v;
    }
    case K_TCUM: {
        double v = s > 0 ? expm1(s) / s : 1.0;
        double w = s > 0 ? -expm1(-s) / s : 1.0;
        return v * v * w;
    }
    case K_L1:
        return s > 0 ? -expm1(-s) / s : 1.0;
    }
    return NAN; /* not a kind: every kind is listed above */
}

/* Eigen-decomposition of a small symmetric matrix (cyclic Jacobi). A: n*n,
   destroyed; eigenvalues in w, eigenvectors in columns of V. */
static void soe_jacobi_eig(size_t n, double *A, double *w, double *V)
{
    for (size_t i = 0; i < n; i++)
        for (size_t j = 0; j < n; j++) V[i * n + j] = i == j;
    for (int sweep = 0; sweep < 100; sweep++) {
        double off = 0.0, dg = 0.0;
        for (size_t i = 0; i < n; i++) {
            dg += A[i * n + i] * A[i * n + i];
            for (size_t j = i + 1; j < n; j++) off += A[i * n + j] * A[i * n + j];
        }
        if (off <= 1e-34 * dg || off == 0.0) break;
        for (size_t p = 0; p < n; p++)
            for (size_t r = p + 1; r < n; r++) {
                double apr = A[p * n + r];
                if (apr == 0.0) continue;
                double th = (A[r * n + r] - A[p * n + p]) / (2.0 * apr);
                double t = (th >= 0 ? 1.0 : -1.0) / (fabs(th) + sqrt(th * th + 1.0));
                double c = 1.0 / sqrt(t * t + 1.0), s = t * c;
                for (size_t k = 0; k < n; k++) {
                    double akp = A[k * n + p], akr = A[k * n + r];
                    A[k * n + p] = c * akp - s * akr;
                    A[k * n + r] = s * akp + c * akr;
                }
                for (size_t k = 0; k < n; k++) {
                    double apk = A[p * n + k], ark = A[r * n + k];
                    A[p * n + k] = c * apk - s * ark;
                    A[r * n + k] = s * apk + c * ark;
                }
                for (size_t k = 0; k < n; k++) {
                    double vkp = V[k * n + p], vkr = V[k * n + r];
                    V[k * n + p] = c * vkp - s * vkr;
                    V[k * n + r] = s * vkp + c * vkr;
                }
            }
    }
    for (size_t i = 0; i < n; i++) w[i] = A[i * n + i];
}

/*
 * Gauss rule of ng nodes for the discrete measure sum_j w_j delta(x_j)
 * (w_j > 0): Lanczos with full reorthogonalisation on diag(x), start vector
 * sqrt(w / sum w), then the eigen-decomposition of the Jacobi matrix
 * (Golub-Welsch). work: N*ng + N doubles. Returns the number of nodes.
 */
#define SOE_MAXG 16
static size_t soe_gauss_discrete(size_t N, const double *x, const double *w,
                                size_t ng, double *work, double *gx, double *gw)
{
    double tot = 0.0;
    for (size_t j = 0; j < N; j++) tot += w[j];
    if (ng > N) ng = N;
    if (ng > SOE_MAXG) ng = SOE_MAXG;
    double *Q = work, *v = work + N * ng;
    double al[SOE_MAXG], be[SOE_MAXG];
    for (size_t j = 0; j < N; j++) Q[j * ng] = sqrt(w[j] / tot);
    size_t k, n = ng;
    for (k = 0; k < ng; k++) {
        double s = 0.0;
        for (size_t j = 0; j < N; j++) { v[j] = x[j] * Q[j * ng + k]; s += Q[j * ng + k] * v[j]; }
        al[k] = s;
        if (k + 1 == ng) break;
        for (int pass = 0; pass < 2; pass++)
            for (size_t i = 0; i <= k; i++) {
                double dot = 0.0;
                for (size_t j = 0; j < N; j++) dot += Q[j * ng + i] * v[j];
                for (size_t j = 0; j < N; j++) v[j] -= dot * Q[j * ng + i];
            }
        double nr = 0.0;
        for (size_t j = 0; j < N; j++) nr += v[j] * v[j];
        nr = sqrt(nr);
        if (!(nr > 1e-300)) { n = k + 1; break; }
        be[k] = nr;
        for (size_t j = 0; j < N; j++) Q[j * ng + k + 1] = v[j] / nr;
    }
    double A[SOE_MAXG * SOE_MAXG], V[SOE_MAXG * SOE_MAXG];
    memset(A, 0, sizeof A);
    for (size_t i = 0; i < n; i++) {
        A[i * n + i] = al[i];
        if (i + 1 < n) A[i * n + i + 1] = A[(i + 1) * n + i] = be[i];
    }
    soe_jacobi_eig(n, A, gx, V);
    for (size_t i = 0; i < n; i++) gw[i] = tot * V[i] * V[i];
    return n;
}

/* Step of the trapezoidal rule in tau for relative error kappa*tol on the
   pure power s^p: 2 sqrt(2 pi) w^(p+1/2) e^(-pi w/2) / Gamma(p+1), w = 2pi/dtau
   (Stirling's formula for |Gamma(x + i w)|). */
static double soe_dtau(double p, double target)
{
    double lg = log(tgamma(p + 1.0));
    double lo = 0.5, hi = 1000.0;
    for (int it = 0; it < 100; it++) {
        double w = 0.5 * (lo + hi);
        double e = log(2.0) + 0.5 * log(2.0 * SOE_PI) + (p + 0.5) * log(w) -
                   0.5 * SOE_PI * w - lg;
        if (e > log(target)) lo = w; else hi = w;
    }
    double dt = 2.0 * SOE_PI / hi;
    return dt > 1.5 ? 1.5 : dt;
}

typedef struct {
    int rule, kind;
    int x0inj;                 /* x_0 enters the terms (trapezoid, a < 1) */
    double a, p, p1, K, Kcorr, tol, M;   /* p1 = p + 1, exact */
    /* verification grid and references */
    size_t ndense, ngeo;
    uint64_t mlo;              /* = B */
    const double *cref, *corrref;   /* dense then geometric */
    const uint64_t *mgeo;
} soe_ctx;

/* Build one candidate: L terms in q[], w[] (kernel weights), wc[] (corr).
   Returns FC_OK or FC_ERR_TOL (too many terms) / FC_ERR_NOMEM. */
static int soe_candidate(const soe_ctx *cx, double X, size_t ng, double kappa,
                         double cB, double *q, double *w, double *wc,
                         size_t *Lout)
{
    const double a = cx->a, p = cx->p, p1 = cx->p1, B = SOE_BAND;
    const double dtau = soe_dtau(p, kappa * cx->tol);
    const double sL = X / cx->M;
    const double eta = 0.1;
    const int kind = cx->kind;
    size_t L = 0;
    double jL = ceil(log(sL) / dtau);
    /* trapezoid nodes s >= sL up to the right truncation */
    for (double j = jL;; j += 1.0) {
        double s = exp(j * dtau);
        double W = dtau * pow(s, p1) * soe_phi(kind, a, s);
        if (s * B > 1.0 && W * exp(-s * B) < eta * cx->tol * cB) break;
        if (L + ng >= SOE_MAX_TERMS) return FC_ERR_TOL;
        q[L] = -expm1(-s);
        w[L] = W;
        wc[L] = cx->x0inj ? W * soe_phi(K_CORR, a, s) / soe_phi(K_TRAP, a, s) : 0.0;
        L++;
    }
    /* left: discrete measure of the nodes s < sL, in x = s / sL */
    size_t N = (size_t)(46.0 / dtau) + 3, i = 0;
    double *buf = malloc((3 * N + N * SOE_MAXG + N) * sizeof(double));
    if (!buf) return FC_ERR_NOMEM;
    double *xs = buf, *ws = buf + N, *wrk = buf + 2 * N;
    double j = jL - 1.0, s = 0.0;
    for (; i + 1 < N; j -= 1.0, i++) {
        s = exp(j * dtau);
        double xx = s / sL;
        if (xx < 1e-20) break;
        xs[i] = xx;
        ws[i] = dtau * pow(s, p1) * soe_phi(kind, a, s);
    }
    /* geometric remainder sum_{k>=0} W(s e^{-k dtau}), phi ~ phi(0) */
    s = exp(j * dtau);
    xs[i] = 0.0;
    ws[i] = dtau * pow(s, p1) * soe_phi(kind, a, 0.0) / (-expm1(-p1 * dtau));
    i++;
    double gx[SOE_MAXG], gw[SOE_MAXG];
    size_t n = soe_gauss_discrete(i, xs, ws, ng, wrk, gx, gw);
    free(buf);
    for (size_t k = 0; k < n; k++) {
        double sk = gx[k] * sL;
        if (!(sk > 0.0) || !(gw[k] > 0.0) || !isfinite(gw[k])) return FC_ERR_TOL;
        q[L] = -expm1(-sk);
        w[L] = gw[k];
        wc[L] = cx->x0inj ? gw[k] * soe_phi(K_CORR, a, sk) / soe_phi(K_TRAP, a, sk) : 0.0;
        L++;
    }
    for (size_t l = 0; l < L; l++) {
        w[l] *= cx->K;
        wc[l] *= cx->Kcorr;
        if (!(q[l] > 0.0 && q[l] < 1.0) || !isfinite(w[l]) || !isfinite(wc[l]))
            return FC_ERR_TOL;
    }
    *Lout = L;
    return FC_OK;
}

/* Largest relative error of sum_l w_l (1-q_l)^m against ref over the grid.
   work: ndense long doubles; P: 2*L long doubles. */
static double soe_verify(const soe_ctx *cx, size_t L, const double *q,
                        const double *w, const double *ref, long double *P,
                        long double *work)
{
    double worst = 0.0;
    long double *lq = P + L;
    const size_t nd = cx->ndense;
    for (size_t l = 0; l < L; l++) lq[l] = log1pl(-(long double)q[l]);
    /* dense: (1-q)^m by repeated multiplication in long double (relative
       error below m * 2^-64 <= 6e-16 at m = 10^4), term by term so that the
       chains are independent */
    for (size_t i = 0; i < nd; i++) work[i] = 0.0L;
    size_t l = 0;
    for (; l + 2 <= L; l += 2) {
        long double p0 = expl((long double)cx->mlo * lq[l]), r0 = 1.0L - (long double)q[l];
        long double p1 = expl((long double)cx->mlo * lq[l + 1]), r1 = 1.0L - (long double)q[l + 1];
        long double w0 = w[l], w1 = w[l + 1];
        for (size_t i = 0; i < nd; i++) {
            work[i] += w0 * p0 + w1 * p1;
            p0 *= r0;
            p1 *= r1;
        }
    }
    for (; l < L; l++) {
        long double p0 = expl((long double)cx->mlo * lq[l]), r0 = 1.0L - (long double)q[l];
        long double w0 = w[l];
        for (size_t i = 0; i < nd; i++) { work[i] += w0 * p0; p0 *= r0; }
    }
    for (size_t i = 0; i < nd; i++) {
        double e = fabs((double)(work[i] - (long double)ref[i])) / fabs(ref[i]);
        if (!(e <= worst)) worst = e;   /* NaN-safe */
    }
    for (size_t i = 0; i < cx->ngeo; i++) {
        long double m = (long double)cx->mgeo[i], sum = 0.0L;
        for (size_t k = 0; k < L; k++) sum += (long double)w[k] * expl(m * lq[k]);
        double r = ref[nd + i];
        double e = fabs((double)(sum - (long double)r)) / fabs(r);
        if (!(e <= worst)) worst = e;
    }
    (void)P;
    return worst;
}

/* sin(pi a) for 0 < a < 2 with full relative accuracy: the argument is
   reduced exactly first (1 - a and 2 - a are exact by Sterbenz's lemma),
   so that a near 1 does not lose digits to the rounding of pi a (the
   relative error of sin(SOE_PI * a) is about eps / |1 - a|). */
static double soe_sinpi(double a)
{
    if (a <= 0.5) return sin(SOE_PI * a);
    if (a <= 1.5) return sin(SOE_PI * (1.0 - a));
    return -sin(SOE_PI * (2.0 - a));
}

/*
 * The exponent p of the density, p1 = p + 1 and the constants K, Kcorr.
 * exact = 0: as in format version 1, K from sin(SOE_PI * a) and p1 = p + 1.0,
 * which lose digits as a approaches 1 (relative error of sin about
 * eps / |1 - a|) and, for L1, as a approaches 0 (p + 1.0 with p = a - 1
 * has an absolute error of eps, a relative one of eps / a), so that the
 * check at creation fails there. exact = 1: sin(pi a) after an exact
 * argument reduction (soe_sinpi), and p1 formed exactly (1 - a and 2 - a
 * exact by Sterbenz's lemma for 1/2 <= a <= 2; a + 1 rounds once).
 * Creation tries exact = 0 first, so that every stream the version-1 code
 * could build gets the same bits (and its saved blobs still load), and
 * exact = 1 only when no candidate passes.
 */
static void soe_constants(soe_ctx *cx, int rule, int cum, double a, double step,
                         int exact)
{
    double spa = (exact ? soe_sinpi(a) : sin(SOE_PI * a)) / SOE_PI;
    if (cum) {
        cx->kind = fc__rule_has_soe_col(rule) ? K_TCUM : K_RCUM;
        cx->p = 1.0 - a; cx->K = -spa * pow(step, a);
        cx->p1 = exact ? 2.0 - a : cx->p + 1.0;
        return;
    }
    const fc__rule_desc *d = fc__rule(rule);
    double p1x = 1.0 - a;   /* p + 1 formed exactly */
    cx->kind = d->density;
    switch (d->density) {
    case K_RECT: cx->p = -a; cx->K = spa * pow(step, a); break;
    case K_TRAP: cx->p = -a; cx->K = spa * pow(step, a); break;
    case K_GRUN: cx->p = a; cx->K = -spa * pow(step, -a); p1x = a + 1.0; break;
    case K_L1: cx->p = a - 1.0; cx->K = spa * pow(step, -a); p1x = a; break;
    }
    if (fc__rule_soe_col(d, NULL) != NULL) cx->Kcorr = -spa * pow(step, a);
    cx->p1 = cx->p + 1.0;
    if (exact) cx->p1 = p1x;
}

/*
 * The sum of exponentials, the band and the trapezoid start table of a
 * compressed stream (fc__soe in internal.h). The arguments are checked by
 * the caller: (rule, order, step) valid, order in the rule's compressed
 * range (the loader also accepts orders below FC__CS_MIN_ORDER), tol in
 * [1e-15, 1e-2], 1 <= horizon <= 2^53 - 2. FC_ERR_RANGE when h^a or h^-a or
 * a band weight is beyond the double range, FC_ERR_TOL when no candidate
 * passes the check (GUARANTEE), FC_ERR_NOMEM, or the status of the weights.
 */
int fc__soe_build(int rule, double order, double step, double tol,
                  double horizon, fc__soe *out)
{
    int st;
    const fc__rule_desc *d = fc__rule(rule);
    const int cum = order >= d->cumulative_from;
    /* the column the construction carries (the trapezoid's x_0); every
       other column is added at run time (stream_compressed.c) */
    size_t kx = 0;
    const int x0 = fc__rule_soe_col(d, &kx) != NULL;
    const int tcum = cum && x0;     /* trapezoid, a >= 1 */
    const int x0inj = x0 && !cum;   /* x_0 enters the terms at n = B */
    const size_t B = SOE_BAND;
    const double a = order;
    const uint64_t M = (uint64_t)floor(horizon);
    soe_ctx cx;
    memset(&cx, 0, sizeof cx);
    cx.rule = rule;
    cx.x0inj = x0inj;
    cx.a = a;
    cx.tol = tol;
    cx.M = (double)M;
    cx.mlo = B;
    /* version-1 constants first (the blobs saved so far were built with
       them and must rebuild to the same bits); the exact ones only if no
       candidate passes with those (soe_constants) */
    soe_constants(&cx, rule, cum, a, step, 0);
    if (!isfinite(cx.K) || cx.K == 0.0) return FC_ERR_RANGE; /* h^a or h^-a beyond the double range */

    /* band weights and the trapezoid start table */
    double *cband = out->cband, *ctab = out->ctab;
    const long double fpre = tcum ? soe_tcum_pre(a, step)
                             : cum ? soe_fcum_pre(a, step) : 0.0L;
    if (cum) {
        for (size_t m = 0; m < B; m++) {
            double f = tcum ? soe_tcum(a, fpre, m) : soe_fcum(a, fpre, m);
            if (!isfinite(cband[m] = f) ||
                (tcum && f != 0.0 && fabs(f) < DBL_MIN))
                return FC_ERR_RANGE;
        }
    } else if ((st = fc__lag_kernel(rule, a, step, 0, B, cband)) != FC_OK)
        return st;
    memset(ctab, 0, B * sizeof *ctab);
    if (x0 && (st = fc__correction(rule, kx, a, step, 0, B, ctab)) != FC_OK)
        return st;
    out->cum = cum;
    out->L = 0;
    out->corrmax = 0.0;
    if (tcum) {
        /* the correction corr_n x_0, n >= B, comes from the library's
           weights at run time (stream_compressed.c), for every n a stream
           can reach (past the horizon too, with FC_HORIZON_CONTINUE); they
           grow like n^(a-1) (|corr_n| ~ h^a a/(2 Gamma(a+1)) n^(a-1)):
           both ends, n = B and the last count 2^53 - 1, must be within
           the double range */
        double ce[2];
        if ((st = fc__correction(rule, kx, a, step, B, 1, ce)) != FC_OK ||
            (st = fc__correction(rule, kx, a, step, FC_INDEX_LIMIT - 1, 1, ce + 1)) != FC_OK)
            return st;
        out->corrmax = fabs(ce[0]) > fabs(ce[1]) ? fabs(ce[0]) : fabs(ce[1]);
    }

    /* horizon < B, or a = 1 on the running sum (f_m = 0 for m >= 2): the
       band alone is exact for every n <= horizon */
    if (!(M >= B && !(cum && a == 1.0))) return FC_OK;

    /* verification grid */
    size_t Lbest = 0;
    double *tmp = NULL;
    uint64_t *mgeo = NULL;
    long double *P = NULL;
    uint64_t dense_hi = M < SOE_DENSE ? M : SOE_DENSE;
    cx.ndense = (size_t)(dense_hi - B + 1);
    size_t maxgeo = 0;
    if (M > SOE_DENSE)
        maxgeo = (size_t)(SOE_PER_DECADE * log10((double)M / SOE_DENSE)) + 2;
    mgeo = malloc((maxgeo + 1) * sizeof *mgeo);
    size_t ntot = cx.ndense + maxgeo;
    /* tmp: refs (2*ntot) + 7 arrays of SOE_MAX_TERMS (best and candidate) */
    tmp = malloc((2 * ntot + 7 * SOE_MAX_TERMS) * sizeof(double));
    P = malloc((2 * SOE_MAX_TERMS + cx.ndense) * sizeof *P);
    if (!mgeo || !tmp || !P) { st = FC_ERR_NOMEM; goto done; }
    size_t g = 0;
    uint64_t last = dense_hi;
    for (size_t k = 1; k < maxgeo; k++) {
        double mm = floor(SOE_DENSE * pow((double)M / SOE_DENSE, (double)k / (double)(maxgeo - 1)) + 0.5);
        uint64_t mi = (uint64_t)mm;
        if (mi > M) mi = M;
        if (mi > last) { mgeo[g++] = mi; last = mi; }
    }
    if (M > last) mgeo[g++] = M;
    cx.ngeo = g;
    cx.mgeo = mgeo;
    double *cref = tmp, *corrref = tmp + ntot;
    if (tcum) {
        for (size_t k = 0; k < cx.ndense; k++) cref[k] = soe_tcum(a, fpre, B + k);
        for (size_t k = 0; k < g; k++) cref[cx.ndense + k] = soe_tcum(a, fpre, mgeo[k]);
    } else if (cum) {
        for (size_t k = 0; k < cx.ndense; k++) cref[k] = soe_fcum(a, fpre, B + k);
        for (size_t k = 0; k < g; k++) cref[cx.ndense + k] = soe_fcum(a, fpre, mgeo[k]);
    } else {
        if ((st = fc__lag_kernel(rule, a, step, B, cx.ndense, cref)) != FC_OK) goto done;
        for (size_t k = 0; k < g; k++)
            if ((st = fc__lag_kernel(rule, a, step, mgeo[k], 1, cref + cx.ndense + k)) != FC_OK)
                goto done;
    }
    if (x0inj) {
        if ((st = fc__correction(rule, kx, a, step, B, cx.ndense, corrref)) != FC_OK) goto done;
        for (size_t k = 0; k < g; k++)
            if ((st = fc__correction(rule, kx, a, step, mgeo[k], 1, corrref + cx.ndense + k)) != FC_OK)
                goto done;
    }
    for (size_t k = 0; k < cx.ndense + g; k++)
        if (!isfinite(cref[k]) || cref[k] == 0.0 ||
            (x0inj && (!isfinite(corrref[k]) || corrref[k] == 0.0))) {
            st = FC_ERR_TOL;
            goto done;
        }
    cx.cref = cref;
    cx.corrref = corrref;

    double *qb = tmp + 2 * ntot, *wb = qb + SOE_MAX_TERMS, *ijb = wb + SOE_MAX_TERMS;
    double *qc = ijb + SOE_MAX_TERMS, *wcand = qc + SOE_MAX_TERMS, *wccand = wcand + SOE_MAX_TERMS;
    double *ijc = wccand + SOE_MAX_TERMS;
    static const struct { double X; int ng; double kappa; } cand[] = {
        {2.0, 7, 0.3}, {3.0, 8, 0.3}, {2.0, 8, 0.1}, {3.0, 9, 0.1},
        {4.0, 10, 0.03}, {4.0, 11, 0.01},
    };
    const double thresh = 0.6 * tol + 16.0 * 2.220446049250313e-16;
    int found = 0;
    for (int pass = 0; pass < 2 && !found; pass++) {
        if (pass == 1) {
            soe_constants(&cx, rule, cum, a, step, 1);
            if (!isfinite(cx.K) || cx.K == 0.0) break;
        }
        const double cB = fabs(cref[0] / cx.K);
        for (size_t ci = 0; ci < sizeof cand / sizeof cand[0]; ci++) {
            if (found && ci >= 2) break;    /* the fallbacks only if needed */
            size_t Lc;
            int bs = soe_candidate(&cx, cand[ci].X, (size_t)cand[ci].ng, cand[ci].kappa,
                                   cB, qc, wcand, wccand, &Lc);
            if (bs == FC_ERR_NOMEM) { st = bs; goto done; }
            if (bs != FC_OK) continue;
            if (found && Lc >= Lbest) continue;
            for (size_t l = 0; l < Lc; l++) ijc[l] = 1.0;
            double e = soe_verify(&cx, Lc, qc, wcand, cref, P, P + 2 * SOE_MAX_TERMS);
            if (e <= thresh && x0inj) {
                /* the correction actually realised: beta (inj - 1), inj rounded */
                for (size_t l = 0; l < Lc; l++) {
                    ijc[l] = 1.0 + wccand[l] / wcand[l];
                    wccand[l] = (double)((long double)wcand[l] * ((long double)ijc[l] - 1.0L));
                    if (!(ijc[l] > 0.0 && ijc[l] <= 2.0)) e = HUGE_VAL;
                }
                if (e <= thresh)
                    e = soe_verify(&cx, Lc, qc, wccand, corrref, P, P + 2 * SOE_MAX_TERMS);
            }
            if (!(e <= thresh)) continue;
            memcpy(qb, qc, Lc * sizeof(double));
            memcpy(wb, wcand, Lc * sizeof(double));
            memcpy(ijb, ijc, Lc * sizeof(double));
            Lbest = Lc;
            found = 1;
        }
    }
    if (!found) { st = FC_ERR_TOL; goto done; }
    for (size_t l = 0; l < Lbest; l++) {
        /* fold (1-q)^B into the weights: the state holds sum r^j u_{n-B-j} */
        long double rB = expl((long double)B * log1pl(-(long double)qb[l]));
        out->q[l] = qb[l];
        out->beta[l] = (double)((long double)wb[l] * rB);
        out->inj[l] = x0inj ? ijb[l] : 1.0;
    }
    out->L = Lbest;
    st = FC_OK;
done:
    free(tmp); free(mgeo); free(P);
    return st;
}

/*
 * POWER KERNEL ON AN INTERVAL (the grid engine, grid_soe.c).
 *
 * fc__soe_power approximates the continuous kernel
 *     k(tau) = tau^(g-1) / Gamma(g),    0 < g <= 1,
 * (the Riemann-Liouville kernel of I^g; the L1 scheme's Caputo kernel
 * tau^(-a)/Gamma(1-a) is g = 1 - a) on 1 <= tau <= R by
 *     k(tau) ~= sum_{l<L} w_l exp(-s_l tau),   s_l >= 0, w_l > 0,
 * with a relative error at most tol. With b = 1 - g in (0, 1) (g < 1),
 * the Laplace representation tau^(-b) = (1/Gamma(b)) int_0^inf
 * s^(b-1) e^(-s tau) ds (Jiang, Zhang, Zhang and Zhang, Commun. Comput.
 * Phys. 21 (2017) 650-678, eq. (2.5)) gives
 *     k(tau) = C int_0^inf s^(b-1) e^(-s tau) ds,  C = 1/(Gamma(b) Gamma(1-b)),
 * and the same construction as the compressed streams above: the
 * trapezoidal rule in log s (Beylkin and Monzon 2010), its right
 * truncation, and the Gauss rule (Golub-Welsch on the discrete measure,
 * soe_gauss_discrete) of the nodes s < X / R, all weights positive. The
 * continuous kernel has phi = 1 (no discretisation factor). g = 1: one
 * term, s = 0, w = 1 (exact).
 *
 * GUARANTEE. The result is checked in long double against k at 96 points
 * per decade of a geometric grid from tau = 1 to tau = R (both ends
 * included); the construction fails with FC_ERR_TOL unless the relative
 * error is at most 0.6 tol + 16 eps at every point (the margin covers the
 * ripple between points as above: its period, dtau in log tau, spans more
 * than 12 points). Arguments are checked by the caller: 0 < g <= 1
 * (g given as e_lo = g - 1 exactly, in long double, so that the exponent
 * of an L1 kernel -a is exact), tol in [1e-15, 1e-2], 1 <= R <= 2^100.
 * out->s and out->w are allocated here (free both with free()).
 */
int fc__soe_power(long double gm1, double tol, double R, fc__soe_pow *out)
{
    out->L = 0;
    out->s = out->w = NULL;
    if (gm1 == 0.0L) {
        out->s = malloc(sizeof(double));
        out->w = malloc(sizeof(double));
        if (!out->s || !out->w) { free(out->s); free(out->w); out->s = out->w = NULL; return FC_ERR_NOMEM; }
        out->s[0] = 0.0;
        out->w[0] = 1.0;
        out->L = 1;
        return FC_OK;
    }
    const long double bl = -gm1;            /* b = 1 - g, exact */
    const double b = (double)bl;
    const long double gl = 1.0L + gm1;      /* g */
    const long double Cl = 1.0L / (tgammal(bl) * tgammal(1.0L - bl));
    const long double kden = tgammal(gl);
    const double C = (double)Cl;
    const double lR = log10(R);
    const size_t nv = (size_t)ceil(96.0 * (lR > 0 ? lR : 0.0)) + 2;
    long double *tv = malloc(nv * sizeof *tv), *kv = malloc(nv * sizeof *kv);
    size_t cap = 2 * SOE_MAX_TERMS + 64;
    double *sc = malloc(cap * sizeof *sc), *wc = malloc(cap * sizeof *wc);
    double *sb = malloc(cap * sizeof *sb), *wb = malloc(cap * sizeof *wb);
    int st = FC_OK;
    if (!tv || !kv || !sc || !wc || !sb || !wb) { st = FC_ERR_NOMEM; goto done; }
    for (size_t i = 0; i < nv; i++) {
        long double tau = nv > 1 ? powl((long double)R, (long double)i / (long double)(nv - 1)) : 1.0L;
        if (i == nv - 1) tau = R;
        if (i == 0) tau = 1.0L;
        tv[i] = tau;
        kv[i] = powl(tau, gm1) / kden;
    }
    static const struct { double X; int ng; double kappa; } cand[] = {
        {2.0, 7, 0.3}, {3.0, 8, 0.3}, {2.0, 8, 0.1}, {3.0, 9, 0.1},
        {4.0, 10, 0.03}, {4.0, 11, 0.01},
    };
    const double thresh = 0.6 * tol + 16.0 * 2.220446049250313e-16;
    const double eta = 0.1;
    size_t Lbest = 0;
    for (size_t ci = 0; ci < sizeof cand / sizeof cand[0]; ci++) {
        if (Lbest && ci >= 2) break;
        const double dtau = soe_dtau(b - 1.0, cand[ci].kappa * tol);
        const double sL = cand[ci].X / R;
        double jL = ceil(log(sL) / dtau);
        size_t L = 0;
        int ok = 1;
        for (double j = jL;; j += 1.0) {
            double s = exp(j * dtau);
            double W = dtau * pow(s, b);
            /* relative to k(1) = 1/Gamma(g): C W e^-s < eta tol / Gamma(g) */
            if (s > 1.0 && C * W * exp(-s) < eta * tol / (double)kden) break;
            if (L + SOE_MAXG >= cap) { ok = 0; break; }
            sc[L] = s;
            wc[L] = W;
            L++;
        }
        if (!ok) continue;
        size_t N = (size_t)(46.0 / dtau) + 3, i = 0;
        double *buf = malloc((3 * N + N * SOE_MAXG + N) * sizeof(double));
        if (!buf) { st = FC_ERR_NOMEM; goto done; }
        double *xs = buf, *ws = buf + N, *wrk = buf + 2 * N;
        double j = jL - 1.0, s = 0.0;
        for (; i + 1 < N; j -= 1.0, i++) {
            s = exp(j * dtau);
            double xx = s / sL;
            if (xx < 1e-20) break;
            xs[i] = xx;
            ws[i] = dtau * pow(s, b);
        }
        s = exp(j * dtau);
        xs[i] = 0.0;
        ws[i] = dtau * pow(s, b) / (-expm1(-b * dtau));
        i++;
        double gx[SOE_MAXG], gw[SOE_MAXG];
        size_t ng = soe_gauss_discrete(i, xs, ws, (size_t)cand[ci].ng, wrk, gx, gw);
        free(buf);
        for (size_t k = 0; k < ng; k++) {
            double sk = gx[k] * sL;
            if (!(sk > 0.0) || !(gw[k] > 0.0) || !isfinite(gw[k])) { ok = 0; break; }
            sc[L] = sk;
            wc[L] = gw[k];
            L++;
        }
        if (!ok) continue;
        for (size_t l = 0; l < L; l++) {
            wc[l] = (double)((long double)wc[l] * Cl);
            if (!(wc[l] > 0.0) || !isfinite(wc[l])) ok = 0;
        }
        if (!ok || (Lbest && L >= Lbest)) continue;
        double worst = 0.0;
        for (size_t v = 0; v < nv && worst <= thresh; v++) {
            long double sum = 0.0L;
            for (size_t l = 0; l < L; l++) sum += (long double)wc[l] * expl(-(long double)sc[l] * tv[v]);
            double e = (double)(fabsl(sum - kv[v]) / kv[v]);
            if (!(e <= worst)) worst = e;
        }
        if (!(worst <= thresh)) continue;
        memcpy(sb, sc, L * sizeof *sb);
        memcpy(wb, wc, L * sizeof *wb);
        Lbest = L;
    }
    if (!Lbest) { st = FC_ERR_TOL; goto done; }
    out->s = malloc(Lbest * sizeof(double));
    out->w = malloc(Lbest * sizeof(double));
    if (!out->s || !out->w) {
        free(out->s); free(out->w); out->s = out->w = NULL;
        st = FC_ERR_NOMEM;
        goto done;
    }
    memcpy(out->s, sb, Lbest * sizeof(double));
    memcpy(out->w, wb, Lbest * sizeof(double));
    out->L = Lbest;
done:
    free(tv); free(kv); free(sc); free(wc); free(sb); free(wb);
    return st;
}
