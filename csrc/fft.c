/*
 * fft.c -- the library's own real FFT of power-of-two sizes (fft.h and the
 * fc_rfft_* functions of fracconv.h).
 *
 * Method (all textbook):
 *   - a real transform of size n is a complex transform of size M = n/2 of
 *     z_j = x_2j + i x_2j+1 followed by one twiddle pass that separates the
 *     spectra of the even and odd samples (Cooley, Lewis and Welch, J. Sound
 *     Vib. 12 (1970); also Press et al., Numerical Recipes, sec. 12.3); the
 *     inverse runs the same pass backwards, then the inverse complex
 *     transform;
 *   - the complex transform is a radix-4 Stockham autosort transform
 *     (decimation in frequency, no bit reversal; Van Loan, Computational
 *     Frameworks for the Fast Fourier Transform, SIAM 1992, sec. 1.7), last
 *     stage radix 8 when log2 M is odd; each stage has its own contiguous
 *     twiddle table; for large M (2^16 complex and up) M = n1 n2 and the
 *     transform is done in two passes over memory, n1-point transforms of
 *     the columns, a twiddle, n2-point transforms of the rows (the
 *     "four-step" order of Bailey, J. Supercomputing 4 (1990)), each pass
 *     16 columns at a time through small contiguous buffers;
 *   - twiddles come from cos/sin of exact fractions reduced to the first
 *     octant, never from recurrences.
 * The kernels (fft_kernels.h) are compiled twice: portable C, and AVX2+FMA
 * on x86-64 (every function of that instance carries
 * __attribute__((target("avx2,fma"))), which GCC and clang both accept;
 * chosen at plan creation with __builtin_cpu_supports, which both provide;
 * no -march flag is needed and nothing global is written by this file).
 * -DFC_NO_SIMD (or -DFC__FFT_NO_SIMD) leaves the AVX2 instance out: the
 * portable build that `make check-portable` compares with the default one.
 */
#include <stdint.h>
#include <stdlib.h>
#include <string.h>
#include <math.h>

#include "internal.h"

#if defined(__GNUC__) && (defined(__x86_64__) || defined(__i386__)) \
    && !defined(FC__FFT_NO_SIMD) && !defined(FC_NO_SIMD)
#define FC__FFT_X86 1
#include <immintrin.h>
#else
#define FC__FFT_X86 0
#endif

#if defined(__GNUC__)
#define FFT_ALWAYS_INLINE inline __attribute__((always_inline))
#define FFT_PREFETCH(a) __builtin_prefetch((a), 0, 3)
#else
#define FFT_ALWAYS_INLINE inline
#define FFT_PREFETCH(a) ((void)0)
#endif

/* Complex sizes below this use the small scalar path. */
#define FC__FFT_MIN_VEC 16
/* Radix-8 stages where they fit (1), or radix 4 only (0): on Zen 3 the
   radix-8 stages measured no faster (register pressure), so off. */
#ifndef FC__FFT_RADIX8
#define FC__FFT_RADIX8 0
#endif
/* Large sizes (log2 m >= FC__FFT_BIG_LOG): two passes over memory,
   FC__FFT_BIG_W columns at a time. */
#ifndef FC__FFT_BIG_LOG
#define FC__FFT_BIG_LOG 16
#endif
#ifndef FC__FFT_BIG_W
#define FC__FFT_BIG_W 16
#endif
enum { FC__ST_FIRST, FC__ST_R4, FC__ST_R4L, FC__ST_R8L, FC__ST_FIRST8, FC__ST_R8 };

struct fc__fft_stage {
    int kind;
    size_t s;          /* stride (columns) */
    size_t m;          /* span / radix */
    size_t ncur;       /* span */
    const double *tw;  /* twiddles (FIRST, R4, FIRST8, R8) or NULL */
};

#define FC__FFT_MAXSTAGES 16

