/*
 * weights.c -- quadrature weights of the rules, accurate for every index
 * 0 <= m < 2^53 and every order 0 < a <= 10 (l1: 0 < a < 1).
 *
 * No weight is computed by subtracting nearly equal numbers. With u = 1/m:
 *
 *   rectangle  b_m = (m+1)^a - m^a       = m^a u H_a(u),
 *              H_e(u) = sum_{j>=0} binom(e, j+1) u^j   ((1+u)^e - 1 = u H_e(u))
 *   l1         d_m = (m+1)^q - m^q       = m^q u H_q(u),  q = 1 - a
 *   trapezoid  a_m = m^(a+1) ((1+u)^(a+1) + (1-u)^(a+1) - 2)
 *                  = m^a u Q(u^2),  Q(v) = 2 sum_{k>=0} binom(a+1, 2k+2) v^k
 *   start      A_n = n^(a+1) ((1-u)^(a+1) - 1 + (a+1) u)
 *                  = n^a u T(u),    T(u) = sum_{j>=0} binom(a+1, j+2) (-u)^j
 *   grunwald   g_m = Gamma(m-a) / (Gamma(-a) Gamma(m+1))
 *                  = C m^(-a-1) F(u),  C = 1/Gamma(-a),
 *              log F(u) = sum_{k>=2} (-1)^k (B_k(-a) - B_k(1)) u^(k-1) / (k(k-1))
 *              (the Stirling series of log Gamma(z+h), DLMF 5.11.8, taken at
 *              h = -a and h = 1; B_k the Bernoulli polynomials, DLMF 24.2).
 *
 * The binomial series converge for u < 1 and are used for m >= 2 (u <= 1/2),
 * with as many terms as the largest u of a run needs for a relative
 * truncation error below W_TOL (at most W_JMAX terms); m = 0 and m = 1 have
 * closed forms. Well conditioned: for m >= 2 the first term dominates each
 * series (the later terms alternate or are small), so the relative error is
 * a few units of rounding.
 *
 * Speed: the power m^e is the expensive part (a pow() call costs about
 * 20 ns here). Along a run of consecutive indices it is carried in two
 * doubles, P_{m+1} = P_m + P_m u H_e(u) (the update is the weight itself for
 * rectangle and l1), and recomputed by pow() at the start of every run. The
 * update has a relative error of a few eps, but its size is only about
 * e*u*P, so a run of K <= m0 / (4 (e + 1)) steps from m0 adds at most about
 * eps * e * log(1 + K/m0) < eps to P. The grunwald weights are carried the
 * same way: g_{m+1} = g_m - g_m (a+1)/(m+1) (Grunwald-Letnikov recurrence,
 * common practice), in two doubles, with runs of K <= m0 / (4 (a + 1)).
 * Below G_M0 the grunwald product g_m = prod_{k<=m} ((k-1) - a)/k is formed
 * in extended precision (long double with a 64-bit mantissa, else
 * double-double arithmetic), an error below 1e-16 after G_M0 steps.
 * C = 1/Gamma(-a) comes from the reflection-free form in rgamma_neg(),
 * exact factors near the poles times the Taylor series of 1/Gamma(1+z).
 *
 * The scale factors h^a/Gamma(a+1) etc. are kept as M 2^E (0.5 <= M < 1
 * in long double, E an integer; fc__rule_scale), so that h^a itself may
 * be far outside the double range (h^10 for h = 1e300). When M 2^E is a
 * normal double with room to spare and no weight of the range can
 * overflow, it is applied in one multiplication; otherwise each unit
 * weight is multiplied by M and then by 2^E (one rounding, and gradual
 * underflow), so that every weight whose scaled value is representable
 * stays accurate, and a weight that overflows makes the call return
 * FC_ERR_RANGE before anything is written.
 *
 * Measured against mpmath at 60 digits (tests/test_weights.py and a wider
 * scratch sweep): largest relative error about 6e-16 for every rule, orders
 * 1e-6 .. 10 including orders within 1e-14 of an integer, indices up to
 * 2^53 - 1. Results that are subnormal (orders below about 1e-290 at large
 * indices) cannot carry that relative accuracy.
 */
