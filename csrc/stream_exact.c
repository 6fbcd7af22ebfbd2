/*
 * stream_exact.c -- the exact stream engine (engine 3): lagged sums of a
 * rule's kernel or of a user kernel, every output as exact as the batch
 * engines. The facade (stream.c) checks every argument and dispatches
 * here through fc__exact_ops (internal.h).
 *
 * Algorithm: the online form of the dyadic split of the lower-triangular
 * Toeplitz matrix (Hairer, Lubich, Schlichte, SIAM J. Sci. Stat. Comput. 6
 * (1985)), with the kernel known in advance; the kernel is cut into P
 * segments of each size L, 2L, 4L, ..., the non-uniform partition used for
 * zero-latency convolution (Gardner, J. Audio Eng. Soc. 43 (1995)).
 *
 *   y_n = history_n + c_0 u_n,   history_n = sum_{m>=1} c_m u_{n-m}
 *
 * Every lag m >= 1 is handled by exactly one of:
 *   - the leaf band, 1 <= m < L: summed directly when u_{n-1} is known (a
 *     fixed-length dot product, fixed summation order);
 *   - level j: block size s = 64 * 2^j, lags [b_j, b_j + P s), b_0 = L,
 *     b_{j+1} = b_j + P s_j, cut into P kernel segments
 *     [b_j + p s, b_j + (p+1) s). Input blocks [f s, f s + s) are convolved
 *     with the segments by FFTs of size 2s with a frequency-domain delay line
 *     (the uniformly partitioned convolution of each level of Gardner's
 *     non-uniform partition): frame f = sum_p X_{f-p} K_p (X_b the spectrum
 *     of input block b, K_p of kernel segment p, one kernel spectrum per
 *     segment for the whole stream) is one inverse FFT whose 2s-1 values are
 *     added to the accumulator of outputs f s + b_j ...
 * The geometry (L, P) is chosen per stream from its kernel (ex_geometry):
 * L = 64, P = 8 where that keeps every output's FFT rounding at the scale
 * of its own terms, otherwise L = 64 p0, P = max(8, p0) with the batch
 * engine's first segment p0 (fc__segment_start), so that b_j >= p0 s_j.
 * Each (input k, lag m) pair lies in exactly one block b = floor(k/s) and one
 * segment p of exactly one band, hence in exactly one frame f = b + p: every
 * lag is summed exactly once for every output.
 * Timing: frame f is computed when the count reaches f s + D_j, D_j =
 * floor(b_j/s) s >= s: blocks f-p <= f are complete then (f s + s <= f s +
 * D_j), and its first output f s + b_j >= f s + D_j is still in the future
 * (zero latency: history_n is complete before x_n arrives). Computing frames
 * this late keeps the live accumulator short (< 3 s beyond the count).
 *
 * Cost: per level and per s samples one forward and one inverse FFT of size
 * 2s and P spectral multiply-adds: O(log s) per sample; about log2(n/(P L))
 * levels, so amortised O(log^2 n) per sample, plus L multiply-adds for the
 * leaf band. The push that completes a frame at every level costs
 * O((n/P) log n); the largest FFT is of size about 2n/P.
 *
 * Block pushes (the samples of the whole block are known before its first
 * output): the frames of a level due within the block are computed up to
 * FC_S_GROUP at a time (level_frames), so that each kernel-segment spectrum
 * is read from memory once per group rather than once per frame, and the
 * leaf-band terms four outputs at a time (fc__leaf_dots). Every output is
 * the same sum of the same rounded terms in the same order as in single
 * pushes: only the order of independent work changes.
 *
 * Memory per channel: the history of u (n doubles), the ring of block
 * spectra (at most P slots of 2s+4 doubles per level, about 4n doubles in
 * all; once a level's ring is complete, min(FC_S_GROUP, P) - 1 slots more
 * for frames computed together) and a short accumulator; shared between
 * channels: the kernel spectra (about 4n doubles) and the FFT plans (one
 * per level). Measured (bench/stream_memory.py, one channel): about 75
 * bytes per sample.
 *
 * Everything that a push needs (buffers, new levels, their spectra) is
 * allocated by ex_prepare() before anything is changed; a failure leaves the
 * stream as it was. The result of a push depends only on the samples pushed
 * (not on how they were split into blocks or on capacities), so preview,
 * save/load and reset reproduce outputs bit for bit.
 */
#include <stdlib.h>
#include <string.h>
#include <math.h>
#include <limits.h>
#include "internal.h"
#include "serial.h"
#include "fft.h"

#define FC_S_BLOCK0 64          /* block size of level 0 */
#define FC_S_LEAF 64            /* the default leaf band: lags 0 .. 63 */
#define FC_S_SEGS 8             /* the default segments of size s per level */
#define FC_S_LEAF_MAX 1024      /* limits of the per-stream geometry */
#define FC_S_SEGS_MAX 16
#define FC_S_MAXLEV 24          /* levels: s = 64 * 2^j <= 2^29 (FFT <= 2^30) */
#define FC_S_MAXBLOCK ((size_t)1 << 29)
#define FC_S_CORR 256           /* correction cache chunk (per column) */
#define FC_S_GROUP 4            /* frames of a level computed together at most */
/* lags covered by the leaf band L and all levels: b_MAXLEV = L + 64 P
   (2^MAXLEV - 1); the default geometry's (about 8.6e9) is the smallest of
   all, and bounds the length of a user kernel */
#define FC_S_LAG_LIMIT ((uint64_t)FC_S_LEAF + (uint64_t)FC_S_BLOCK0 * \
                        FC_S_SEGS * ((UINT64_C(1) << FC_S_MAXLEV) - 1))
/* The default geometry is kept while its predicted error ratio (see
   ex_geometry) is at most this. Measured (spikes, positive and alternating
   data, N = 4096, every rule): error / scale about 1.3e-16 per unit of
   ratio; the worst kept case, Grunwald at order 2.7 (ratio 56), 7e-15, a
   fourteenth of the 1e-13 bound */
#define FC_S_KEEP_RATIO 64.0

#define FC_S_KIND_RULE FC__KIND_RULE
#define FC_S_KIND_KERNEL FC__KIND_KERNEL
_Static_assert(FC_S_LAG_LIMIT == FC__KERNEL_LEN_MAX,
               "the facade's kernel length limit is this geometry's");
_Static_assert(FC__STREAM_CHANNELS_MAX ==
                   ((size_t)-1) / (8 * sizeof(double) * FC_S_LEAF_MAX),
               "the facade's channel limit keeps these buffers addressable");

typedef struct {
    size_t s;              /* block size */
    uint64_t base;         /* first lag of the level */
    uint64_t delay;        /* frame f is done when the count reaches f*s+delay */
    size_t nseg;           /* kernel segments (<= segs), = ring length */
    size_t made;           /* segments with spectrum and ring slot allocated */
    fc_fft_plan *plan;     /* FFT of size 2s */
    int kexp[FC_S_SEGS_MAX];  /* kspec[p] is 2^-kexp[p] times the true one */
    double *kspec[FC_S_SEGS_MAX]; /* 2s+2: spectrum of c[base+p*s, base+(p+1)*s)/(2s) */
    double *xspec[FC_S_SEGS_MAX]; /* ring slot: C spectra of block f, slot
                                     f % nseg, each 2s+2 doubles, its
                                     exponent and a zero flag */
    size_t gslots;         /* slots of gsc (0, or min(FC_S_GROUP, nseg) - 1
                              once the ring is complete) */
    double *gsc[FC_S_GROUP - 1]; /* slots of the size of a ring slot, for
                              frames computed together (see level_frames) */
    uint64_t gf;           /* pending group: the products of frames gf+1 ..  */
    size_t gn;             /* gf+gn-1 wait in gsc[0 ..] (gn = 0: none) */
} fc__level;

/* The state of one exact stream (the facade's engine pointer). */
typedef struct {
    unsigned kind;          /* FC_S_KIND_*, or FC__KIND_SHIFTED (a rule
                               stream in all but its kernel) */
    int rule;               /* -1 for a kernel */
    unsigned shift;         /* 1 for FC__KIND_SHIFTED: c_m is the rule's
                               lag kernel at m + 1; else 0 */
    double order, step;
    size_t ncorr;           /* correction columns (rule table), <=
                               FC__CORR_MAX */
    const fc__corr_col *cols;
    int zero_first;         /* y_0 = 0 exactly (rule table) */
    int diffs;              /* rule summing differences of x (rule table) */
    size_t C;               /* channels */
    double *kernel;         /* user kernel copy (kind kernel) */
    size_t klen;
    double c0;
    size_t leaf;            /* leaf band: lags 1 .. leaf-1 (also the u padding) */
    size_t segs;            /* kernel segments per level */
    uint64_t lag_limit;     /* b_MAXLEV of this geometry */
    double *leafk;          /* leaf: leafk[i] = c_{leaf-i} (i >= 1), leafk[0] = 0 */
    uint64_t n;             /* samples pushed per channel */
    size_t nlev;            /* levels created */
    fc__level *lev;         /* FC_S_MAXLEV levels */
    double *u;              /* C rows of leaf + ucap doubles */
    size_t ucap;
    double *acc;            /* C rows of acap doubles, index k at k - abase */
    size_t acap;
    uint64_t abase;
    uint64_t acc_hi;        /* acc entries >= acc_hi are zero */
    uint64_t prep_n;        /* capacity is ready for this many samples */
    uint64_t gend;          /* within a block push: u is stored up to this
                               count, frames due by then may be computed
                               together; 0 otherwise */
    double *xprev;          /* C: previous sample (L1) */
    double *xcol;           /* XR(s) rows of C: x_j of column k in row k
                               (0 before it arrives; one row of zeros
                               without columns) */
    double *tmp;            /* (3 + XR(s)) C: a step's outputs and u; saved
                               xprev, xcol */
    double klog2;           /* log2 of a bound on every |c_m| and |corr_n| */
    double umax;            /* largest |u| stored since creation or reset */
    double *lbuf;           /* C rows of FC_S_BLOCK0: leaf terms of the
                               next outputs of a block push */
    fc__leaf_dots_fn leafv; /* their kernel */
    double *work;           /* 4*smax + 2 doubles */
    size_t wcap;            /* smax the work buffer serves */
    double *corr;           /* ncorr rows of FC_S_CORR: column k's corr_n
                               cache, n in corr_chunk[k]*FC_S_CORR + i */
    uint64_t corr_chunk[FC__CORR_MAX];
    int corr_valid[FC__CORR_MAX];
    /* threads of the push under way (1 outside fc_stream_push_block_threads)
       and the scratch of the extra ones: not part of the state */
    size_t par;
    size_t nhelp;
    struct ex_helper *help;
} ex_engine;