struct fc_fft_plan {
    size_t n;          /* real size */
    size_t m;          /* complex size n/2 */
    size_t nbytes;
    int nstages;
    struct fc__fft_stage stages[FC__FFT_MAXSTAGES];
    /* large sizes: m = n1 * n2, columns transformed B at a time in local
       buffers (big != 0; stages[] unused then) */
    int big;
    size_t n1, n2, bw;
    int nfront, nback;
    struct fc__fft_stage front[FC__FFT_MAXSTAGES], back[FC__FFT_MAXSTAGES];
    double *tw1;       /* exp(-2 pi i c k1 / m), c = multiple of bw: [c/bw][k1] */
    double *tw2;       /* exp(-2 pi i b k1 / m), b < bw: [k1][b] */
    double *loc1, *loc2; /* bw * max(n1, n2) complex each */
    double *scratch;   /* m complex */
    double *twpost;    /* e_k = -i exp(-2 pi i k/n), k = 0 .. m/2 */
    double *twsmall;   /* m < FC__FFT_MIN_VEC: exp(-2 pi i j/m), j < m */
    void *mem;
    void (*fwd)(fc_fft_plan *, const double *, double *);
    void (*inv)(fc_fft_plan *, const double *, double *, double);
    /* the spectral products, chosen with fwd/inv when the plan is made
       (the CPU is probed once per plan, never per call) */
    void (*sdot)(size_t, const double *const *, const double *const *,
                 size_t, double *);
    void (*sdotf)(size_t, const double *const *, const double *const *,
                  size_t, size_t, double *const *);
    void (*sdotl)(size_t, const double *const *, const double *const *,
                  size_t, const size_t *, size_t, double *const *);
    void (*smul)(size_t, const double *, const double *, double *);
};

/* exp(-2 pi i j / N) for N a power of two: octant reduction, then cos/sin of
   an angle 2 pi r/N with r/N exact. */
static void fc__twiddle(size_t j, size_t N, double *re, double *im)
{
    static const double two_pi = 6.28318530717958647692528676655900577;
    size_t q, r, quarter;
    double c, s;
    while (N < 8) { N *= 2; j *= 2; }
    j &= N - 1;
    quarter = N / 4;
    q = j / quarter;
    r = j % quarter;
    if (2 * r <= quarter) {
        double a = two_pi * ((double)r / (double)N);
        c = cos(a);
        s = sin(a);
    } else {
        double a = two_pi * ((double)(quarter - r) / (double)N);
        c = sin(a);
        s = cos(a);
    }
    /* rotate (c, s) = (cos, sin) of the reduced angle by q quarter turns */
    switch (q) {
    case 0: *re = c; *im = -s; break;
    case 1: *re = -s; *im = -c; break;
    case 2: *re = -c; *im = s; break;
    default: *re = s; *im = c; break;
    }
}

/* Naive complex DFT for m < FC__FFT_MIN_VEC (twiddles exact table). */
static void fc__small_cdft(const fc_fft_plan *p, const double *x, double *y,
                           int inv)
{
    const size_t M = p->m;
    const double *w = p->twsmall;
    size_t k, j;
    for (k = 0; k < M; k++) {
        double sr = 0.0, si = 0.0;
        for (j = 0; j < M; j++) {
            size_t e = (j * k) & (M - 1);
            double wr = w[2 * e], wi = inv ? -w[2 * e + 1] : w[2 * e + 1];
            sr += x[2 * j] * wr - x[2 * j + 1] * wi;
            si += x[2 * j] * wi + x[2 * j + 1] * wr;
        }
        y[2 * k] = sr;
        y[2 * k + 1] = si;
    }
}

/* ---------------------------------------------------------------------- */
/* Portable instance. With GCC, V is a pair of generic 2-double vectors
   (one complex each; SSE2 registers on x86-64); otherwise a struct of four
   doubles. Sign flips multiply by +-1 (exact). */

#if defined(__GNUC__) && !defined(__clang__) && !defined(FC__FFT_STRUCT_V)
/* one complex per 2-double vector (an SSE2 register on x86-64) */
typedef double fc__g2 __attribute__((vector_size(16)));
typedef long long fc__g2i __attribute__((vector_size(16)));
typedef struct { fc__g2 lo, hi; } fc__gv;