#include "internal.h"

#include <float.h>

#define W_JMAX 64          /* coefficients kept per binomial series */
#define W_TOL 1.0e-17      /* relative truncation error of a series */
#define W_RUN_CAP 65536.0  /* longest run between two pow() restarts */
#define G_M0 256           /* grunwald: asymptotic form from this index */
#define G_KMAX 30          /* terms of F kept (needs B_0 .. B_{G_KMAX}) */

/* ------------------------------------------------ double-double helpers */

/* s + e = a + b exactly (Knuth TwoSum). */
static inline void two_sum(double a, double b, double *s, double *e)
{
    double x = a + b;
    double bb = x - a;
    *e = (a - (x - bb)) + (b - bb);
    *s = x;
}

/* s + e = a + b exactly, |a| >= |b| (Dekker FastTwoSum). */
static inline void fast_two_sum(double a, double b, double *s, double *e)
{
    double x = a + b;
    *e = b - (x - a);
    *s = x;
}

/* p + e = a * b exactly (Dekker TwoProduct, or one fma where it is fast). */
static inline void two_prod(double a, double b, double *p, double *e)
{
    double x = a * b;
#ifdef FP_FAST_FMA
    *e = fma(a, b, -x);
#else
    const double split = 134217729.0; /* 2^27 + 1 */
    double t = split * a, ah = t - (t - a), al = a - ah;
    t = split * b;
    double bh = t - (t - b), bl = b - bh;
    *e = ((ah * bh - x) + ah * bl + al * bh) + al * bl;
#endif
    *p = x;
}

/* ---------------------------------------------------- series coefficients */

/*
 * b[j] = binom(s + sa, j), j = 0 .. n-1, for an integer s and sa = +a or -a:
 * b[j] = b[j-1] ((s - j + 1) + sa) / j. Each factor is one rounding from its
 * exact value (none when it nearly cancels), and the products are kept in
 * long double.
 */
static void binom_coeffs(int s, double sa, int n, double *b)
{
    long double c = 1.0L;
    b[0] = 1.0;
    for (int j = 1; j < n; j++) {
        c *= ((long double)(s - j + 1) + (long double)sa) / (long double)j;
        b[j] = (double)c;
    }
}

/*
 * The number of terms J a series sum_j c[j] u^j (n coefficients) needs for
 * 0 <= u <= u0: the smallest J with sum_{j>=J} |c[j]| u0^j <= W_TOL |c[0]|.
 */
static int series_terms(const double *c, int n, double u0)
{
    double t[W_JMAX];
    double p = 1.0;
    for (int j = 0; j < n; j++) {
        t[j] = fabs(c[j]) * p;
        p *= u0;
    }
    double lim = W_TOL * fabs(c[0]), tail = 0.0;
    int J = n;
    while (J > 1 && tail + t[J - 1] <= lim) {
        tail += t[J - 1];
        J--;
    }
    return J;
}

/*
 * How many coefficients the series need for indices >= m_min >= 2: every
 * coefficient here is at most 2^12 times the first in magnitude (a short
 * bound on |binom(e, j)| / |binom(e, j0)| for |e| <= 11), so n terms with
 * 2^12 u0^n / (1 - u0) <= W_TOL leave a negligible tail.
 */
static int coef_count(double m_min)
{
    double u0 = 1.0 / m_min;
    double n = ceil(log(W_TOL * 0x1p-12 * (1.0 - u0)) / log(u0)) + 2.0;
    if (!(n < (double)W_JMAX)) return W_JMAX;
    return n < 2.0 ? 2 : (int)n;
}

static inline double horner(const double *c, int J, double u)
{
    double s = c[J - 1];
    for (int j = J - 2; j >= 0; j--) s = s * u + c[j];
    return s;
}

