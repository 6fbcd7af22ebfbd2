/*
 * lagsum.c -- batch lagged sums y_n = sum_{k<=n} c_{n-k} x_k, and the rules
 * applied to whole records.
 *
 * Engines:
 *   direct   O(N*K) summation, blocked so that a chunk of outputs stays in
 *            cache while every lag is added to it; lags in groups, each
 *            group's sum added with TwoSum (componentwise accurate for
 *            every kernel length; see direct_accumulate).
 *   blocked  lags below FC_DIRECT_BAND summed directly; the rest cut into
 *            segments of growing size, each an FFT block convolution whose
 *            kernel values vary little over the lags it touches, so every
 *            output keeps its error at the scale of its own terms
 *            (componentwise, as direct summation); see part_shape below.
 *            O(N log N) work for N samples (O(N log K) for K lags).
 *   fft      one FFT convolution of the whole record: O(N log N), accurate
 *            only normwise (small outputs next to large ones lose digits).
 *
 * fc_lagged_sum and fc_apply run every engine on samples (and a kernel)
 * scaled by powers of two and apply the factor taken out at the end, so
 * that finite input never overflows on the way (see lagsum_scaled).
 */
#include "internal.h"

#include <stdlib.h>
#include <string.h>

#define FC_DIRECT_CHUNK 256  /* outputs per cache chunk in the direct engine */
#define FC_MAX_LOG2 30

struct fc_context {
    fc_fft_plan *plans[FC_MAX_LOG2 + 1];
    double *work;
    size_t work_cap; /* doubles */
    size_t threads;  /* threads a call may use, 1 .. FC_THREADS_MAX */
    size_t nhelp;    /* helper contexts in help[] (workers 1 .. nhelp) */
    fc_context **help; /* each with its own plans and work space */
};

int fc_context_create(fc_context **out)
{
    if (out == NULL) return FC_ERR_NULL;
    fc_context *ctx = calloc(1, sizeof *ctx);
    if (ctx == NULL) return FC_ERR_NOMEM;
    ctx->threads = 1;
    *out = ctx;
    return FC_OK;
}

/* Free the helpers beyond the first keep. */
static void drop_helpers(fc_context *ctx, size_t keep)
{
    for (size_t i = keep; i < ctx->nhelp; i++) fc_context_free(ctx->help[i]);
    if (keep < ctx->nhelp) ctx->nhelp = keep;
    if (ctx->nhelp == 0) {
        free(ctx->help);
        ctx->help = NULL;
    }
}

void fc_context_free(fc_context *ctx)
{
    if (ctx == NULL) return;
    drop_helpers(ctx, 0);
    for (int i = 0; i <= FC_MAX_LOG2; i++) fc__fft_free(ctx->plans[i]);
    free(ctx->work);
    free(ctx);
}

int fc_context_nbytes(const fc_context *ctx, size_t *nbytes)
{
    if (ctx == NULL || nbytes == NULL) return FC_ERR_NULL;
    size_t total = sizeof *ctx + ctx->work_cap * sizeof(double);
    for (int i = 0; i <= FC_MAX_LOG2; i++)
        if (ctx->plans[i] != NULL) total += fc__fft_nbytes(ctx->plans[i]);
    total += ctx->nhelp * sizeof(fc_context *);
    for (size_t i = 0; i < ctx->nhelp; i++) {
        size_t b = 0;
        (void)fc_context_nbytes(ctx->help[i], &b);
        total += b;
    }
    *nbytes = total;
    return FC_OK;
}

int fc_context_set_threads(fc_context *ctx, size_t threads)
{
    if (ctx == NULL) return FC_ERR_NULL;
    if (threads == 0 || threads > FC_THREADS_MAX) return FC_ERR_ARG;
    ctx->threads = threads; /* helpers beyond it are kept for later calls */
    return FC_OK;
}

int fc_context_threads(const fc_context *ctx, size_t *threads)
{
    if (ctx == NULL || threads == NULL) return FC_ERR_NULL;
    *threads = ctx->threads;
    return FC_OK;
}

/* The context of worker w (0: ctx itself). */
static fc_context *worker_ctx(fc_context *ctx, size_t w)
{
    return w == 0 ? ctx : ctx->help[w - 1];
}

/* How many workers (1 .. want) have a context prepared by prep: worker 0
   is ctx (prepared by the caller); helpers are made or reused and
   prepared in turn, and the first that cannot be (no memory) ends the
   count. Never an error: fewer workers give the same result. */
typedef int (*prep_fn)(fc_context *wctx, const void *arg);
static size_t workers_ready(fc_context *ctx, size_t want, prep_fn prep,
                            const void *arg)
{
    size_t w = 1;
    if (want > ctx->threads) want = ctx->threads;
    if (!fc__have_threads()) want = 1;
    if (want > 1 && ctx->nhelp < want - 1) {
        fc_context **h = realloc(ctx->help, (want - 1) * sizeof *h);
        if (h == NULL) want = ctx->nhelp + 1;
        else ctx->help = h;
    }
    for (; w < want; w++) {
        if (w > ctx->nhelp) {
            fc_context *hc;
            if (fc_context_create(&hc) != FC_OK) break;
            ctx->help[ctx->nhelp++] = hc;
        }
        if (prep(ctx->help[w - 1], arg) != FC_OK) break;
    }
    if (ctx->nhelp == 0 && ctx->help != NULL) { /* nothing made: no array */
        free(ctx->help);
        ctx->help = NULL;
    }
    return w;
}

/* Calls with fewer samples than this in all run on the calling thread. */
#define FC_PAR_MIN_SAMPLES ((size_t)1 << 15)
/* ... and below this when signals are split (several thread starts and
   joins a call, one per phase) */
#define FC_PAR_MIN_SPLIT ((size_t)1 << 17)

static int log2_exact(size_t n)
{
    int k = 0;
    while (((size_t)1 << k) < n) k++;
    return k;
}

/* Make sure the context has a plan of size n = 2^k (n <= 2^30). */
static int ensure_plan(fc_context *ctx, size_t n)
{
    int k = log2_exact(n);
    if (k > FC_MAX_LOG2) return FC_ERR_SIZE;
    if (ctx->plans[k] != NULL) return FC_OK;
    return fc__fft_create(n, &ctx->plans[k]);
}

static fc_fft_plan *plan_of(fc_context *ctx, size_t n)
{
    return ctx->plans[log2_exact(n)];
}

static int ensure_work(fc_context *ctx, size_t doubles)
{
    if (ctx->work_cap >= doubles) return FC_OK;
    double *w = malloc(doubles * sizeof(double));
    if (w == NULL) return FC_ERR_NOMEM;
    free(ctx->work);
    ctx->work = w;
    ctx->work_cap = doubles;
    return FC_OK;
}

/*
 * y[i] += sum_{m=0}^{min(i, K-1)} c[m] * x[i-m] for 0 <= i < len.
 *
 * Outputs are taken in cache-sized chunks; within a chunk the lags are
 * added in increasing order (an axpy per lag, which the compiler
 * vectorises). Plain recursive summation of K terms has an error up to
 * about K eps sum|terms| (Higham, Accuracy and Stability of Numerical
 * Algorithms, 2002, sec. 4.2), too much for long kernels (a tail of small
 * lags below half an ulp of the running sum is dropped altogether). So the
 * lags are taken in groups of FC_DIRECT_GROUP: the first group is summed
 * into y as before (kernels of at most FC_DIRECT_GROUP lags give the same
 * bits as plain summation), every later group plainly into a temporary,
 * and that group sum is added to y with TwoSum (Knuth, TAOCP vol. 2,
 * sec. 4.2.2), the rounding errors gathered in a correction added at the
 * end of the chunk (cascaded summation, Higham sec. 4.3). Error about
 * (FC_DIRECT_GROUP + 2) eps sum|terms| whatever K, for about one TwoSum
 * (six additions) per output and group, i.e. some 5% more work than the
 * plain sum at K >> FC_DIRECT_GROUP.
 */