/* The scratch of an extra thread: its own FFT plans (a plan holds scratch
   space, fft.h) for the levels it serves and a work buffer like s->work. */
typedef struct ex_helper {
    fc_fft_plan *plan[FC_S_MAXLEV];
    double *work;
    size_t wcap;
} ex_helper;

/* Frames of block size s >= FC_S_PAR_BLOCK with s * channels >=
   FC_S_PAR_WORK are shared by the threads of a push (smaller ones are
   not worth a thread start). */
#define FC_S_PAR_BLOCK 512
#define FC_S_PAR_WORK 16384


/* Rows of xcol: one per column, at least one (the x_0 field of the saved
   payload). */
#define XR(s) ((s)->ncorr > 1 ? (s)->ncorr : 1)

/* ------------------------------------------------------------ helpers */

static size_t lev_size(size_t j) { return (size_t)FC_S_BLOCK0 << j; }

/* Kernel values c[start .. start+count), zero beyond klen for kernels
   (a shifted rule kernel: the rule's from start + 1). */
static int kernel_values(const ex_engine *s, uint64_t start, size_t count,
                         double *out)
{
    if (s->kind == FC_S_KIND_KERNEL) {
        for (size_t i = 0; i < count; i++) {
            uint64_t m = start + i;
            out[i] = m < s->klen ? s->kernel[m] : 0.0;
        }
        return FC_OK;
    }
    return fc__lag_kernel(s->rule, s->order, s->step, start + s->shift,
                          count, out);
}

static double leaf_dot(const double *k, const double *u, size_t len)
{
    /* fixed order: 8 partial sums, combined pairwise (len % 8 == 0) */
    double a0 = 0, a1 = 0, a2 = 0, a3 = 0, a4 = 0, a5 = 0, a6 = 0, a7 = 0;
    for (size_t i = 0; i < len; i += 8) {
        a0 += k[i] * u[i];
        a1 += k[i + 1] * u[i + 1];
        a2 += k[i + 2] * u[i + 2];
        a3 += k[i + 3] * u[i + 3];
        a4 += k[i + 4] * u[i + 4];
        a5 += k[i + 5] * u[i + 5];
        a6 += k[i + 6] * u[i + 6];
        a7 += k[i + 7] * u[i + 7];
    }
    return ((a0 + a4) + (a2 + a6)) + ((a1 + a5) + (a3 + a7));
}

/* corr_n of column k (cached per aligned chunk, so that the value depends
   on n alone). */
static int corr_get(ex_engine *s, size_t k, uint64_t n, double *v)
{
    uint64_t chunk = n / FC_S_CORR;
    double *row = s->corr + k * FC_S_CORR;
    if (!s->corr_valid[k] || s->corr_chunk[k] != chunk) {
        int st = fc__correction(s->rule, k, s->order, s->step,
                                chunk * FC_S_CORR, FC_S_CORR, row);
        if (st != FC_OK) {
            s->corr_valid[k] = 0;
            return st;
        }
        s->corr_chunk[k] = chunk;
        s->corr_valid[k] = 1;
    }
    *v = row[n - chunk * FC_S_CORR];
    return FC_OK;
}

/* The corrections of output n: cv[k] = corr_n of column k when the column
   has arrived (n >= j) and the output is not the exact zero y_0, else 0. */
static int corr_values(ex_engine *s, uint64_t n, double *cv)
{
    for (size_t k = 0; k < s->ncorr; k++) {
        cv[k] = 0.0;
        if (n >= s->cols[k].column && !(n == 0 && s->zero_first)) {
            int st = corr_get(s, k, n, &cv[k]);
            if (st != FC_OK) return st;
        }
    }
    return FC_OK;
}

static double *urow(const ex_engine *s, size_t c)
{
    return s->u + c * (s->leaf + s->ucap) + s->leaf;
}
static double *arow(const ex_engine *s, size_t c)
{
    return s->acc + c * s->acap;
}

/* History term of output s->n for channel c (cv: corr_values): the
   columns already stored (j < n), in the table's order. lv: NULL, or the
   leaf term of channel c at lv[c * FC_S_BLOCK0] (computed ahead by the
   same operations, s->leafv). */
static inline double ex_hist(const ex_engine *s, size_t c, const double *cv,
                             const double *lv)
{
    uint64_t n = s->n;
    const double *uc = urow(s, c);
    double h = arow(s, c)[n - s->abase] +
               (lv ? lv[c * FC_S_BLOCK0]
                   : leaf_dot(s->leafk, uc + n - s->leaf, s->leaf));
    if (n == 0 && s->zero_first) return 0.0;
    for (size_t k = 0; k < s->ncorr; k++)
        if (s->cols[k].column < n) h += cv[k] * s->xcol[k * s->C + c];
    return h;
}

/* The u value pushing x would store for channel c. */
static inline double ex_u(const ex_engine *s, size_t c, double x)
{
    if (s->diffs)
        return s->n == 0 ? 0.0 : x - s->xprev[c];
    return x;
}

/* Output of pushing x on channel c; u gets the stored value. */
static inline double ex_y(const ex_engine *s, size_t c, double x,
                          const double *cv, const double *lv, double *u)
{
    double h = ex_hist(s, c, cv, lv);
    *u = ex_u(s, c, x);
    if (s->n == 0 && s->zero_first)
        return 0.0; /* y_0 = (c_0 + corr_0) x_0 = 0 */
    double y = h + s->c0 * *u;
    /* a column arriving now (j = n) */
    for (size_t k = 0; k < s->ncorr; k++)
        if (s->cols[k].column == s->n) y += cv[k] * x;
    return y;
}

/* ------------------------------------------------------------ levels */

/* b_j = leaf + P (s_0 + ... + s_{j-1}): b_j >= p0 s_j when leaf = p0 s_0
   and P >= p0. */
static uint64_t geom_base(size_t leaf, size_t segs, size_t j)
{
    return (uint64_t)leaf +
           (uint64_t)segs * FC_S_BLOCK0 * ((UINT64_C(1) << j) - 1);
}

static void lev_geom(const ex_engine *s, size_t j, size_t *sz, uint64_t *base,
                     uint64_t *delay)
{
    *sz = lev_size(j);
    *base = geom_base(s->leaf, s->segs, j);
    *delay = (*base / *sz) * *sz;
}

/* Kernel segments level j ever needs (0: the level is not needed). */
static size_t lev_nseg(const ex_engine *s, size_t j)
{
    size_t sz;
    uint64_t base, delay;
    if (j >= FC_S_MAXLEV) return 0;
    if (s->kind != FC_S_KIND_KERNEL) return s->segs;
    lev_geom(s, j, &sz, &base, &delay);
    if (base >= s->klen) return 0;
    uint64_t k = ((uint64_t)s->klen - base + sz - 1) / sz;
    return k < s->segs ? (size_t)k : s->segs;
}

/* Slots for frames computed together: once the ring of nseg slots is
   complete, min(FC_S_GROUP, nseg) - 1 more of the same size. */
static size_t lev_gslots(size_t nseg)
{
    return nseg < 2 ? 0 : (nseg < FC_S_GROUP ? nseg : FC_S_GROUP) - 1;
}

static void level_free(fc__level *L)
{
    fc__fft_free(L->plan);
    L->plan = NULL;
    for (size_t q = 0; q < L->gslots; q++) {
        free(L->gsc[q]);
        L->gsc[q] = NULL;
    }
    L->gslots = 0;
    L->gn = 0;
    for (size_t p = 0; p < L->made; p++) {
        free(L->kspec[p]);
        free(L->xspec[p]);
        L->kspec[p] = L->xspec[p] = NULL;
    }
    L->made = 0;
}

/*
 * Scaling by powers of two (exact). A block of samples or a kernel segment
 * whose largest magnitude lies outside [2^-400, 2^400]
 * is scaled to a largest magnitude in [1/2, 1) before its FFT, its exponent
 * kept beside its spectrum; a frame with any scaled operand sums its
 * products at the scale of its largest one and scales the inverse FFT back.
 * Elsewhere (all data of ordinary size) nothing is scaled, so the results
 * are those of the unscaled arithmetic bit for bit; with it, no spectrum or
 * product overflows for finite samples, and an output overflows only when
 * the sum of the magnitudes of its terms nearly does.
 */
#define FC_S_XSLOT(n2) ((n2) + 4) /* spectrum, exponent, zero flag */

static int scale_exponent(const double *v, size_t n, int *zero)
{
    double mx = fc__max_abs(v, n);
    int e = 0;
    *zero = mx == 0.0;
    if (mx != 0.0 && !(mx >= 0x1p-400 && mx <= 0x1p400)) (void)frexp(mx, &e);
    return e;
}

static int log2_size(size_t n)
{
    int k = 0;
    while (((size_t)1 << k) < n) k++;
    return k;
}

/* Spectrum of kernel segment p of level L into L->kspec[p]; tmp: 2s. */
static int segment_spectrum(const ex_engine *s, fc__level *L, size_t p,
                            double *tmp)
{
    size_t sz = L->s, n2 = 2 * sz;
    int zero;
    int st = kernel_values(s, L->base + (uint64_t)p * sz, sz, tmp);
    if (st != FC_OK) return st;
    int e = scale_exponent(tmp, sz, &zero);
    if (e == 0) {
        double scale = 1.0 / (double)n2; /* a power of two: exact */
        for (size_t i = 0; i < sz; i++) tmp[i] *= scale;
        L->kexp[p] = 0;
    } else {
        for (size_t i = 0; i < sz; i++) tmp[i] = ldexp(tmp[i], -e);
        L->kexp[p] = e - log2_size(n2);
    }
    memset(tmp + sz, 0, sz * sizeof(double));
    fc__fft_forward(L->plan, tmp, L->kspec[p]);
    return FC_OK;
}

/* Spectrum of input block f of channel c into X, with its exponent at
   [n2+2] and a zero-block flag at [n2+3]; plan and t (2s doubles) of the
   thread doing it. */
static void block_spectrum_to(const ex_engine *s, fc__level *L, uint64_t f,
                              size_t c, fc_fft_plan *plan, double *t, double *X)
{
    size_t sz = L->s, n2 = 2 * sz;
    int zero;
    memcpy(t, urow(s, c) + f * sz, sz * sizeof(double));
    int e = scale_exponent(t, sz, &zero);
    if (e != 0)
        for (size_t i = 0; i < sz; i++) t[i] = ldexp(t[i], -e);
    memset(t + sz, 0, sz * sizeof(double));
    fc__fft_forward(plan, t, X);
    X[n2 + 2] = (double)e;
    X[n2 + 3] = zero ? 1.0 : 0.0;
}

/* The same into its ring slot. */
static void block_spectrum(const ex_engine *s, fc__level *L, uint64_t f,
                           size_t c, fc_fft_plan *plan, double *t)
{
    block_spectrum_to(s, L, f, c, plan, t,
                      L->xspec[f % L->nseg] + c * FC_S_XSLOT(2 * L->s));
}

