/*
 * compressed.c -- the compressed stream (engine 4): bounded memory and the
 * same work on every sample.
 *
 * Every rule is a lagged sum y_n = sum_{k<=n} c_{n-k} u_k + corr_n x_0
 * (internal.h). Lags m < B (B = CS_BAND) are summed exactly from a ring
 * buffer of the last B values of u; every lag B <= m <= horizon is carried by
 * a sum of exponentials
 *
 *     c_m ~= sum_{l<L} beta_l (1 - q_l)^m,      0 < q_l < 1,
 *
 * each term a one-pole recursion S_l <- (1 - q_l) S_l + u_{n-B}.
 *
 * GUARANTEE. At creation the sum of exponentials is checked against the
 * library's own weights (fc__lag_kernel, fc__x0_correction) at every lag
 * B <= m <= min(horizon, 10^4) and on a geometric grid of 64 lags per decade
 * beyond, up to the horizon itself; creation fails with FC_ERR_TOL unless the
 * measured relative error is at most 0.6 tol + 16 eps at every checked lag
 * (the margin 0.6 covers the ripple of the error between grid points, whose
 * period is about 0.3 in log m, i.e. more than 8 grid points). Hence for
 * n <= floor(horizon), with eps = 2^-52,
 *
 *     |y_n - y_n(exact)| <= (tol + 64 eps) ( sum_k |c_{n-k} u_k| + |corr_n x_0| )
 *
 * where y_n(exact) is the lagged sum with the library's weights in exact
 * arithmetic. The rounding allowance 64 eps is the sum of: 16 eps from the
 * creation check (the 16 eps also absorbs the check's own long double
 * arithmetic, below 3 eps); the dot product of the L <= 200 states in 8
 * fma lanes of at most 25 terms and a 3-level reduction, at most 28 eps of
 * sum_l |beta_l S_l| (Higham, Accuracy and Stability of Numerical
 * Algorithms, 2nd ed., SIAM 2002, sec. 3.1: gamma_k for a sum of depth k);
 * the band, 16 lanes of 4 terms, a pairwise step and a 3-level reduction,
 * 8 eps; the final three additions, 3 eps; the states (each kept as an
 * unevaluated sum S + Sc, updated as S + ((d - q S) + Sc) with an exact
 * TwoSum, Knuth, TAOCP vol. 2, sec. 4.2.2, see cs_terms_portable; the
 * product q Sc is dropped, at most one rounding of S over the memory 1/q of
 * the term), 2 eps; the rounding of u (L1 differences, the running sum X)
 * and of the stored weights beta and cb, 2 eps; in all 59 eps, stated as 64.
 * Measured (tests/test_promises_compressed.py, tol 1e-15, spikes, positive
 * and alternating data, every rule): at most 10.2 eps beyond tol, i.e. an
 * error of 3.25 tol at tol = 1e-15, and at most 0.44 tol for every
 * tol >= 1e-14. At tol = 1e-15 the allowance dominates: the promise there
 * is about 15 tol.
 * Beyond the horizon there is no guarantee (lags beyond it are not
 * represented accurately).
 *
 * Creation finds no verified construction (FC_ERR_TOL) only at the extreme
 * corner tol < 2e-15 with horizon > 1e14, and there only for the Grunwald
 * rule (measured over 30 orders per rule at tol 1e-15 .. 1e-14 and horizons
 * 1e12 .. 9e15). Orders below CS_MIN_ORDER = 1e-280 are refused with
 * FC_ERR_ORDER: the kernel beyond lag 0 is of size a/m and would be
 * subnormal at the largest horizons. Orders near the integers (a near 1
 * from either side, a near 2, L1 with a near 0) need no special path, but
 * where the constants of format version 1 (sin(CS_PI * a), p + 1.0) lose
 * too many digits for the check (relative errors of eps / |1 - a| and, for
 * L1, eps / a) creation retries with the constants computed exactly
 * (cs_constants); the version-1 constants are tried first so that the
 * streams the earlier code could build, and their saved blobs, are
 * unchanged.
 *
 * RANGE (see cs_umax for the derivation). Finite samples never give a NaN
 * or an infinity: each stream has a bound umax on the engine inputs u (x;
 * L1: x_n - x_{n-1}; rectangle with a >= 1: the running sum X), fixed at
 * creation, below which every state, partial sum and output is finite; a
 * push or preview with some |u| > umax is refused with FC_ERR_RANGE before
 * anything is written (cs_check_block, which also refuses a count reaching
 * 2^53 with FC_ERR_SIZE). For step 1, umax >= 1e290 for every rule, order,
 * tol and horizon offered (measured: 2.49e291 at the largest horizons, up
 * to 1.7e308 at short ones).
 *
 * LOAD. A saved payload is untrusted: fc__cs_load rebuilds the stream from
 * its parameters (one creation) and requires the stored weights bit for
 * bit, then takes only the running state, checked against the invariants
 * of cs_step (cs_state_ok).
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
 * X_i = sum_{k<=i} x_k: the engine above runs unchanged on u = X with the
 * kernel f (flag cum; X is carried in double-double, high part in xprev,
 * low part in x0, so the payload layout is unchanged). e_j is the second
 * difference of t^a, e_j = int_{-1}^{1} (1-|v|) a(a-1) (j+v)^(a-2) dv, and
 * t^(a-2) = int s^(1-a) e^{-st} ds / Gamma(2-a), hence for m >= 2
 *     f_m = K int_0^inf s^(1-a) (expm1(s)/s)^2 e^{-s m} ds,
 *     K = -h^a sin(pi a)/pi > 0,
 * built and verified as above against f_m from cs_fcum (a cancellation-free
 * series in long double). Since f >= 0 and |X_i| <= sum_{k<=i} |x_k|,
 * sum_m f_m |X_{n-m}| <= sum_k c_{n-k} |x_k|: the guarantee holds as stated,
 * with the rounding of X (below 2 eps sum_{k<=i} |x_k| per value) inside the
 * eps term. For a = 1, f_m = 0 for m >= 2: no terms. The trapezoid rule is
 * not offered for a >= 1 (FC_ERR_ORDER).
 *
 * Arithmetic of a push (identical in the portable and the AVX2 path, so
 * results do not depend on which one runs): explicit fma() for every
 * product, fixed lane structure (two accumulators of four lanes for the
 * terms, four for the band), fixed reduction order. Work per sample and
 * channel: L recursions and a dot product of length B, whatever the data.
 * Memory: 3 L + 2 B doubles shared, 2 B + 2 L + 2 per channel, fixed at
 * creation; a push never allocates.
 *
 * Creation cost: the weights at about 10^4 + 64 log10(horizon / 10^4)
 * lags (fc__lag_kernel) and a few candidate builds, each verified over the
 * whole grid in long double (x87 on x86-64; where long double is double the
 * check is correspondingly less sharp).
 */
#include <stdlib.h>
#include <string.h>
#include <math.h>
#include <float.h>
#include "internal.h"
#include "serial.h"

#if (defined(__GNUC__) || defined(__clang__)) && \
    (defined(__x86_64__) || defined(__i386__))
#define CS_HAVE_AVX2 1
#include <immintrin.h>
#else
#define CS_HAVE_AVX2 0
#endif