#define FC_DIRECT_GROUP 128
#define FC_DIRECT_REG 32 /* outputs kept in registers (the first group) */

#if (defined(__GNUC__) || defined(__clang__)) \
    && (defined(__x86_64__) || defined(__i386__)) && !defined(FC_NO_SIMD)
#define FC__DIRECT_AVX2 1
#define FC__DIRECT_INLINE inline __attribute__((always_inline))
#else
#define FC__DIRECT_AVX2 0
#define FC__DIRECT_INLINE inline
#endif

/* The body, compiled twice below: generic, and with AVX2 enabled (function
   attribute target("avx2"), which GCC and clang both accept; no FMA, so
   with no FMA contraction allowed the two give the same bits). Chosen per
   call with __builtin_cpu_supports (a read of the CPU model that the
   compiler's runtime fills in at start-up; no global state of ours, no
   ifunc resolver as target_clones would make). */
/* d[i - base] += sum_{m = mlo}^{mhi-1} c[m] x[i-m] (lags m <= i only) for
   i0 <= i < i1, the lags of each output added in increasing order. Once
   every lag reaches every output (i0 >= mhi - 1), FC_DIRECT_REG outputs at
   a time are held in registers while the lags are added (no load and store
   of d per lag); the rest by one axpy per lag. Both do the same operations
   in the same order on each output, so the bits do not depend on which. */
static FC__DIRECT_INLINE void
lags_into(const double *restrict x, const double *restrict c, size_t mlo,
          size_t mhi, double *restrict d, size_t base, size_t i0, size_t i1)
{
    size_t jr = i0; /* outputs [i0, jr) done in registers */
    if (i0 + 1 >= mhi) {
        for (; jr + FC_DIRECT_REG <= i1; jr += FC_DIRECT_REG) {
            double acc[FC_DIRECT_REG];
            double *restrict dd = d + (jr - base);
            for (size_t j = 0; j < FC_DIRECT_REG; j++) acc[j] = dd[j];
            for (size_t m = mlo; m < mhi; m++) {
                const double cm = c[m];
                const double *restrict xx = x + (jr - m);
                for (size_t j = 0; j < FC_DIRECT_REG; j++) acc[j] += cm * xx[j];
            }
            for (size_t j = 0; j < FC_DIRECT_REG; j++) dd[j] = acc[j];
        }
    }
    for (size_t m = mlo; m < mhi && jr < i1; m++) {
        const double cm = c[m];
        size_t ib = jr > m ? jr : m;
        if (ib >= i1) continue;
        double *restrict dd = d + (ib - base);
        const double *restrict xx = x + (ib - m);
        size_t cnt = i1 - ib;
        for (size_t j = 0; j < cnt; j++) dd[j] += cm * xx[j];
    }
}

static FC__DIRECT_INLINE void
direct_accumulate_body(const double *restrict x, size_t len,
                       const double *restrict c, size_t K,
                       double *restrict y, size_t lo, size_t hi)
{
    double grp[FC_DIRECT_CHUNK], cor[FC_DIRECT_CHUNK];
    for (size_t i0 = lo; i0 < hi; i0 += FC_DIRECT_CHUNK) {
        size_t i1 = i0 + FC_DIRECT_CHUNK < len ? i0 + FC_DIRECT_CHUNK : len;
        size_t mmax = K < i1 ? K : i1; /* lags 0 .. mmax-1 */
        size_t m1 = mmax < FC_DIRECT_GROUP ? mmax : FC_DIRECT_GROUP;
        lags_into(x, c, 0, m1, y, 0, i0, i1);
        if (mmax <= FC_DIRECT_GROUP) continue;
        size_t clen = i1 - i0;
        for (size_t j = 0; j < clen; j++) cor[j] = 0.0;
        for (size_t g0 = FC_DIRECT_GROUP; g0 < mmax; g0 += FC_DIRECT_GROUP) {
            size_t g1 = g0 + FC_DIRECT_GROUP < mmax ? g0 + FC_DIRECT_GROUP : mmax;
            size_t jb = (i0 > g0 ? i0 : g0) - i0; /* first output of lag g0 */
            for (size_t j = jb; j < clen; j++) grp[j] = 0.0;
            lags_into(x, c, g0, g1, grp, i0, i0, i1);
            double *restrict yy = y + i0;
            for (size_t j = jb; j < clen; j++) {
                /* TwoSum: s + e = yy[j] + grp[j] exactly */
                double a = yy[j], b = grp[j];
                double sum = a + b;
                double bb = sum - a;
                double e = (a - (sum - bb)) + (b - bb);
                yy[j] = sum;
                cor[j] += e;
            }
        }
        for (size_t j = 0; j < clen; j++) y[i0 + j] += cor[j];
    }
}

static void direct_accumulate_generic(const double *restrict x, size_t len,
                                      const double *restrict c, size_t K,
                                      double *restrict y, size_t lo, size_t hi)
{
    direct_accumulate_body(x, len, c, K, y, lo, hi);
}

#if FC__DIRECT_AVX2
__attribute__((target("avx2")))
static void direct_accumulate_avx2(const double *restrict x, size_t len,
                                   const double *restrict c, size_t K,
                                   double *restrict y, size_t lo, size_t hi)
{
    direct_accumulate_body(x, len, c, K, y, lo, hi);
}
#endif

/* Outputs lo <= i < hi only (lo a multiple of FC_DIRECT_CHUNK, hi one or
   len): the chunks, hence the bits, are those of the whole range, so
   ranges may be done by different threads. */
static void direct_range(const double *restrict x, size_t len,
                         const double *restrict c, size_t K,
                         double *restrict y, size_t lo, size_t hi)
{
#if FC__DIRECT_AVX2
    if (__builtin_cpu_supports("avx2")) {
        direct_accumulate_avx2(x, len, c, K, y, lo, hi);
        return;
    }
#endif
    direct_accumulate_generic(x, len, c, K, y, lo, hi);
}

static void direct_accumulate(const double *restrict x, size_t len,
                              const double *restrict c, size_t K,
                              double *restrict y)
{
    direct_range(x, len, c, K, y, 0, len);
}

/*
 * The partitioned engine.
 *
 * Lags [0, D) are summed directly. Past them the lag axis is cut into
 * segments [pW, (p+1)W) of a few sizes W = W0, R W0, R^2 W0, ...; size W
 * carries the segments p = p0 .. R p0 - 1, so consecutive sizes tile the
 * lags without gaps (D = p0 W0). Each segment is a uniformly partitioned
 * overlap-save convolution with blocks of W samples and FFTs of size 2W:
 * the spectrum Z_b of the input window [(b-1)W, (b+1)W) is computed once
 * and reused by every segment of its size (a frequency-domain delay line),
 * and output block i is one inverse FFT of sum_p Z_{i-p} C_p.
 *
 * Why segments start at p0 >= 2 blocks (p0 = 1 below): the FFT's rounding
 * error in output block i is at the scale of the largest kernel value of
 * the segment times the window's samples, while those samples reach block
 * i through lags between (p-1)W and (p+2)W. With p >= p0 the kernel changes by at most a
 * factor ((p0+2)/p0)^gamma over that range (gamma the kernel's power-law
 * exponent, estimated from the kernel itself), so each output keeps its
 * error at the scale of its own terms sum_k |c_{n-k} x_k|, as direct
 * summation does, whatever the input. (A square of the plain dyadic split
 * spans lags 1 .. 2s-1 and loses up to ~3 digits after a spike against a
 * fast-decaying Grunwald kernel; the same scheme of doubling partitions is
 * used for zero-latency convolution, Gardner, J. Audio Eng. Soc. 43 (1995).)
 *
 * Segments one block away (p0 = 1): the window of segment p = 1 reaches
 * its block through lags 1 .. 3W-1, the kernel's first lags included, where
 * the power law says nothing; where the kernel itself shows that its
 * values there are no smaller than 1/16 of the segment's (one_block_start:
 * the decaying kernels of the rules), p0 = 1 with R = 8 or 16 (a model of
 * the work chooses) needs fewer sizes, hence fewer FFTs, for the same
 * bound. Otherwise (growing kernels, a near zero among the first lags) the
 * shapes of fc__segment_start.
 */