/*
 * One step P <- P (1 + gm) of a power carried as ph + pl (|gm| < 1/2):
 * wh = ph * gm is added to ph exactly (FastTwoSum), the rest to pl, so
 * that the loop-carried chains are one multiply and one add long.
 */
#define CARRY_POWER(ph, pl, wh, gm)                                        \
    do {                                                                   \
        double cp_w = (wh);                                                \
        double cp_x = (ph) + cp_w;                                         \
        double cp_e = cp_w - (cp_x - (ph));                                \
        (pl) = (pl) * (1.0 + (gm)) + cp_e;                                 \
        (ph) = cp_x;                                                       \
    } while (0)

/* Length of a run that starts at m0 >= 2 and carries m^e (see the top). */
static inline uint64_t run_length(double m0, double e, uint64_t left)
{
    double k = floor(m0 / (4.0 * (e + 1.0)));
    if (k > W_RUN_CAP) k = W_RUN_CAP;
    if (k < 1.0) k = 1.0;
    uint64_t K = (uint64_t)k;
    return K < left ? K : left;
}

/* 2^e - 1 without cancellation, 0 < e <= 10. */
static double pow2m1(double e)
{
    return e >= 1.0 ? pow(2.0, e) - 1.0 : expm1(e * 0.69314718055994530942);
}

/* ------------------------------------------------- first differences */

/*
 * out[i] = s * ((m+1)^e - m^e), m = start + i, with e = a (rectangle,
 * l1 == 0) or e = 1 - a (l1 != 0). m^e is pow(m, a), or m * pow(m, -a) for
 * l1 so that the rounding of 1 - a does not enter a power of a large m.
 */
static void first_diff_fill(double a, int l1, uint64_t start, size_t count,
                            double s, double *out)
{
    double b[W_JMAX + 1], c[W_JMAX];
    double e = l1 ? 1.0 - a : a;
    int nc = coef_count(start < 2 ? 2.0 : (double)start);
    binom_coeffs(l1 ? 1 : 0, l1 ? -a : a, nc + 1, b);
    for (int j = 0; j < nc; j++) c[j] = b[j + 1];

    size_t i = 0;
    while (i < count && start + i < 2) {
        uint64_t m = start + i;
        out[i] = s * (m == 0 ? 1.0 : pow2m1(e));
        i++;
    }
    while (i < count) {
        double m0 = (double)(start + i);
        int J = series_terms(c, nc, 1.0 / m0);
        uint64_t K = run_length(m0, e, (uint64_t)(count - i));
        double ph = l1 ? m0 * pow(m0, -a) : pow(m0, a), pl = 0.0;
        double md = m0;
        for (uint64_t k = 0; k < K; k++, i++, md += 1.0) {
            double u = 1.0 / md;
            double gm = u * horner(c, J, u);
            double wh = ph * gm, wl = pl * gm;
            out[i] = s * (wh + wl);
            CARRY_POWER(ph, pl, wh, gm);
        }
    }
}

/* ------------------------------------------------------------ trapezoid */

/* out[i] = s * a_m, m = start + i. */
static void trapezoid_fill(double a, uint64_t start, size_t count, double s,
                           double *out)
{
    double b[W_JMAX + 2], ca[W_JMAX], cq[W_JMAX / 2];
    int nc = coef_count(start < 2 ? 2.0 : (double)start), nq = nc / 2 + 1;
    if (nq > W_JMAX / 2) nq = W_JMAX / 2;
    binom_coeffs(0, a, nc + 1, b);
    for (int j = 0; j < nc; j++) ca[j] = b[j + 1];
    binom_coeffs(1, a, 2 * nq + 1, b);
    for (int k = 0; k < nq; k++) cq[k] = 2.0 * b[2 * k + 2];

    size_t i = 0;
    while (i < count && start + i < 2) {
        uint64_t m = start + i;
        /* a_0 = 1, a_1 = 2^(a+1) - 2 = 2 (2^a - 1) */
        out[i] = s * (m == 0 ? 1.0 : 2.0 * pow2m1(a));
        i++;
    }
    while (i < count) {
        double m0 = (double)(start + i);
        double u0 = 1.0 / m0;
        int Ja = series_terms(ca, nc, u0);
        int Jq = series_terms(cq, nq, u0 * u0);
        uint64_t K = run_length(m0, a, (uint64_t)(count - i));
        double ph = pow(m0, a), pl = 0.0;
        double md = m0;
        for (uint64_t k = 0; k < K; k++, i++, md += 1.0) {
            double u = 1.0 / md;
            out[i] = s * ((ph + pl) * (u * horner(cq, Jq, u * u)));
            double gm = u * horner(ca, Ja, u);
            CARRY_POWER(ph, pl, ph * gm, gm);
        }
    }
}