static inline fc__gv fc__g_ld(const double *p)
{ fc__gv r; memcpy(&r.lo, p, sizeof r.lo); memcpy(&r.hi, p + 2, sizeof r.hi); return r; }
static inline void fc__g_st(double *p, fc__gv a)
{ memcpy(p, &a.lo, sizeof a.lo); memcpy(p + 2, &a.hi, sizeof a.hi); }
static inline fc__gv fc__g_add(fc__gv a, fc__gv b)
{ a.lo += b.lo; a.hi += b.hi; return a; }
static inline fc__gv fc__g_sub(fc__gv a, fc__gv b)
{ a.lo -= b.lo; a.hi -= b.hi; return a; }
static inline fc__gv fc__g_mul(fc__gv a, fc__gv b)
{ a.lo *= b.lo; a.hi *= b.hi; return a; }
static inline fc__gv fc__g_set1(double x)
{ fc__gv r; r.lo = (fc__g2){x, x}; r.hi = r.lo; return r; }
static inline fc__g2 fc__g2_swap(fc__g2 a)
{ const fc__g2i m = {1, 0}; return __builtin_shuffle(a, m); }
static inline fc__gv fc__g_conj(fc__gv a)
{ const fc__g2 s = {1.0, -1.0}; a.lo *= s; a.hi *= s; return a; }
static inline fc__gv fc__g_mul_mi(fc__gv a)
{
    const fc__g2 s = {1.0, -1.0};
    a.lo = fc__g2_swap(a.lo) * s; a.hi = fc__g2_swap(a.hi) * s; return a;
}
static inline fc__gv fc__g_mul_pi(fc__gv a)
{
    const fc__g2 s = {-1.0, 1.0};
    a.lo = fc__g2_swap(a.lo) * s; a.hi = fc__g2_swap(a.hi) * s; return a;
}
static inline fc__gv fc__g_cmul(fc__gv a, fc__gv wr, fc__gv wi)
{
    const fc__g2 s = {-1.0, 1.0};
    fc__gv r;
    r.lo = a.lo * wr.lo + fc__g2_swap(a.lo) * (wi.lo * s);
    r.hi = a.hi * wr.hi + fc__g2_swap(a.hi) * (wi.hi * s);
    return r;
}
static inline fc__gv fc__g_cmulc(fc__gv a, fc__gv wr, fc__gv wi)
{
    const fc__g2 s = {1.0, -1.0};
    fc__gv r;
    r.lo = a.lo * wr.lo + fc__g2_swap(a.lo) * (wi.lo * s);
    r.hi = a.hi * wr.hi + fc__g2_swap(a.hi) * (wi.hi * s);
    return r;
}
static inline fc__gv fc__g_rev(fc__gv a) { fc__gv r; r.lo = a.hi; r.hi = a.lo; return r; }
static inline fc__gv fc__g_lo2(fc__gv a, fc__gv b) { fc__gv r; r.lo = a.lo; r.hi = b.lo; return r; }
static inline fc__gv fc__g_hi2(fc__gv a, fc__gv b) { fc__gv r; r.lo = a.hi; r.hi = b.hi; return r; }
static inline fc__gv fc__g_dupre(fc__gv a)
{
    const fc__g2i m = {0, 0};
    a.lo = __builtin_shuffle(a.lo, m); a.hi = __builtin_shuffle(a.hi, m); return a;
}
static inline fc__gv fc__g_dupim(fc__gv a)
{
    const fc__g2i m = {1, 1};
    a.lo = __builtin_shuffle(a.lo, m); a.hi = __builtin_shuffle(a.hi, m); return a;
}
#else
typedef struct { double d[4]; } fc__gv;