#define FC_DIRECT_BAND 64
#define FC_MAX_SEGS 32 /* most segments of one size: R p0 - p0 */

typedef struct {
    size_t K;     /* lags in use (trailing zeros trimmed, <= n) */
    size_t D;     /* direct lags [0, D) */
    size_t W0;    /* first block size */
    size_t R;     /* growth of the block size */
    size_t p0;    /* first segment of each size */
    size_t maxW;  /* largest block size in use */
    size_t maxseg;/* most segments of one size */
} part_shape;

/* Array access for fc__segment_start. */
static int array_at(const void *ctx, uint64_t m, double *v)
{
    *v = ((const double *)ctx)[m];
    return FC_OK;
}

/*
 * The power-law exponent of |c| over octaves of lags m0, 2 m0, 4 m0, ...
 * (every octave [m, 2m] with 2m < K, sampled at m, 3m/2 and 2m), and the
 * first segment p0 it calls for: segments start at least p0 block lengths
 * from the outputs they feed, so that the kernel changes by at most a
 * factor of about ((p0+2)/p0)^gamma across the samples one FFT product
 * touches. A zero at a sampled lag gives gamma = 1e9 (the most cautious
 * shape). Shared by the batch engine and the exact stream (stream_exact.c).
 */
int fc__segment_start(fc__kernel_at at, const void *ctx, uint64_t m0,
                      uint64_t K, double *gamma, size_t *p0)
{
    double g = 0.0;
    for (uint64_t m = m0; 2 * m < K; m *= 2) {
        double a, b, a2;
        int st;
        if ((st = at(ctx, m, &a)) != FC_OK ||
            (st = at(ctx, 2 * m, &b)) != FC_OK ||
            (st = at(ctx, m + m / 2, &a2)) != FC_OK)
            return st;
        a = fabs(a);
        b = fabs(b);
        a2 = fabs(a2);
        if (a == 0.0 || b == 0.0 || a2 == 0.0) { g = 1e9; break; }
        double r = fabs(log2(b / a));
        if (r > g) g = r;
        if (m > UINT64_MAX / 4) break;
    }
    /* ((p0+2)/p0)^gamma <= 16: the error stays within ~16 eps of the
       componentwise scale */
    *gamma = g;
    if (g <= 4.0) *p0 = 2;
    else if (g <= 6.8) *p0 = 4;
    else if (g <= 12.4) *p0 = 8;
    else *p0 = 16;
    return FC_OK;
}

/*
 * May segments start one block from their outputs (p0 = 1, growth R = 8
 * or 16, W0 = FC_DIRECT_BAND)? The window of segment p = 1 of size W (lags [W, 2W))
 * reaches its outputs through lags 1 .. 3W - 1 (the window ends where the
 * block starts), where the power law says nothing (the kernel's first
 * values); so it is checked on the kernel itself: for every size W = W0,
 * R W0, ... below K, max |c| over [W, 2W) <= 16 min |c| over [1, 3W)
 * (within the lags in use), the factor the shapes of
 * fc__segment_start allow. The segments p >= 2 of these sizes are those of
 * p0 = 2 (the power-law exponent already <= 4). One pass over the kernel.
 * True for the decaying kernels of the rules (rectangle and trapezoid at
 * orders up to 1, Grunwald up to about 1.5, L1); false for a growing
 * kernel (c_0 the smallest) or one with a near zero among its first lags.
 */
/* The least (most = 0) or largest (most = 1) |c[i]| over a <= i < b (b > a):
   four running values, so that the loop is not one long chain. */
static double abs_extreme(const double *c, size_t a, size_t b, int most)
{
    double r[4];
    size_t i = a;
    for (int l = 0; l < 4; l++) r[l] = fabs(c[a]);
    for (; i + 4 <= b; i += 4)
        for (int l = 0; l < 4; l++) {
            double v = fabs(c[i + (size_t)l]);
            r[l] = most ? (v > r[l] ? v : r[l]) : (v < r[l] ? v : r[l]);
        }
    for (; i < b; i++) {
        double v = fabs(c[i]);
        r[0] = most ? (v > r[0] ? v : r[0]) : (v < r[0] ? v : r[0]);
    }
    double x = most ? (r[0] > r[1] ? r[0] : r[1]) : (r[0] < r[1] ? r[0] : r[1]);
    double y = most ? (r[2] > r[3] ? r[2] : r[3]) : (r[2] < r[3] ? r[2] : r[3]);
    return most ? (x > y ? x : y) : (x < y ? x : y);
}

static int one_block_start(const double *c, size_t K, size_t R)
{
    double lo = INFINITY; /* min |c| over [1, m) */
    size_t m = 1;
    for (size_t W = FC_DIRECT_BAND; W < K; W *= R) {
        size_t e3 = 3 * W < K ? 3 * W : K, e2 = 2 * W < K ? 2 * W : K;
        if (m < e3) {
            double v = abs_extreme(c, m, e3, 0);
            if (v < lo) lo = v;
            m = e3;
        }
        double hi = abs_extreme(c, W, e2, 1);
        if (!(hi <= 16.0 * lo)) return 0;
        if (W > K / R) break;
    }
    return 1;
}

/* A model of the partitioned engine's work for n outputs with first
   segment p0, growth R, first block size W0 and K lags: per block of size
   W, two FFTs of size 2W (about 2W log2(2W) each, common practice
   estimate) and nseg products of W + 1 bins, one product counted as 2.2
   FFT points (the ratio measured here, AVX2). Used only to choose between
   shapes that are all componentwise accurate. */
static double part_cost(size_t n, size_t K, size_t p0, size_t R, size_t W0)
{
    double cost = 0.0;
    for (size_t W = W0; p0 * W < K; W *= R) {
        size_t phi = (K + W - 1) / W, nb = (n + W - 1) / W;
        if (phi > R * p0) phi = R * p0;
        double fft = 2.0 * (double)(2 * W) * log2((double)(2 * W));
        double prod = 2.2 * (double)(phi - p0) * (double)(W + 1);
        cost += (double)(nb > p0 ? nb - p0 : 0) * (fft + prod);
        if (W > K / R) break;
    }
    return cost;
}

static part_shape part_shape_of(size_t n, const double *c, size_t K)
{
    part_shape sh;
    double g;
    while (K > 1 && c[K - 1] == 0.0) K--; /* trailing zeros cost nothing */
    if (K > n) K = n;
    sh.K = K;
    (void)fc__segment_start(array_at, c, 8, K, &g, &sh.p0); /* cannot fail */
    sh.R = sh.p0 == 2 ? 8 : sh.p0 == 4 ? 4 : 2;
    if (sh.p0 == 2) {
        /* segments p = 1 .. R - 1 of each size where the kernel allows:
           R = 8 or 16, whichever the model finds cheaper for this n */
        double c2 = part_cost(n, K, 2, 8, FC_DIRECT_BAND / 2);
        double c8 = part_cost(n, K, 1, 8, FC_DIRECT_BAND);
        double c16 = part_cost(n, K, 1, 16, FC_DIRECT_BAND);
        size_t Ra = c8 <= c16 ? 8 : 16, Rb = 24 - Ra; /* cheaper first */
        double ca = Ra == 8 ? c8 : c16, cb = Ra == 8 ? c16 : c8;
        if (ca < c2 && one_block_start(c, K, Ra)) {
            sh.p0 = 1;
            sh.R = Ra;
        } else if (cb < c2 && one_block_start(c, K, Rb)) {
            sh.p0 = 1;
            sh.R = Rb;
        }
    }
    sh.W0 = FC_DIRECT_BAND / sh.p0;
    sh.D = sh.p0 * sh.W0;
    sh.maxW = 0;
    sh.maxseg = 0;
    for (size_t W = sh.W0; sh.p0 * W < K; W *= sh.R) {
        size_t phi = (K + W - 1) / W;
        if (phi > sh.R * sh.p0) phi = sh.R * sh.p0;
        sh.maxW = W;
        if (phi - sh.p0 > sh.maxseg) sh.maxseg = phi - sh.p0;
    }
    return sh;
}