/* out[i] = s * A_n, n = start + i. */
static void trapezoid_start_fill(double a, uint64_t start, size_t count,
                                 double s, double *out)
{
    double b[W_JMAX + 2], ca[W_JMAX], ct[W_JMAX];
    int nc = coef_count(start < 2 ? 2.0 : (double)start);
    binom_coeffs(0, a, nc + 1, b);
    for (int j = 0; j < nc; j++) ca[j] = b[j + 1];
    binom_coeffs(1, a, nc + 2, b);
    for (int j = 0; j < nc; j++) ct[j] = (j & 1) ? -b[j + 2] : b[j + 2];

    size_t i = 0;
    /* n = 0: A_0 = 0. 1 <= n <= a + 1: (n-1)^(a+1) + (a-(n-1)) n^a, a sum
       of two terms >= 0. */
    while (i < count && (double)(start + i) - 1.0 <= a) {
        uint64_t n = start + i;
        if (n == 0) {
            out[i] = 0.0;
        } else {
            double n1 = (double)(n - 1);
            out[i] = s * (n1 * pow(n1, a) + (a - n1) * pow((double)n, a));
        }
        i++;
    }
    while (i < count) {
        double m0 = (double)(start + i);
        double u0 = 1.0 / m0;
        int Ja = series_terms(ca, nc, u0);
        int Jt = series_terms(ct, nc, u0);
        uint64_t K = run_length(m0, a, (uint64_t)(count - i));
        double ph = pow(m0, a), pl = 0.0;
        double md = m0;
        for (uint64_t k = 0; k < K; k++, i++, md += 1.0) {
            double u = 1.0 / md;
            out[i] = s * ((ph + pl) * (u * horner(ct, Jt, u)));
            double gm = u * horner(ca, Ja, u);
            CARRY_POWER(ph, pl, ph * gm, gm);
        }
    }
}

/* ------------------------------------------------ Gamma and the scales */

/*
 * Taylor coefficients of 1/Gamma(1+z) at z = 0 (1/Gamma is entire, DLMF
 * 5.7.1; these are its coefficients c_{k+1}), computed with mpmath at 40
 * digits; 26 terms leave a relative error below 1e-25 for |z| <= 1/2.
 */
static const long double RGAMMA1P[26] = {
    1.0L,
    5.772156649015328606065121e-1L,
    -6.558780715202538810770195e-1L,
    -4.200263503409523552900393e-2L,
    1.665386113822914895017008e-1L,
    -4.21977345555443367482083e-2L,
    -9.621971527876973562114922e-3L,
    7.21894324666309954239501e-3L,
    -1.165167591859065112113971e-3L,
    -2.1524167411495097281573e-4L,
    1.280502823881161861531986e-4L,
    -2.013485478078823865568939e-5L,
    -1.250493482142670657345359e-6L,
    1.13302723198169588237413e-6L,
    -2.056338416977607103450154e-7L,
    6.116095104481415817862499e-9L,
    5.002007644469222930055665e-9L,
    -1.181274570487020144588127e-9L,
    1.04342671169110051049154e-10L,
    7.782263439905071254049937e-12L,
    -3.696805618642205708187816e-12L,
    5.100370287454475979015481e-13L,
    -2.05832605356650678322243e-14L,
    -5.348122539423017982370017e-15L,
    1.226778628238260790158894e-15L,
    -1.181259301697458769513765e-16L};

