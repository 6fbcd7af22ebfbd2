/*
 * stream_compressed.c -- the compressed stream engine (the runtime):
 * bounded memory and the same work on every sample.
 *
 * Every rule is a lagged sum y_n = sum_{k<=n} c_{n-k} u_k + corr_n x_0
 * (internal.h). Lags m < B (B = CS_BAND) are summed exactly from a ring
 * buffer of the last B values of u; every lag B <= m <= horizon is carried by
 * a sum of exponentials
 *
 *     c_m ~= sum_{l<L} beta_l (1 - q_l)^m,      0 < q_l < 1,
 *
 * each term a one-pole recursion S_l <- (1 - q_l) S_l + u_{n-B}. The terms,
 * the band and the trapezoid table come from fc__soe_build (soe_build.c,
 * the construction and its check at creation).
 *
 * GUARANTEE. The construction's check (soe_build.c, GUARANTEE) holds the
 * relative error of the sum of exponentials to 0.6 tol + 16 eps at every
 * checked lag. Hence for n <= floor(horizon), with eps = 2^-52,
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
 * LOAD. A saved payload is untrusted: the loader rebuilds the stream from
 * its parameters (one construction) and requires the stored weights bit
 * for bit, then takes only the running state, checked against the
 * invariants of cs_step (cs_state_ok).
 *
 * Rectangle and trapezoid rules, 1 <= a < 2 (flag cum): the engine runs on
 * u = X, the running sum of x, carried in double-double (high part in
 * xprev, low part in x0, so the payload layout is the same for every
 * rule). The trapezoid rule there (flag tcum) keeps x_0 per channel as well
 * (xfirst, one more double per channel in the payload, for these streams
 * only) and adds corr_n x_0 for every n: from ctab for n < B, and for
 * n >= B from the library's weights (cs_corr_at), which the engine
 * computes for the aligned block of CS_CORR_BLK indices holding n, so that
 * each value depends on n alone (not on the pushes, previews or loads
 * before it). The correction is then exact with respect to the library's
 * weights (as in the band), and the guarantee holds as stated.
 *
 * Other correction columns. A rule's columns (the rule table,
 * fc__corr_col) other than the one the construction carries (soe: the
 * trapezoid's x_0) are added at run time in the same way: x_j is kept per
 * channel once it arrives (nx doubles per channel, saved after the fields
 * above: no rule of today's table has such a column, so no payload of
 * today's rules changes) and corr_n x_j, corr_n from the library's weights
 * in aligned blocks, is added for every n >= j after the terms above, in
 * the table's order. The guarantee then holds with |corr_n x_j| added to
 * the sum of magnitudes (the weights are exact, one more rounding per
 * column); RANGE: cs_check_block refuses a step whose
 * sum_i |corr^i_n x_j| exceeds umax (or is not finite), and cs_umax counts
 * that sum once.
 *
 * Arithmetic of a push (identical in the portable and the AVX2 path, so
 * results do not depend on which one runs; the CPU is probed once per
 * stream and the choice kept in it): explicit fma() for every product,
 * fixed lane structure (two accumulators of four lanes for the terms, four
 * for the band), fixed reduction order. Work per sample and channel: L
 * recursions and a dot product of length B, whatever the data.
 * Memory: 3 L + 2 B doubles shared, 2 B + 2 L + 2 per channel (the
 * columns added at run time: CS_CORR_BLK more shared and one more per
 * channel each), fixed at creation; a push never allocates.
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

#define CS_BAND FC__CS_BAND         /* exact local band: lags 0 .. CS_BAND-1 */
#define CS_MAX_TERMS FC__CS_MAX_TERMS /* more than this: FC_ERR_TOL */
#define CS_FMT_VERSION 1u
#define CS_CORR_BLK 256             /* corrections added at run time:
                                       corr_n cached in aligned blocks of
                                       this many n */

/* corr_n of one correction column (d->corr[k]) for n in [base, base + cnt),
   recomputed from n alone (not part of the state). */
typedef struct {
    double *buf;              /* CS_CORR_BLK */
    uint64_t base;
    size_t cnt;
    size_t k;
} cs_cache;


/* The state of one compressed stream (the facade's engine pointer). */
typedef struct cs_engine {
    int rule;
    int x0corr;               /* the construction carries the rule's x_0
                                 column (trapezoid; fc__corr_col.soe) */
    int diffs;                /* the rule sums differences of x (L1) */
    int cum;                  /* rectangle, trapezoid, order >= 1: engine
                                 input is X */
    int tcum;                 /* trapezoid, order >= 1: corr_n x_0 (n >= B)
                                 from the library's weights, x_0 kept in
                                 xfirst */
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
    double *xfirst;           /* C (tcum only, else NULL): x_0 */
    cs_cache tc;              /* tcum: the x_0 column's corr_n, n >= B */
    double corrmax;           /* tcum: max |corr_n|, B <= n <= horizon */
    /* the other correction columns (not carried by the construction),
       added at run time from the library's weights: nx of them, column
       xj[i] of the rule's list, x_j of channel c in xs[i * C + c] (0
       before it arrives) */
    size_t nx;
    uint64_t xj[FC__CORR_MAX];
    cs_cache xc[FC__CORR_MAX];
    double *xs;
    double umax;              /* largest accepted |u| (RANGE) */
    /* One channel only: the states and output a preview computed, and the
       sample and count it computed them for; a push of that very sample
       next takes them (swapping S with pS) instead of computing the step
       again, so a preview followed by its push costs one step. Not part
       of the state: not saved, dropped by every push and by reset. */
    double *pS, *pSc, py;
    uint64_t pn, pbits;
    int pvalid;
    void *mem;
    size_t memsize;
} cs_engine;