/* Spectra of input block f of every channel into the slot X. */
static void block_spectra_to(ex_engine *s, fc__level *L, uint64_t f,
                             double *X)
{
    for (size_t c = 0; c < s->C; c++)
        block_spectrum_to(s, L, f, c, L->plan, s->work, X + c * FC_S_XSLOT(2 * L->s));
}

/* The same into block f's ring slot. */
static void block_spectra(ex_engine *s, fc__level *L, uint64_t f)
{
    block_spectra_to(s, L, f, L->xspec[f % L->nseg]);
}

/* Y = sum_p 2^(d_p - E) X_p K_p over the nonzero blocks, E = max d_p: the
   frame at the scale of its largest product (d_p = block exponent + kernel
   exponent); returns E. */
static int scaled_dot(size_t n2, const double *const *xp, const fc__level *L,
                      size_t np, double *Y)
{
    int E = INT_MIN;
    for (size_t p = 0; p < np; p++) {
        if (xp[p][n2 + 3] != 0.0) continue;
        int d = (int)xp[p][n2 + 2] + L->kexp[p];
        if (d > E) E = d;
    }
    memset(Y, 0, (n2 + 2) * sizeof(double));
    if (E == INT_MIN) return 0;
    for (size_t p = 0; p < np; p++) {
        const double *X = xp[p], *K = L->kspec[p];
        if (X[n2 + 3] != 0.0) continue;
        int sh = (int)X[n2 + 2] + L->kexp[p] - E;
        if (sh < -1074) continue; /* below 2^-1074 of the largest product */
        double g = ldexp(1.0, sh);
        for (size_t k = 0; k < n2 + 2; k += 2) {
            double xr = X[k] * g, xi = X[k + 1] * g;
            Y[k] += xr * K[k] - xi * K[k + 1];
            Y[k + 1] += xr * K[k + 1] + xi * K[k];
        }
    }
    return E;
}

/* 1 when the frame of the np blocks xp (xp[p] the block of kernel segment
   p) has a scaled operand (see scaled_dot). */
static int frame_scaled(const fc__level *L, const double *const *xp,
                        size_t np, size_t n2)
{
    for (size_t p = 0; p < np; p++)
        if ((xp[p][n2 + 2] != 0.0 || L->kexp[p] != 0) && xp[p][n2 + 3] == 0.0)
            return 1;
    return 0;
}

/* The inverse FFT of the products Y of frame f for channel c (scaled: by
   2^E), added to outputs f*s + base ... f*s + base + 2s - 2 (only those
   >= lo). */
static void frame_add(ex_engine *s, fc__level *L, uint64_t f, size_t c,
                      const double *Y, int scaled, int E, uint64_t lo)
{
    size_t n2 = 2 * L->s;
    double *t = s->work;
    uint64_t o = f * L->s + L->base;
    size_t i0 = lo > o ? (size_t)(lo - o) : 0;
    double *a = arow(s, c) + (o - s->abase);
    fc__fft_inverse(L->plan, Y, t);
    if (!scaled)
        for (size_t i = i0; i + 1 < n2; i++) a[i] += t[i];
    else
        for (size_t i = i0; i + 1 < n2; i++) a[i] += ldexp(t[i], E);
}

/* Frame f of level j: new block spectrum, sum_p X_{f-p} K_p, one inverse
   FFT, added to outputs f*s + base ... f*s + base + 2s - 2 (only those >= lo:
   lo > 0 when a refused block is undone, see ex_rollback). */
/* Frame f of level L for channel c (its block spectrum already made):
   sum_p X_{f-p} K_p, one inverse FFT, added to the channel's outputs from
   o + i0 on; plan and t (4s+2 doubles) of the thread doing it. */
static void frame_channel(const ex_engine *s, const fc__level *L, uint64_t f,
                          size_t c, size_t i0, fc_fft_plan *plan, double *t)
{
    size_t sz = L->s, n2 = 2 * sz, R = L->nseg;
    size_t np = f + 1 < R ? (size_t)f + 1 : R;
    double *Y = t + n2;
    uint64_t o = f * sz + L->base;
    const double *xp[FC_S_SEGS_MAX];
    size_t off = c * FC_S_XSLOT(n2);
    int scaled = 0;
    for (size_t p = 0; p < np; p++) {
        xp[p] = L->xspec[(f - p) % R] + off;
        if ((xp[p][n2 + 2] != 0.0 || L->kexp[p] != 0) && xp[p][n2 + 3] == 0.0)
            scaled = 1;
    }
    double *a = arow(s, c) + (o - s->abase);
    if (!scaled) {
        fc__spec_dot(plan, xp, (const double *const *)L->kspec, np, Y);
        fc__fft_inverse(plan, Y, t);
        for (size_t i = i0; i + 1 < n2; i++) a[i] += t[i];
    } else {
        int E = scaled_dot(n2, xp, L, np, Y);
        fc__fft_inverse(plan, Y, t);
        for (size_t i = i0; i + 1 < n2; i++) a[i] += ldexp(t[i], E);
    }
}

/* A frame with the channels shared by the threads of the push: task k
   makes the block spectra and the frames of its range of channels (a
   channel's frame reads only its own spectra), each thread with its own
   plan and work buffer: the same operations on the same values as the
   serial loop, so the same bits. */
typedef struct {
    ex_engine *s;
    size_t j, i0, q;
    uint64_t f;
} ex_frame_job;

static void frame_task(void *arg, size_t k, size_t w)
{
    const ex_frame_job *J = arg;
    ex_engine *s = J->s;
    fc__level *L = &s->lev[J->j];
    fc_fft_plan *plan = w == 0 ? L->plan : s->help[w - 1].plan[J->j];
    double *t = w == 0 ? s->work : s->help[w - 1].work;
    size_t c0 = k * s->C / J->q, c1 = (k + 1) * s->C / J->q;
    for (size_t c = c0; c < c1; c++) {
        block_spectrum(s, L, J->f, c, plan, t);
        frame_channel(s, L, J->f, c, J->i0, plan, t);
    }
}

/* Whether a frame of block size sz is shared by the threads of the push. */
static int frame_shared(const ex_engine *s, size_t sz)
{
    return s->par > 1 && sz >= FC_S_PAR_BLOCK && sz * s->C >= FC_S_PAR_WORK;
}

static void level_frame(ex_engine *s, size_t j, uint64_t f, uint64_t lo)
{
    fc__level *L = &s->lev[j];
    size_t sz = L->s, n2 = 2 * sz, R = L->nseg;
    uint64_t o = f * sz + L->base;
    if (frame_shared(s, sz)) {
        /* one task per channel, handed out in turn: a thread held up (a
           busy machine) leaves the remaining channels to the others */
        size_t i0 = lo > o ? (size_t)(lo - o) : 0;
        ex_frame_job J = {s, j, i0, s->C, f};
        fc__run_tasks(s->C, s->par, frame_task, &J);
    } else {
        size_t np = f + 1 < R ? (size_t)f + 1 : R;
        double *Y = s->work + n2;
        block_spectra(s, L, f);
        const double *xp[FC_S_SEGS_MAX];
        for (size_t c = 0; c < s->C; c++) {
            size_t off = c * FC_S_XSLOT(n2);
            for (size_t p = 0; p < np; p++) xp[p] = L->xspec[(f - p) % R] + off;
            if (!frame_scaled(L, xp, np, n2)) {
                fc__spec_dot(L->plan, xp, (const double *const *)L->kspec, np, Y);
                frame_add(s, L, f, c, Y, 0, 0, lo);
            } else {
                int E = scaled_dot(n2, xp, L, np, Y);
                frame_add(s, L, f, c, Y, 1, E, lo);
            }
        }
    }
    if (o + n2 - 1 > s->acc_hi) s->acc_hi = o + n2 - 1;
}

/*
 * Frames f .. f+gn-1 of level j together (a block push whose samples are
 * all stored: their blocks are known; 2 <= gn <= gslots + 1; the ring of
 * R = nseg slots complete). The spectra of blocks
 * f+1 .. f+gn-1 go to gsc[0 ..]; the products of every frame are summed
 * in one pass over the bins (fc__spec_dot_frames: each kernel spectrum read
 * once for all gn frames; frame f+g has np = min(f+g+1, R) segments),
 * frame f's into the work buffer, frame f+g's (g >= 1) in place of block
 * f+g-R, whose last reader is frame f+g-1 (no block yet when f+g < R); then
 * the slots of blocks f+g-R and f+g are exchanged, so that the ring holds
 * the blocks it would hold after frame f+gn-1 and gsc[g-1] the products of
 * frame f+g (its exponent at [n2+2], a scaled flag at [n2+3]). Frame f is
 * added now; frames f+g when they are due (pending_frame), each the same
 * sums, inverse FFT and additions at the same count as level_frame's: the
 * results are bit for bit those of frames computed one by one.
 */
static void level_frames(ex_engine *s, size_t j, uint64_t f, size_t gn)
{
    fc__level *L = &s->lev[j];
    size_t sz = L->s, n2 = 2 * sz, R = L->nseg, lim[FC_S_GROUP];
    for (size_t g = 0; g < gn; g++)
        lim[g] = f + g + 1 < R ? (size_t)(f + g + 1) : R;
    double *Y = s->work + n2;
    uint64_t o = f * sz + L->base;
    block_spectra(s, L, f);
    for (size_t g = 1; g < gn; g++) block_spectra_to(s, L, f + g, L->gsc[g - 1]);
    /* xs[i]: block f-R+1+i, i < R+gn-1 */
    const double *xs[FC_S_SEGS_MAX + FC_S_GROUP - 1];
    double *dst[FC_S_GROUP];
    const double *xp[FC_S_SEGS_MAX];
    for (size_t c = 0; c < s->C; c++) {
        size_t off = c * FC_S_XSLOT(n2);
        for (size_t i = 0; i < R + gn - 1; i++) {
            if (f + 1 + i < R) { /* no block (read by no frame) */
                xs[i] = NULL;
                continue;
            }
            uint64_t b = f + 1 + i - R;
            xs[i] = (b <= f ? L->xspec[b % R] : L->gsc[b - f - 1]) + off;
        }
        dst[0] = Y;
        for (size_t g = 1; g < gn; g++) dst[g] = L->xspec[(f + g) % R] + off;
        int any = 0;
        for (size_t g = 0; g < gn && !any; g++) {
            for (size_t p = 0; p < lim[g]; p++) xp[p] = xs[R - 1 + g - p];
            any = frame_scaled(L, xp, lim[g], n2);
        }
        if (!any) {
            if (lim[0] == R)
                fc__spec_dot_frames(L->plan, xs,
                                    (const double *const *)L->kspec, R, gn, dst);
            else
                fc__spec_dot_frames_lim(L->plan, xs,
                                        (const double *const *)L->kspec, R,
                                        lim, gn, dst);
            for (size_t g = 1; g < gn; g++) dst[g][n2 + 2] = dst[g][n2 + 3] = 0.0;
            frame_add(s, L, f, c, Y, 0, 0, 0);
            continue;
        }
        /* a scaled operand: the frames one by one, in their order */
        int E0 = 0, sc0 = 0;
        for (size_t g = 0; g < gn; g++) {
            size_t np = lim[g];
            for (size_t p = 0; p < np; p++) xp[p] = xs[R - 1 + g - p];
            int sc = frame_scaled(L, xp, np, n2), E = 0;
            if (!sc)
                fc__spec_dot(L->plan, xp, (const double *const *)L->kspec, np,
                             dst[g]);
            else
                E = scaled_dot(n2, xp, L, np, dst[g]);
            if (g == 0) {
                E0 = E;
                sc0 = sc;
            } else {
                dst[g][n2 + 2] = (double)E;
                dst[g][n2 + 3] = sc ? 1.0 : 0.0;
            }
        }
        frame_add(s, L, f, c, Y, sc0, E0, 0);
    }
    for (size_t g = 1; g < gn; g++) {
        double *q = L->xspec[(f + g) % R];
        L->xspec[(f + g) % R] = L->gsc[g - 1];
        L->gsc[g - 1] = q;
    }
    L->gf = f;
    L->gn = gn;
    if (o + n2 - 1 > s->acc_hi) s->acc_hi = o + n2 - 1;
}