/* 1/Gamma(1+z), |z| <= 1/2. */
static long double rgamma1p_small(long double z)
{
    long double r = RGAMMA1P[25];
    for (int k = 24; k >= 0; k--) r = r * z + RGAMMA1P[k];
    return r;
}

/* 1/Gamma(1+t), -1/2 <= t <= 23/2: 1/Gamma(1+z) / prod_{k=1}^{n} (z+k),
   t = n + z (z exact). */
static long double rgamma1p(long double t)
{
    long double n = floorl(t + 0.5L), z = t - n, p = 1.0L;
    for (long double k = 1.0L; k <= n; k += 1.0L) p *= z + k;
    return rgamma1p_small(z) / p;
}

/* 1/Gamma(-a), 0 < a <= 10, without cancellation near the poles: with
   a = n + z, |z| <= 1/2 (z exact), Gamma(1-z) = Gamma(-a) prod_{j=0}^{n}
   (-(j+z)), so 1/Gamma(-a) = (-1)^(n+1) z prod_{j=1}^{n} (j+z) / Gamma(1-z). */
static long double rgamma_neg(double a)
{
    long double n = floorl((long double)a + 0.5L), z = (long double)a - n;
    long double p = z;
    for (long double k = 1.0L; k <= n; k += 1.0L) p *= z + k;
    long double sgn = fmodl(n, 2.0L) == 0.0L ? -1.0L : 1.0L;
    return sgn * p * rgamma1p_small(-z);
}

/*
 * h^e = m 2^E, |e| <= 10, for any positive double h (h^e itself may be far
 * outside the double range): h = f 2^Eh, 0.5 <= f < 1, so
 * h^e = f^e 2^(e Eh); e Eh = p + perr exactly (a product of a double and an
 * integer of 11 bits: exact in a 64-bit long double, else split with one
 * fma), p = ip + fp with ip the nearest integer (p - ip exact), and
 * m = f^e 2^(fp + perr) lies within [2^-11, 2^11].
 */
static void pow_step(double h, double e, long double *m, long *E)
{
    int Eh;
    double f = frexp(h, &Eh);
#if LDBL_MANT_DIG >= 64
    long double p = (long double)e * (long double)Eh; /* exact */
    long double ip = nearbyintl(p), fp = p - ip;
    *m = expl((long double)e * logl((long double)f)) * exp2l(fp);
#else
    double p = e * (double)Eh;
    double perr = fma(e, (double)Eh, -p);
    double ip = nearbyint(p), fp = (p - ip) + perr;
    *m = pow(f, e) * exp2(fp);
#endif
    *E = (long)ip;
}

/* The scale factor of a rule (kind FC__START_WEIGHTS: that of the trapezoid
   start weights) as M 2^E, 0.5 <= M < 1. */
void fc__rule_scale(int kind, double a, double h, long double *M, long *E)
{
    long double la = a, m = 1.0L, g = 1.0L;
    *E = 0;
    switch (fc__weight_scale(kind)) {
    case FC__SCALE_HA_G1: pow_step(h, a, &m, E); g = rgamma1p(la); break;
    case FC__SCALE_HA_G2: pow_step(h, a, &m, E); g = rgamma1p(1.0L + la); break;
    case FC__SCALE_HNA: pow_step(h, -a, &m, E); g = 1.0L; break;
    case FC__SCALE_HNA_G2MA: pow_step(h, -a, &m, E); g = rgamma1p(1.0L - la); break;
    }
    int k;
    *M = frexpl(m * g, &k);
    *E += k;
}

/* ------------------------------------------------------------- grunwald */