/*
 * The sizes of the partitioned engine, where their kernel spectra lie in
 * the context's work space, and one worker's area (the largest over the
 * sizes of: window spectra ring of nseg + G - 1 slots, window, G sums,
 * output; see part_blocks). The kernel spectra (shared, read
 * only while the threads run) come first in the calling thread's work
 * space, its area after them; a helper's area is its whole work space.
 */
#define FC_MAX_SIZES 32
#define FC_GROUP_MAX 8   /* frames of fc__spec_dot_frames at most */
#define FC_GROUP_SEGS 16 /* segments it takes at most (FC__SDF_B) */
typedef struct {
    part_shape sh;
    size_t nsz;                 /* sizes W[0] = W0, R W0, ..., maxW */
    size_t W[FC_MAX_SIZES];
    size_t nseg[FC_MAX_SIZES];  /* segments of each size */
    size_t kofs[FC_MAX_SIZES];  /* kernel spectra of size z at work + kofs[z] */
    size_t G[FC_MAX_SIZES];     /* output blocks of size z summed at once */
    size_t ktotal;              /* doubles of all kernel spectra */
    size_t area;                /* doubles of one worker's area */
} part_plan;

static int part_prep_worker(fc_context *wctx, const void *arg)
{
    const part_plan *pp = arg;
    for (size_t z = 0; z < pp->nsz; z++) {
        int st = ensure_plan(wctx, 2 * pp->W[z]);
        if (st != FC_OK) return st;
    }
    return ensure_work(wctx, pp->area);
}

static int part_prepare(fc_context *ctx, size_t n, const double *c, size_t K,
                        part_plan *pp)
{
    const part_shape *sh = &pp->sh;
    pp->sh = part_shape_of(n, c, K);
    pp->nsz = 0;
    pp->ktotal = 0;
    pp->area = 0;
    if (sh->maxW == 0) return FC_OK;
    for (size_t W = sh->W0; W <= sh->maxW; W *= sh->R) {
        size_t z = pp->nsz, phi = (sh->K + W - 1) / W, t;
        if (W > ((size_t)1 << (FC_MAX_LOG2 - 1)) || z >= FC_MAX_SIZES)
            return FC_ERR_SIZE;
        if (phi > sh->R * sh->p0) phi = sh->R * sh->p0;
        pp->W[z] = W;
        pp->nseg[z] = phi - sh->p0;
        pp->kofs[z] = pp->ktotal;
        /* blocks summed G at once (each kernel spectrum read once for G
           blocks): up to FC_GROUP_MAX, at most the segments' count (the
           window spectra kept grow by G - 1) */
        pp->G[z] = pp->nseg[z] < FC_GROUP_MAX ? pp->nseg[z] : FC_GROUP_MAX;
        if (pp->nseg[z] > FC_GROUP_SEGS || pp->G[z] < 2) pp->G[z] = 1;
        /* ring nseg + G - 1, window, G sums, output */
        size_t a;
        if (fc__mul_size(pp->nseg[z] + 2 * pp->G[z] + 1, 2 * W + 2, &a) != FC_OK ||
            fc__mul_size(pp->nseg[z], 2 * W + 2, &t) != FC_OK ||
            fc__add_size(pp->ktotal, t, &pp->ktotal) != FC_OK)
            return FC_ERR_SIZE;
        if (a > pp->area) pp->area = a;
        pp->nsz++;
    }
    size_t total;
    if (fc__add_size(pp->area, 16, &pp->area) != FC_OK ||
        fc__add_size(pp->ktotal, pp->area, &total) != FC_OK)
        return FC_ERR_SIZE;
    for (size_t z = 0; z < pp->nsz; z++) {
        int st = ensure_plan(ctx, 2 * pp->W[z]);
        if (st != FC_OK) return st;
    }
    return ensure_work(ctx, total);
}

/* The spectrum of the window [(b-1)W, (b+1)W) of x (zero outside [0, n))
   into spec: straight from x when the window lies inside it, else through
   buf (the same samples, hence the same bits). */
static void window_spectrum(fc_fft_plan *plan, const double *x, size_t n,
                            size_t b, size_t W, double *buf, double *spec)
{
    if (b > 0 && (b + 1) * W <= n) {
        fc__fft_forward(plan, x + (b - 1) * W, spec);
        return;
    }
    size_t lo = b > 0 ? (b - 1) * W : 0; /* first sample */
    size_t off = b > 0 ? 0 : W;          /* where it goes */
    size_t avail = lo < n ? n - lo : 0;
    size_t cnt = 2 * W - off < avail ? 2 * W - off : avail;
    memset(buf, 0, off * sizeof(double));
    memcpy(buf + off, x + lo, cnt * sizeof(double));
    memset(buf + off + cnt, 0, (2 * W - off - cnt) * sizeof(double));
    fc__fft_forward(plan, buf, spec);
}

/*
 * Output blocks ia <= i < ib (ia >= p0) of size z of one signal: block i
 * is one inverse FFT of sum_p Z_{i-p} C_p, added to outputs [iW, iW+W).
 * The window spectra Z_b are computed once each and kept in a ring of
 * nseg + G - 1; G blocks at a time are summed by fc__spec_dot_frames
 * (..._lim near the start, where a block has fewer windows than segments):
 * each kernel spectrum read once for the G blocks, every sum bit for bit
 * that of fc__spec_dot over the same terms. A range that starts
 * past the first block first computes the windows its first block needs.
 * Each Z_b and each block's sum is computed the same way whatever the
 * range, so ranges may be done by different threads with the bits of one
 * pass.
 */