/* Frame f of level j from the products level_frames left for it. */
static void pending_frame(ex_engine *s, size_t j, uint64_t f)
{
    fc__level *L = &s->lev[j];
    size_t n2 = 2 * L->s, g = (size_t)(f - L->gf);
    const double *Yb = L->gsc[g - 1];
    uint64_t o = f * L->s + L->base;
    for (size_t c = 0; c < s->C; c++) {
        const double *Y = Yb + c * FC_S_XSLOT(n2);
        frame_add(s, L, f, c, Y, Y[n2 + 3] != 0.0, (int)Y[n2 + 2], 0);
    }
    if (g + 1 == L->gn) L->gn = 0;
    if (o + n2 - 1 > s->acc_hi) s->acc_hi = o + n2 - 1;
}

/* Frame f of level j, due now: from a pending group, with the frames due
   after it within the samples stored (s->gend), or alone. */
static void frame_due(ex_engine *s, size_t j, uint64_t f)
{
    fc__level *L = &s->lev[j];
    if (L->gn && f > L->gf && f - L->gf < L->gn) {
        pending_frame(s, j, f);
        return;
    }
    /* a frame the threads share (level_frame) is not grouped: grouping
       saves most on the small frames, which stay on one thread */
    if (s->gend && L->gslots && L->made == L->nseg && s->gend >= L->delay &&
        !frame_shared(s, L->s)) {
        uint64_t last = (s->gend - L->delay) / L->s; /* the last frame due */
        uint64_t gn = last >= f ? last - f + 1 : 0;
        if (gn > L->gslots + 1) gn = L->gslots + 1;
        if (gn >= 2) {
            level_frames(s, j, f, (size_t)gn);
            return;
        }
    }
    level_frame(s, j, f, 0);
}

/* Workers (1 .. want) whose scratch serves every level a threaded frame
   may use: helpers are made or grown in turn, the first that cannot be
   (no memory) ends the count. Never an error: fewer threads, same bits. */
static size_t ex_helpers_ready(ex_engine *s, size_t want)
{
    size_t w = 1;
    if (!fc__have_threads()) return 1;
    if (want > 1 && s->nhelp < want - 1) {
        ex_helper *h = realloc(s->help, (want - 1) * sizeof *h);
        if (h == NULL) want = s->nhelp + 1;
        else {
            s->help = h;
            memset(h + s->nhelp, 0, (want - 1 - s->nhelp) * sizeof *h);
        }
    }
    for (; w < want; w++) {
        ex_helper *h = &s->help[w - 1];
        int ok = 1;
        if (w > s->nhelp) s->nhelp = w;
        if (h->wcap < s->wcap) {
            double *nw = malloc((4 * s->wcap + 2) * sizeof(double));
            if (nw == NULL) break;
            free(h->work);
            h->work = nw;
            h->wcap = s->wcap;
        }
        for (size_t j = 0; j < s->nlev && ok; j++) {
            size_t sz = s->lev[j].s;
            if (sz < FC_S_PAR_BLOCK || sz * s->C < FC_S_PAR_WORK || h->plan[j]) continue;
            if (fc__fft_create(2 * sz, &h->plan[j]) != FC_OK) ok = 0;
        }
        if (!ok) break;
    }
    if (s->nhelp == 0 && s->help != NULL) {
        free(s->help);
        s->help = NULL;
    }
    return w;
}

/* ------------------------------------------------------------ capacity */

/* What a stream with n_end samples needs. */
typedef struct {
    size_t nlev;                /* levels */
    size_t made[FC_S_MAXLEV];   /* segments per level */
    size_t stop;                /* largest level block size (0: none) */
    uint64_t ext;               /* accumulator reach beyond the count */
    uint64_t aend;              /* accumulator must hold indices < aend */
} ex_need;

static int ex_needs(const ex_engine *s, uint64_t n_end, ex_need *nd)
{
    size_t j = 0, sz, nseg;
    uint64_t base, delay;
    nd->stop = 0;
    nd->ext = 1;
    while ((nseg = lev_nseg(s, j)) > 0) {
        lev_geom(s, j, &sz, &base, &delay);
        if (delay > n_end) break;
        if (sz > FC_S_MAXBLOCK) return FC_ERR_SIZE;
        uint64_t frames = (n_end - delay) / sz + 1;
        nd->made[j] = frames < nseg ? (size_t)frames : nseg;
        nd->stop = sz;
        if (base - delay + 2 * (uint64_t)sz - 1 > nd->ext)
            nd->ext = base - delay + 2 * (uint64_t)sz - 1;
        j++;
    }
    /* lags >= lag_limit have no level: refuse counts that need them
       (kernel streams have klen <= FC_S_LAG_LIMIT <= lag_limit) */
    if (s->kind != FC_S_KIND_KERNEL && n_end >= s->lag_limit)
        return FC_ERR_SIZE;
    nd->nlev = j;
    nd->aend = n_end + nd->ext;
    return FC_OK;
}

/* The largest sample count the present capacity serves without any
   allocation, given the needs nd of some count it does serve. */
static uint64_t ex_ready(const ex_engine *s, const ex_need *nd)
{
    uint64_t r = s->ucap;
    size_t sz;
    uint64_t base, delay;
    if (lev_nseg(s, nd->nlev) > 0) {
        lev_geom(s, nd->nlev, &sz, &base, &delay);
        if (delay - 1 < r) r = delay - 1;
    }
    for (size_t j = 0; j < nd->nlev; j++) {
        if (nd->made[j] < s->lev[j].nseg) {
            lev_geom(s, j, &sz, &base, &delay);
            uint64_t ev = delay + (uint64_t)nd->made[j] * sz - 1;
            if (ev < r) r = ev;
        }
    }
    uint64_t a = s->abase + s->acap - nd->ext;
    if (a < r) r = a;
    return r;
}

/*
 * Make room for n_end samples. exact: allocate exactly what is needed
 * (reserve); otherwise grow geometrically. All new memory is obtained
 * (and new kernel spectra computed) before anything is changed.
 */