static inline fc__gv fc__g_ld(const double *p)
{ fc__gv r; r.d[0] = p[0]; r.d[1] = p[1]; r.d[2] = p[2]; r.d[3] = p[3]; return r; }
static inline void fc__g_st(double *p, fc__gv a)
{ p[0] = a.d[0]; p[1] = a.d[1]; p[2] = a.d[2]; p[3] = a.d[3]; }
static inline fc__gv fc__g_add(fc__gv a, fc__gv b)
{ fc__gv r; int i; for (i = 0; i < 4; i++) r.d[i] = a.d[i] + b.d[i]; return r; }
static inline fc__gv fc__g_sub(fc__gv a, fc__gv b)
{ fc__gv r; int i; for (i = 0; i < 4; i++) r.d[i] = a.d[i] - b.d[i]; return r; }
static inline fc__gv fc__g_mul(fc__gv a, fc__gv b)
{ fc__gv r; int i; for (i = 0; i < 4; i++) r.d[i] = a.d[i] * b.d[i]; return r; }
static inline fc__gv fc__g_set1(double x)
{ fc__gv r; r.d[0] = x; r.d[1] = x; r.d[2] = x; r.d[3] = x; return r; }
static inline fc__gv fc__g_conj(fc__gv a)
{ a.d[1] = -a.d[1]; a.d[3] = -a.d[3]; return a; }
/* a * (-i) */
static inline fc__gv fc__g_mul_mi(fc__gv a)
{ fc__gv r; r.d[0] = a.d[1]; r.d[1] = -a.d[0]; r.d[2] = a.d[3]; r.d[3] = -a.d[2]; return r; }
/* a * (+i) */
static inline fc__gv fc__g_mul_pi(fc__gv a)
{ fc__gv r; r.d[0] = -a.d[1]; r.d[1] = a.d[0]; r.d[2] = -a.d[3]; r.d[3] = a.d[2]; return r; }
/* a * (wr + i wi), wr and wi duplicated per complex */
static inline fc__gv fc__g_cmul(fc__gv a, fc__gv wr, fc__gv wi)
{
    fc__gv r;
    r.d[0] = a.d[0] * wr.d[0] - a.d[1] * wi.d[0];
    r.d[1] = a.d[1] * wr.d[1] + a.d[0] * wi.d[1];
    r.d[2] = a.d[2] * wr.d[2] - a.d[3] * wi.d[2];
    r.d[3] = a.d[3] * wr.d[3] + a.d[2] * wi.d[3];
    return r;
}
/* a * conj(wr + i wi) */
static inline fc__gv fc__g_cmulc(fc__gv a, fc__gv wr, fc__gv wi)
{
    fc__gv r;
    r.d[0] = a.d[0] * wr.d[0] + a.d[1] * wi.d[0];
    r.d[1] = a.d[1] * wr.d[1] - a.d[0] * wi.d[1];
    r.d[2] = a.d[2] * wr.d[2] + a.d[3] * wi.d[2];
    r.d[3] = a.d[3] * wr.d[3] - a.d[2] * wi.d[3];
    return r;
}
/* swap the two complex values */
static inline fc__gv fc__g_rev(fc__gv a)
{ fc__gv r; r.d[0] = a.d[2]; r.d[1] = a.d[3]; r.d[2] = a.d[0]; r.d[3] = a.d[1]; return r; }
/* [a.c0, b.c0] and [a.c1, b.c1] */
static inline fc__gv fc__g_lo2(fc__gv a, fc__gv b)
{ fc__gv r; r.d[0] = a.d[0]; r.d[1] = a.d[1]; r.d[2] = b.d[0]; r.d[3] = b.d[1]; return r; }
static inline fc__gv fc__g_hi2(fc__gv a, fc__gv b)
{ fc__gv r; r.d[0] = a.d[2]; r.d[1] = a.d[3]; r.d[2] = b.d[2]; r.d[3] = b.d[3]; return r; }
/* [re0, re0, re1, re1] and [im0, im0, im1, im1] */
static inline fc__gv fc__g_dupre(fc__gv a)
{ a.d[1] = a.d[0]; a.d[3] = a.d[2]; return a; }
static inline fc__gv fc__g_dupim(fc__gv a)
{ a.d[0] = a.d[1]; a.d[2] = a.d[3]; return a; }

#endif

#define V fc__gv
#define VLD fc__g_ld
#define VST fc__g_st
#define VADD fc__g_add
#define VSUB fc__g_sub
#define VMUL fc__g_mul
#define VSET1 fc__g_set1
#define VCONJ fc__g_conj
#define VMUL_MI fc__g_mul_mi
#define VMUL_PI fc__g_mul_pi
#define VCMUL fc__g_cmul
#define VCMULC fc__g_cmulc
#define VREV fc__g_rev
#define VLO2 fc__g_lo2
#define VHI2 fc__g_hi2
#define VDUPRE fc__g_dupre
#define VDUPIM fc__g_dupim
#define FFT_FN(name) fc__gen_##name
#define FFT_TARGET
#include "fft_kernels.h"
#include "fft_undef.h"