static void part_blocks(const part_plan *pp, size_t z, const double *kspec,
                        fc_fft_plan *plan, const double *xs, size_t n,
                        double *ys, size_t ia, size_t ib, double *area)
{
    const size_t W = pp->W[z], n2 = 2 * W, sp = n2 + 2, p0 = pp->sh.p0;
    const size_t nseg = pp->nseg[z], G = pp->G[z], L = nseg + G - 1;
    double *ring = area;                    /* L window spectra */
    double *buf = ring + L * sp;            /* 2W */
    double *acc = buf + sp;                 /* G sums of 2W+2 */
    double *out = acc + G * sp;             /* 2W */
    const double *zp[FC_MAX_SEGS + FC_GROUP_MAX], *cp[FC_MAX_SEGS];
    double *ap[FC_GROUP_MAX];
    if (ia >= ib) return;
    for (size_t b = ia - p0 > nseg - 1 ? ia - p0 - (nseg - 1) : 0;
         b < ia - p0; b++)
        window_spectrum(plan, xs, n, b, W, buf, ring + (b % L) * sp);
    for (size_t j = 0; j < nseg; j++) cp[j] = kspec + j * sp;
    for (size_t g = 0; g < G; g++) ap[g] = acc + g * sp;
    for (size_t i = ia; i < ib;) {
        /* the newest window needed: b = i - p0, samples [(b-1)W, (b+1)W) */
        size_t b = i - p0;
        size_t ng = G > 1 ? (ib - i < G ? ib - i : G) : 1;
        for (size_t g = 0; g < ng; g++)
            window_spectrum(plan, xs, n, b + g, W, buf, ring + ((b + g) % L) * sp);
        if (ng > 1) {
            /* zp[t]: window b - (nseg - 1) + t, t < nseg + ng - 1 (none
               before window 0: near the start block b + g sums its
               b + g + 1 windows only, lim[g]) */
            size_t lim[FC_GROUP_MAX];
            for (size_t t = 0; t < nseg + ng - 1; t++)
                zp[t] = b + t + 1 >= nseg ? ring + ((b + t + 1 - nseg) % L) * sp
                                          : NULL;
            if (b + 1 >= nseg) {
                fc__spec_dot_frames(plan, zp, cp, nseg, ng, ap);
            } else {
                for (size_t g = 0; g < ng; g++)
                    lim[g] = b + g + 1 < nseg ? b + g + 1 : nseg;
                fc__spec_dot_frames_lim(plan, zp, cp, nseg, lim, ng, ap);
            }
        } else {
            /* Y_i = sum_p Z_{i-p} C_p over the windows that exist */
            size_t jmax = b + 1 < nseg ? b + 1 : nseg;
            for (size_t j = 0; j < jmax; j++) zp[j] = ring + ((b - j) % L) * sp;
            fc__spec_dot(plan, zp, cp, jmax, acc);
        }
        for (size_t g = 0; g < ng; g++, i++) {
            fc__fft_inverse(plan, ap[g], out);
            size_t r0 = i * W;
            size_t cnt = n - r0 < W ? n - r0 : W;
            for (size_t t = 0; t < cnt; t++) ys[r0 + t] += out[W + t];
        }
    }
}

/*
 * A threaded call of the partitioned engine. Every output is the direct
 * band's sum, then size W0's block added, then size R W0's, ... in that
 * order whatever the split, so the bits never depend on the threads:
 *   whole signals: task s does signal s completely (enough signals);
 *   phases: with fewer signals than threads (or a count that would leave
 *     threads idle) the direct band, then each size in turn, is split into
 *     q ranges per signal (output ranges of whole direct chunks; runs of
 *     blocks of about equal cost), the phases one after the other.
 */
typedef struct {
    fc_context *ctx;
    const part_plan *pp;
    const double *x, *c;
    double *y;
    size_t n, Kd, q;
    size_t phase;                      /* 0: direct band; z + 1: size z */
    size_t bnd[FC_THREADS_MAX + 1];    /* range starts of the phase */
} part_job;

static double *worker_area(const part_job *J, size_t w)
{
    return w == 0 ? J->ctx->work + J->pp->ktotal : J->ctx->help[w - 1]->work;
}

static void part_signal_task(void *arg, size_t sg, size_t w)
{
    const part_job *J = arg;
    const part_plan *pp = J->pp;
    fc_context *wc = worker_ctx(J->ctx, w);
    const double *xs = J->x + sg * J->n;
    double *ys = J->y + sg * J->n;
    memset(ys, 0, J->n * sizeof(double));
    direct_accumulate(xs, J->n, J->c, J->Kd, ys);
    for (size_t z = 0; z < pp->nsz; z++) {
        size_t nb = (J->n + pp->W[z] - 1) / pp->W[z];
        part_blocks(pp, z, J->ctx->work + pp->kofs[z], plan_of(wc, 2 * pp->W[z]),
                    xs, J->n, ys, pp->sh.p0, nb, worker_area(J, w));
    }
}

static void part_phase_task(void *arg, size_t k, size_t w)
{
    const part_job *J = arg;
    const part_plan *pp = J->pp;
    size_t sg = k / J->q, r = k % J->q;
    const double *xs = J->x + sg * J->n;
    double *ys = J->y + sg * J->n;
    size_t lo = J->bnd[r], hi = J->bnd[r + 1];
    if (J->phase == 0) {
        if (hi > J->n) hi = J->n;
        if (lo >= hi) return;
        memset(ys + lo, 0, (hi - lo) * sizeof(double));
        direct_range(xs, J->n, J->c, J->Kd, ys, lo, hi);
        return;
    }
    size_t z = J->phase - 1;
    part_blocks(pp, z, J->ctx->work + pp->kofs[z],
                plan_of(worker_ctx(J->ctx, w), 2 * pp->W[z]), xs, J->n, ys,
                lo, hi, worker_area(J, w));
}

/* Kernel segment k (counted over every size) into its spectrum: one FFT
   each, the same whichever thread does it; the worker's area as scratch. */
static void kspec_task(void *arg, size_t k, size_t w)
{
    const part_job *J = arg;
    const part_plan *pp = J->pp;
    const size_t K = pp->sh.K, p0 = pp->sh.p0;
    size_t z = 0;
    while (k >= pp->nseg[z]) k -= pp->nseg[z++];
    const size_t W = pp->W[z], n2 = 2 * W, sp = n2 + 2;
    const double scale = 1.0 / (double)n2;
    double *buf = worker_area(J, w);
    size_t lag0 = (p0 + k) * W;
    for (size_t m = 0; m < W; m++)
        buf[m] = lag0 + m < K ? J->c[lag0 + m] * scale : 0.0;
    memset(buf + W, 0, W * sizeof(double));
    fc__fft_forward(plan_of(worker_ctx(J->ctx, w), n2), buf,
                    J->ctx->work + pp->kofs[z] + k * sp);
}

static size_t gcd_size(size_t a, size_t b)
{
    while (b) { size_t t = a % b; a = b; b = t; }
    return a;
}

/* Partitioned engine; every allocation of the calling thread already made
   by part_prepare. */
static void part_run(fc_context *ctx, const part_plan *pp, const double *x,
                     size_t nsig, size_t n, const double *c, double *y)
{
    const part_shape *sh = &pp->sh;
    part_job J;
    size_t T = ctx->threads;
    J.ctx = ctx;
    J.pp = pp;
    J.x = x;
    J.c = c;
    J.y = y;
    J.n = n;
    J.Kd = sh->K < sh->D ? sh->K : sh->D;
    if (T > 1 && nsig * n < FC_PAR_MIN_SAMPLES) T = 1;
    /* at least about 2^13 samples a thread: no helper (plans, work space)
       that could have nothing to do */
    if (T > 1 && T > nsig * n / 8192) T = nsig * n / 8192;
    /* whole signals when they keep the threads busy, or when the call is
       too small to split */
    int whole = T == 1 || nsig % T == 0 || nsig >= 2 * T;
    if (!whole && nsig * n < FC_PAR_MIN_SPLIT) {
        if (T > nsig) T = nsig;
        whole = 1;
    }
    if (T > 1) T = workers_ready(ctx, T, part_prep_worker, pp);
    /* the kernel spectra first (shared, read only afterwards) */
    size_t nk = 0;
    for (size_t z = 0; z < pp->nsz; z++) nk += pp->nseg[z];
    fc__run_tasks(nk, T, kspec_task, &J);
    if (whole || T == 1 || nsig % T == 0 || nsig >= 2 * T) {
        fc__run_tasks(nsig, T, part_signal_task, &J);
        return;
    }
    /* q ranges per signal: at least q0 (nsig q0 a multiple of T), up to
       4 T where the ranges stay long, so that a thread held up (a busy
       machine) leaves more of the ranges to the others */
    const size_t q0 = T / gcd_size(nsig % T, T);
    size_t qmax = 4 * T > FC_THREADS_MAX ? FC_THREADS_MAX : 4 * T;
    if (qmax < q0) qmax = q0;
    /* the direct band: whole chunks of outputs */
    size_t nch = (n + FC_DIRECT_CHUNK - 1) / FC_DIRECT_CHUNK;
    J.q = qmax < nch ? qmax : nch;
    if (J.q < q0) J.q = q0;
    for (size_t r = 0; r <= J.q; r++) J.bnd[r] = r * nch / J.q * FC_DIRECT_CHUNK;
    J.phase = 0;
    fc__run_tasks(nsig * J.q, T, part_phase_task, &J);
    for (size_t z = 0; z < pp->nsz; z++) {
        /* runs of blocks p0 .. nb-1 of about equal cost: 4 (two FFTs and
           the window) + the segments summed (common practice estimate) */
        size_t nb = (n + pp->W[z] - 1) / pp->W[z], p0 = sh->p0;
        double total = 0.0, acc = 0.0;
        /* runs of at least 2 nseg blocks: the windows a run computes
           first (nseg - 1 FFTs) stay a small part of its work */
        J.q = (nb > p0 ? nb - p0 : 0) / (2 * pp->nseg[z]);
        if (J.q > qmax) J.q = qmax;
        if (J.q < q0) J.q = q0;
        for (size_t i = p0; i < nb; i++)
            total += 4.0 + (double)(i - p0 + 1 < pp->nseg[z] ? i - p0 + 1 : pp->nseg[z]);
        size_t r = 1;
        J.bnd[0] = p0 < nb ? p0 : nb;
        for (size_t i = p0; i < nb && r < J.q; i++) {
            acc += 4.0 + (double)(i - p0 + 1 < pp->nseg[z] ? i - p0 + 1 : pp->nseg[z]);
            while (r < J.q && acc >= total * (double)r / (double)J.q) J.bnd[r++] = i + 1;
        }
        while (r <= J.q) J.bnd[r++] = nb > p0 ? nb : J.bnd[0];
        J.phase = z + 1;
        fc__run_tasks(nsig * J.q, T, part_phase_task, &J);
    }
}