/*
 * Coefficients f[k] of F(u) = exp(sum_{j>=1} sig_j u^j),
 * sig_j = (-1)^(j+1) (B_{j+1}(-a) - B_{j+1}(0)) / ((j+1) j)
 * (B_k(1) = B_k(0) for k >= 2), and k f_k = sum_{j=1}^k j sig_j f_{k-j}.
 */
static void grunwald_asym_coeffs(double a, int nf, double *f)
{
    /* Bernoulli numbers B_0 .. B_30 (DLMF Table 24.2.1; odd ones beyond
       B_1 vanish). */
    static const double bern[G_KMAX + 1] = {
        1.0, -0.5, 1.0 / 6.0, 0.0, -1.0 / 30.0, 0.0, 1.0 / 42.0, 0.0,
        -1.0 / 30.0, 0.0, 5.0 / 66.0, 0.0, -691.0 / 2730.0, 0.0, 7.0 / 6.0,
        0.0, -3617.0 / 510.0, 0.0, 43867.0 / 798.0, 0.0, -174611.0 / 330.0,
        0.0, 854513.0 / 138.0, 0.0, -236364091.0 / 2730.0, 0.0,
        8553103.0 / 6.0, 0.0, -23749461029.0 / 870.0, 0.0,
        8615841276005.0 / 14322.0};
    long double sig[G_KMAX], fl[G_KMAX], row[G_KMAX + 1];
    long double x = -(long double)a;
    row[0] = 1.0L; /* row n of Pascal's triangle */
    for (int n = 1; n <= nf; n++) {
        row[n] = 0.0L;
        for (int i = n; i >= 1; i--) row[i] += row[i - 1];
        if (n < 2) continue;
        /* D = B_n(x) - B_n(0) = sum_{i<n} binom(n, i) B_i x^(n-i) */
        long double d = 0.0L;
        for (int i = 0; i < n; i++) d = (d + row[i] * (long double)bern[i]) * x;
        int j = n - 1;
        long double sgn = (j & 1) ? 1.0L : -1.0L; /* (-1)^(j+1) */
        sig[j] = sgn * d / ((long double)n * (long double)j);
    }
    fl[0] = 1.0L;
    for (int k = 1; k < nf; k++) {
        long double acc = 0.0L;
        for (int j = 1; j <= k; j++) acc += (long double)j * sig[j] * fl[k - j];
        fl[k] = acc / (long double)k;
    }
    for (int k = 0; k < nf; k++) f[k] = (double)fl[k];
}

/*
 * Terms of F needed for indices >= m_min >= G_M0: |f_k| is below about
 * 2^11 (2 (a+1))^k (for integer a, f_k = h_k(0, 1, .., a), the complete
 * symmetric polynomial, at most binom(k+a, a) a^k; the divergent part of
 * the Stirling series is of size k!/(2 pi m)^k, negligible here), so n terms
 * with 2^11 (22/m_min)^n <= 1e-18 suffice.
 */
static int grunwald_coef_count(double m_min)
{
    double n = ceil(log(1e-18 * 0x1p-11) / log(22.0 / m_min)) + 1.0;
    if (!(n < (double)G_KMAX)) return G_KMAX;
    return n < 2.0 ? 2 : (int)n;
}

typedef struct {
    double hi, lo;
} fc_dd;

/* g <- g * ((m-1) - a) / m in double-double. Used only where long double
   is not extended (below); marked unused so that clang, which warns of an
   unused static inline function, builds with -Werror either way. */
#if defined(__GNUC__) || defined(__clang__)
__attribute__((unused))
#endif
static inline fc_dd dd_gl_step(fc_dd g, double m, double a)
{
    double nh, nl, ph, pl, q1, rh, rl;
    two_sum(m - 1.0, -a, &nh, &nl);
    two_prod(g.hi, nh, &ph, &pl);
    pl += g.hi * nl + g.lo * nh;
    fast_two_sum(ph, pl, &ph, &pl);
    q1 = ph / m;
    two_prod(q1, m, &rh, &rl);
    double q2 = (((ph - rh) - rl) + pl) / m;
    fc_dd r;
    fast_two_sum(q1, q2, &r.hi, &r.lo);
    return r;
}