/* ---------------------------------------------------------------- push */

/* Portable kernel: the same operations and order as the AVX2 one. Term l
   receives d, or inj_l * d when inj is not NULL (the one step n = B of the
   trapezoid rule); the new states go to So, Sco (which may be S, Sc)
   unless So is NULL. A new state s or compensation e below DBL_MIN in
   magnitude is set to +0 before it is used: a stream fed zeros (a
   controller's integral held at a limit, a signal that stops) would
   otherwise decay its states into the subnormal range, where arithmetic
   is many times slower on common CPUs (seen: 5x per push), and the work
   per sample would no longer be the same on every step. The error this
   adds is absolute, below Lp * DBL_MIN * max |beta_l| per output. */
static void cs_terms_portable(size_t Lp, const double *q, const double *beta,
                              const double *inj, const double *S, const double *Sc,
                              double *So, double *Sco, double d, double acc_out[8])
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
            s = fc__ftz(s);
            e = fc__ftz(e);
            acc[k] = fma(beta[l + k], s, acc[k]);
            if (So) { So[l + k] = s; Sco[l + k] = e; }
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
                          const double *inj, const double *S, const double *Sc,
                          double *So, double *Sco, double d, double acc_out[8])
{
    __m256d accA = _mm256_setzero_pd(), accB = _mm256_setzero_pd();
    const __m256d dv = _mm256_set1_pd(d);
    const __m256d tiny = _mm256_set1_pd(DBL_MIN);
    const __m256d mag = _mm256_castsi256_pd(_mm256_set1_epi64x(0x7fffffffffffffffLL));
#define CS_FLUSH(v) _mm256_and_pd((v), _mm256_cmp_pd(_mm256_and_pd((v), mag), tiny, _CMP_GE_OQ))
    for (size_t l = 0; l < Lp; l += 8) {
        __m256d q0 = _mm256_loadu_pd(q + l), q1 = _mm256_loadu_pd(q + l + 4);
        __m256d d0 = inj ? _mm256_mul_pd(_mm256_loadu_pd(inj + l), dv) : dv;
        __m256d d1 = inj ? _mm256_mul_pd(_mm256_loadu_pd(inj + l + 4), dv) : dv;
        __m256d s00 = _mm256_loadu_pd(S + l), s01 = _mm256_loadu_pd(S + l + 4);
        __m256d c00 = _mm256_loadu_pd(Sc + l), c01 = _mm256_loadu_pd(Sc + l + 4);
        /* fnmadd: -(q s) + d in one rounding, fma(-q, s, d) exactly */
        __m256d t0 = _mm256_add_pd(_mm256_fnmadd_pd(q0, s00, d0), c00);
        __m256d t1 = _mm256_add_pd(_mm256_fnmadd_pd(q1, s01, d1), c01);
        __m256d s0 = _mm256_add_pd(s00, t0), s1 = _mm256_add_pd(s01, t1);
        __m256d z0 = _mm256_sub_pd(s0, s00), z1 = _mm256_sub_pd(s1, s01);
        __m256d e0 = _mm256_add_pd(_mm256_sub_pd(s00, _mm256_sub_pd(s0, z0)),
                                   _mm256_sub_pd(t0, z0));
        __m256d e1 = _mm256_add_pd(_mm256_sub_pd(s01, _mm256_sub_pd(s1, z1)),
                                   _mm256_sub_pd(t1, z1));
        s0 = CS_FLUSH(s0); s1 = CS_FLUSH(s1);
        e0 = CS_FLUSH(e0); e1 = CS_FLUSH(e1);
        accA = _mm256_fmadd_pd(_mm256_loadu_pd(beta + l), s0, accA);
        accB = _mm256_fmadd_pd(_mm256_loadu_pd(beta + l + 4), s1, accB);
        if (So) {
            _mm256_storeu_pd(So + l, s0);
            _mm256_storeu_pd(So + l + 4, s1);
            _mm256_storeu_pd(Sco + l, e0);
            _mm256_storeu_pd(Sco + l + 4, e1);
        }
    }
    _mm256_storeu_pd(acc_out, accA);
    _mm256_storeu_pd(acc_out + 4, accB);
#undef CS_FLUSH
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

static void cs_terms(const cs_engine *cs, const double *inj, const double *S,
                     const double *Sc, double *So, double *Sco, double d,
                     double acc[8])
{
#if CS_HAVE_AVX2
    if (cs->simd) {
        cs_terms_avx2(cs->Lp, cs->q, cs->beta, inj, S, Sc, So, Sco, d, acc);
        return;
    }
#endif
    cs_terms_portable(cs->Lp, cs->q, cs->beta, inj, S, Sc, So, Sco, d, acc);
}

static double cs_band(const cs_engine *cs, const double *w)
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
 * 2: history (u_n and, at n = 0, x_0 taken as unknown = 0), 3: push of
 * the sample the last preview computed (one channel, cs->pvalid): its
 * states and output are taken as they are.
 * Every mode performs the same arithmetic on the values it uses, so a
 * preview equals the push bit for bit.
 */
/* corr_n of a column added at run time, n < 2^53 (past the horizon too):
   the library's correction (fc__correction) computed for the aligned block
   of CS_CORR_BLK indices holding n (cut at 2^53 - 1), so that the value
   depends on n alone; NAN if the weights leave the double range. tcum:
   creation checked both ends, n = B and n = 2^53 - 1 (soe_build.c), and
   |corr_n| grows with n there, so the x_0 column never gives NAN. Other
   columns: cs_check_block refuses a step whose correction is not finite
   or too large. */
static double cs_corr_at(const cs_engine *cs, cs_cache *k, uint64_t n)
{
    if (!(n >= k->base && n - k->base < k->cnt)) {
        uint64_t base = n - n % CS_CORR_BLK;
        size_t cnt = CS_CORR_BLK;
        if (FC_INDEX_LIMIT - base < cnt) cnt = (size_t)(FC_INDEX_LIMIT - base);
        if (fc__correction(cs->rule, k->k, cs->order, cs->step, base, cnt,
                           k->buf) != FC_OK) {
            k->cnt = 0;
            return NAN;
        }
        k->base = base;
        k->cnt = cnt;
    }
    return k->buf[n - k->base];
}

/* The corrections of the columns added at run time for output n:
   w[i] = corr_n of column i once it has arrived (n >= j), else 0. */
static void cs_extra_weights(cs_engine *cs, uint64_t n, double *w)
{
    for (size_t i = 0; i < cs->nx; i++)
        w[i] = n >= cs->xj[i] ? cs_corr_at(cs, &cs->xc[i], n) : 0.0;
}

static void cs_step(cs_engine *cs, const double *x, double *y, int mode)
{
    const size_t B = CS_BAND, C = cs->C;
    const int commit = mode == 0 || mode == 3;
    const uint64_t n = cs->n;
    const size_t pos = (size_t)(n % B);
    /* trapezoid: corr_n x_0 from the table for n < B; for n >= B it is
       carried by the terms, u_0 having entered term l as inj_l u_0 at
       n = B (corr_m + c_m = sum_l beta_l inj_l (1-q_l)^m) */
    const double corr = (cs->x0corr && n < B) ? cs->ctab[n]
                        : cs->tcum ? cs_corr_at(cs, &cs->tc, n) : 0.0;
    const int inject = cs->x0corr && !cs->tcum && n == B;
    double xw[FC__CORR_MAX];
    cs_extra_weights(cs, n, xw);
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
        double yc;
        if (mode == 3) {
            double *t = cs->S;
            cs->S = cs->pS; cs->pS = t;
            t = cs->Sc;
            cs->Sc = cs->pSc; cs->pSc = t;
            yc = cs->py;
        } else {
            double d = ring[pos];         /* u_{n-B} (0 while n < B) */
            double acc[8];
            double terms = 0.0;
            double *S = cs->S + c * cs->Lp, *Sc = cs->Sc + c * cs->Lp;
            double *So = mode == 0 ? S : mode == 1 ? cs->pS : NULL;
            double *Sco = mode == 0 ? Sc : mode == 1 ? cs->pSc : NULL;
            if (cs->L) {
                cs_terms(cs, inject ? cs->inj : NULL, S, Sc, So, Sco, d, acc);
                terms = cs_reduce8(acc);
            }
            /* window u_{n-B+1} .. u_{n-1}, u_{n-B} (weight 0) */
            double band = cs_band(cs, ring + pos + 1);
            double x0 = n == 0 ? xc : cs->tcum ? cs->xfirst[c] : cs->x0[c];
            yc = ((terms + band) + cs->c0 * u) + corr * x0;
            /* the other columns, in the table's order (x_j is the sample
               pushed now when j = n) */
            for (size_t i = 0; i < cs->nx; i++)
                if (n >= cs->xj[i])
                    yc += xw[i] * (n == cs->xj[i] ? xc : cs->xs[i * C + c]);
            if (mode == 1 && cs->pS) {
                cs->py = yc;
                cs->pn = n;
                memcpy(&cs->pbits, &xc, sizeof xc);
                cs->pvalid = 1;
            }
        }
        y[c] = yc;
        if (commit) {
            ring[pos] = u;
            ring[pos + B] = u;
            if (cs->cum) {
                cs->xprev[c] = Xhi;
                cs->x0[c] = Xlo;
                if (cs->tcum && n == 0) cs->xfirst[c] = xc;
            }
            else {
                cs->xprev[c] = xc;
                if (n == 0) cs->x0[c] = xc;
            }
            for (size_t i = 0; i < cs->nx; i++)
                if (n == cs->xj[i]) cs->xs[i * C + c] = xc;
        }
    }
    if (commit) {
        cs->n = n + 1;
        cs->pvalid = 0;
    }
}