static int ex_prepare(ex_engine *s, uint64_t n_end, int exact)
{
    ex_need nd;
    int st;
    if (n_end <= s->prep_n) return FC_OK;
    if ((st = ex_needs(s, n_end, &nd)) != FC_OK) return st;
    if (n_end > (uint64_t)((size_t)-1)) return FC_ERR_SIZE;

    size_t C = s->C;
    int grow_u = n_end > s->ucap;
    int grow_a = nd.aend > s->abase + s->acap;
    int grow_w = nd.stop > s->wcap;
    int grow_l = nd.nlev > s->nlev;
    for (size_t j = 0; j < nd.nlev && j < s->nlev; j++)
        if (nd.made[j] > s->lev[j].made) grow_l = 1;
    if (!grow_u && !grow_a && !grow_w && !grow_l) {
        s->prep_n = ex_ready(s, &nd);
        return FC_OK;
    }

    size_t nucap = s->ucap, nacap = s->acap, nwcap = s->wcap, bytes;
    double *nu = NULL, *na = NULL, *nw = NULL;
    fc__level nl[FC_S_MAXLEV];
    size_t nlev_new = nd.nlev > s->nlev ? nd.nlev : s->nlev;
    uint64_t nbase = s->abase;

    if (grow_u) {
        nucap = (size_t)n_end;
        if (!exact && s->ucap <= (size_t)-1 / 2 && 2 * s->ucap > nucap)
            nucap = 2 * s->ucap;
        size_t row;
        if (fc__add_size(nucap, s->leaf, &row) ||
            fc__mul_size(row, C, &bytes) ||
            fc__mul_size(bytes, sizeof(double), &bytes))
            return FC_ERR_SIZE;
        nu = malloc(bytes);
        if (!nu) return FC_ERR_NOMEM;
    }
    if (grow_a) {
        nbase = s->n;
        uint64_t want = nd.aend - nbase;
        if (!exact) want *= 2;
        if (want > (uint64_t)((size_t)-1)) { free(nu); return FC_ERR_SIZE; }
        nacap = (size_t)want;
        if (fc__mul_size(nacap, C, &bytes) ||
            fc__mul_size(bytes, sizeof(double), &bytes)) {
            free(nu);
            return FC_ERR_SIZE;
        }
        /* zeroed by calloc: fresh pages beyond what is ever reached are
           then never touched */
        na = calloc(1, bytes);
        if (!na) { free(nu); return FC_ERR_NOMEM; }
    }
    if (grow_w) {
        nwcap = nd.stop;
        if (fc__mul_size(nwcap, 4, &bytes) || fc__add_size(bytes, 2, &bytes) ||
            fc__mul_size(bytes, sizeof(double), &bytes)) {
            free(nu); free(na);
            return FC_ERR_SIZE;
        }
        nw = malloc(bytes);
        if (!nw) { free(nu); free(na); return FC_ERR_NOMEM; }
    }
    if (grow_l) {
        double *tmp = nw ? nw : s->work;
        memcpy(nl, s->lev, sizeof(nl));
        for (size_t j = s->nlev; j < nd.nlev; j++) {
            memset(&nl[j], 0, sizeof(nl[j]));
            lev_geom(s, j, &nl[j].s, &nl[j].base, &nl[j].delay);
            nl[j].nseg = lev_nseg(s, j);
        }
        st = FC_OK;
        size_t j = 0, p = 0;
        for (j = 0; j < nd.nlev && st == FC_OK; j++) {
            size_t n2 = 2 * nl[j].s, xb;
            p = nl[j].made;
            if (j >= s->nlev) st = fc__fft_create(n2, &nl[j].plan);
            if (st == FC_OK &&
                (fc__add_size(n2, 4, &xb) || fc__mul_size(xb, C, &xb) ||
                 fc__mul_size(xb, sizeof(double), &xb)))
                st = FC_ERR_SIZE;
            for (p = nl[j].made; st == FC_OK && p < nd.made[j]; p++) {
                /* (p keeps the count made when the loop stops) */
                nl[j].kspec[p] = malloc((n2 + 2) * sizeof(double));
                nl[j].xspec[p] = malloc(xb);
                if (!nl[j].kspec[p] || !nl[j].xspec[p]) {
                    free(nl[j].kspec[p]);
                    free(nl[j].xspec[p]);
                    st = FC_ERR_NOMEM;
                    break;
                }
                st = segment_spectrum(s, &nl[j], p, tmp);
                if (st != FC_OK) {
                    free(nl[j].kspec[p]);
                    free(nl[j].xspec[p]);
                    break;
                }
            }
            if (st == FC_OK) nl[j].made = nd.made[j];
            else nl[j].made = p; /* segments made so far at the failing level */
            /* the ring complete: the slots for frames computed together */
            if (st == FC_OK && nl[j].made == nl[j].nseg && nl[j].gslots == 0) {
                size_t gs = lev_gslots(nl[j].nseg);
                for (size_t q = 0; q < gs; q++) {
                    if (!(nl[j].gsc[q] = malloc(xb))) {
                        while (q--) {
                            free(nl[j].gsc[q]);
                            nl[j].gsc[q] = NULL;
                        }
                        st = FC_ERR_NOMEM;
                        break;
                    }
                }
                if (st == FC_OK) nl[j].gslots = gs;
            }
        }
        if (st != FC_OK) {
            /* unwind: everything beyond what the stream owned */
            for (size_t i = 0; i < j; i++) {
                size_t old = i < s->nlev ? s->lev[i].made : 0;
                size_t gold = i < s->nlev ? s->lev[i].gslots : 0;
                for (size_t q = old; q < nl[i].made; q++) {
                    free(nl[i].kspec[q]);
                    free(nl[i].xspec[q]);
                }
                if (gold == 0)
                    for (size_t q = 0; q < nl[i].gslots; q++) free(nl[i].gsc[q]);
                if (i >= s->nlev) fc__fft_free(nl[i].plan);
            }
            free(nu); free(na); free(nw);
            return st;
        }
    }

    /* commit */
    if (nu) {
        size_t pad = s->leaf, row = pad + nucap, orow = pad + s->ucap;
        for (size_t c = 0; c < C; c++) {
            double *d = nu + c * row;
            memset(d, 0, pad * sizeof(double));
            if (s->n) memcpy(d + pad, s->u + c * orow + pad,
                             (size_t)s->n * sizeof(double));
        }
        free(s->u);
        s->u = nu;
        s->ucap = nucap;
    }
    if (na) {
        uint64_t live = s->acc_hi > s->n ? s->acc_hi - s->n : 0;
        for (size_t c = 0; c < C; c++) {
            double *d = na + c * nacap;
            if (live) memcpy(d, s->acc + c * s->acap + (s->n - s->abase),
                             (size_t)live * sizeof(double));
        }
        free(s->acc);
        s->acc = na;
        s->acap = nacap;
        s->abase = nbase;
    }
    if (nw) {
        free(s->work);
        s->work = nw;
        s->wcap = nwcap;
    }
    if (grow_l) {
        memcpy(s->lev, nl, nlev_new * sizeof(fc__level));
        s->nlev = nlev_new;
    }
    s->prep_n = ex_ready(s, &nd);
    return FC_OK;
}

/* ------------------------------------------------------------ exact ops */

/* One time step of every channel; capacity prepared, samples finite; lv:
   see ex_hist. */
static int ex_step(ex_engine *s, const double *x, double *y, const double *lv)
{
    double cv[FC__CORR_MAX];
    size_t C = s->C;
    uint64_t n = s->n;
    int st = corr_values(s, n, cv);
    if (st != FC_OK) return st;
    int l1 = s->diffs;
    /* every output first: one that is not representable refuses the step
       before anything changes */
    double *yt = s->tmp, *ut = s->tmp + C;
    for (size_t c = 0; c < C; c++) {
        yt[c] = ex_y(s, c, x[c], cv, lv, &ut[c]);
        if (!isfinite(yt[c]) || !isfinite(ut[c])) return FC_ERR_RANGE;
    }
    /* channel c reads x[c] before y[c] is written: y may be x (in place) */
    for (size_t c = 0; c < C; c++) {
        urow(s, c)[n] = ut[c];
        if (fabs(ut[c]) > s->umax) s->umax = fabs(ut[c]);
        if (l1) s->xprev[c] = x[c];
        for (size_t k = 0; k < s->ncorr; k++)
            if (s->cols[k].column == n) s->xcol[k * C + c] = x[c];
        y[c] = yt[c];
    }
    s->n = ++n;
    if (n % FC_S_BLOCK0 == 0) {
        for (size_t j = 0; j < s->nlev; j++) {
            const fc__level *L = &s->lev[j];
            if (n % L->s || n < L->delay) break; /* the same for larger j */
            frame_due(s, j, (n - L->delay) / L->s);
        }
    }
    return FC_OK;
}

/*
 * Undo the steps of a refused block back to count n0 (accumulator reach hi0;
 * previous/first samples saved in tmp[2C..4C)): the accumulator from n0 on
 * is cleared and the frames done at counts <= n0 that reach outputs >= n0
 * are done again in their order (adding only to those outputs), after the
 * ring of block spectra is recomputed for them: the state is that of count
 * n0 bit for bit.
 */
static void ex_rollback(ex_engine *s, uint64_t n0, uint64_t hi0)
{
    size_t C = s->C;
    uint64_t ff[FC_S_MAXLEV], mlo = n0 + 1;
    for (size_t c = 0; c < C; c++)
        memset(arow(s, c) + (n0 - s->abase), 0,
               (s->acap - (size_t)(n0 - s->abase)) * sizeof(double));
    for (size_t j = 0; j < s->nlev; j++) {
        fc__level *L = &s->lev[j];
        ff[j] = UINT64_MAX;
        if (n0 < L->delay) continue;
        uint64_t fl = (n0 - L->delay) / L->s;
        uint64_t reach = L->base + 2 * (uint64_t)L->s - 2; /* last output - f s */
        uint64_t first = n0 > reach ? (n0 - reach + L->s - 1) / L->s : 0;
        uint64_t fr = first < fl + 1 ? first : fl + 1;
        for (uint64_t f = fr + 1 > L->nseg ? fr + 1 - L->nseg : 0; f < fr; f++)
            block_spectra(s, L, f);
        if (first <= fl) {
            ff[j] = first;
            uint64_t m = first * L->s + L->delay;
            if (m < mlo) mlo = m;
        }
    }
    for (uint64_t m = mlo; m <= n0; m += FC_S_BLOCK0) {
        for (size_t j = 0; j < s->nlev; j++) {
            const fc__level *L = &s->lev[j];
            if (m % L->s || m < L->delay) break;
            uint64_t f = (m - L->delay) / L->s;
            if (f >= ff[j]) level_frame(s, j, f, n0);
        }
    }
    s->acc_hi = hi0;
    s->n = n0;
    memcpy(s->xprev, s->tmp + 2 * C, C * sizeof(double));
    memcpy(s->xcol, s->tmp + 3 * C, XR(s) * C * sizeof(double));
}

static int ex_preview(ex_engine *s, const double *x, double *y)
{
    double cv[FC__CORR_MAX];
    int st = corr_values(s, s->n, cv);
    if (st != FC_OK) return st;
    double *yt = s->tmp, *ut = s->tmp + s->C;
    for (size_t c = 0; c < s->C; c++) {
        yt[c] = ex_y(s, c, x[c], cv, NULL, &ut[c]);
        if (!isfinite(yt[c]) || !isfinite(ut[c])) return FC_ERR_RANGE;
    }
    memcpy(y, yt, s->C * sizeof(double)); /* memmove semantics not needed: y == x or apart */
    return FC_OK;
}

static int ex_history(ex_engine *s, double *h)
{
    double cv[FC__CORR_MAX];
    int st = corr_values(s, s->n, cv);
    if (st != FC_OK) return st;
    for (size_t c = 0; c < s->C; c++) {
        s->tmp[c] = ex_hist(s, c, cv, NULL);
        if (!isfinite(s->tmp[c])) return FC_ERR_RANGE;
    }
    memcpy(h, s->tmp, s->C * sizeof(double));
    return FC_OK;
}

/*
 * 1 when no output of a block of tot values x ending at count n_end can
 * leave the double range, so that no step of it can fail: every output and
 * every intermediate of the frames is at most (n_end + 1) * max|u| * max|c|
 * (times the FFT's few-fold growth), with max|u| over the history (umax)
 * and the block (L1: |x_k - x_{k-1}| <= 2 max|x|).
 */
static int ex_block_safe(const ex_engine *s, const double *x, size_t tot,
                         uint64_t n_end)
{
    double m = fc__max_abs(x, tot);
    if (s->diffs) {
        double p = fc__max_abs(s->xprev, s->C);
        m = 2.0 * (p > m ? p : m);
    }
    if (s->umax > m) m = s->umax;
    /* the stored samples of the columns (x_j = u_j <= umax on u = x) */
    double q = fc__max_abs(s->xcol, XR(s) * s->C);
    if (q > m) m = q;
    if (m == 0.0 || !isfinite(m)) return m == 0.0;
    int e;
    frexp(m, &e);
    return (double)e + s->klog2 + log2((double)n_end + 1.0) + 16.0 < 1000.0;
}