#define CS_BAND 64              /* exact local band: lags 0 .. CS_BAND-1 */
#define CS_MAX_TERMS 200        /* more than this: FC_ERR_TOL */
#define CS_DENSE 10000          /* verified densely up to this lag */
#define CS_PER_DECADE 64        /* then on a geometric grid */
#define CS_FMT_VERSION 1u
#define CS_MIN_ORDER FC__CS_MIN_ORDER /* smallest order offered (the rule table) */
#define CS_PI 3.14159265358979323846

struct fc_cstream {
    int rule;
    int x0corr;               /* the rule has an x_0 correction (trapezoid) */
    int diffs;                /* the rule sums differences of x (L1) */
    int cum;                  /* rectangle, order >= 1: engine input is X */
    int simd;                 /* 1: AVX2+FMA kernel, 0: portable */
    double order, step, tol, horizon;
    size_t C;                 /* channels */
    size_t L, Lp;             /* terms, padded to a multiple of 8 */
    uint64_t n;               /* samples pushed per channel */
    /* shared, Lp each (padding: q = 0.5, beta = 0, inj = 1) */
    double *q, *beta;
    double *inj;              /* trapezoid: u_0 enters term l as inj_l u_0 */
    double *cb;               /* CS_BAND: cb[j] = c_{B-1-j}, cb[B-1] = 0 */
    double c0;
    double *ctab;             /* CS_BAND: corr_n, n < B (trapezoid) */
    /* per channel */
    double *ring;             /* C * 2B, mirrored ring of u */
    double *S, *Sc;           /* C * Lp, compensated states */
    double *xprev, *x0;       /* C */
    double umax;              /* largest accepted |u| (RANGE) */
    void *mem;
    size_t memsize;
};

/* ---------------------------------------------------------------- push */

/* Portable kernel: the same operations and order as the AVX2 one. Term l
   receives d, or inj_l * d when inj is not NULL (the one step n = B of the
   trapezoid rule). */
static void cs_terms_portable(size_t Lp, const double *q, const double *beta,
                              const double *inj, double *S, double *Sc,
                              double d, int commit, double acc_out[8])
{
    double acc[8] = {0, 0, 0, 0, 0, 0, 0, 0};
    for (size_t l = 0; l < Lp; l += 8) {
        for (int k = 0; k < 8; k++) {
            double qq = q[l + k], s0 = S[l + k], c0 = Sc[l + k];
            double t = fma(-qq, s0, inj ? inj[l + k] * d : d);
            double t3 = t + c0;
            double s = s0 + t3;
            double z = s - s0;
            double e = (s0 - (s - z)) + (t3 - z);
            acc[k] = fma(beta[l + k], s, acc[k]);
            if (commit) { S[l + k] = s; Sc[l + k] = e; }
        }
    }
    memcpy(acc_out, acc, sizeof acc);
}

static double cs_reduce8(const double a[8]);
static double cs_band_portable(const double *cb, const double *w)
{
    double acc[16], v[8];
    for (int k = 0; k < 16; k++) acc[k] = 0.0;
    for (size_t j = 0; j < CS_BAND; j += 16)
        for (int k = 0; k < 16; k++) acc[k] = fma(cb[j + k], w[j + k], acc[k]);
    for (int k = 0; k < 8; k++) v[k] = acc[k] + acc[k + 8];
    return cs_reduce8(v);
}

static double cs_reduce8(const double a[8])
{
    double v0 = a[0] + a[4], v1 = a[1] + a[5];
    double v2 = a[2] + a[6], v3 = a[3] + a[7];
    return (v0 + v1) + (v2 + v3);
}

#if CS_HAVE_AVX2
__attribute__((target("avx2,fma")))
static void cs_terms_avx2(size_t Lp, const double *q, const double *beta,
                          const double *inj, double *S, double *Sc, double d,
                          int commit, double acc_out[8])
{
    __m256d accA = _mm256_setzero_pd(), accB = _mm256_setzero_pd();
    const __m256d dv = _mm256_set1_pd(d);
    for (size_t l = 0; l < Lp; l += 8) {
        __m256d nq0 = _mm256_sub_pd(_mm256_setzero_pd(), _mm256_loadu_pd(q + l));
        __m256d nq1 = _mm256_sub_pd(_mm256_setzero_pd(), _mm256_loadu_pd(q + l + 4));
        __m256d d0 = inj ? _mm256_mul_pd(_mm256_loadu_pd(inj + l), dv) : dv;
        __m256d d1 = inj ? _mm256_mul_pd(_mm256_loadu_pd(inj + l + 4), dv) : dv;
        __m256d s00 = _mm256_loadu_pd(S + l), s01 = _mm256_loadu_pd(S + l + 4);
        __m256d c00 = _mm256_loadu_pd(Sc + l), c01 = _mm256_loadu_pd(Sc + l + 4);
        __m256d t0 = _mm256_add_pd(_mm256_fmadd_pd(nq0, s00, d0), c00);
        __m256d t1 = _mm256_add_pd(_mm256_fmadd_pd(nq1, s01, d1), c01);
        __m256d s0 = _mm256_add_pd(s00, t0), s1 = _mm256_add_pd(s01, t1);
        __m256d z0 = _mm256_sub_pd(s0, s00), z1 = _mm256_sub_pd(s1, s01);
        __m256d e0 = _mm256_add_pd(_mm256_sub_pd(s00, _mm256_sub_pd(s0, z0)),
                                   _mm256_sub_pd(t0, z0));
        __m256d e1 = _mm256_add_pd(_mm256_sub_pd(s01, _mm256_sub_pd(s1, z1)),
                                   _mm256_sub_pd(t1, z1));
        accA = _mm256_fmadd_pd(_mm256_loadu_pd(beta + l), s0, accA);
        accB = _mm256_fmadd_pd(_mm256_loadu_pd(beta + l + 4), s1, accB);
        if (commit) {
            _mm256_storeu_pd(S + l, s0);
            _mm256_storeu_pd(S + l + 4, s1);
            _mm256_storeu_pd(Sc + l, e0);
            _mm256_storeu_pd(Sc + l + 4, e1);
        }
    }
    _mm256_storeu_pd(acc_out, accA);
    _mm256_storeu_pd(acc_out + 4, accB);
}

__attribute__((target("avx2,fma")))
static double cs_band_avx2(const double *cb, const double *w)
{
    __m256d A = _mm256_setzero_pd(), Bv = _mm256_setzero_pd();
    __m256d Cv = _mm256_setzero_pd(), Dv = _mm256_setzero_pd();
    for (size_t j = 0; j < CS_BAND; j += 16) {
        A = _mm256_fmadd_pd(_mm256_loadu_pd(cb + j), _mm256_loadu_pd(w + j), A);
        Bv = _mm256_fmadd_pd(_mm256_loadu_pd(cb + j + 4), _mm256_loadu_pd(w + j + 4), Bv);
        Cv = _mm256_fmadd_pd(_mm256_loadu_pd(cb + j + 8), _mm256_loadu_pd(w + j + 8), Cv);
        Dv = _mm256_fmadd_pd(_mm256_loadu_pd(cb + j + 12), _mm256_loadu_pd(w + j + 12), Dv);
    }
    double a[8];
    _mm256_storeu_pd(a, _mm256_add_pd(A, Cv));
    _mm256_storeu_pd(a + 4, _mm256_add_pd(Bv, Dv));
    return cs_reduce8(a);
}