/* ---------------------------------------------------------------------- */
/* AVX2 + FMA instance (x86 only, selected at run time).                   */
#if FC__FFT_X86
/* On every function of this instance (the helpers below and, through
   FFT_TARGET, the kernels): a function attribute, not a pragma region, so
   that clang compiles it too. */
#define FC__AVX2_FN __attribute__((target("avx2,fma")))

static FC__AVX2_FN inline __m256d fc__a_signodd(void) { return _mm256_set_pd(-0.0, 0.0, -0.0, 0.0); }
static FC__AVX2_FN inline __m256d fc__a_signeven(void) { return _mm256_set_pd(0.0, -0.0, 0.0, -0.0); }
static FC__AVX2_FN inline __m256d fc__a_swap(__m256d a) { return _mm256_permute_pd(a, 0x5); }
static FC__AVX2_FN inline __m256d fc__a_conj(__m256d a) { return _mm256_xor_pd(a, fc__a_signodd()); }
static FC__AVX2_FN inline __m256d fc__a_mul_mi(__m256d a)
{ return _mm256_xor_pd(fc__a_swap(a), fc__a_signodd()); }
static FC__AVX2_FN inline __m256d fc__a_mul_pi(__m256d a)
{ return _mm256_xor_pd(fc__a_swap(a), fc__a_signeven()); }
static FC__AVX2_FN inline __m256d fc__a_cmul(__m256d a, __m256d wr, __m256d wi)
{ return _mm256_fmaddsub_pd(a, wr, _mm256_mul_pd(fc__a_swap(a), wi)); }
static FC__AVX2_FN inline __m256d fc__a_cmulc(__m256d a, __m256d wr, __m256d wi)
{ return _mm256_fmsubadd_pd(a, wr, _mm256_mul_pd(fc__a_swap(a), wi)); }
static FC__AVX2_FN inline __m256d fc__a_rev(__m256d a) { return _mm256_permute2f128_pd(a, a, 0x01); }
static FC__AVX2_FN inline __m256d fc__a_lo2(__m256d a, __m256d b) { return _mm256_permute2f128_pd(a, b, 0x20); }
static FC__AVX2_FN inline __m256d fc__a_hi2(__m256d a, __m256d b) { return _mm256_permute2f128_pd(a, b, 0x31); }
static FC__AVX2_FN inline __m256d fc__a_dupim(__m256d a) { return _mm256_permute_pd(a, 0xF); }

#define V __m256d
#define VLD _mm256_loadu_pd
#define VST _mm256_storeu_pd
#define VADD _mm256_add_pd
#define VSUB _mm256_sub_pd
#define VMUL _mm256_mul_pd
#define VSET1 _mm256_set1_pd
#define VCONJ fc__a_conj
#define VMUL_MI fc__a_mul_mi
#define VMUL_PI fc__a_mul_pi
#define VCMUL fc__a_cmul
#define VCMULC fc__a_cmulc
#define VREV fc__a_rev
#define VLO2 fc__a_lo2
#define VHI2 fc__a_hi2
#define VDUPRE _mm256_movedup_pd
#define VDUPIM fc__a_dupim
#define FFT_FN(name) fc__avx2_##name
#define FFT_TARGET FC__AVX2_FN
#include "fft_kernels.h"
#include "fft_undef.h"
#undef FC__AVX2_FN

static int fc__have_avx2_fma(void)
{
    __builtin_cpu_init();
    return __builtin_cpu_supports("avx2") && __builtin_cpu_supports("fma");
}
#endif

/* ---------------------------------------------------------------------- */
/* Plans.                                                                  */

static int fc__log2_exact(size_t n, int *lg)
{
    int l = 0;
    if (n < 2 || (n & (n - 1)) != 0) return FC_ERR_SIZE;
    while (((size_t)1 << l) < n) l++;
    *lg = l;
    return FC_OK;
}

/* Stage list of a complex transform of size 2^lg (lg >= 2) whose columns
   start at stride s0 (1: the whole transform; bw: bw interleaved columns). */