static int ex_push_block(ex_engine *s, const double *x, size_t count,
                         double *y, size_t threads)
{
    size_t C = s->C, tot = count * C; /* fits (the facade checked) */
    int st;
    if ((uint64_t)count > UINT64_MAX - s->n) return FC_ERR_SIZE;
    uint64_t n_end = s->n + count;
    if ((st = ex_prepare(s, n_end, 0)) != FC_OK) return st;
    /* the corrections at both ends of the block (|corr_n| is monotone
       there), so that the only failure the loop could meet is checked
       before anything changes */
    for (size_t k = 0; count && k < s->ncorr; k++) {
        double v;
        uint64_t j = s->cols[k].column, lo = s->n > j ? s->n : j;
        if (n_end - 1 < j) continue;
        if ((st = corr_get(s, k, n_end - 1, &v)) != FC_OK) return st;
        if ((lo > 0 || !s->zero_first) && (st = corr_get(s, k, lo, &v)) != FC_OK)
            return st;
    }
    /* outputs go to y only once every step has succeeded: straight into y
       when no output of the block can leave the double range (ordinary
       data; no allocation), through a staging copy otherwise */
    double *stage = NULL, *yb = y;
    double umax0 = s->umax;
    if (count > 1 && !ex_block_safe(s, x, tot, n_end)) {
        if (!(stage = malloc(tot * sizeof(double)))) return FC_ERR_NOMEM;
        yb = stage;
        memcpy(s->tmp + 2 * C, s->xprev, C * sizeof(double));
        memcpy(s->tmp + 3 * C, s->xcol, XR(s) * C * sizeof(double));
    }
    uint64_t n0 = s->n, hi0 = s->acc_hi;
    if (threads > C) threads = C;
    /* threads only for a block reaching a frame worth sharing */
    if (threads > 1 && s->nlev > 0 && s->lev[s->nlev - 1].s >= FC_S_PAR_BLOCK &&
        s->lev[s->nlev - 1].s * C >= FC_S_PAR_WORK && count >= FC_S_PAR_BLOCK)
        s->par = ex_helpers_ready(s, threads);
    if (!stage && count > 1) {
        /* no step can fail: u of the whole block first (what ex_step
           stores), so that frames due within the block can be computed
           together (frame_due) */
        for (size_t c = 0; c < C; c++) {
            double *uc = urow(s, c) + n0;
            if (!s->diffs) {
                for (size_t t = 0; t < count; t++) uc[t] = x[t * C + c];
            } else {
                uc[0] = n0 == 0 ? 0.0 : x[c] - s->xprev[c];
                for (size_t t = 1; t < count; t++)
                    uc[t] = x[t * C + c] - x[(t - 1) * C + c];
            }
        }
        s->gend = n_end;
    }
    for (size_t t = 0; t < count; t++) {
        const double *lv = NULL;
        if (s->gend) {
            /* the leaf terms of the next outputs, all u before them stored */
            size_t i = t % FC_S_BLOCK0;
            if (i == 0) {
                size_t T = count - t < FC_S_BLOCK0 ? count - t : FC_S_BLOCK0;
                for (size_t c = 0; c < C; c++)
                    s->leafv(s->leafk, urow(s, c) + n0 + t - s->leaf, s->leaf,
                             T, s->lbuf + c * FC_S_BLOCK0);
            }
            lv = s->lbuf + i;
        }
        st = ex_step(s, x + t * C, yb + t * C, lv);
        if (st != FC_OK) { /* FC_ERR_RANGE: an output beyond the double range */
            s->gend = 0;
            for (size_t j = 0; j < s->nlev; j++) s->lev[j].gn = 0;
            s->par = 1;
            if (t > 0) ex_rollback(s, n0, hi0);
            s->umax = umax0;
            free(stage);
            return st;
        }
    }
    s->gend = 0;
    s->par = 1;
    if (stage) {
        memcpy(y, stage, tot * sizeof(double));
        free(stage);
    }
    return FC_OK;
}

static void ex_reset(ex_engine *s)
{
    if (s->acc) memset(s->acc, 0, s->C * s->acap * sizeof(double));
    s->abase = 0;
    s->acc_hi = 0;
    s->n = 0;
    s->prep_n = 0; /* capacities are rechecked (the accumulator base moved) */
    s->umax = 0.0;
    s->gend = 0;
    for (size_t j = 0; j < s->nlev; j++) s->lev[j].gn = 0;
    if (s->xprev) memset(s->xprev, 0, s->C * sizeof(double));
    if (s->xcol) memset(s->xcol, 0, XR(s) * s->C * sizeof(double));
}

static size_t ex_nbytes(const ex_engine *s)
{
    size_t b = sizeof(*s);
    b += s->C * (s->leaf + s->ucap) * sizeof(double) * (s->u != NULL);
    b += s->C * s->acap * sizeof(double);
    b += s->wcap ? (4 * s->wcap + 2) * sizeof(double) : 0;
    b += s->klen * sizeof(double);
    b += (4 + 2 * XR(s) + FC_S_BLOCK0) * s->C * sizeof(double) +
         s->leaf * sizeof(double) +
         FC_S_MAXLEV * sizeof(fc__level) + s->ncorr * FC_S_CORR * sizeof(double);
    for (size_t j = 0; j < s->nlev; j++)
        b += s->lev[j].made * ((2 * s->lev[j].s + 2) +
                                s->C * FC_S_XSLOT(2 * s->lev[j].s)) * sizeof(double) +
             s->lev[j].gslots * s->C * FC_S_XSLOT(2 * s->lev[j].s) * sizeof(double) +
             fc__fft_nbytes(s->lev[j].plan);
    for (size_t i = 0; i < s->nhelp; i++) { /* threads' scratch */
        b += sizeof(ex_helper) + (s->help[i].work ? (4 * s->help[i].wcap + 2) * sizeof(double) : 0);
        for (size_t j = 0; j < FC_S_MAXLEV; j++)
            if (s->help[i].plan[j]) b += fc__fft_nbytes(s->help[i].plan[j]);
    }
    return b;
}

/* ------------------------------------------------------------ create */

static void ex_free(ex_engine *s)
{
    if (!s) return;
    if (s->lev)
        for (size_t j = 0; j < s->nlev; j++) level_free(&s->lev[j]);
    free(s->lev);
    free(s->kernel);
    free(s->u);
    free(s->acc);
    free(s->xprev);
    free(s->xcol);
    free(s->corr);
    free(s->tmp);
    free(s->leafk);
    free(s->lbuf);
    free(s->work);
    for (size_t i = 0; i < s->nhelp; i++) {
        for (size_t j = 0; j < FC_S_MAXLEV; j++) fc__fft_free(s->help[i].plan[j]);
        free(s->help[i].work);
    }
    free(s->help);
    free(s);
}

/* ------------------------------------------------------------ geometry */

static int rule_at(const void *ctx, uint64_t m, double *v)
{
    const ex_engine *s = ctx;
    return fc__lag_kernel(s->rule, s->order, s->step, m + s->shift, 1, v);
}
static int kern_at(const void *ctx, uint64_t m, double *v)
{
    const ex_engine *s = ctx;
    *v = m < s->klen ? s->kernel[m] : 0.0;
    return FC_OK;
}

/* lags over which a rule's exponent is estimated: [64, 2^36) */
#define FC_S_RULE_SPAN (UINT64_C(1) << 36)
/* lags of the default geometry's level 0 and the outputs it feeds */
#define FC_S_PROBE (FC_S_LEAF + (FC_S_SEGS + 2) * FC_S_BLOCK0)

/*
 * The leaf band and the segments per level, chosen from the kernel.
 *
 * Frame f of a level (block size s, base b) adds FFT rounding at the scale
 * of max |c| over each segment [b + p s, b + p s + s) times the block's
 * samples, while those samples reach the frame's outputs through lags
 * b + p s - s + 1 .. b + p s + 2s - 2. The ratio of the two kernel sizes
 * bounds the error of every output against its own terms.
 *
 * The default geometry (leaf 64, 8 segments: b_0 = s_0) is kept when that
 * ratio is at most FC_S_KEEP_RATIO: measured exactly over level 0 (lags 1
 * .. 703; it includes lags of the leaf band), and for the levels above from
 * the exponent gamma (level 1, b = 4.5 s, is the widest: (830/449)^gamma).
 * Otherwise the first segment p0 of the batch engine (fc__segment_start,
 * lags >= 64) gives leaf = 64 p0 and P = max(8, p0), so that every base
 * b_j >= p0 s_j and the ratio is at most ((p0+2)/(p0-1))^gamma. A user
 * kernel with a zero or a sign change at a lag >= 64 gets the most
 * cautious shape (p0 = 16).
 */
static int ex_geometry(const ex_engine *s, size_t *leaf, size_t *segs)
{
    int kern = s->kind == FC_S_KIND_KERNEL;
    double g, c[FC_S_PROBE];
    size_t p0;
    int st = fc__segment_start(kern ? kern_at : rule_at, s, FC_S_BLOCK0,
                               kern ? (uint64_t)s->klen : FC_S_RULE_SPAN,
                               &g, &p0);
    if (st != FC_OK) return st;
    if (kern) {
        for (size_t m = FC_S_BLOCK0; m < s->klen; m++) {
            double a = s->kernel[m];
            if (a == 0.0 || (m > FC_S_BLOCK0 && (a < 0.0) != (s->kernel[m - 1] < 0.0))) {
                g = 1e9;
                p0 = 16;
                break;
            }
        }
    }
    if (!kern && g >= 1e9) {
        /* a rule kernel with zeros: the Grunwald weights of an integer
           order vanish beyond lag a (binomial coefficients), and all-zero
           segments add exact zeros; any nonzero sampled lag keeps p0 */
        int tail_zero = 1;
        for (uint64_t m = FC_S_BLOCK0; m < FC_S_RULE_SPAN && tail_zero; m *= 2) {
            double a, b;
            if ((st = rule_at(s, m, &a)) != FC_OK ||
                (st = rule_at(s, m + m / 2, &b)) != FC_OK)
                return st;
            if (a != 0.0 || b != 0.0) tail_zero = 0;
        }
        if (tail_zero) g = 0.0;
    }
    double r = g > 1e3 ? INFINITY : pow(830.0 / 449.0, g);
    if (r <= FC_S_KEEP_RATIO) {
        if ((st = kernel_values(s, 0, FC_S_PROBE, c)) != FC_OK) return st;
        for (size_t p = 0; p < FC_S_SEGS && r <= FC_S_KEEP_RATIO; p++) {
            size_t b = FC_S_LEAF + p * FC_S_BLOCK0;
            double mx = 0.0, mn = INFINITY;
            for (size_t m = b; m < b + FC_S_BLOCK0; m++)
                if (fabs(c[m]) > mx) mx = fabs(c[m]);
            if (mx == 0.0) continue; /* an all-zero segment adds exact zeros */
            for (size_t m = b - FC_S_BLOCK0 + 1; m <= b + 2 * FC_S_BLOCK0 - 2; m++)
                if (fabs(c[m]) < mn) mn = fabs(c[m]);
            if (mn == 0.0 || mx / mn > r) r = mn == 0.0 ? INFINITY : mx / mn;
        }
    }
    if (r <= FC_S_KEEP_RATIO) {
        *leaf = FC_S_LEAF;
        *segs = FC_S_SEGS;
    } else {
        *leaf = FC_S_BLOCK0 * p0;
        *segs = p0 > FC_S_SEGS ? p0 : FC_S_SEGS;
    }
    return FC_OK;
}