static int cs_cpu_avx2(void)
{
    return __builtin_cpu_supports("avx2") && __builtin_cpu_supports("fma");
}
#else
static int cs_cpu_avx2(void) { return 0; }
#endif

static void cs_terms(const fc_cstream *cs, const double *inj, double *S,
                     double *Sc, double d, int commit, double acc[8])
{
#if CS_HAVE_AVX2
    if (cs->simd) {
        cs_terms_avx2(cs->Lp, cs->q, cs->beta, inj, S, Sc, d, commit, acc);
        return;
    }
#endif
    cs_terms_portable(cs->Lp, cs->q, cs->beta, inj, S, Sc, d, commit, acc);
}

static double cs_band(const fc_cstream *cs, const double *w)
{
#if CS_HAVE_AVX2
    if (cs->simd) return cs_band_avx2(cs->cb, w);
#endif
    return cs_band_portable(cs->cb, w);
}

/* X <- X + x in double-double (hi, lo): two exact TwoSums (Knuth, TAOCP
   vol. 2, sec. 4.2.2), the result renormalised so that |lo| <= ulp(hi)/2. */
static inline void cs_dd_add(double *hi, double *lo, double x)
{
    double h = *hi, l = *lo;
    double s = h + x, z = s - h;
    double e = (h - (s - z)) + (x - z);
    double t = l + e;
    double H = s + t;
    z = H - s;
    *lo = (s - (H - z)) + (t - z);
    *hi = H;
}

/*
 * One time step for all channels. mode 0: push (commit), 1: preview,
 * 2: history (u_n and, at n = 0, x_0 taken as unknown = 0).
 * Every mode performs the same arithmetic on the values it uses, so a
 * preview equals the push bit for bit.
 */
static void cs_step(fc_cstream *cs, const double *x, double *y, int mode)
{
    const size_t B = CS_BAND, C = cs->C;
    const int commit = mode == 0;
    const uint64_t n = cs->n;
    const size_t pos = (size_t)(n % B);
    /* trapezoid: corr_n x_0 from the table for n < B; for n >= B it is
       carried by the terms, u_0 having entered term l as inj_l u_0 at
       n = B (corr_m + c_m = sum_l beta_l inj_l (1-q_l)^m) */
    const double corr = (cs->x0corr && n < B) ? cs->ctab[n] : 0.0;
    const int inject = cs->x0corr && n == B;
    for (size_t c = 0; c < C; c++) {
        double xc = mode == 2 ? 0.0 : x[c];
        double u;
        double Xhi = 0.0, Xlo = 0.0;
        if (cs->diffs) u = (n == 0 || mode == 2) ? 0.0 : xc - cs->xprev[c];
        else if (cs->cum) {
            /* X_n = X_{n-1} + x_n in double-double (xprev = high part,
               x0 = low part), u = X_n rounded */
            Xhi = cs->xprev[c];
            Xlo = cs->x0[c];
            cs_dd_add(&Xhi, &Xlo, xc);
            u = Xhi;
        } else u = xc;
        double *ring = cs->ring + c * 2 * B;
        double d = ring[pos];             /* u_{n-B} (0 while n < B) */
        double acc[8];
        double terms = 0.0;
        if (cs->L) {
            cs_terms(cs, inject ? cs->inj : NULL, cs->S + c * cs->Lp,
                     cs->Sc + c * cs->Lp, d, commit, acc);
            terms = cs_reduce8(acc);
        }
        /* window u_{n-B+1} .. u_{n-1}, u_{n-B} (weight 0) */
        double band = cs_band(cs, ring + pos + 1);
        double x0 = n == 0 ? xc : cs->x0[c];
        double yc = ((terms + band) + cs->c0 * u) + corr * x0;
        y[c] = yc;
        if (commit) {
            ring[pos] = u;
            ring[pos + B] = u;
            if (cs->cum) { cs->xprev[c] = Xhi; cs->x0[c] = Xlo; }
            else {
                cs->xprev[c] = xc;
                if (n == 0) cs->x0[c] = xc;
            }
        }
    }
    if (commit) cs->n = n + 1;
}

/*
 * RANGE. FC_OK if pushing the count time steps x (finite) keeps every
 * engine input u (x; L1: x_n - x_{n-1}; rectangle with a >= 1: the running
 * sum X) within umax, else FC_ERR_RANGE; also FC_ERR_SIZE if the count
 * would reach 2^53 (the loader's bound). Writes nothing: the running sums
 * and the differences are recomputed with the very operations of cs_step.
 */
static int cs_check_block(const fc_cstream *cs, const double *x, size_t count)
{
    const size_t C = cs->C;
    const double U = cs->umax;
    if ((uint64_t)count > FC_INDEX_LIMIT - 1 - cs->n) return FC_ERR_SIZE;
    for (size_t c = 0; c < C; c++) {
        double hi = cs->xprev[c], lo = cs->x0[c];
        uint64_t n = cs->n;
        for (size_t t = 0; t < count; t++, n++) {
            double xc = x[t * C + c], u;
            if (cs->diffs) { u = n == 0 ? 0.0 : xc - hi; hi = xc; }
            else if (cs->cum) { cs_dd_add(&hi, &lo, xc); u = hi; }
            else u = xc;
            if (!(fabs(u) <= U)) return FC_ERR_RANGE;
        }
    }
    return FC_OK;
}

int fc__cs_push_block(fc_cstream *cs, const double *x, size_t count, double *y)
{
    int st;
    if (!cs || (count && (!x || !y))) return FC_ERR_NULL;
    if ((st = cs_check_block(cs, x, count)) != FC_OK) return st;
    for (size_t t = 0; t < count; t++)
        cs_step(cs, x + t * cs->C, y + t * cs->C, 0);
    return FC_OK;
}

int fc__cs_preview(const fc_cstream *cs, const double *x, double *y)
{
    int st;
    if (!cs || !x || !y) return FC_ERR_NULL;
    if ((st = cs_check_block(cs, x, 1)) != FC_OK) return st;
    cs_step((fc_cstream *)cs, x, y, 1);   /* mode 1 writes nothing */
    return FC_OK;
}

int fc__cs_history(const fc_cstream *cs, double *h)
{
    if (!cs || !h) return FC_ERR_NULL;
    cs_step((fc_cstream *)cs, NULL, h, 2);  /* mode 2 writes nothing */
    return FC_OK;
}

void fc__cs_reset(fc_cstream *cs)
{
    if (!cs) return;
    size_t C = cs->C, B = CS_BAND;
    memset(cs->ring, 0, C * 2 * B * sizeof(double));
    memset(cs->S, 0, C * cs->Lp * sizeof(double));
    memset(cs->Sc, 0, C * cs->Lp * sizeof(double));
    memset(cs->xprev, 0, C * sizeof(double));
    memset(cs->x0, 0, C * sizeof(double));
    cs->n = 0;
}

uint64_t fc__cs_count(const fc_cstream *cs) { return cs ? cs->n : 0; }
size_t fc__cs_nbytes(const fc_cstream *cs)
{
    return cs ? sizeof(*cs) + cs->memsize : 0;
}
size_t fc__cs_terms(const fc_cstream *cs) { return cs ? cs->L : 0; }

void fc__cs_free(fc_cstream *cs)
{
    if (!cs) return;
    free(cs->mem);
    free(cs);
}

/* ------------------------------------------------------------ allocation */