static int fc__stage_list(int lg, size_t s0, struct fc__fft_stage *st)
{
    int rem = lg, ns = 0;
    size_t L = (size_t)1 << lg, s = 1;
    while (rem > 0) {
        st[ns].ncur = L / s;
        st[ns].s = s * s0;
        st[ns].tw = NULL;
        if (rem == 2 || rem == 3) {
            st[ns].kind = (rem == 2) ? FC__ST_R4L : FC__ST_R8L;
            st[ns].m = 1;
            ns++;
            break;
        }
        if (FC__FFT_RADIX8 && rem >= 5) {
            st[ns].kind = (s * s0 == 1) ? FC__ST_FIRST8 : FC__ST_R8;
            st[ns].m = L / s / 8;
            ns++;
            s *= 8;
            rem -= 3;
        } else {
            st[ns].kind = (s * s0 == 1) ? FC__ST_FIRST : FC__ST_R4;
            st[ns].m = L / s / 4;
            ns++;
            s *= 4;
            rem -= 2;
        }
    }
    return ns;
}

/* Twiddle values per p of a stage (radix - 1 complex), 0 if none. */
static size_t fc__stage_twper(int kind)
{
    switch (kind) {
    case FC__ST_FIRST: case FC__ST_R4: return 3;
    case FC__ST_FIRST8: case FC__ST_R8: return 7;
    default: return 0;
    }
}

/* Doubles of twiddles a stage list needs. */
static size_t fc__stage_twcount(const struct fc__fft_stage *st, int ns)
{
    size_t t = 0;
    int i;
    for (i = 0; i < ns; i++)
        t += (2 * fc__stage_twper(st[i].kind) * st[i].m + 7) & ~(size_t)7;
    return t;
}

/* Fill the twiddles of a stage list from d; returns the doubles used.
   First stages (s = 1) pair p and p+1: [w_k(p), w_k(p+1)] per k; the
   others store w_k(p) for k = 1 .. radix-1 per p. */
static size_t fc__stage_fill(struct fc__fft_stage *st, int ns, double *d)
{
    size_t used = 0, q, k;
    int i;
    for (i = 0; i < ns; i++) {
        const size_t r1 = fc__stage_twper(st[i].kind);
        double *w = d + used;
        if (r1 == 0) continue;
        if (st[i].kind == FC__ST_FIRST || st[i].kind == FC__ST_FIRST8) {
            for (q = 0; q < st[i].m; q += 2)
                for (k = 1; k <= r1; k++) {
                    double *o = w + 2 * r1 * q + 4 * (k - 1);
                    fc__twiddle(q * k, st[i].ncur, &o[0], &o[1]);
                    fc__twiddle((q + 1) * k, st[i].ncur, &o[2], &o[3]);
                }
        } else {
            for (q = 0; q < st[i].m; q++)
                for (k = 1; k <= r1; k++)
                    fc__twiddle(q * k, st[i].ncur, &w[2 * r1 * q + 2 * (k - 1)],
                                &w[2 * r1 * q + 2 * (k - 1) + 1]);
        }
        st[i].tw = w;
        used += (2 * r1 * st[i].m + 7) & ~(size_t)7;
    }
    return used;
}

#define FC__PAD8(x) (((x) + 7) & ~(size_t)7)