/* One FFT convolution of the whole record. */
static int fft_prep_worker(fc_context *wctx, const void *arg)
{
    size_t P = *(const size_t *)arg;
    int st = ensure_plan(wctx, P);
    if (st != FC_OK) return st;
    return ensure_work(wctx, 2 * P + 8);
}

static int fft_prepare(fc_context *ctx, size_t n, size_t K, size_t *P)
{
    size_t need = n + (K < n ? K : n) - 1;
    size_t p = 2;
    while (p < need) {
        if (p > ((size_t)1 << (FC_MAX_LOG2 - 1))) return FC_ERR_SIZE;
        p *= 2;
    }
    *P = p;
    int st = ensure_plan(ctx, p);
    if (st != FC_OK) return st;
    return ensure_work(ctx, 3 * p + 8);
}

typedef struct {
    fc_context *ctx;
    size_t P, n;
    const double *x, *spec;
    double *y;
} fft_job;

/* Signal sg: the calling thread's buffers follow the kernel spectrum in
   its work space, a helper's are its work space. */
static void fft_task(void *arg, size_t sg, size_t w)
{
    const fft_job *J = arg;
    const size_t P = J->P, n = J->n;
    fc_context *wc = worker_ctx(J->ctx, w);
    fc_fft_plan *p = plan_of(wc, P);
    double *buf = w == 0 ? J->ctx->work + P + 2 : wc->work; /* P */
    double *xs = buf + P;                                    /* P + 2 */
    memcpy(buf, J->x + sg * n, n * sizeof(double));
    memset(buf + n, 0, (P - n) * sizeof(double));
    fc__fft_forward(p, buf, xs);
    fc__spec_mul(p, xs, J->spec, xs);
    fc__fft_inverse(p, xs, buf);
    memcpy(J->y + sg * n, buf, n * sizeof(double));
}

static void fft_run(fc_context *ctx, size_t P, const double *x, size_t nsig,
                    size_t n, const double *c, size_t K, double *y)
{
    fc_fft_plan *p = plan_of(ctx, P);
    double *spec = ctx->work;           /* P + 2 */
    double *buf = spec + P + 2;         /* P */
    size_t Ku = K < n ? K : n;
    double scale = 1.0 / (double)P;
    for (size_t m = 0; m < P; m++) buf[m] = m < Ku ? c[m] * scale : 0.0;
    fc__fft_forward(p, buf, spec);
    fft_job J = {ctx, P, n, x, spec, y};
    size_t T = ctx->threads < nsig ? ctx->threads : nsig;
    if (T > 1 && nsig * n < FC_PAR_MIN_SAMPLES) T = 1;
    if (T > 1) T = workers_ready(ctx, T, fft_prep_worker, &P);
    fc__run_tasks(nsig, T, fft_task, &J);
}

/* The direct engine by ranges of whole chunks of outputs. */
typedef struct {
    const double *x, *c;
    double *y;
    size_t n, K, q, nch;
} direct_job;

static void direct_task(void *arg, size_t k, size_t w)
{
    const direct_job *J = arg;
    size_t sg = k / J->q, r = k % J->q;
    size_t lo = r * J->nch / J->q * FC_DIRECT_CHUNK;
    size_t hi = (r + 1) * J->nch / J->q * FC_DIRECT_CHUNK;
    (void)w;
    if (hi > J->n) hi = J->n;
    if (lo >= hi) return;
    memset(J->y + sg * J->n + lo, 0, (hi - lo) * sizeof(double));
    direct_range(J->x + sg * J->n, J->n, J->c, J->K, J->y + sg * J->n, lo, hi);
}

static void direct_run(fc_context *ctx, const double *x, size_t nsig,
                       size_t n, const double *c, size_t K, double *y)
{
    direct_job J = {x, c, y, n, K, 1, (n + FC_DIRECT_CHUNK - 1) / FC_DIRECT_CHUNK};
    size_t T = ctx != NULL ? ctx->threads : 1;
    /* about 2^22 multiply-adds or more: worth the threads */
    if (T > 1 && (double)nsig * (double)n * (double)(K < 64 ? 64 : K) < 4194304.0)
        T = 1;
    if (T > 1 && nsig < 4 * T) {
        /* outputs late in a signal have more lags: ranges of 4 per thread */
        J.q = (4 * T + nsig - 1) / nsig;
        if (J.q > J.nch) J.q = J.nch;
        if (J.q > FC_THREADS_MAX) J.q = FC_THREADS_MAX;
    }
    fc__run_tasks(nsig * J.q, T, direct_task, &J);
}

/* Choice of engine by size: direct while it costs less than the FFT work. */
static int choose_engine(size_t n, size_t K)
{
    size_t Ku = K < n ? K : n;
    if (Ku <= 2 * FC_DIRECT_BAND || n <= 2 * FC_DIRECT_BAND) return FC_ENGINE_DIRECT;
    return FC_ENGINE_BLOCKED;
}

/* The lagged sum once every argument has been checked. */
static int lagsum_checked(fc_context *ctx, const double *x, size_t nsig,
                          size_t n, const double *c, size_t K, int engine,
                          double *y)
{
    if (engine == FC_ENGINE_AUTO) engine = choose_engine(n, K);
    if (K > n) K = n;
    if (engine == FC_ENGINE_DIRECT) {
        direct_run(ctx, x, nsig, n, c, K, y);
        return FC_OK;
    }
    if (engine == FC_ENGINE_BLOCKED) {
        part_plan plan;
        int st = part_prepare(ctx, n, c, K, &plan);
        if (st != FC_OK) return st;
        part_run(ctx, &plan, x, nsig, n, c, y);
        return FC_OK;
    }
    size_t P;
    int st = fft_prepare(ctx, n, K, &P);
    if (st != FC_OK) return st;
    fft_run(ctx, P, x, nsig, n, c, K, y);
    return FC_OK;
}

static int check_engine(int engine)
{
    return (engine >= FC_ENGINE_AUTO && engine <= FC_ENGINE_FFT) ? FC_OK
                                                                 : FC_ERR_ARG;
}