/* out[i] = s * g_m, m = start + i. */
static void grunwald_fill(double a, uint64_t start, size_t count, double s,
                          double *out)
{
    uint64_t end = start + count;
    size_t i = 0;

    /* m < G_M0: the product g_m = prod_{k<=m} ((k-1) - a)/k in
       double-double, from g_0 = 1. */
    if (start < G_M0) {
        uint64_t top = end < G_M0 ? end : G_M0;
#if LDBL_MANT_DIG >= 64 && !defined(FC_WEIGHTS_NO_LDBL)
        /* extended precision: each factor and product one rounding of
           2^-64, (m-1) - a exact where it nearly cancels; 255 steps keep
           the error below 1e-16 */
        long double g = 1.0L, la = a;
        for (uint64_t m = 0; m < top; m++) {
            if (m > 0) g = g * (((long double)m - 1.0L) - la) / (long double)m;
            if (m >= start) out[i++] = s * (double)g;
        }
#else
        fc_dd g = {1.0, 0.0};
        for (uint64_t m = 0; m < top; m++) {
            if (m > 0) g = dd_gl_step(g, (double)m, a);
            if (m >= start) out[i++] = s * (g.hi + g.lo);
        }
#endif
    }
    if (end <= G_M0) return;

    double f[G_KMAX];
    int nf = grunwald_coef_count(start < G_M0 ? (double)G_M0 : (double)start);
    grunwald_asym_coeffs(a, nf, f);
    double C = (double)rgamma_neg(a); /* 0 for integer a */
    double ap1 = a + 1.0;
    while (i < count) {
        double m0 = (double)(start + i);
        double u0 = 1.0 / m0;
        int J = series_terms(f, nf, u0);
        uint64_t K = run_length(m0, a, (uint64_t)(count - i));
        /* g = C m^(-a-1) F(1/m) at the start of a run */
        double gh = C * (pow(m0, -a) / m0 * horner(f, J, u0)), gl = 0.0;
        out[i++] = s * gh;
        double md = m0 + 1.0;
        for (uint64_t k = 1; k < K; k++, i++, md += 1.0) {
            /* g_m = g_{m-1} - g_{m-1} (a+1)/m, |g (a+1)/m| < |g| / 4 */
            double r = ap1 / md;
            double d = gh * r;
            double t = gh - d;
            double err = (gh - t) - d; /* t + err = gh - d exactly */
            gl = gl * (1.0 - r) + err;
            gh = t;
            out[i] = s * (gh + gl);
        }
    }
}

/* ------------------------------------------------------- scale and checks */

static int check_args(int rule, double a, double h, uint64_t start,
                      size_t count, const double *out)
{
    int st = fc__check_rule(rule, a, h);
    if (st != FC_OK) return st;
    if (start > FC_INDEX_LIMIT || (uint64_t)count > FC_INDEX_LIMIT - start)
        return FC_ERR_INDEX;
    if (out == NULL && count > 0) return FC_ERR_NULL;
    return FC_OK;
}

/*
 * Unscaled ("unit") weights of `kind` (a rule, or FC__START_WEIGHTS) times
 * s, arguments already checked.
 */
static void fill_unit(int kind, double a, uint64_t start, size_t count,
                      double s, double *out)
{
    fc__weight_seq(kind)->fill(a, start, count, s, out);
}

void fc__unit_weights(int kind, double a, uint64_t start, size_t count,
                      double *out)
{
    if (count > 0) fill_unit(kind, a, start, count, 1.0, out);
}

/*
 * log2 of a bound on the unit weights of `kind` for indices below M >= 1
 * (generous: it only decides whether the one-multiplication path is safe):
 * rectangle b_m <= (m+1)^a, l1 d_m <= 1, trapezoid a_m <= 2 (m+1)^(a+1),
 * start A_n <= (n-1)^(a+1) + |n-1-a| n^a <= 2^5 M^(a+1),
 * grunwald |g_m| = |binom(a, m)| <= 2^12 for a <= 10.
 */