int fc__fft_create(size_t n, fc_fft_plan **out)
{
    fc_fft_plan *p;
    int lg, lm, st;
    size_t M, ndbl, nbytes, off, k;
    size_t n_scr, n_post, n_small = 0, n_tw, n_tw1 = 0, n_tw2 = 0, n_loc = 0;
    unsigned char *base;
    double *d;

    if (out == NULL) return FC_ERR_NULL;
    st = fc__log2_exact(n, &lg);
    if (st != FC_OK || lg > 30) return FC_ERR_SIZE;
    M = n / 2;
    lm = lg - 1;

    p = (fc_fft_plan *)malloc(sizeof *p);
    if (p == NULL) return FC_ERR_NOMEM;
    memset(p, 0, sizeof *p);
    p->n = n;
    p->m = M;

    /* stage layout */
    if (lm >= FC__FFT_BIG_LOG) {
        int t1 = lm / 4;
        p->big = 1;
        p->bw = FC__FFT_BIG_W;
        p->n1 = (size_t)1 << (2 * t1);
        p->n2 = M / p->n1;
        p->nfront = fc__stage_list(2 * t1, p->bw, p->front);
        p->nback = fc__stage_list(lm - 2 * t1, p->bw, p->back);
    } else if (M >= FC__FFT_MIN_VEC) {
        p->nstages = fc__stage_list(lm, 1, p->stages);
    }

    /* memory, every piece padded to 8 doubles (64 bytes) */
    n_scr = FC__PAD8(2 * M);
    n_post = FC__PAD8(2 * (M / 2 + 1));
    if (M < FC__FFT_MIN_VEC) n_small = FC__PAD8(2 * M);
    n_tw = fc__stage_twcount(p->stages, p->nstages)
           + fc__stage_twcount(p->front, p->nfront)
           + fc__stage_twcount(p->back, p->nback);
    if (p->big) {
        size_t mx = p->n1 > p->n2 ? p->n1 : p->n2;
        n_tw1 = FC__PAD8(2 * (M / p->bw));
        n_tw2 = FC__PAD8(2 * p->bw * p->n1);
        n_loc = FC__PAD8(2 * p->bw * mx);
    }
    /* M <= 2^29: none of these sums can overflow a 64-bit size_t, but a
       32-bit one can */
    ndbl = 0;
    if (fc__add_size(ndbl, n_scr, &ndbl) || fc__add_size(ndbl, n_post, &ndbl)
        || fc__add_size(ndbl, n_small, &ndbl) || fc__add_size(ndbl, n_tw, &ndbl)
        || fc__add_size(ndbl, n_tw1, &ndbl) || fc__add_size(ndbl, n_tw2, &ndbl)
        || fc__add_size(ndbl, n_loc, &ndbl) || fc__add_size(ndbl, n_loc, &ndbl)
        || fc__mul_size(ndbl, sizeof(double), &nbytes)
        || fc__add_size(nbytes, 64, &nbytes)) {
        free(p);
        return FC_ERR_SIZE;
    }
    p->mem = malloc(nbytes);
    if (p->mem == NULL) {
        free(p);
        return FC_ERR_NOMEM;
    }
    base = (unsigned char *)p->mem;
    off = (size_t)((64 - ((uintptr_t)base & 63)) & 63);
    d = (double *)(void *)(base + off);
    p->nbytes = sizeof *p + nbytes;

    p->scratch = d;
    memset(p->scratch, 0, 2 * M * sizeof(double));
    d += n_scr;
    p->twpost = d;
    for (k = 0; k <= M / 2; k++) {
        double wr, wi;
        fc__twiddle(k, n, &wr, &wi);
        /* -i (wr + i wi) = wi - i wr */
        p->twpost[2 * k] = wi;
        p->twpost[2 * k + 1] = -wr;
    }
    d += n_post;
    if (n_small) {
        p->twsmall = d;
        for (k = 0; k < M; k++)
            fc__twiddle(k, M, &p->twsmall[2 * k], &p->twsmall[2 * k + 1]);
        d += n_small;
    }
    d += fc__stage_fill(p->stages, p->nstages, d);
    d += fc__stage_fill(p->front, p->nfront, d);
    d += fc__stage_fill(p->back, p->nback, d);
    if (p->big) {
        size_t c, b, k1, bw = p->bw, n1 = p->n1;
        p->tw1 = d;
        for (c = 0; c < p->n2 / bw; c++)
            for (k1 = 0; k1 < n1; k1++)
                fc__twiddle(c * bw * k1, M, &d[2 * (c * n1 + k1)],
                            &d[2 * (c * n1 + k1) + 1]);
        d += n_tw1;
        p->tw2 = d;
        for (k1 = 0; k1 < n1; k1++)
            for (b = 0; b < bw; b++)
                fc__twiddle(b * k1, M, &d[2 * (k1 * bw + b)],
                            &d[2 * (k1 * bw + b) + 1]);
        d += n_tw2;
        p->loc1 = d;
        d += n_loc;
        p->loc2 = d;
        d += n_loc;
    }
    p->fwd = fc__gen_rfft_forward;
    p->inv = fc__gen_rfft_inverse;
    p->sdot = fc__gen_spec_dot;
    p->sdotf = fc__gen_spec_dot_frames;
    p->sdotl = fc__gen_spec_dot_frames_lim;
    p->smul = fc__gen_spec_mul;
#if FC__FFT_X86
    if (fc__have_avx2_fma()) {
        p->fwd = fc__avx2_rfft_forward;
        p->inv = fc__avx2_rfft_inverse;
        p->sdot = fc__avx2_spec_dot;
        p->sdotf = fc__avx2_spec_dot_frames;
        p->sdotl = fc__avx2_spec_dot_frames_lim;
        p->smul = fc__avx2_spec_mul;
    }
#endif
    *out = p;
    return FC_OK;
}
#undef FC__PAD8