/* 1 if [a, a+na) and [b, b+nb) (doubles) share an element. */
static int overlaps(const double *a, size_t na, const double *b, size_t nb)
{
    uintptr_t pa = (uintptr_t)a, pb = (uintptr_t)b;
    return pa < pb + nb * sizeof(double) && pb < pa + na * sizeof(double);
}


static double sum_abs(const double *v, size_t n)
{
    double s0 = 0.0, s1 = 0.0, s2 = 0.0, s3 = 0.0;
    size_t i = 0;
    for (; i + 4 <= n; i += 4) {
        s0 += fabs(v[i]);
        s1 += fabs(v[i + 1]);
        s2 += fabs(v[i + 2]);
        s3 += fabs(v[i + 3]);
    }
    for (; i < n; i++) s0 += fabs(v[i]);
    return (s0 + s1) + (s2 + s3);
}

/*
 * Scaling by powers of two (exact in binary floating point, except for
 * gradual underflow). Every engine runs on samples of moderate size (as
 * they are when every signal's largest magnitude is ordinary, else each
 * signal scaled to a largest magnitude in [1/2, 1)) and on a kernel of
 * moderate size (the unit kernel of a rule, or the user's kernel, scaled
 * the same way when needed), so no partial sum, FFT value or difference
 * can overflow; the outputs z of signal s are then multiplied by the factor
 * M 2^T[s] that was taken out (one multiplication per output when that is
 * a normal double and no output can overflow; else checked first, so that
 * FC_ERR_RANGE leaves y untouched).
 */

/* The exponent e of v = f 2^e, 0.5 <= f < 1 (v > 0 finite). */
static int exponent_of(double v)
{
    int e;
    (void)frexp(v, &e);
    return e;
}

/* out[i] = x[i] 2^-e, exact unless the result is subnormal (then one
   rounding, far below the scale of the largest sample). */
static void scale_copy(const double *x, size_t n, int e, double *out)
{
    if (e >= -1021 && e <= 1021) {
        const double f = ldexp(1.0, -e);
        for (size_t i = 0; i < n; i++) out[i] = x[i] * f;
    } else {
        const double f1 = ldexp(1.0, -e / 2), f2 = ldexp(1.0, -e - (-e / 2));
        for (size_t i = 0; i < n; i++) out[i] = (x[i] * f1) * f2;
    }
}

/*
 * May z (every |z_n| <= zb) be multiplied by M 2^T in place without a
 * check? Yes when zb M 2^T < 2^1023 with a factor two to spare.
 */
static int scale_is_safe(double zb, double M, long T)
{
    if (!(zb > 0.0)) return 1;
    return (long)exponent_of(zb * M) + T <= 1022;
}

/* y[i] = z[i] M 2^T (z may be y): one multiplication when M 2^T is a
   normal double and the caller knows nothing can overflow (fast), else
   fc__scale_value per value (as scale_check). */
static void scale_out(const double *z, size_t n, double M, long T, int fast,
                      double *y)
{
    if (fast && M == 1.0 && T == 0) {
        if (z != y) memcpy(y, z, n * sizeof(double));
        return;
    }
    if (fast && T >= -1020 && T <= 1023) {
        const double F = ldexp(M, (int)T);
        for (size_t i = 0; i < n; i++) y[i] = z[i] * F;
    } else {
        for (size_t i = 0; i < n; i++) y[i] = fc__scale_value(z[i], M, T);
    }
}

/* FC_OK if every z[i] M 2^T is finite, else FC_ERR_RANGE. */
static int scale_check(const double *z, size_t n, double M, long T)
{
    for (size_t i = 0; i < n; i++)
        if (!isfinite(fc__scale_value(z[i], M, T))) return FC_ERR_RANGE;
    return FC_OK;
}

/* The starting corrections of a rule (rules.c) for n outputs: column k
   (d->corr[k]) has the weights w[k*n .. k*n+n) and, for signal s, the
   (scaled) sample x_j in xj[s*ncorr + k]; zero_first: y_0 = 0 exactly. */
typedef struct {
    const fc__rule_desc *d;
    const double *w, *xj;
    int zero_first;
} lag_corr;

/*
 * The scaled lagged sum: signal s of y is (M 2^T[s]) lagsum(in_s, c), in
 * and c already scaled; straight into y when the caller found that the
 * scaling cannot overflow (safe), else through a temporary that is checked
 * first (FC_ERR_RANGE, y untouched). corr (may be NULL): z_n += w_k[n] x_j
 * for every column (j, k) and n >= j, in the table's order, before
 * scaling, and y_0 = 0 exactly when the rule says so (trapezoid).
 */
static int lagsum_scaled(fc_context *ctx, const double *in, size_t nsig,
                         size_t n, const double *c, size_t K, int engine,
                         const lag_corr *corr, double M, const long *T,
                         int safe, double *y)
{
    size_t total = nsig * n;
    double *z = y, *tmp = NULL;
    if (!safe) {
        tmp = malloc(total * sizeof(double));
        if (tmp == NULL) return FC_ERR_NOMEM;
        z = tmp;
    }
    int st = lagsum_checked(ctx, in, nsig, n, c, K, engine, z);
    if (st == FC_OK && corr != NULL) {
        const size_t nc = corr->d->ncorr;
        for (size_t sg = 0; sg < nsig; sg++) {
            double *zs = z + sg * n;
            for (size_t k = 0; k < nc; k++) {
                const double xj = corr->xj[sg * nc + k];
                const double *w = corr->w + k * n;
                for (size_t i = (size_t)corr->d->corr[k].column; i < n; i++)
                    zs[i] += w[i] * xj;
            }
            if (corr->zero_first)
                zs[0] = 0.0; /* exactly, whatever the rounding above */
        }
    }
    for (size_t sg = 0; st == FC_OK && !safe && sg < nsig; sg++)
        st = scale_check(z + sg * n, n, M, T[sg]);
    if (st == FC_OK)
        for (size_t sg = 0; sg < nsig; sg++)
            scale_out(z + sg * n, n, M, T[sg], safe, y + sg * n);
    free(tmp);
    return st;
}

/*
 * The largest magnitude xm[s] of each signal and its exponent ex[s]
 * (xm = f 2^ex, 0.5 <= f < 1; ex = 0 for a signal of zeros).
 */
static void signal_maxima(const double *x, size_t nsig, size_t n, long *ex,
                          double *xm)
{
    for (size_t sg = 0; sg < nsig; sg++) {
        double m = fc__max_abs(x + sg * n, n);
        xm[sg] = m;
        ex[sg] = m > 0.0 ? exponent_of(m) : 0;
    }
}