/* Common exact-mode setup after kind/rule/kernel are set: the geometry
   (leaf 0: chosen from the kernel; otherwise as given), the leaf band. */
static int ex_init(ex_engine *s, size_t leaf, size_t segs)
{
    size_t C = s->C, bytes;
    double leafc[FC_S_LEAF_MAX];
    int st;
    if (fc__mul_size(C, sizeof(double), &bytes)) return FC_ERR_SIZE;
    s->xprev = calloc(C, sizeof(double));
    s->xcol = calloc(C, XR(s) * sizeof(double));
    s->tmp = calloc(C, (3 + XR(s)) * sizeof(double));
    s->lev = calloc(FC_S_MAXLEV, sizeof(fc__level));
    s->lbuf = calloc(C, FC_S_BLOCK0 * sizeof(double));
    s->leafv = fc__leaf_dots_kernel();
    if (s->ncorr && !(s->corr = calloc(s->ncorr, FC_S_CORR * sizeof(double))))
        return FC_ERR_NOMEM;
    if (!s->xprev || !s->xcol || !s->tmp || !s->lev || !s->lbuf)
        return FC_ERR_NOMEM;
    if (leaf == 0 && (st = ex_geometry(s, &leaf, &segs)) != FC_OK) return st;
    if (!(s->leafk = malloc(leaf * sizeof(double)))) return FC_ERR_NOMEM;
    s->leaf = leaf;
    s->segs = segs;
    s->lag_limit = geom_base(leaf, segs, FC_S_MAXLEV);
    st = kernel_values(s, 0, leaf, leafc);
    if (st != FC_OK) return st;
    s->c0 = leafc[0];
    s->leafk[0] = 0.0;
    for (size_t i = 1; i < leaf; i++) s->leafk[i] = leafc[leaf - i];
    if (s->kind == FC_S_KIND_KERNEL) {
        double km = 0.0;
        for (size_t i = 0; i < s->klen; i++)
            km = fabs(s->kernel[i]) > km ? fabs(s->kernel[i]) : km;
        s->klog2 = km > 0.0 ? log2(km) : -1100.0;
    } else {
        long double M;
        long E;
        fc__rule_scale(s->rule, s->order, s->step, &M, &E);
        /* each correction column is a few times the weights
           (internal.h, fc__corr_col) */
        s->klog2 = fc__unit_log2_bound(s->rule, s->order,
                                       s->lag_limit + s->shift) +
                   (double)log2l(M) + (double)E +
                   (s->ncorr ? 5.0 + log2((double)s->ncorr) : 0.0);
    }
    /* room for the leaf band of the first samples */
    return ex_prepare(s, 1, 1);
}

/* A new engine for the definition d (checked) with the geometry given
   (leaf 0: chosen from the kernel). */
static int ex_create_geom(const fc__stream_def *d, size_t leaf, size_t segs,
                          ex_engine **out)
{
    int st;
    ex_engine *s = calloc(1, sizeof(*s));
    if (!s) return FC_ERR_NOMEM;
    s->C = d->channels;
    s->kind = d->kind;
    s->rule = -1;
    s->par = 1; /* one thread outside fc_stream_push_block_threads */
    if (d->kind == FC_S_KIND_KERNEL) {
        s->kernel = malloc(d->klen * sizeof(double));
        if (!s->kernel) { ex_free(s); return FC_ERR_NOMEM; }
        memcpy(s->kernel, d->kernel, d->klen * sizeof(double));
        s->klen = d->klen;
    } else {
        s->rule = d->rule;
        s->shift = d->kind == FC__KIND_SHIFTED;
        const fc__rule_desc *rd = fc__rule(d->rule);
        s->ncorr = rd->ncorr;
        s->cols = rd->corr;
        s->zero_first = rd->zero_first;
        s->diffs = fc__rule_uses_differences(d->rule);
        s->order = d->order;
        s->step = d->step;
    }
    if ((st = ex_init(s, leaf, segs)) != FC_OK) { ex_free(s); return st; }
    *out = s;
    return FC_OK;
}

static uint64_t ex_acc_live(const ex_engine *s)
{
    return s->acc_hi > s->n ? s->acc_hi - s->n : 0;
}

/* The payload after the common header (stream.c), little-endian:
     u64 leaf size, u64 segments per level, u64 n, u64 klen (0 for a
     rule), u64 A (accumulator values kept per channel), f64 kernel[klen],
     f64 xprev[C], f64 x0[C] (x_0 of a column j = 0, else 0), f64 u[C][n],
     f64 acc[C][A] (outputs n .. n+A-1), then for each correction column
     with j >= 1, in the table's order, f64 x_j[C] (0 before it arrives;
     no rule of today's table has one, so its payloads end with acc).
   The kernel spectra and the ring of block spectra are recomputed on load
   (the same FFTs of the same data give the same bits). */
#define FC_S_PAYLOAD_HDR 40

/* The number of correction columns with j >= 1 (saved after acc). */
static size_t ex_later_cols(const ex_engine *s)
{
    size_t m = 0;
    for (size_t k = 0; k < s->ncorr; k++) m += s->cols[k].column != 0;
    return m;
}

/* The row of xcol holding x_0, or -1 when no column has j = 0. */
static long ex_x0_row(const ex_engine *s)
{
    for (size_t k = 0; k < s->ncorr; k++)
        if (s->cols[k].column == 0) return (long)k;
    return -1;
}

static int ex_save_size(const ex_engine *s, size_t *size)
{
    size_t nd = 0, t;
    uint64_t A = ex_acc_live(s);
    /* doubles: klen + 2C + C*n + C*A + C*(columns j >= 1) */
    if (fc__add_size(s->klen, (2 + ex_later_cols(s)) * s->C, &nd))
        return FC_ERR_SIZE;
    if (fc__mul_size(s->C, (size_t)s->n, &t) || fc__add_size(nd, t, &nd))
        return FC_ERR_SIZE;
    if (fc__mul_size(s->C, (size_t)A, &t) || fc__add_size(nd, t, &nd))
        return FC_ERR_SIZE;
    if (fc__mul_size(nd, 8, &nd) || fc__add_size(nd, FC_S_PAYLOAD_HDR, &nd))
        return FC_ERR_SIZE;
    *size = nd;
    return FC_OK;
}

/* The payload into q, which holds exactly ex_save_size bytes. */
static void ex_save(const ex_engine *s, unsigned char *q)
{
    uint64_t A = ex_acc_live(s);
    fc__put64(q, (uint64_t)s->leaf);
    fc__put64(q + 8, (uint64_t)s->segs);
    fc__put64(q + 16, s->n);
    fc__put64(q + 24, (uint64_t)s->klen);
    fc__put64(q + 32, A);
    q += FC_S_PAYLOAD_HDR;
    for (size_t i = 0; i < s->klen; i++, q += 8) fc__putd(q, s->kernel[i]);
    for (size_t c = 0; c < s->C; c++, q += 8) fc__putd(q, s->xprev[c]);
    long r0 = ex_x0_row(s);
    for (size_t c = 0; c < s->C; c++, q += 8)
        fc__putd(q, r0 < 0 ? 0.0 : s->xcol[(size_t)r0 * s->C + c]);
    for (size_t c = 0; c < s->C; c++) {
        const double *uc = urow(s, c);
        for (uint64_t k = 0; k < s->n; k++, q += 8) fc__putd(q, uc[k]);
    }
    for (size_t c = 0; c < s->C; c++) {
        const double *ac = arow(s, c) + (s->n - s->abase);
        for (uint64_t k = 0; k < A; k++, q += 8) fc__putd(q, ac[k]);
    }
    for (size_t k = 0; k < s->ncorr; k++) {
        if (s->cols[k].column == 0) continue;
        for (size_t c = 0; c < s->C; c++, q += 8)
            fc__putd(q, s->xcol[k * s->C + c]);
    }
}

static int finite_le(const unsigned char *p, size_t count)
{
    for (size_t i = 0; i < count; i++)
        if (!isfinite(fc__getd(p + 8 * i))) return 0;
    return 1;
}

/* Replay the frames of every count m = 64, 128, ... <= n over the history
   already in place (s->n still 0): the same frames in the same order as the
   pushes that stored it, so the accumulator and the ring of block spectra
   come out bit for bit (the engine's state depends only on the samples). */
static void ex_replay(ex_engine *s, uint64_t n)
{
    s->gend = n; /* the whole history is stored: frames may go together */
    for (uint64_t m = FC_S_BLOCK0; m <= n; m += FC_S_BLOCK0) {
        for (size_t j = 0; j < s->nlev; j++) {
            const fc__level *L = &s->lev[j];
            if (m % L->s || m < L->delay) break;
            frame_due(s, j, (m - L->delay) / L->s);
        }
    }
    s->gend = 0;
}

/* A new engine for d with geometry (leaf, segs) (leaf 0: the one its
   kernel implies), the C x n history at uq in place and its frames
   replayed; FC_ERR_FORMAT if the stream cannot hold n samples. */
static int ex_rebuild(const fc__stream_def *d, size_t leaf, size_t segs,
                      const unsigned char *uq, uint64_t n, ex_engine **out)
{
    ex_engine *s = NULL;
    size_t C = d->channels;
    int st = ex_create_geom(d, leaf, segs, &s);
    if (st != FC_OK) return st == FC_ERR_NOMEM ? st : FC_ERR_FORMAT;
    ex_need nd;
    if (ex_needs(s, n, &nd) != FC_OK) {
        ex_free(s);
        return FC_ERR_FORMAT;
    }
    if ((st = ex_prepare(s, n, 1)) != FC_OK) {
        ex_free(s);
        return st == FC_ERR_NOMEM ? st : FC_ERR_FORMAT;
    }
    for (size_t c = 0; c < C; c++) {
        double *uc = urow(s, c);
        const unsigned char *r = uq + 8 * (size_t)(c * n);
        for (uint64_t k = 0; k < n; k++) {
            uc[k] = fc__getd(r + 8 * k);
            if (fabs(uc[k]) > s->umax) s->umax = fabs(uc[k]);
        }
    }
    ex_replay(s, n);
    s->n = n;
    *out = s;
    return FC_OK;
}

static uint64_t dbits(double d)
{
    uint64_t v;
    memcpy(&v, &d, 8);
    return v;
}

/* 1 if the stream's live accumulator is the C x A block at aq, bit for bit
   (abase is 0 after a fresh prepare). */
static int acc_matches(const ex_engine *s, const unsigned char *aq, uint64_t A)
{
    if (ex_acc_live(s) != A) return 0;
    for (size_t c = 0; c < s->C; c++) {
        const double *ac = arow(s, c) + (s->n - s->abase);
        for (uint64_t k = 0; k < A; k++, aq += 8)
            if (dbits(ac[k]) != fc__get64(aq)) return 0;
    }
    return 1;
}