double fc__unit_log2_bound(int kind, double a, uint64_t M)
{
    double l = log2((double)(M < 1 ? 1 : M));
    return fc__weight_seq(kind)->log2_bound(a, l);
}

/*
 * The weight sequences the rule table (rules.c) points to: filler and
 * bound of each (l = log2 of the index limit).
 */
static void rectangle_fill(double a, uint64_t start, size_t count, double s,
                           double *out)
{
    first_diff_fill(a, 0, start, count, s, out);
}
static void l1_fill(double a, uint64_t start, size_t count, double s,
                    double *out)
{
    first_diff_fill(a, 1, start, count, s, out);
}
static double rectangle_bound(double a, double l) { return a * l + 1.0; }
static double l1_bound(double a, double l) { (void)a; (void)l; return 1.0; }
static double trapezoid_bound(double a, double l) { return (a + 1.0) * l + 2.0; }
static double grunwald_bound(double a, double l) { (void)a; (void)l; return 12.0; }
static double trapezoid_start_bound(double a, double l) { return (a + 1.0) * l + 6.0; }

const fc__wseq fc__seq_rectangle = {rectangle_fill, rectangle_bound};
const fc__wseq fc__seq_trapezoid = {trapezoid_fill, trapezoid_bound};
const fc__wseq fc__seq_trapezoid_start = {trapezoid_start_fill, trapezoid_start_bound};
const fc__wseq fc__seq_grunwald = {grunwald_fill, grunwald_bound};
const fc__wseq fc__seq_l1 = {l1_fill, l1_bound};

/* w M 2^E rounded to double (overflow to inf, gradual underflow). */
double fc__scale_value(double w, long double M, long E)
{
    double v = (double)((long double)w * M);
    if (E > 4096) E = 4096;
    if (E < -4096) E = -4096;
    return ldexp(v, (int)E);
}

/*
 * Fill out[0..count) with the weights of `kind`, arguments already checked.
 * One double multiplication per weight when the scale factor is a normal
 * double with room to spare and no weight of the range can overflow;
 * otherwise each unit weight is scaled by M 2^E on its own (one rounding
 * and a power of two), a first pass over chunks making sure that none
 * overflows (FC_ERR_RANGE, nothing written) and a second writing them.
 */
static int fill(int kind, double a, double h, uint64_t start, size_t count,
                double *out)
{
    long double M;
    long E;
    fc__rule_scale(kind, a, h, &M, &E);
    double lb = fc__unit_log2_bound(kind, a, start + count);
    if (E > -958 && (double)E + lb < 1022.0) {
        double s = (double)ldexpl(M, (int)E);
        fill_unit(kind, a, start, count, s, out);
        return FC_OK;
    }
    double buf[512];
    for (int pass = 0; pass < 2; pass++) {
        for (size_t j = 0; j < count; j += 512) {
            size_t m = count - j < 512 ? count - j : 512;
            fill_unit(kind, a, start + j, m, 1.0, buf);
            for (size_t i = 0; i < m; i++) {
                double v = fc__scale_value(buf[i], M, E);
                if (pass == 0) {
                    if (!isfinite(v)) return FC_ERR_RANGE;
                } else {
                    out[j + i] = v;
                }
            }
        }
    }
    return FC_OK;
}

int fc_weights(int rule, double order, double step, uint64_t start,
               size_t count, double *out)
{
    int st = check_args(rule, order, step, start, count, out);
    if (st != FC_OK) return st;
    return count > 0 ? fill(rule, order, step, start, count, out) : FC_OK;
}

int fc_trapezoid_start(double order, double step, uint64_t start,
                       size_t count, double *out)
{
    int st = check_args(FC_RULE_TRAPEZOID, order, step, start, count, out);
    if (st != FC_OK) return st;
    return count > 0 ? fill(FC__START_WEIGHTS, order, step, start, count, out)
                     : FC_OK;
}