/*
 * RANGE. FC_OK if pushing the count time steps x (finite) keeps every
 * engine input u (x; L1: x_n - x_{n-1}; rectangle with a >= 1: the running
 * sum X) within umax, and the columns added at run time within umax too
 * (sum_i |corr^i_n x_j| <= umax for every step: cs_umax counts it once),
 * else FC_ERR_RANGE; also FC_ERR_SIZE if the count would reach 2^53 (the
 * loader's bound). Writes no state (only the caches of corr_n): the
 * running sums and the differences are recomputed with the very
 * operations of cs_step.
 */
/* The columns added at run time over count steps of x (x NULL: one step
   whose sample is taken as 0, the history): FC_ERR_RANGE if some
   sum_i |corr^i_n x_j| is above umax or not finite. */
static int cs_check_extra(cs_engine *cs, const double *x, size_t count)
{
    const size_t C = cs->C;
    for (size_t t = 0; cs->nx && t < count; t++) {
        double xw[FC__CORR_MAX];
        const uint64_t n = cs->n + t;
        cs_extra_weights(cs, n, xw);
        for (size_t c = 0; c < C; c++) {
            double e = 0.0;
            for (size_t i = 0; i < cs->nx; i++) {
                uint64_t j = cs->xj[i];
                if (n < j) continue;
                double xj = j < cs->n ? cs->xs[i * C + c]
                            : x ? x[(size_t)(j - cs->n) * C + c] : 0.0;
                e += fabs(xw[i]) * fabs(xj);
            }
            if (!(e <= cs->umax)) return FC_ERR_RANGE;
        }
    }
    return FC_OK;
}