void fc__fft_free(fc_fft_plan *p)
{
    if (p == NULL) return;
    free(p->mem);
    free(p);
}

size_t fc__fft_size(const fc_fft_plan *p) { return p->n; }
size_t fc__fft_nbytes(const fc_fft_plan *p) { return p->nbytes; }

void fc__fft_forward(fc_fft_plan *p, const double *in, double *out)
{
    p->fwd(p, in, out);
}

void fc__fft_inverse(fc_fft_plan *p, const double *in, double *out)
{
    p->inv(p, in, out, 1.0);
}

void fc__spec_dot(const fc_fft_plan *p, const double *const *a,
                  const double *const *b, size_t cnt, double *out)
{
    p->sdot(p->n / 2 + 1, a, b, cnt, out);
}
void fc__spec_dot_frames(const fc_fft_plan *p, const double *const *x,
                         const double *const *b, size_t cnt, size_t ng,
                         double *const *out)
{
    p->sdotf(p->n / 2 + 1, x, b, cnt, ng, out);
}
void fc__spec_dot_frames_lim(const fc_fft_plan *p, const double *const *x,
                             const double *const *b, size_t cnt,
                             const size_t *lim, size_t ng, double *const *out)
{
    p->sdotl(p->n / 2 + 1, x, b, cnt, lim, ng, out);
}
void fc__spec_mul(const fc_fft_plan *p, const double *a, const double *b,
                  double *out)
{
    p->smul(p->n / 2 + 1, a, b, out);
}

/* ---------------------------------------------------------------------- */
/* Public wrappers.                                                        */

/* 1 if [a, a+na) and [b, b+nb) (in doubles) overlap. */
static int fc__overlap(const double *a, size_t na, const double *b, size_t nb)
{
    uintptr_t a0 = (uintptr_t)a, b0 = (uintptr_t)b;
    uintptr_t a1 = a0 + na * sizeof(double), b1 = b0 + nb * sizeof(double);
    return a0 < b1 && b0 < a1;
}

int fc_rfft_create(size_t n, fc_fft_plan **out)
{
    if (out == NULL) return FC_ERR_NULL;
    return fc__fft_create(n, out);
}

void fc_rfft_free(fc_fft_plan *p) { fc__fft_free(p); }

int fc_rfft_forward(fc_fft_plan *p, const double *in, double *out)
{
    if (p == NULL || in == NULL || out == NULL) return FC_ERR_NULL;
    if (fc__overlap(in, p->n, out, p->n + 2)) return FC_ERR_ARG;
    p->fwd(p, in, out);
    return FC_OK;
}

int fc_rfft_inverse(fc_fft_plan *p, const double *in, double *out)
{
    if (p == NULL || in == NULL || out == NULL) return FC_ERR_NULL;
    if (fc__overlap(in, p->n + 2, out, p->n)) return FC_ERR_ARG;
    p->inv(p, in, out, 1.0 / (double)p->n);
    return FC_OK;
}

/* The leaf_dots kernel of the instance this CPU runs (probed once per
   call of this function: the caller keeps the pointer). */
fc__leaf_dots_fn fc__leaf_dots_kernel(void)
{
#if FC__FFT_X86
    if (fc__have_avx2_fma()) return fc__avx2_leaf_dots;
#endif
    return fc__gen_leaf_dots;
}