int fc_lagged_sum(fc_context *ctx, const double *x, size_t nsig, size_t n,
                  const double *kernel, size_t klen, int engine, double *y)
{
    size_t total;
    if (fc__mul_size(nsig, n, &total) != FC_OK) return FC_ERR_SIZE;
    if (total > ((size_t)-1) / sizeof(double) / 2) return FC_ERR_SIZE;
    if (kernel == NULL) return FC_ERR_NULL;
    if (klen == 0) return FC_ERR_KERNEL;
    if (check_engine(engine) != FC_OK) return FC_ERR_ARG;
    if (total == 0) return FC_OK;
    if (x == NULL || y == NULL) return FC_ERR_NULL;
    if (klen > ((size_t)-1) / sizeof(double)) return FC_ERR_SIZE;
    if (overlaps(x, total, y, total) || overlaps(kernel, klen, y, total))
        return FC_ERR_ARG;
    if (fc__check_finite(kernel, klen) != FC_OK) return FC_ERR_KERNEL;
    if (fc__check_finite(x, total) != FC_OK) return FC_ERR_NONFINITE;
    size_t K = klen < n ? klen : n;
    double cmax = fc__max_abs(kernel, K);
    if (cmax == 0.0) {
        memset(y, 0, total * sizeof(double));
        return FC_OK;
    }
    int ec = exponent_of(cmax);
    size_t need;
    if (fc__mul_size(nsig, sizeof(long) + sizeof(double), &need) != FC_OK)
        return FC_ERR_SIZE;
    void *meta = malloc(need);
    if (meta == NULL) return FC_ERR_NOMEM;
    long *T = meta;
    double *xm = (double *)(T + nsig);
    /* Ordinary magnitudes are used as they are (no copy): with both
       largest values within 2^+-400 nothing can overflow on the way
       (partial sums and FFT values stay below 2^900), and with their
       product above 2^-30 underflow costs no more than the documented
       1e-290 times that product. Otherwise each signal is scaled to a
       largest magnitude in [1/2, 1), and so is the kernel. */
    signal_maxima(x, nsig, n, T, xm);
    int scaled = ec < -400 || ec > 400;
    for (size_t sg = 0; sg < nsig; sg++)
        if (xm[sg] > 0.0 && (T[sg] < -400 || T[sg] > 400 || T[sg] + ec < -30))
            scaled = 1;
    if (!scaled) {
        ec = 0;
        for (size_t sg = 0; sg < nsig; sg++) T[sg] = 0;
    }
    double *mem = NULL;
    const double *xs = x, *cs = kernel;
    if (scaled) {
        if (fc__add_size(total, K, &need) != FC_OK) {
            free(meta);
            return FC_ERR_SIZE;
        }
        mem = malloc(need * sizeof(double));
        if (mem == NULL) {
            free(meta);
            return FC_ERR_NOMEM;
        }
        for (size_t sg = 0; sg < nsig; sg++)
            scale_copy(x + sg * n, n, (int)T[sg], mem + sg * n);
        scale_copy(kernel, K, ec, mem + total);
        xs = mem;
        cs = mem + total;
    }
    /* |z_n| <= sum|cs| max|xs| (1 + rounding), for each signal */
    double csum = sum_abs(cs, K) * (1.0 + 1e-6);
    int safe = 1;
    for (size_t sg = 0; sg < nsig; sg++) {
        double xsm = ldexp(xm[sg], -(int)T[sg]); /* max of the signal used */
        T[sg] += ec;
        if (!scale_is_safe(csum * xsm, 1.0, T[sg])) safe = 0;
    }
    fc_context *own = NULL;
    int st = FC_OK;
    if (ctx == NULL) {
        st = fc_context_create(&own);
        ctx = own;
    }
    if (st == FC_OK)
        st = lagsum_scaled(ctx, xs, nsig, n, cs, K, engine, NULL, 1.0, T,
                           safe, y);
    fc_context_free(own);
    free(mem);
    free(meta);
    return st;
}

int fc_apply(fc_context *ctx, int rule, double order, double step,
             const double *x, size_t nsig, size_t n, int engine, double *y)
{
    int st = fc__check_rule(rule, order, step);
    if (st != FC_OK) return st;
    if (check_engine(engine) != FC_OK) return FC_ERR_ARG;
    size_t total;
    if (fc__mul_size(nsig, n, &total) != FC_OK) return FC_ERR_SIZE;
    if (total > ((size_t)-1) / sizeof(double) / 4) return FC_ERR_SIZE;
    if (total == 0) return FC_OK;
    if (x == NULL || y == NULL) return FC_ERR_NULL;
    if (overlaps(x, total, y, total)) return FC_ERR_ARG;
    if (fc__check_finite(x, total) != FC_OK) return FC_ERR_NONFINITE;

    const fc__rule_desc *d = fc__rule(rule);
    int diffs = d->uses_differences;
    const size_t nc = d->ncorr;
    size_t need;
    if (fc__mul_size(nsig, sizeof(long) + sizeof(double), &need) != FC_OK)
        return FC_ERR_SIZE;
    void *meta = malloc(need);
    if (meta == NULL) return FC_ERR_NOMEM;
    long *T = meta;
    double *xm = (double *)(T + nsig);
    /* Samples of ordinary magnitude (every signal's largest within
       2^-30 .. 2^400, the unit kernels being between about 2^-700 and
       2^600) are used as they are: nothing can overflow on the way (below
       2^900) and underflow costs no more than documented. Otherwise each
       signal is scaled to a largest magnitude in [1/2, 1). */
    signal_maxima(x, nsig, n, T, xm);
    int scaled = 0;
    for (size_t sg = 0; sg < nsig; sg++)
        if (xm[sg] > 0.0 && (T[sg] < -30 || T[sg] > 400)) scaled = 1;
    if (!scaled)
        for (size_t sg = 0; sg < nsig; sg++) T[sg] = 0;
    /* unit kernel n, unit corrections nc*n, the samples x_j of the
       columns nsig*nc, scaled samples or their differences nsig*n (when
       needed); nc <= FC__CORR_MAX */
    size_t extra = 0, t1, t2;
    if (fc__mul_size(nc + 1, n, &t1) || fc__mul_size(nsig, nc, &t2) ||
        fc__add_size(t1, t2, &extra) ||
        fc__add_size(extra, scaled || diffs ? total : 0, &extra) ||
        extra > ((size_t)-1) / sizeof(double)) {
        free(meta);
        return FC_ERR_SIZE;
    }
    double *mem = malloc(extra * sizeof(double));
    if (mem == NULL) {
        free(meta);
        return FC_ERR_NOMEM;
    }
    double *c = mem;
    double *cr = c + n;
    double *xj = cr + nc * n;
    double *u = xj + nsig * nc;

    fc_context *own = NULL;
    if (ctx == NULL) {
        st = fc_context_create(&own);
        if (st != FC_OK) goto done;
        ctx = own;
    }
    long double Ml;
    long E;
    fc__unit_kernel(rule, order, step, 0, n, c, &Ml, &E);
    for (size_t k = 0; k < nc; k++)
        fc__unit_correction(rule, k, order, 0, n, cr + k * n);
    /* x_j of each column, scaled as its signal (not differenced) */
    for (size_t sg = 0; sg < nsig; sg++)
        for (size_t k = 0; k < nc; k++) {
            uint64_t j = d->corr[k].column;
            double v = j < n ? x[sg * n + (size_t)j] : 0.0;
            if (scaled) scale_copy(&v, 1, (int)T[sg], &v);
            xj[sg * nc + k] = v;
        }
    /* each signal scaled by 2^-ex; for L1 the differences, taken after
       scaling (so that they cannot overflow) */
    const double *in = x;
    if (scaled || diffs) {
        for (size_t sg = 0; sg < nsig; sg++) {
            const double *xs = x + sg * n;
            double *us = u + sg * n;
            if (scaled) {
                scale_copy(xs, n, (int)T[sg], us);
                xs = us;
            }
            if (diffs) {
                for (size_t i = n - 1; i > 0; i--) us[i] = xs[i] - xs[i - 1];
                us[0] = 0.0;
            }
        }
        in = u;
    }
    /* |x 2^-ex| <= xs (differences: 2 xs), so
       |z_n| <= (sum|c| + sum_k max|corr_k|) xs, the first sum twice for
       differences */
    double cm = 0.0;
    for (size_t k = 0; k < nc; k++) cm += fc__max_abs(cr + k * n, n);
    double cb = (sum_abs(c, n) * (diffs ? 2.0 : 1.0) + cm) * (1.0 + 1e-6);
    int safe = 1;
    for (size_t sg = 0; sg < nsig; sg++) {
        double xs = ldexp(xm[sg], -(int)T[sg]);
        T[sg] += E;
        if (!scale_is_safe(cb * xs, (double)Ml, T[sg])) safe = 0;
    }
    const lag_corr lc = {d, cr, xj, d->zero_first};
    st = lagsum_scaled(ctx, in, nsig, n, c, n, engine,
                       nc || d->zero_first ? &lc : NULL, (double)Ml, T,
                       safe, y);
done:
    fc_context_free(own);
    free(mem);
    free(meta);
    return st;
}