static int cs_check_block(cs_engine *cs, const double *x, size_t count)
{
    const size_t C = cs->C;
    const double U = cs->umax;
    if ((uint64_t)count > FC_INDEX_LIMIT - 1 - cs->n) return FC_ERR_SIZE;
    int st = cs_check_extra(cs, x, count);
    if (st != FC_OK) return st;
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

/* The facade has checked the pointers, the finiteness of the samples, the
   overlap of x and y and the horizon (internal.h); the engine's own limits
   (RANGE, the count below 2^53) are checked here before anything is
   written. */
/*
 * A block with the channels shared by threads: task k runs every time step
 * of its range of channels (channels share nothing but the count and what
 * depends on it alone: the correction and the weights of the columns added
 * at run time, computed first in step order). cs_step0_channel is
 * cs_step's mode 0 for one channel, the same operations in the same order:
 * the same bits.
 */
typedef struct {
    cs_engine *cs;
    const double *x, *corr, *xw;
    double *y;
    size_t count, q;
} cs_job;

static void cs_step0_channel(cs_engine *cs, size_t c, double *v, double xc,
                             double *yout, uint64_t n, double corr, int inject,
                             const double *xw)
{
    /* v: the channel's xprev, x0 and xfirst, held by the caller */
    const size_t B = CS_BAND, C = cs->C;
    const size_t pos = (size_t)(n % B);
    double u;
    double Xhi = 0.0, Xlo = 0.0;
    if (cs->diffs) u = n == 0 ? 0.0 : xc - v[0];
    else if (cs->cum) {
        Xhi = v[0];
        Xlo = v[1];
        cs_dd_add(&Xhi, &Xlo, xc);
        u = Xhi;
    } else u = xc;
    double *ring = cs->ring + c * 2 * B;
    double d = ring[pos];
    double acc[8];
    double terms = 0.0;
    double *S = cs->S + c * cs->Lp, *Sc = cs->Sc + c * cs->Lp;
    if (cs->L) {
        cs_terms(cs, inject ? cs->inj : NULL, S, Sc, S, Sc, d, acc);
        terms = cs_reduce8(acc);
    }
    double band = cs_band(cs, ring + pos + 1);
    double x0 = n == 0 ? xc : cs->tcum ? v[2] : v[1];
    double yc = ((terms + band) + cs->c0 * u) + corr * x0;
    for (size_t i = 0; i < cs->nx; i++)
        if (n >= cs->xj[i])
            yc += xw[i] * (n == cs->xj[i] ? xc : cs->xs[i * C + c]);
    *yout = yc;
    ring[pos] = u;
    ring[pos + B] = u;
    if (cs->cum) {
        v[0] = Xhi;
        v[1] = Xlo;
        if (cs->tcum && n == 0) v[2] = xc;
    }
    else {
        v[0] = xc;
        if (n == 0) v[1] = xc;
    }
    for (size_t i = 0; i < cs->nx; i++)
        if (n == cs->xj[i]) cs->xs[i * C + c] = xc;
}

/* Fewest channels in a range a thread takes (8 doubles: a cache line). */
#define CS_PAR_CHANNELS 8
/* Time steps a thread runs on one channel before the next (its rows of the
   samples and outputs stay in cache across the range's channels). */
#define CS_PAR_TILE 256

static void cs_task(void *arg, size_t k, size_t w)
{
    const cs_job *J = arg;
    cs_engine *cs = J->cs;
    const size_t C = cs->C, c0 = k * C / J->q, c1 = (k + 1) * C / J->q;
    const size_t nx = cs->nx;
    (void)w;
    /* channel by channel through the block's time steps: the channel's
       states stay in cache, and the running values other threads' channels
       share cache lines with (xprev, x0, xfirst) are written once, at the
       end; the same operations in the same order as cs_step: same bits */
    for (size_t t0 = 0; t0 < J->count; t0 += CS_PAR_TILE) {
        const size_t t1 = J->count - t0 < CS_PAR_TILE ? J->count : t0 + CS_PAR_TILE;
        for (size_t c = c0; c < c1; c++) {
            double v[3] = {cs->xprev[c], cs->x0[c], cs->xfirst ? cs->xfirst[c] : 0.0};
            for (size_t t = t0; t < t1; t++) {
                const uint64_t n = cs->n + t;
                const int inject = cs->x0corr && !cs->tcum && n == CS_BAND;
                cs_step0_channel(cs, c, v, J->x[t * C + c], &J->y[t * C + c], n,
                                 J->corr[t], inject, J->xw + t * nx);
            }
            cs->xprev[c] = v[0];
            cs->x0[c] = v[1];
            if (cs->xfirst) cs->xfirst[c] = v[2];
        }
    }
}

/* Blocks of fewer values than this in all run on the calling thread. */
#define CS_PAR_MIN 4096

static int cs_push_block(void *eng, const double *x, size_t count, double *y,
                         size_t threads)
{
    cs_engine *cs = eng;
    int st;
    uint64_t bits;
    if (count == 1 && cs->pvalid && cs->pn == cs->n) {
        memcpy(&bits, x, sizeof bits);
        if (bits == cs->pbits) {      /* the previewed sample: checked then */
            cs_step(cs, x, y, 3);
            return FC_OK;
        }
    }
    if ((st = cs_check_block(cs, x, count)) != FC_OK) return st;
    if (threads > cs->C) threads = cs->C;
    if (threads > 1 && count * cs->C >= CS_PAR_MIN &&
        count <= ((size_t)-1) / sizeof(double) / (1 + cs->nx)) {
        double *corr = malloc(count * (1 + cs->nx) * sizeof(double));
        if (corr != NULL) { /* else: the calling thread alone, below */
            /* up to 4 ranges of channels per thread, handed out in turn,
               each of at least CS_PAR_CHANNELS channels (ranges of one
               or two channels put two threads on the cache lines of each
               output row) */
            size_t q = 4 * threads < cs->C ? 4 * threads : cs->C;
            if (q > cs->C / CS_PAR_CHANNELS) q = cs->C / CS_PAR_CHANNELS;
            if (q < 1) q = 1;
            double *xw = corr + count;
            cs_job J = {cs, x, corr, xw, y, count, q};
            for (size_t t = 0; t < count; t++) {
                const uint64_t n = cs->n + t;
                corr[t] = (cs->x0corr && n < CS_BAND) ? cs->ctab[n]
                          : cs->tcum ? cs_corr_at(cs, &cs->tc, n) : 0.0;
                cs_extra_weights(cs, n, xw + t * cs->nx);
            }
            fc__run_tasks(q, threads, cs_task, &J);
            cs->n += count;
            cs->pvalid = 0;
            free(corr);
            return FC_OK;
        }
    }
    for (size_t t = 0; t < count; t++)
        cs_step(cs, x + t * cs->C, y + t * cs->C, 0);
    return FC_OK;
}

static int cs_push1(void *eng, double x, double *y)
{
    return cs_push_block(eng, &x, 1, y, 1);
}

static int cs_preview(void *eng, const double *x, double *y)
{
    cs_engine *cs = eng;
    int st;
    if ((st = cs_check_block(cs, x, 1)) != FC_OK) return st;
    cs_step(cs, x, y, 1);   /* mode 1 writes nothing */
    return FC_OK;
}

static int cs_history(void *eng, double *h)
{
    int st = cs_check_extra(eng, NULL, 1);
    if (st != FC_OK) return st;
    cs_step(eng, NULL, h, 2);  /* mode 2 writes nothing */
    return FC_OK;
}

static void cs_reset(void *eng)
{
    cs_engine *cs = eng;
    size_t C = cs->C, B = CS_BAND;
    memset(cs->ring, 0, C * 2 * B * sizeof(double));
    memset(cs->S, 0, C * cs->Lp * sizeof(double));
    memset(cs->Sc, 0, C * cs->Lp * sizeof(double));
    memset(cs->xprev, 0, C * sizeof(double));
    memset(cs->x0, 0, C * sizeof(double));
    if (cs->xfirst) memset(cs->xfirst, 0, C * sizeof(double));
    if (cs->nx) memset(cs->xs, 0, cs->nx * C * sizeof(double));
    cs->n = 0;
    cs->pvalid = 0;
}

static uint64_t cs_count(const void *eng)
{
    return ((const cs_engine *)eng)->n;
}
static size_t cs_nbytes(const void *eng)
{
    const cs_engine *cs = eng;
    return sizeof(*cs) + cs->memsize;
}
static size_t cs_nterms(const void *eng)
{
    return ((const cs_engine *)eng)->L;
}

static void cs_free(void *eng)
{
    cs_engine *cs = eng;
    if (!cs) return;
    free(cs->mem);
    free(cs);
}

/* ------------------------------------------------------------ allocation */

/* The correction columns of a rule the runtime adds (those the
   construction does not carry). */
static size_t cs_runtime_cols(int rule)
{
    const fc__rule_desc *d = fc__rule(rule);
    size_t m = 0;
    for (size_t k = 0; k < d->ncorr; k++) m += !d->corr[k].soe;
    return m;
}

static int cs_alloc(size_t C, size_t Lp, int tcum, size_t nx,
                    cs_engine **out)
{
    const size_t B = CS_BAND;
    size_t nd = 0, t;
    /* shared: 3*Lp + 2*B (tcum: + CS_CORR_BLK; + nx CS_CORR_BLK; one
       channel: + 2*Lp for the preview's states); per channel: 2B + 2*Lp + 2
       (tcum: + 1; + nx) */
    size_t per;
    const size_t xper = (tcum ? 1 : 0) + nx,
                 xsh = (tcum ? CS_CORR_BLK : 0) + nx * CS_CORR_BLK
                       + (C == 1 ? 2 * Lp : 0);
    if (fc__mul_size(2, Lp, &per) || fc__add_size(per, 2 * B + 2 + xper, &per) ||
        fc__mul_size(per, C, &t) || fc__add_size(t, 3 * Lp + 2 * B + xsh, &nd) ||
        fc__mul_size(nd, sizeof(double), &t) || fc__add_size(t, 64, &t))
        return FC_ERR_SIZE;
    cs_engine *cs = calloc(1, sizeof *cs);
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
    if (tcum) {
        cs->xfirst = p; p += C;
        cs->tc.buf = p; p += CS_CORR_BLK;
    }
    for (size_t i = 0; i < nx; i++) {
        cs->xc[i].buf = p; p += CS_CORR_BLK;
    }
    if (nx) { cs->xs = p; p += nx * C; }
    if (C == 1) {
        cs->pS = p; p += Lp;
        cs->pSc = p; p += Lp;
    }
    cs->tcum = tcum;
    cs->nx = nx;
    cs->C = C;
    cs->Lp = Lp;
    for (size_t l = 0; l < Lp; l++) { cs->q[l] = 0.5; cs->inj[l] = 1.0; }
    *out = cs;
    return FC_OK;
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

static double cs_umax(const cs_engine *cs)
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
    if (cs->tcum && cs->corrmax > cmax) cmax = cs->corrmax;
    go += cmax;
    if (cs->nx) go += 1.0;  /* the other columns: at most U (cs_check_block) */
    double g = go > gs ? go : gs;
    if (!(g <= 1e300)) return 0.0;      /* not reached for accepted steps */
    return 0.25 * (DBL_MAX / g);
}

/* The parts of a new stream common to both shapes: the band (reversed for
   the dot product, lag 0 apart), the trapezoid table, the parameters. */
static void cs_finish(cs_engine *cs, const double *cband, const double *ctab,
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
    cs->cum = order >= fc__rule(rule)->cumulative_from; /* = fc__soe.cum */
    /* cs->tcum, cs->nx: set by cs_alloc (tcum = cum and x0corr) */
    cs->x0corr = fc__rule_has_soe_col(rule);
    const fc__rule_desc *d = fc__rule(rule);
    size_t kx;
    if (fc__rule_soe_col(d, &kx)) cs->tc.k = kx;
    for (size_t k = 0, i = 0; k < d->ncorr; k++)
        if (!d->corr[k].soe) {
            cs->xj[i] = d->corr[k].column;
            cs->xc[i++].k = k;
        }
    cs->diffs = fc__rule_uses_differences(rule);
    cs->simd = cs_cpu_avx2();
    cs->umax = cs_umax(cs);
    cs_reset(cs);
}

/* ------------------------------------------------------------ create */

/* A stream running the construction d (soe_build.c). */
static int cs_from_soe(const fc__soe *d, int rule, double order, double step,
                       size_t channels, double tol, double horizon,
                       cs_engine **out)
{
    int st;
    size_t L = d->L;
    size_t Lp = (L + 7) / 8 * 8;
    if (Lp == 0) Lp = 8;
    cs_engine *cs;
    const int tcum = d->cum && fc__rule_has_soe_col(rule);
    if ((st = cs_alloc(channels, Lp, tcum, cs_runtime_cols(rule), &cs)) != FC_OK)
        return st;
    cs->corrmax = d->corrmax;
    memcpy(cs->q, d->q, L * sizeof(double));
    memcpy(cs->beta, d->beta, L * sizeof(double));
    memcpy(cs->inj, d->inj, L * sizeof(double));
    cs->L = L;
    cs_finish(cs, d->cband, d->ctab, rule, order, step, tol, horizon);
    *out = cs;
    return FC_OK;
}

/* The construction of d (checked by the facade): the sum of exponentials
   (soe_build.c), then the stream that runs it. */
static int cs_build(int rule, double order, double step, size_t channels,
                    double tol, double horizon, cs_engine **out)
{
    int st;
    fc__soe *soe = malloc(sizeof *soe);
    if (!soe) return FC_ERR_NOMEM;
    st = fc__soe_build(rule, order, step, tol, horizon, soe);
    if (st == FC_OK)
        st = cs_from_soe(soe, rule, order, step, channels, tol, horizon, out);
    free(soe);
    return st;
}

static int cs_create(const fc__stream_def *d, void **eng)
{
    cs_engine *cs;
    int st = cs_build(d->rule, d->order, d->step, d->channels, d->tol,
                      d->horizon, &cs);
    if (st == FC_OK) *eng = cs;
    return st;
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
 *      (rectangle and trapezoid with order >= 1: ring holds X, xprev/x0
 *      the high/low parts of X), and for the trapezoid with order >= 1
 *      only, x_0 (these streams are new with it: every payload that
 *      earlier code wrote has the layout without it), then x_j of each
 *      correction column the runtime adds (cs_engine.nx, in the table's
 *      order; no rule of today's table has one)
 *  end u64 FNV-1a 64 of everything before it
 */
#define CS_HDR 72
static const unsigned char cs_magic[4] = {'F', 'C', 'C', 'S'};

/* Number of doubles after the header for (C, L, tcum, nx); FC_ERR_SIZE on
   overflow. */
static int cs_ndoubles(uint64_t C, uint64_t L, int tcum, size_t nx,
                       size_t *nd)
{
    const size_t B = CS_BAND;
    size_t per, t, sh;
    if (C > (size_t)-1 || L > CS_MAX_TERMS) return FC_ERR_SIZE;
    sh = 3 * (size_t)L + 2 * B + 1;
    if (fc__mul_size(2, (size_t)L, &per) ||
        fc__add_size(per, B + 2 + (tcum ? 1 : 0) + nx, &per) ||
        fc__mul_size(per, (size_t)C, &t) || fc__add_size(t, sh, &t))
        return FC_ERR_SIZE;
    *nd = t;
    return FC_OK;
}

static size_t cs_size_for(uint64_t C, uint64_t L, int tcum, size_t nx)
{
    size_t nd, t;
    if (cs_ndoubles(C, L, tcum, nx, &nd) || fc__mul_size(nd, 8, &t) ||
        fc__add_size(t, CS_HDR + 8, &t))
        return 0;
    return t;
}

static int cs_save_size(const void *eng, size_t *size)
{
    const cs_engine *cs = eng;
    *size = cs_size_for(cs->C, cs->L, cs->tcum, cs->nx); /* 0: too large (cs_save refuses) */
    return FC_OK;
}

static int cs_save(const void *eng, unsigned char *buf, size_t size)
{
    const cs_engine *cs = eng;
    size_t need = cs_size_for(cs->C, cs->L, cs->tcum, cs->nx);
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
        if (cs->tcum) { fc__putd(p, cs->xfirst[c]); p += 8; }
        for (size_t i = 0; i < cs->nx; i++) {
            fc__putd(p, cs->xs[i * cs->C + c]); p += 8;
        }
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
 *  - rectangle and trapezoid a >= 1 (cum): (xprev, x0) is the
 *    double-double X; trapezoid a >= 1 (tcum): xfirst = x_0, where
 *    x_0 + 0 (-0 gives +0) is ring slot 0 while n <= B, +0 at n = 0,
 *    and |x_0| <= umax;
 *    otherwise x0 = x_0, which is ring slot 0 while n <= B, and |x_0| <=
 *    umax outside L1 (x_0 = u_0);
 *  - a column added at run time: x_j = +0 while n <= j (finite once
 *    stored; cs_check_block bounds its term at every step).
 */
static int cs_state_ok(const cs_engine *cs)
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
        for (size_t i = 0; i < cs->nx; i++)
            if (n <= cs->xj[i] && !cs_zero_bits(cs->xs[i * cs->C + c])) return 0;
        if (cs->tcum) {
            const double xf = cs->xfirst[c];
            if (n == 0 && !cs_zero_bits(xf)) return 0;
            if (!(fabs(xf) <= U)) return 0;
            /* X_0 = +0 + x_0 (cs_dd_add): x_0 = -0 gives X_0 = +0 */
            if (n >= 1 && n <= B && !cs_same(xf + 0.0, ring[0])) return 0;
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

/* The parameters a creation accepts (fc_stream_create's checks), except
   that orders below FC__CS_MIN_ORDER are accepted too: version-1 code
   could build some of them at short horizons, and their saved blobs must
   still load. */
static int cs_params_ok(int rule, double order, double step, uint64_t C,
                        double tol, double horizon)
{
    if (fc__check_rule(rule, order, step) != FC_OK) return 0;
    fc__range r = fc__rule(rule)->compressed;
    r.lo = 0.0;
    r.lo_incl = 0;
    return fc__in_range(&r, order) && C != 0 && C <= FC__STREAM_CHANNELS_MAX &&
           tol >= FC__CS_TOL_MIN && tol <= FC__CS_TOL_MAX && horizon >= 1.0 &&
           horizon <= FC__CS_HORIZON_MAX;
}

/*
 * The payload is untrusted. Sizes: the channel count and the term count
 * must give exactly the payload size (so nothing larger than the blob is
 * ever allocated), and the checksum must match. Parameters: the payload's
 * (rule, order, step, channels, tol, horizon) must be the common header's
 * (d) bit for bit, so that the facade's getters describe the engine that
 * was rebuilt; the stream is rebuilt from them -- the construction is
 * deterministic -- and the stored q, beta, inj, band, c0 and ctab must
 * equal the rebuilt ones bit for bit. Only the running state (ring, S, Sc,
 * xprev, x0, n) is then taken from the blob, and it must pass cs_state_ok.
 * Anything else is FC_ERR_FORMAT (FC_ERR_NOMEM if the rebuild runs out of
 * memory). Cost: one construction.
 */
static int cs_load(const fc__stream_def *d, const unsigned char *buf,
                   size_t size, void **eng)
{
    const size_t B = CS_BAND;
    fc__rd r;
    if (d->kind != FC__KIND_RULE) return FC_ERR_FORMAT;
    fc__rd_init(&r, buf, size);
    const unsigned char *magic = fc__rd_bytes(&r, 4);
    uint32_t version = fc__rd_u32(&r), rule = fc__rd_u32(&r);
    uint32_t band = fc__rd_u32(&r);
    uint64_t C = fc__rd_u64(&r), L = fc__rd_u64(&r), n = fc__rd_u64(&r);
    double order = fc__rd_d(&r), step = fc__rd_d(&r);
    double tol = fc__rd_d(&r), horizon = fc__rd_d(&r);
    if (r.bad || size < CS_HDR + 8 || memcmp(magic, cs_magic, 4) != 0 ||
        version != CS_FMT_VERSION)
        return FC_ERR_FORMAT;
    if (rule > (uint32_t)INT32_MAX || fc__rule((int)rule) == NULL || band != B)
        return FC_ERR_FORMAT;
    if (C == 0 || L > CS_MAX_TERMS) return FC_ERR_FORMAT;
    /* the trapezoid at orders >= 1 keeps x_0 per channel as well */
    const int tcum = fc__rule_has_soe_col((int)rule) &&
                     order >= fc__rule((int)rule)->cumulative_from;
    const size_t nx = cs_runtime_cols((int)rule);
    size_t need = cs_size_for(C, L, tcum, nx);   /* 0 on overflow */
    if (need == 0 || need != size) return FC_ERR_FORMAT;
    if (fc__get64(buf + size - 8) != fc__fnv1a(FC__FNV_OFFSET, buf, size - 8))
        return FC_ERR_FORMAT;
    if (n >= FC_INDEX_LIMIT) return FC_ERR_FORMAT;
    size_t nd;
    if (cs_ndoubles(C, L, tcum, nx, &nd)) return FC_ERR_FORMAT;
    fc__rd v = r;   /* the doubles, read twice: checked, then taken */
    for (size_t i = 0; i < nd; i++)
        if (!isfinite(fc__rd_d(&v))) return FC_ERR_FORMAT;
    if ((int)rule != d->rule || C != (uint64_t)d->channels ||
        !cs_same(order, d->order) || !cs_same(step, d->step) ||
        !cs_same(tol, d->tol) || !cs_same(horizon, d->horizon))
        return FC_ERR_FORMAT;
    if (!cs_params_ok((int)rule, order, step, C, tol, horizon))
        return FC_ERR_FORMAT;

    cs_engine *cs;
    int st = cs_build((int)rule, order, step, (size_t)C, tol, horizon, &cs);
    if (st != FC_OK) return st == FC_ERR_NOMEM ? st : FC_ERR_FORMAT;
    int bad = cs->L != L || cs->tcum != tcum;
#define SAMEV(arr, cnt) do { for (size_t i_ = 0; i_ < (cnt); i_++) \
        if (!cs_same((arr)[i_], fc__rd_d(&r))) bad = 1; } while (0)
    if (!bad) {
        SAMEV(cs->q, L); SAMEV(cs->beta, L); SAMEV(cs->inj, L);
        SAMEV(cs->cb, B);
        SAMEV(&cs->c0, 1);
        SAMEV(cs->ctab, B);
    }
#undef SAMEV
    if (bad) {
        cs_free(cs);
        return FC_ERR_FORMAT;
    }
#define GETV(arr, cnt) do { for (size_t i_ = 0; i_ < (cnt); i_++) (arr)[i_] = fc__rd_d(&r); } while (0)
    for (size_t c = 0; c < C; c++) {
        double *ring = cs->ring + c * 2 * B;
        GETV(ring, B);
        memcpy(ring + B, ring, B * sizeof(double));
        GETV(cs->S + c * cs->Lp, L);
        GETV(cs->Sc + c * cs->Lp, L);
        cs->xprev[c] = fc__rd_d(&r);
        cs->x0[c] = fc__rd_d(&r);
        if (tcum) cs->xfirst[c] = fc__rd_d(&r);
        for (size_t i = 0; i < nx; i++) cs->xs[i * (size_t)C + c] = fc__rd_d(&r);
    }
#undef GETV
    cs->n = n;
    if (r.bad || !cs_state_ok(cs)) {
        cs_free(cs);
        return FC_ERR_FORMAT;
    }
    *eng = cs;
    return FC_OK;
}

static const fc__range *cs_order_range(const fc__rule_desc *d)
{
    return &d->compressed;
}

const fc__stream_ops fc__compressed_ops = {
    .has_horizon = 1,
    .tol_min = FC__CS_TOL_MIN,
    .tol_max = FC__CS_TOL_MAX,
    .horizon_max = FC__CS_HORIZON_MAX,
    .order_range = cs_order_range,
    .create = cs_create,
    .load = cs_load,
    .free = cs_free,
    .push_block = cs_push_block,
    .push1 = cs_push1,
    .preview = cs_preview,
    .history = cs_history,
    .reset = cs_reset,
    .reserve = NULL,        /* memory is fixed at creation */
    .count = cs_count,
    .remaining = NULL,      /* the horizon decides (facade) */
    .nbytes = cs_nbytes,
    .terms = cs_nterms,
    .save_size = cs_save_size,
    .save = cs_save,
};