static int cs_alloc(size_t C, size_t Lp, fc_cstream **out)
{
    const size_t B = CS_BAND;
    size_t nd = 0, t;
    /* shared: 3*Lp + 2*B; per channel: 2B + 2*Lp + 2 */
    size_t per;
    if (fc__mul_size(2, Lp, &per) || fc__add_size(per, 2 * B + 2, &per) ||
        fc__mul_size(per, C, &t) || fc__add_size(t, 3 * Lp + 2 * B, &nd) ||
        fc__mul_size(nd, sizeof(double), &t) || fc__add_size(t, 64, &t))
        return FC_ERR_SIZE;
    fc_cstream *cs = calloc(1, sizeof *cs);
    if (!cs) return FC_ERR_NOMEM;
    cs->mem = calloc(1, t);
    if (!cs->mem) { free(cs); return FC_ERR_NOMEM; }
    cs->memsize = t;
    uintptr_t a = ((uintptr_t)cs->mem + 63) & ~(uintptr_t)63;
    double *p = (double *)a;
    cs->q = p; p += Lp;
    cs->beta = p; p += Lp;
    cs->inj = p; p += Lp;
    cs->cb = p; p += B;
    cs->ctab = p; p += B;
    cs->ring = p; p += C * 2 * B;
    cs->S = p; p += C * Lp;
    cs->Sc = p; p += C * Lp;
    cs->xprev = p; p += C;
    cs->x0 = p; p += C;
    cs->C = C;
    cs->Lp = Lp;
    for (size_t l = 0; l < Lp; l++) { cs->q[l] = 0.5; cs->inj[l] = 1.0; }
    *out = cs;
    return FC_OK;
}

/* ------------------------------------------------------ SOE construction */

/* The density kinds: the rule table's (FC__DENS_*), and two derived
   ones: the trapezoid's x_0 correction and the rectangle rule on the
   running sum. */
enum { K_RECT = FC__DENS_RECT, K_TRAP = FC__DENS_TRAP, K_GRUN = FC__DENS_GRUN,
       K_L1 = FC__DENS_L1, K_CORR = 5, K_RCUM = 6 };

/* Rectangle rule, 1 <= a < 2: the kernel on the running sum X,
   f_0 = 0, f_1 = h^a/Gamma(a+1), f_m = h^a/Gamma(a+1) (m^a - 2(m-1)^a + (m-2)^a)
   (m >= 2), in long double without cancellation: m = 2 by expm1, m >= 3
   by the binomial series m^a sum_{k>=2} (-1)^k binom(a,k) (2^k - 2) m^-k,
   whose terms are all positive for 1 < a < 2 (and zero for a = 1). */
static long double cs_fcum_pre(double a, double h)
{
    return powl((long double)h, (long double)a) / tgammal((long double)a + 1.0L);
}
static double cs_fcum(double a, long double pre, uint64_t m)
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

/* phi(s) of the densities above, without the constant K. */
static double cs_phi(int kind, double a, double s)
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
    case K_L1:
        return s > 0 ? -expm1(-s) / s : 1.0;
    }
    return NAN; /* not a kind: every kind is listed above */
}

/* Eigen-decomposition of a small symmetric matrix (cyclic Jacobi). A: n*n,
   destroyed; eigenvalues in w, eigenvectors in columns of V. */
static void cs_jacobi_eig(size_t n, double *A, double *w, double *V)
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
#define CS_MAXG 16
static size_t cs_gauss_discrete(size_t N, const double *x, const double *w,
                                size_t ng, double *work, double *gx, double *gw)
{
    double tot = 0.0;
    for (size_t j = 0; j < N; j++) tot += w[j];
    if (ng > N) ng = N;
    if (ng > CS_MAXG) ng = CS_MAXG;
    double *Q = work, *v = work + N * ng;
    double al[CS_MAXG], be[CS_MAXG];
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
    double A[CS_MAXG * CS_MAXG], V[CS_MAXG * CS_MAXG];
    memset(A, 0, sizeof A);
    for (size_t i = 0; i < n; i++) {
        A[i * n + i] = al[i];
        if (i + 1 < n) A[i * n + i + 1] = A[(i + 1) * n + i] = be[i];
    }
    cs_jacobi_eig(n, A, gx, V);
    for (size_t i = 0; i < n; i++) gw[i] = tot * V[i] * V[i];
    return n;
}

/* Step of the trapezoidal rule in tau for relative error kappa*tol on the
   pure power s^p: 2 sqrt(2 pi) w^(p+1/2) e^(-pi w/2) / Gamma(p+1), w = 2pi/dtau
   (Stirling's formula for |Gamma(x + i w)|). */
static double cs_dtau(double p, double target)
{
    double lg = log(tgamma(p + 1.0));
    double lo = 0.5, hi = 1000.0;
    for (int it = 0; it < 100; it++) {
        double w = 0.5 * (lo + hi);
        double e = log(2.0) + 0.5 * log(2.0 * CS_PI) + (p + 0.5) * log(w) -
                   0.5 * CS_PI * w - lg;
        if (e > log(target)) lo = w; else hi = w;
    }
    double dt = 2.0 * CS_PI / hi;
    return dt > 1.5 ? 1.5 : dt;
}

typedef struct {
    int rule, kind;
    double a, p, p1, K, Kcorr, tol, M;   /* p1 = p + 1, exact */
    /* verification grid and references */
    size_t ndense, ngeo;
    uint64_t mlo;              /* = B */
    const double *cref, *corrref;   /* dense then geometric */
    const uint64_t *mgeo;
} cs_ctx;

/* Build one candidate: L terms in q[], w[] (kernel weights), wc[] (corr).
   Returns FC_OK or FC_ERR_TOL (too many terms) / FC_ERR_NOMEM. */