/*
 * The exact payload q[0 .. p) of a blob whose common header gave d. Nothing
 * derived is taken on trust: the sizes are bounded by the payload before
 * anything is allocated; the stream is built from its definition (rule or
 * kernel, checked as a creation checks it), the geometry field must be the
 * one the kernel implies (or, from a blob written before the geometry was
 * chosen per kernel, the former fixed one, which is then replayed only to
 * check the blob and the stream continues in the implied geometry); the
 * stored history u is replayed through the engine and the stored
 * accumulator must equal the recomputed one bit for bit; the
 * previous/first-sample fields must be what the samples imply.
 */
static int ex_load(const fc__stream_def *d, const unsigned char *q, size_t p,
                   ex_engine **out)
{
    const size_t C = d->channels;
    const uint64_t C64 = (uint64_t)C;
    const unsigned kind = d->kind;
    const int rule = d->rule;
    fc__rd r;
    int st;
    fc__rd_init(&r, q, p);
    uint64_t leaf = fc__rd_u64(&r), segs = fc__rd_u64(&r), n = fc__rd_u64(&r),
             klen = fc__rd_u64(&r), A = fc__rd_u64(&r);
    if (r.bad) return FC_ERR_FORMAT;
    /* exact mode has no tolerance or horizon */
    if (dbits(d->tol) != 0 || dbits(d->horizon) != 0) return FC_ERR_FORMAT;
    /* a geometry this code can choose */
    int legacy = leaf == FC_S_LEAF && segs == FC_S_SEGS;
    int known = legacy;
    for (uint64_t p0 = 2; p0 <= 16; p0 *= 2)
        if (leaf == FC_S_BLOCK0 * p0 && segs == (p0 > FC_S_SEGS ? p0 : FC_S_SEGS))
            known = 1;
    if (!known) return FC_ERR_FORMAT;
    /* the rule's correction columns (an unknown rule is refused below) */
    const fc__rule_desc *rd = kind == FC_S_KIND_RULE ? fc__rule(rule) : NULL;
    uint64_t later = 0;
    for (size_t k = 0; rd && k < rd->ncorr; k++) later += rd->corr[k].column != 0;
    /* sizes: every count must fit in the payload (checked piecewise so that
       nothing overflows) */
    uint64_t room = (p - FC_S_PAYLOAD_HDR) / 8; /* doubles present */
    if ((p - FC_S_PAYLOAD_HDR) % 8 || klen > room || C64 > room) return FC_ERR_FORMAT;
    uint64_t used = klen + 2 * C64;
    if (used > room) return FC_ERR_FORMAT;
    if (n > (room - used) / C64) return FC_ERR_FORMAT;
    used += C64 * n;
    if (A > (room - used) / C64) return FC_ERR_FORMAT;
    used += C64 * A;
    if (later > (room - used) / C64) return FC_ERR_FORMAT;
    used += C64 * later;
    if (used != room) return FC_ERR_FORMAT;
    /* the sections (their sizes fit: checked above) */
    const unsigned char *kq = fc__rd_bytes(&r, 8 * (size_t)klen);
    const unsigned char *xq = fc__rd_bytes(&r, 8 * C);
    const unsigned char *x0q = fc__rd_bytes(&r, 8 * C);
    const unsigned char *uq = fc__rd_bytes(&r, 8 * (size_t)(C64 * n));
    const unsigned char *aq = fc__rd_bytes(&r, 8 * (size_t)(C64 * A));
    const unsigned char *lq = fc__rd_bytes(&r, 8 * (size_t)(C64 * later));
    if (r.bad || r.pos != p) return FC_ERR_FORMAT;
    /* the definition and the samples must be finite; the accumulator is
       compared bit for bit with the recomputed one (it may hold infinities
       once huge samples have made later outputs overflow) */
    if (!finite_le(kq, (size_t)(used - C64 * A - C64 * later)) ||
        !finite_le(lq, (size_t)(C64 * later)))
        return FC_ERR_FORMAT;

    if (kind == FC_S_KIND_KERNEL) {
        if (rule != -1 || klen == 0 || klen > FC_S_LAG_LIMIT) return FC_ERR_FORMAT;
        if (dbits(d->order) != 0 || dbits(d->step) != 0) return FC_ERR_FORMAT;
    } else if (kind == FC_S_KIND_RULE) {
        if (klen != 0) return FC_ERR_FORMAT;
        if (fc__check_rule(rule, d->order, d->step) != FC_OK ||
            !fc__in_range(&fc__rule(rule)->exact, d->order))
            return FC_ERR_FORMAT;
    } else {
        return FC_ERR_FORMAT;
    }
    /* the previous / first sample fields against the samples: a column j
       keeps x_j (= u_j on u = x, free but finite on differences; 0 before
       it arrives), L1 the previous sample (free once there is one; 0
       before) and u_0 = 0; unused fields are 0 */
    int has0 = rd != NULL && fc__rule_x0(rd) != NULL;
    int l1 = rd != NULL && rd->uses_differences;
    for (size_t c = 0; c < C; c++) {
        uint64_t xp = fc__get64(xq + 8 * c), x0 = fc__get64(x0q + 8 * c);
        uint64_t u0 = n > 0 ? fc__get64(uq + 8 * (size_t)(c * n)) : 0;
        if (has0 && l1 ? n == 0 && x0 != 0 : x0 != (has0 ? u0 : 0))
            return FC_ERR_FORMAT;
        if ((!l1 || n == 0) && xp != 0) return FC_ERR_FORMAT;
        if (l1 && u0 != 0) return FC_ERR_FORMAT;
    }
    for (size_t k = 0, i = 0; rd && k < rd->ncorr; k++) {
        uint64_t j = rd->corr[k].column;
        if (j == 0) continue;
        for (size_t c = 0; c < C; c++) {
            uint64_t v = fc__get64(lq + 8 * (i * C + c));
            if (n <= j ? v != 0
                       : !l1 && v != fc__get64(uq + 8 * (size_t)(c * n + j)))
                return FC_ERR_FORMAT;
        }
        i++;
    }

    /* the engine's definition: the header's, with the kernel decoded */
    fc__stream_def def = *d;
    double *kernel = NULL;
    if (kind == FC_S_KIND_KERNEL) {
        if (!(kernel = malloc((size_t)klen * sizeof(double)))) return FC_ERR_NOMEM;
        for (size_t i = 0; i < klen; i++) kernel[i] = fc__getd(kq + 8 * i);
        def.kernel = kernel;
        def.klen = (size_t)klen;
    }
    ex_engine *s = NULL, *old = NULL;
    st = ex_rebuild(&def, 0, 0, uq, n, &s);
    if (st == FC_OK && (s->leaf != leaf || s->segs != segs)) {
        if (!legacy) st = FC_ERR_FORMAT;
        else st = ex_rebuild(&def, FC_S_LEAF, FC_S_SEGS, uq, n, &old);
    }
    free(kernel);
    if (st == FC_OK && !acc_matches(old ? old : s, aq, A)) st = FC_ERR_FORMAT;
    ex_free(old);
    if (st != FC_OK) {
        ex_free(s);
        return st;
    }
    long r0 = ex_x0_row(s);
    for (size_t c = 0; c < C; c++) {
        s->xprev[c] = fc__getd(xq + 8 * c);
        if (r0 >= 0) s->xcol[(size_t)r0 * C + c] = fc__getd(x0q + 8 * c);
    }
    for (size_t k = 0, i = 0; k < s->ncorr; k++) {
        if (s->cols[k].column == 0) continue;
        for (size_t c = 0; c < C; c++)
            s->xcol[k * C + c] = fc__getd(lq + 8 * (i * C + c));
        i++;
    }
    *out = s;
    return FC_OK;
}

/* ------------------------------------------------------------ operations */

/* The facade has checked every argument and sample (internal.h). */
static int op_create(const fc__stream_def *d, void **eng)
{
    ex_engine *s;
    int st = ex_create_geom(d, 0, 0, &s);
    if (st == FC_OK) *eng = s;
    return st;
}
static int op_load(const fc__stream_def *d, const unsigned char *p,
                   size_t size, void **eng)
{
    ex_engine *s;
    int st = ex_load(d, p, size, &s);
    if (st == FC_OK) *eng = s;
    return st;
}
static void op_free(void *eng) { ex_free(eng); }
static int op_push_block(void *eng, const double *x, size_t count, double *y,
                         size_t threads)
{
    return ex_push_block(eng, x, count, y, threads);
}
/* One sample of a one-channel stream: the inline fast path of
   ex_push_block. */
static int op_push1(void *eng, double x, double *y)
{
    ex_engine *s = eng;
    int st = FC_OK;
    if (s->n + 1 > s->prep_n) st = ex_prepare(s, s->n + 1, 0);
    if (st == FC_OK) st = ex_step(s, &x, y, NULL);
    return st;
}
static int op_preview(void *eng, const double *x, double *y)
{
    return ex_preview(eng, x, y);
}
static int op_history(void *eng, double *h) { return ex_history(eng, h); }
static void op_reset(void *eng) { ex_reset(eng); }
static int op_reserve(void *eng, uint64_t n)
{
    ex_engine *s = eng;
    return n > s->n ? ex_prepare(s, n, 1) : FC_OK;
}
static uint64_t op_count(const void *eng)
{
    return ((const ex_engine *)eng)->n;
}
static uint64_t op_remaining(const void *eng)
{
    const ex_engine *s = eng;
    if (s->kind == FC_S_KIND_KERNEL) return UINT64_MAX - s->n;
    return s->lag_limit - 1 - s->n; /* counts < lag_limit */
}
static size_t op_nbytes(const void *eng) { return ex_nbytes(eng); }
static size_t op_terms(const void *eng)
{
    (void)eng;
    return 0;
}
static int op_save_size(const void *eng, size_t *size)
{
    return ex_save_size(eng, size);
}
static int op_save(const void *eng, unsigned char *buf, size_t size)
{
    (void)size; /* exactly ex_save_size (the facade) */
    ex_save(eng, buf);
    return FC_OK;
}

static const fc__range *op_order_range(const fc__rule_desc *d)
{
    return &d->exact;
}

const fc__stream_ops fc__exact_ops = {
    .has_horizon = 0,
    .order_range = op_order_range,
    .create = op_create,
    .load = op_load,
    .free = op_free,
    .push_block = op_push_block,
    .push1 = op_push1,
    .preview = op_preview,
    .history = op_history,
    .reset = op_reset,
    .reserve = op_reserve,
    .count = op_count,
    .remaining = op_remaining,
    .nbytes = op_nbytes,
    .terms = op_terms,
    .save_size = op_save_size,
    .save = op_save,
};