static int cs_build(const cs_ctx *cx, double X, size_t ng, double kappa,
                    double cB, double *q, double *w, double *wc, size_t *Lout)
{
    const double a = cx->a, p = cx->p, p1 = cx->p1, B = CS_BAND;
    const double dtau = cs_dtau(p, kappa * cx->tol);
    const double sL = X / cx->M;
    const double eta = 0.1;
    const int kind = cx->kind;
    size_t L = 0;
    double jL = ceil(log(sL) / dtau);
    /* trapezoid nodes s >= sL up to the right truncation */
    for (double j = jL;; j += 1.0) {
        double s = exp(j * dtau);
        double W = dtau * pow(s, p1) * cs_phi(kind, a, s);
        if (s * B > 1.0 && W * exp(-s * B) < eta * cx->tol * cB) break;
        if (L + ng >= CS_MAX_TERMS) return FC_ERR_TOL;
        q[L] = -expm1(-s);
        w[L] = W;
        wc[L] = fc__rule_has_x0(cx->rule) ? W * cs_phi(K_CORR, a, s) / cs_phi(K_TRAP, a, s) : 0.0;
        L++;
    }
    /* left: discrete measure of the nodes s < sL, in x = s / sL */
    size_t N = (size_t)(46.0 / dtau) + 3, i = 0;
    double *buf = malloc((3 * N + N * CS_MAXG + N) * sizeof(double));
    if (!buf) return FC_ERR_NOMEM;
    double *xs = buf, *ws = buf + N, *wrk = buf + 2 * N;
    double j = jL - 1.0, s = 0.0;
    for (; i + 1 < N; j -= 1.0, i++) {
        s = exp(j * dtau);
        double xx = s / sL;
        if (xx < 1e-20) break;
        xs[i] = xx;
        ws[i] = dtau * pow(s, p1) * cs_phi(kind, a, s);
    }
    /* geometric remainder sum_{k>=0} W(s e^{-k dtau}), phi ~ phi(0) */
    s = exp(j * dtau);
    xs[i] = 0.0;
    ws[i] = dtau * pow(s, p1) * cs_phi(kind, a, 0.0) / (-expm1(-p1 * dtau));
    i++;
    double gx[CS_MAXG], gw[CS_MAXG];
    size_t n = cs_gauss_discrete(i, xs, ws, ng, wrk, gx, gw);
    free(buf);
    for (size_t k = 0; k < n; k++) {
        double sk = gx[k] * sL;
        if (!(sk > 0.0) || !(gw[k] > 0.0) || !isfinite(gw[k])) return FC_ERR_TOL;
        q[L] = -expm1(-sk);
        w[L] = gw[k];
        wc[L] = fc__rule_has_x0(cx->rule) ? gw[k] * cs_phi(K_CORR, a, sk) / cs_phi(K_TRAP, a, sk) : 0.0;
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
static double cs_verify(const cs_ctx *cx, size_t L, const double *q,
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

/*
 * RANGE. Let U bound every engine input so far (|u| <= U: checked for
 * each sample by cs_check_block). A state after n pushes is a geometric
 * sum of at most n inputs, |S_l| <= U min(1/q_l, n) (times 1 + a few eps
 * for rounding; the compensated state tracks the exact recursion, and the
 * trapezoid's one injection has inj_l < 1), and the bound
 *     |S_l| <= 2 U min(1/q_l, n)                                  (*)
 * is kept by every push (from n to n + 1: (1 - q) 2U min(1/q, n) + U <=
 * 2U min(1/q, n + 1)). The count is below 2^53 (cs_check_block), so with
 * m_l = min(1/q_l, 2^53): every |S_l| <= 2 U m_l, every output and every
 * partial sum of cs_step is at most U (sum_l 2 |beta_l| m_l + sum_j |cb_j|
 * + |c0| + max_n |ctab_n|) (|x_0| <= U as x_0 = u_0 outside L1, where
 * ctab is 0), and q S, d - q S, the padding lanes (q = 1/2) at most 4 U.
 * With G = max(that sum of weights, 2 max_l m_l, 4) and U = DBL_MAX / (4 G)
 * everything stays below DBL_MAX / 4 before rounding, and the rounded sums
 * (at most 2 CS_MAX_TERMS + CS_BAND + 3 terms) exceed that by a relative
 * 1e-13 at most: no overflow, so finite inputs give finite states and
 * outputs. Computed in a fixed order from the stored weights, so a rebuilt
 * stream gets the same bits. Since sum_l beta_l m_l is within a factor
 * 1/(1 - 1/e) of sum_{m < 2^53} of the realised kernel, for step 1 this
 * U is above 1e290 for every rule and order offered (about 1.4e291 at
 * worst: G is then at most about 3.2 * 2^53).
 */
static double cs_cap(double q)
{
    double r = 1.0 / q, cap = (double)FC_INDEX_LIMIT;
    return r < cap ? r : cap;
}

static double cs_umax(const fc_cstream *cs)
{
    const size_t B = CS_BAND;
    double gs = 4.0, go = fabs(cs->c0), cmax = 0.0;
    for (size_t l = 0; l < cs->L; l++) {
        double m = cs_cap(cs->q[l]);
        if (2.0 * m > gs) gs = 2.0 * m;
        go += 2.0 * fabs(cs->beta[l]) * m;
    }
    for (size_t j = 0; j < B; j++) {
        go += fabs(cs->cb[j]);
        if (fabs(cs->ctab[j]) > cmax) cmax = fabs(cs->ctab[j]);
    }
    go += cmax;
    double g = go > gs ? go : gs;
    if (!(g <= 1e300)) return 0.0;      /* not reached for accepted steps */
    return 0.25 * (DBL_MAX / g);
}

/* The parts of a new stream common to both shapes: the band (reversed for
   the dot product, lag 0 apart), the trapezoid table, the parameters. */
static void cs_finish(fc_cstream *cs, const double *cband, const double *ctab,
                      int rule, double order, double step, double tol,
                      double horizon)
{
    const size_t B = CS_BAND;
    for (size_t jj = 0; jj + 1 < B; jj++) cs->cb[jj] = cband[B - 1 - jj];
    cs->cb[B - 1] = 0.0;
    cs->c0 = cband[0];
    memcpy(cs->ctab, ctab, B * sizeof *ctab);
    cs->rule = rule; cs->order = order; cs->step = step;
    cs->tol = tol; cs->horizon = horizon;
    cs->cum = order >= fc__rule(rule)->cumulative_from;
    cs->x0corr = fc__rule_has_x0(rule);
    cs->diffs = fc__rule_uses_differences(rule);
    cs->simd = cs_cpu_avx2();
    cs->umax = cs_umax(cs);
    fc__cs_reset(cs);
}

/* sin(pi a) for 0 < a < 2 with full relative accuracy: the argument is
   reduced exactly first (1 - a and 2 - a are exact by Sterbenz's lemma),
   so that a near 1 does not lose digits to the rounding of pi a (the
   relative error of sin(CS_PI * a) is about eps / |1 - a|). */
static double cs_sinpi(double a)
{
    if (a <= 0.5) return sin(CS_PI * a);
    if (a <= 1.5) return sin(CS_PI * (1.0 - a));
    return -sin(CS_PI * (2.0 - a));
}

/*
 * The exponent p of the density, p1 = p + 1 and the constants K, Kcorr.
 * exact = 0: as in format version 1, K from sin(CS_PI * a) and p1 = p + 1.0,
 * which lose digits as a approaches 1 (relative error of sin about
 * eps / |1 - a|) and, for L1, as a approaches 0 (p + 1.0 with p = a - 1
 * has an absolute error of eps, a relative one of eps / a), so that the
 * check at creation fails there. exact = 1: sin(pi a) after an exact
 * argument reduction (cs_sinpi), and p1 formed exactly (1 - a and 2 - a
 * exact by Sterbenz's lemma for 1/2 <= a <= 2; a + 1 rounds once).
 * Creation tries exact = 0 first, so that every stream the version-1 code
 * could build gets the same bits (and its saved blobs still load), and
 * exact = 1 only when no candidate passes.
 */
static void cs_constants(cs_ctx *cx, int rule, int cum, double a, double step,
                         int exact)
{
    double spa = (exact ? cs_sinpi(a) : sin(CS_PI * a)) / CS_PI;
    if (cum) {
        cx->kind = K_RCUM; cx->p = 1.0 - a; cx->K = -spa * pow(step, a);
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
    if (fc__rule_x0(d) != NULL) cx->Kcorr = -spa * pow(step, a);
    cx->p1 = cx->p + 1.0;
    if (exact) cx->p1 = p1x;
}

/* loading = 1: the rebuild of fc__cs_load, which also accepts orders
   below CS_MIN_ORDER (version-1 code could build some of them at short
   horizons, and their saved blobs must still load). */
static int cs_create(int rule, double order, double step, size_t channels,
                     double tol, double horizon, int loading, fc_cstream **out)
{
    int st;
    if (!out) return FC_ERR_NULL;
    if ((st = fc__check_rule(rule, order, step)) != FC_OK) return st;
    /* the rule table's compressed range: 0 < a < 1 for every rule;
       1 <= a < 2 for the rectangle rule, which then runs on the running
       sum X of x (CONSTRUCTION, 1 <= a < 2); below CS_MIN_ORDER (the
       range's lower end) the kernel beyond lag 0 (of size a / m) is
       subnormal at lags near 2^53 and cannot be held to a relative
       tolerance, but a rebuild accepts it (loading) */
    const fc__rule_desc *d = fc__rule(rule);
    const int cum = order >= d->cumulative_from;
    fc__range r = d->compressed;
    if (loading) { r.lo = 0.0; r.lo_incl = 0; }
    if (!fc__in_range(&r, order)) return FC_ERR_ORDER;
    if (channels == 0) return FC_ERR_ARG;
    if (!(tol >= 1e-15 && tol <= 1e-2) || !isfinite(tol)) return FC_ERR_TOL;
    if (!(horizon >= 1.0) || !isfinite(horizon) ||
        horizon > (double)(FC_INDEX_LIMIT - 2))
        return FC_ERR_TOL;

    const size_t B = CS_BAND;
    const double a = order;
    const uint64_t M = (uint64_t)floor(horizon);
    cs_ctx cx;
    memset(&cx, 0, sizeof cx);
    cx.rule = rule;
    cx.a = a;
    cx.tol = tol;
    cx.M = (double)M;
    cx.mlo = B;
    /* version-1 constants first (the blobs saved so far were built with
       them and must rebuild to the same bits); the exact ones only if no
       candidate passes with those (cs_constants) */
    cs_constants(&cx, rule, cum, a, step, 0);
    if (!isfinite(cx.K) || cx.K == 0.0) return FC_ERR_RANGE; /* h^a or h^-a beyond the double range */

    /* band weights and the trapezoid start table */
    double cband[CS_BAND], ctab[CS_BAND];
    const long double fpre = cum ? cs_fcum_pre(a, step) : 0.0L;
    if (cum) {
        for (size_t m = 0; m < B; m++)
            if (!isfinite(cband[m] = cs_fcum(a, fpre, m))) return FC_ERR_RANGE;
    } else if ((st = fc__lag_kernel(rule, a, step, 0, B, cband)) != FC_OK)
        return st;
    memset(ctab, 0, sizeof ctab);
    if (fc__rule_has_x0(rule) &&
        (st = fc__x0_correction(rule, a, step, 0, B, ctab)) != FC_OK)
        return st;

    /* verification grid */
    size_t L = 0, Lbest = 0;
    double *tmp = NULL;
    uint64_t *mgeo = NULL;
    long double *P = NULL;
    /* a = 1: f_m = 0 for m >= 2, the band alone is exact */
    if (M >= B && !(cum && a == 1.0)) {
        uint64_t dense_hi = M < CS_DENSE ? M : CS_DENSE;
        cx.ndense = (size_t)(dense_hi - B + 1);
        size_t maxgeo = 0;
        if (M > CS_DENSE)
            maxgeo = (size_t)(CS_PER_DECADE * log10((double)M / CS_DENSE)) + 2;
        mgeo = malloc((maxgeo + 1) * sizeof *mgeo);
        size_t ntot = cx.ndense + maxgeo;
        /* tmp: refs (2*ntot) + 7 arrays of CS_MAX_TERMS (best and candidate) */
        tmp = malloc((2 * ntot + 7 * CS_MAX_TERMS) * sizeof(double));
        P = malloc((2 * CS_MAX_TERMS + cx.ndense) * sizeof *P);
        if (!mgeo || !tmp || !P) { st = FC_ERR_NOMEM; goto fail; }
        size_t g = 0;
        uint64_t last = dense_hi;
        for (size_t k = 1; k < maxgeo; k++) {
            double mm = floor(CS_DENSE * pow((double)M / CS_DENSE, (double)k / (double)(maxgeo - 1)) + 0.5);
            uint64_t mi = (uint64_t)mm;
            if (mi > M) mi = M;
            if (mi > last) { mgeo[g++] = mi; last = mi; }
        }
        if (M > last) mgeo[g++] = M;
        cx.ngeo = g;
        cx.mgeo = mgeo;
        double *cref = tmp, *corrref = tmp + ntot;
        if (cum) {
            for (size_t k = 0; k < cx.ndense; k++) cref[k] = cs_fcum(a, fpre, B + k);
            for (size_t k = 0; k < g; k++) cref[cx.ndense + k] = cs_fcum(a, fpre, mgeo[k]);
        } else {
            if ((st = fc__lag_kernel(rule, a, step, B, cx.ndense, cref)) != FC_OK) goto fail;
            for (size_t k = 0; k < g; k++)
                if ((st = fc__lag_kernel(rule, a, step, mgeo[k], 1, cref + cx.ndense + k)) != FC_OK)
                    goto fail;
        }
        if (fc__rule_has_x0(rule)) {
            if ((st = fc__x0_correction(rule, a, step, B, cx.ndense, corrref)) != FC_OK) goto fail;
            for (size_t k = 0; k < g; k++)
                if ((st = fc__x0_correction(rule, a, step, mgeo[k], 1, corrref + cx.ndense + k)) != FC_OK)
                    goto fail;
        }
        for (size_t k = 0; k < cx.ndense + g; k++)
            if (!isfinite(cref[k]) || cref[k] == 0.0 ||
                (fc__rule_has_x0(rule) && (!isfinite(corrref[k]) || corrref[k] == 0.0))) {
                st = FC_ERR_TOL;
                goto fail;
            }
        cx.cref = cref;
        cx.corrref = corrref;

        double *qb = tmp + 2 * ntot, *wb = qb + CS_MAX_TERMS, *ijb = wb + CS_MAX_TERMS;
        double *qc = ijb + CS_MAX_TERMS, *wcand = qc + CS_MAX_TERMS, *wccand = wcand + CS_MAX_TERMS;
        double *ijc = wccand + CS_MAX_TERMS;
        static const struct { double X; int ng; double kappa; } cand[] = {
            {2.0, 7, 0.3}, {3.0, 8, 0.3}, {2.0, 8, 0.1}, {3.0, 9, 0.1},
            {4.0, 10, 0.03}, {4.0, 11, 0.01},
        };
        const double thresh = 0.6 * tol + 16.0 * 2.220446049250313e-16;
        int found = 0;
        for (int pass = 0; pass < 2 && !found; pass++) {
            if (pass == 1) {
                cs_constants(&cx, rule, cum, a, step, 1);
                if (!isfinite(cx.K) || cx.K == 0.0) break;
            }
            const double cB = fabs(cref[0] / cx.K);
            for (size_t ci = 0; ci < sizeof cand / sizeof cand[0]; ci++) {
                if (found && ci >= 2) break;    /* the fallbacks only if needed */
                size_t Lc;
                int bs = cs_build(&cx, cand[ci].X, (size_t)cand[ci].ng, cand[ci].kappa,
                                  cB, qc, wcand, wccand, &Lc);
                if (bs == FC_ERR_NOMEM) { st = bs; goto fail; }
                if (bs != FC_OK) continue;
                if (found && Lc >= Lbest) continue;
                for (size_t l = 0; l < Lc; l++) ijc[l] = 1.0;
                double e = cs_verify(&cx, Lc, qc, wcand, cref, P, P + 2 * CS_MAX_TERMS);
                if (e <= thresh && fc__rule_has_x0(rule)) {
                    /* the correction actually realised: beta (inj - 1), inj rounded */
                    for (size_t l = 0; l < Lc; l++) {
                        ijc[l] = 1.0 + wccand[l] / wcand[l];
                        wccand[l] = (double)((long double)wcand[l] * ((long double)ijc[l] - 1.0L));
                        if (!(ijc[l] > 0.0 && ijc[l] <= 2.0)) e = HUGE_VAL;
                    }
                    if (e <= thresh)
                        e = cs_verify(&cx, Lc, qc, wccand, corrref, P, P + 2 * CS_MAX_TERMS);
                }
                if (!(e <= thresh)) continue;
                memcpy(qb, qc, Lc * sizeof(double));
                memcpy(wb, wcand, Lc * sizeof(double));
                memcpy(ijb, ijc, Lc * sizeof(double));
                Lbest = Lc;
                found = 1;
            }
        }
        if (!found) { st = FC_ERR_TOL; goto fail; }
        L = Lbest;
        /* copy into the stream below */
        size_t Lp = (L + 7) / 8 * 8;
        if (Lp == 0) Lp = 8;
        fc_cstream *cs;
        if ((st = cs_alloc(channels, Lp, &cs)) != FC_OK) goto fail;
        for (size_t l = 0; l < L; l++) {
            /* fold (1-q)^B into the weights: the state holds sum r^j u_{n-B-j} */
            long double rB = expl((long double)B * log1pl(-(long double)qb[l]));
            cs->q[l] = qb[l];
            cs->beta[l] = (double)((long double)wb[l] * rB);
            cs->inj[l] = fc__rule_has_x0(rule) ? ijb[l] : 1.0;
        }
        cs->L = L;
        cs_finish(cs, cband, ctab, rule, order, step, tol, horizon);
        free(tmp); free(mgeo); free(P);
        *out = cs;
        return FC_OK;
    }
    /* horizon < B: the band alone is exact for every n <= horizon */
    {
        fc_cstream *cs;
        if ((st = cs_alloc(channels, 8, &cs)) != FC_OK) return st;
        cs->L = 0;
        cs_finish(cs, cband, ctab, rule, order, step, tol, horizon);
        *out = cs;
        return FC_OK;
    }
fail:
    free(tmp); free(mgeo); free(P);
    return st;
}

int fc__cs_create(int rule, double order, double step, size_t channels,
                  double tol, double horizon, fc_cstream **out)
{
    return cs_create(rule, order, step, channels, tol, horizon, 0, out);
}

/* ------------------------------------------------------------ save/load */

/*
 * Payload (little-endian, fixed widths):
 *   0  "FCCS"            4  u32 version
 *   8  u32 rule         12  u32 band B
 *  16  u64 channels     24  u64 L        32  u64 n
 *  40  f64 order        48  f64 step     56  f64 tol     64  f64 horizon
 *  72  f64 q[L], beta[L], inj[L], cb[B], c0, ctab[B]
 *      then per channel: ring[B] (slots 0..B-1), S[L], Sc[L], xprev, x0
 *      (rectangle with order >= 1: ring holds X, xprev/x0 the high/low
 *      parts of X)
 *  end u64 FNV-1a 64 of everything before it
 */
#define CS_HDR 72
static const unsigned char cs_magic[4] = {'F', 'C', 'C', 'S'};

/* Number of doubles after the header for (C, L); FC_ERR_SIZE on overflow. */
static int cs_ndoubles(uint64_t C, uint64_t L, size_t *nd)
{
    const size_t B = CS_BAND;
    size_t per, t, sh;
    if (C > (size_t)-1 || L > CS_MAX_TERMS) return FC_ERR_SIZE;
    sh = 3 * (size_t)L + 2 * B + 1;
    if (fc__mul_size(2, (size_t)L, &per) || fc__add_size(per, B + 2, &per) ||
        fc__mul_size(per, (size_t)C, &t) || fc__add_size(t, sh, &t))
        return FC_ERR_SIZE;
    *nd = t;
    return FC_OK;
}

static size_t cs_size_for(uint64_t C, uint64_t L)
{
    size_t nd, t;
    if (cs_ndoubles(C, L, &nd) || fc__mul_size(nd, 8, &t) ||
        fc__add_size(t, CS_HDR + 8, &t))
        return 0;
    return t;
}

size_t fc__cs_save_size(const fc_cstream *cs)
{
    return cs ? cs_size_for(cs->C, cs->L) : 0;
}

int fc__cs_save(const fc_cstream *cs, unsigned char *buf, size_t size)
{
    if (!cs || !buf) return FC_ERR_NULL;
    size_t need = fc__cs_save_size(cs);
    if (need == 0) return FC_ERR_SIZE;
    if (size < need) return FC_ERR_ARG;
    const size_t B = CS_BAND, L = cs->L;
    unsigned char *p = buf;
    memcpy(p, cs_magic, 4);
    fc__put32(p + 4, CS_FMT_VERSION);
    fc__put32(p + 8, (uint32_t)cs->rule);
    fc__put32(p + 12, (uint32_t)B);
    fc__put64(p + 16, (uint64_t)cs->C);
    fc__put64(p + 24, (uint64_t)L);
    fc__put64(p + 32, cs->n);
    fc__putd(p + 40, cs->order);
    fc__putd(p + 48, cs->step);
    fc__putd(p + 56, cs->tol);
    fc__putd(p + 64, cs->horizon);
    p += CS_HDR;
#define PUTV(arr, cnt) do { for (size_t i_ = 0; i_ < (cnt); i_++) { fc__putd(p, (arr)[i_]); p += 8; } } while (0)
    PUTV(cs->q, L); PUTV(cs->beta, L); PUTV(cs->inj, L);
    PUTV(cs->cb, B);
    fc__putd(p, cs->c0); p += 8;
    PUTV(cs->ctab, B);
    for (size_t c = 0; c < cs->C; c++) {
        PUTV(cs->ring + c * 2 * B, B);
        PUTV(cs->S + c * cs->Lp, L);
        PUTV(cs->Sc + c * cs->Lp, L);
        fc__putd(p, cs->xprev[c]); p += 8;
        fc__putd(p, cs->x0[c]); p += 8;
    }
#undef PUTV
    fc__put64(p, fc__fnv1a(FC__FNV_OFFSET, buf, (size_t)(p - buf)));
    return FC_OK;
}

/* Bit-for-bit equality of two doubles (distinguishes -0 from +0). */
static int cs_same(double a, double b)
{
    return memcmp(&a, &b, sizeof a) == 0;
}
static int cs_zero_bits(double a) { return cs_same(a, 0.0); }

/* (hi, lo) is what an exact TwoSum leaves: |lo| <= ulp(hi)/2, lo = 0 when
   hi = 0 (a sum that rounds to zero or to a subnormal is exact). */
static int cs_dd_ok(double hi, double lo)
{
    int e;
    if (hi == 0.0) return lo == 0.0;
    (void)frexp(hi, &e);                /* |hi| in [2^(e-1), 2^e) */
    return fabs(lo) <= ldexp(1.0, e - 54);
}

/*
 * The running state of a loaded stream against what cs_step can produce
 * (every invariant below follows from cs_step and cs_check_block):
 *  - every ring value (an engine input u) has |u| <= umax; every state
 *    obeys (*) of RANGE, |S_l| <= 2 umax min(1/q_l, n), and (S_l, Sc_l)
 *    is a TwoSum pair;
 *  - while n < B the ring slots n .. B-1 have never been written (+0);
 *    the terms receive ring slot n mod B at step n, so S = Sc = +0 while
 *    n <= B (L1: n <= B + 1, since u_0 = 0);
 *  - n = 0: xprev = x0 = +0;
 *  - n >= 1: outside L1, ring slot (n-1) mod B holds u_{n-1}, which is
 *    xprev (the last sample, or for a >= 1 the high part of X); L1: slot 0
 *    holds u_0 = +0 while n <= B, and xprev = x0 = x_0 when n = 1;
 *  - rectangle a >= 1 (cum): (xprev, x0) is the double-double X;
 *    otherwise x0 = x_0, which is ring slot 0 while n <= B, and |x_0| <=
 *    umax outside L1 (x_0 = u_0).
 */
static int cs_state_ok(const fc_cstream *cs)
{
    const size_t B = CS_BAND, L = cs->L;
    const uint64_t n = cs->n;
    const double U = cs->umax;
    for (size_t c = 0; c < cs->C; c++) {
        const double *ring = cs->ring + c * 2 * B;
        const double *S = cs->S + c * cs->Lp, *Sc = cs->Sc + c * cs->Lp;
        const double xp = cs->xprev[c], x0 = cs->x0[c];
        for (size_t j = 0; j < B; j++) {
            if (!(fabs(ring[j]) <= U)) return 0;
            if (n < B && j >= n && !cs_zero_bits(ring[j])) return 0;
        }
        const int quiet = n <= B || (cs->diffs && n <= B + 1);
        for (size_t l = 0; l < L; l++) {
            /* (*) of RANGE (n >= 1 here unless S = 0 is required anyway) */
            double mn = cs_cap(cs->q[l]);
            if ((double)n < mn) mn = (double)n;
            if (!(fabs(S[l]) <= 2.0 * U * mn)) return 0;
            if (!cs_dd_ok(S[l], Sc[l])) return 0;
            if (quiet && !(cs_zero_bits(S[l]) && cs_zero_bits(Sc[l]))) return 0;
        }
        if (n == 0) {
            if (!cs_zero_bits(xp) || !cs_zero_bits(x0)) return 0;
            continue;
        }
        if (cs->diffs) {
            if (n <= B && !cs_zero_bits(ring[0])) return 0;
            if (n == 1 && !cs_same(xp, x0)) return 0;
        } else {
            if (!cs_same(xp, ring[(n - 1) % B])) return 0;
            if (cs->cum) {
                if (!cs_dd_ok(xp, x0)) return 0;
            } else {
                if (!(fabs(x0) <= U)) return 0;
                if (n <= B && !cs_same(x0, ring[0])) return 0;
            }
        }
    }
    return 1;
}

/*
 * The payload is untrusted. Sizes: the channel count and the term count
 * must give exactly the payload size (so nothing larger than the blob is
 * ever allocated), and the checksum must match. Parameters: the stream is
 * rebuilt by fc__cs_create from (rule, order, step, channels, tol,
 * horizon) -- the construction is deterministic -- and the stored q, beta,
 * inj, band, c0 and ctab must equal the rebuilt ones bit for bit. Only the
 * running state (ring, S, Sc, xprev, x0, n) is then taken from the blob,
 * and it must pass cs_state_ok. Anything else is FC_ERR_FORMAT (FC_ERR_NOMEM
 * if the rebuild runs out of memory). Cost: one creation.
 */
int fc__cs_load(const unsigned char *buf, size_t size, fc_cstream **out)
{
    if (!buf || !out) return FC_ERR_NULL;
    const size_t B = CS_BAND;
    if (size < CS_HDR + 8) return FC_ERR_FORMAT;
    if (memcmp(buf, cs_magic, 4) != 0) return FC_ERR_FORMAT;
    if (fc__get32(buf + 4) != CS_FMT_VERSION) return FC_ERR_FORMAT;
    uint32_t rule = fc__get32(buf + 8);
    if (rule > (uint32_t)INT32_MAX || fc__rule((int)rule) == NULL ||
        fc__get32(buf + 12) != B)
        return FC_ERR_FORMAT;
    uint64_t C = fc__get64(buf + 16), L = fc__get64(buf + 24), n = fc__get64(buf + 32);
    double order = fc__getd(buf + 40), step = fc__getd(buf + 48);
    double tol = fc__getd(buf + 56), horizon = fc__getd(buf + 64);
    if (C == 0 || L > CS_MAX_TERMS) return FC_ERR_FORMAT;
    size_t need = cs_size_for(C, L);   /* 0 on overflow */
    if (need == 0 || need != size) return FC_ERR_FORMAT;
    if (fc__get64(buf + size - 8) != fc__fnv1a(FC__FNV_OFFSET, buf, size - 8)) return FC_ERR_FORMAT;
    if (n >= FC_INDEX_LIMIT) return FC_ERR_FORMAT;
    const unsigned char *p = buf + CS_HDR;
    size_t nd;
    if (cs_ndoubles(C, L, &nd)) return FC_ERR_FORMAT;
    for (size_t i = 0; i < nd; i++)
        if (!isfinite(fc__getd(p + 8 * i))) return FC_ERR_FORMAT;

    fc_cstream *cs;
    int st = cs_create((int)rule, order, step, (size_t)C, tol, horizon, 1, &cs);
    if (st != FC_OK) return st == FC_ERR_NOMEM ? st : FC_ERR_FORMAT;
    int bad = cs->L != L;
#define SAMEV(arr, cnt) do { for (size_t i_ = 0; i_ < (cnt); i_++, p += 8) \
        if (!bad && !cs_same((arr)[i_], fc__getd(p))) bad = 1; } while (0)
    if (!bad) {
        SAMEV(cs->q, L); SAMEV(cs->beta, L); SAMEV(cs->inj, L);
        SAMEV(cs->cb, B);
        SAMEV(&cs->c0, 1);
        SAMEV(cs->ctab, B);
    }
#undef SAMEV
    if (bad) {
        fc__cs_free(cs);
        return FC_ERR_FORMAT;
    }
#define GETV(arr, cnt) do { for (size_t i_ = 0; i_ < (cnt); i_++) { (arr)[i_] = fc__getd(p); p += 8; } } while (0)
    for (size_t c = 0; c < C; c++) {
        double *ring = cs->ring + c * 2 * B;
        GETV(ring, B);
        memcpy(ring + B, ring, B * sizeof(double));
        GETV(cs->S + c * cs->Lp, L);
        GETV(cs->Sc + c * cs->Lp, L);
        cs->xprev[c] = fc__getd(p); p += 8;
        cs->x0[c] = fc__getd(p); p += 8;
    }
#undef GETV
    cs->n = n;
    if (!cs_state_ok(cs)) {
        fc__cs_free(cs);
        return FC_ERR_FORMAT;
    }
    *out = cs;
    return FC_OK;
}

void fc__cs_params(const fc_cstream *cs, int *rule, double *order,
                   double *step, size_t *channels, double *tol,
                   double *horizon)
{
    *rule = cs->rule;
    *order = cs->order;
    *step = cs->step;
    *channels = cs->C;
    *tol = cs->tol;
    *horizon = cs->horizon;
}
