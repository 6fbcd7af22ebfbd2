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
};

int fc_context_create(fc_context **out)
{
    if (out == NULL) return FC_ERR_NULL;
    fc_context *ctx = calloc(1, sizeof *ctx);
    if (ctx == NULL) return FC_ERR_NOMEM;
    *out = ctx;
    return FC_OK;
}

void fc_context_free(fc_context *ctx)
{
    if (ctx == NULL) return;
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
    *nbytes = total;
    return FC_OK;
}

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
static FC__DIRECT_INLINE void
direct_accumulate_body(const double *restrict x, size_t len,
                       const double *restrict c, size_t K,
                       double *restrict y)
{
    double grp[FC_DIRECT_CHUNK], cor[FC_DIRECT_CHUNK];
    for (size_t i0 = 0; i0 < len; i0 += FC_DIRECT_CHUNK) {
        size_t i1 = i0 + FC_DIRECT_CHUNK < len ? i0 + FC_DIRECT_CHUNK : len;
        size_t mmax = K < i1 ? K : i1; /* lags 0 .. mmax-1 */
        size_t m1 = mmax < FC_DIRECT_GROUP ? mmax : FC_DIRECT_GROUP;
        for (size_t m = 0; m < m1; m++) {
            const double cm = c[m];
            size_t ib = i0 > m ? i0 : m;
            double *restrict yy = y + ib;
            const double *restrict xx = x + (ib - m);
            size_t cnt = i1 - ib;
            for (size_t j = 0; j < cnt; j++) yy[j] += cm * xx[j];
        }
        if (mmax <= FC_DIRECT_GROUP) continue;
        size_t clen = i1 - i0;
        for (size_t j = 0; j < clen; j++) cor[j] = 0.0;
        for (size_t g0 = FC_DIRECT_GROUP; g0 < mmax; g0 += FC_DIRECT_GROUP) {
            size_t g1 = g0 + FC_DIRECT_GROUP < mmax ? g0 + FC_DIRECT_GROUP : mmax;
            size_t jb = (i0 > g0 ? i0 : g0) - i0; /* first output of lag g0 */
            for (size_t j = jb; j < clen; j++) grp[j] = 0.0;
            for (size_t m = g0; m < g1; m++) {
                const double cm = c[m];
                size_t ib = i0 > m ? i0 : m;
                double *restrict gg = grp + (ib - i0);
                const double *restrict xx = x + (ib - m);
                size_t cnt = i1 - ib;
                for (size_t j = 0; j < cnt; j++) gg[j] += cm * xx[j];
            }
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
                                      double *restrict y)
{
    direct_accumulate_body(x, len, c, K, y);
}

#if FC__DIRECT_AVX2
__attribute__((target("avx2")))
static void direct_accumulate_avx2(const double *restrict x, size_t len,
                                   const double *restrict c, size_t K,
                                   double *restrict y)
{
    direct_accumulate_body(x, len, c, K, y);
}
#endif

static void direct_accumulate(const double *restrict x, size_t len,
                              const double *restrict c, size_t K,
                              double *restrict y)
{
#if FC__DIRECT_AVX2
    if (__builtin_cpu_supports("avx2")) {
        direct_accumulate_avx2(x, len, c, K, y);
        return;
    }
#endif
    direct_accumulate_generic(x, len, c, K, y);
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
 * Why segments start at p0 >= 2 blocks: the FFT's rounding error in output
 * block i is at the scale of the largest kernel value of the segment times
 * the window's samples, while those samples reach block i through lags
 * between (p-1)W and (p+2)W. With p >= p0 the kernel changes by at most a
 * factor ((p0+2)/p0)^gamma over that range (gamma the kernel's power-law
 * exponent, estimated from the kernel itself), so each output keeps its
 * error at the scale of its own terms sum_k |c_{n-k} x_k|, as direct
 * summation does, whatever the input. (A square of the plain dyadic split
 * spans lags 1 .. 2s-1 and loses up to ~3 digits after a spike against a
 * fast-decaying Grunwald kernel; the same scheme of doubling partitions is
 * used for zero-latency convolution, Gardner, J. Audio Eng. Soc. 43 (1995).)
 */
#define FC_DIRECT_BAND 64
#define FC_MAX_SEGS 32 /* most segments of one size: p0 */

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

static part_shape part_shape_of(size_t n, const double *c, size_t K)
{
    part_shape sh;
    double g;
    while (K > 1 && c[K - 1] == 0.0) K--; /* trailing zeros cost nothing */
    if (K > n) K = n;
    sh.K = K;
    (void)fc__segment_start(array_at, c, 8, K, &g, &sh.p0); /* cannot fail */
    sh.R = sh.p0 == 2 ? 8 : sh.p0 == 4 ? 4 : 2;
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

/* Doubles of work space: kernel spectra + window spectra ring (maxseg each)
   + window + sum + output. */
static int part_prepare(fc_context *ctx, size_t n, const double *c, size_t K,
                        part_shape *sh)
{
    *sh = part_shape_of(n, c, K);
    if (sh->maxW == 0) return FC_OK;
    for (size_t W = sh->W0; W <= sh->maxW; W *= sh->R) {
        int st = ensure_plan(ctx, 2 * W);
        if (st != FC_OK) return st;
    }
    size_t spec = 2 * sh->maxW + 2, total, t2;
    if (fc__mul_size(spec, 2 * sh->maxseg + 3, &total) != FC_OK) return FC_ERR_SIZE;
    if (fc__add_size(total, 16, &t2) != FC_OK) return FC_ERR_SIZE;
    return ensure_work(ctx, t2);
}

/* buf[j] = x[(b-1)W + j] for j < 2W, zero outside [0, n). */
static void window(const double *x, size_t n, size_t b, size_t W, double *buf)
{
    size_t lo = b > 0 ? (b - 1) * W : 0; /* first sample */
    size_t off = b > 0 ? 0 : W;          /* where it goes */
    size_t avail = lo < n ? n - lo : 0;
    size_t cnt = 2 * W - off < avail ? 2 * W - off : avail;
    memset(buf, 0, off * sizeof(double));
    memcpy(buf + off, x + lo, cnt * sizeof(double));
    memset(buf + off + cnt, 0, (2 * W - off - cnt) * sizeof(double));
}

/* One size W of the partitioned engine for every signal. */
static void part_size(fc_context *ctx, const part_shape *sh, size_t W,
                      const double *x, size_t nsig, size_t n, const double *c,
                      double *y)
{
    const size_t n2 = 2 * W, sp = n2 + 2, K = sh->K, p0 = sh->p0;
    size_t phi = (K + W - 1) / W;
    if (phi > sh->R * p0) phi = sh->R * p0;
    const size_t nseg = phi - p0;
    fc_fft_plan *plan = plan_of(ctx, n2);
    double *kspec = ctx->work;              /* nseg spectra */
    double *ring = kspec + nseg * sp;       /* nseg window spectra */
    double *buf = ring + nseg * sp;         /* 2W */
    double *acc = buf + sp;                 /* 2W+2 */
    double *out = acc + sp;                 /* 2W */
    const double scale = 1.0 / (double)n2;
    const double *zp[FC_MAX_SEGS], *cp[FC_MAX_SEGS];

    for (size_t j = 0; j < nseg; j++) {
        size_t lag0 = (p0 + j) * W;
        for (size_t m = 0; m < W; m++)
            buf[m] = lag0 + m < K ? c[lag0 + m] * scale : 0.0;
        memset(buf + W, 0, W * sizeof(double));
        fc__fft_forward(plan, buf, kspec + j * sp);
    }
    const size_t nb = (n + W - 1) / W; /* output blocks */
    for (size_t sg = 0; sg < nsig; sg++) {
        const double *xs = x + sg * n;
        double *ys = y + sg * n;
        for (size_t i = p0; i < nb; i++) {
            /* the newest window needed: b = i - p0, samples [(b-1)W, (b+1)W) */
            size_t b = i - p0;
            window(xs, n, b, W, buf);
            fc__fft_forward(plan, buf, ring + (b % nseg) * sp);
            /* Y_i = sum_p Z_{i-p} C_p over the windows that exist */
            size_t jmax = i - p0 + 1 < nseg ? i - p0 + 1 : nseg;
            for (size_t j = 0; j < jmax; j++) {
                zp[j] = ring + ((i - p0 - j) % nseg) * sp;
                cp[j] = kspec + j * sp;
            }
            fc__spec_dot(plan, zp, cp, jmax, acc);
            fc__fft_inverse(plan, acc, out);
            size_t r0 = i * W;
            size_t cnt = n - r0 < W ? n - r0 : W;
            for (size_t t = 0; t < cnt; t++) ys[r0 + t] += out[W + t];
        }
    }
}

/* Partitioned engine; every allocation already made by part_prepare. */
static void part_run(fc_context *ctx, const part_shape *sh, const double *x,
                     size_t nsig, size_t n, const double *c, double *y)
{
    memset(y, 0, nsig * n * sizeof(double));
    size_t Kd = sh->K < sh->D ? sh->K : sh->D;
    for (size_t sg = 0; sg < nsig; sg++)
        direct_accumulate(x + sg * n, n, c, Kd, y + sg * n);
    if (sh->maxW == 0) return;
    for (size_t W = sh->W0; W <= sh->maxW; W *= sh->R)
        part_size(ctx, sh, W, x, nsig, n, c, y);
}

/* One FFT convolution of the whole record. */
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

static void fft_run(fc_context *ctx, size_t P, const double *x, size_t nsig,
                    size_t n, const double *c, size_t K, double *y)
{
    fc_fft_plan *p = plan_of(ctx, P);
    double *buf = ctx->work;        /* P */
    double *spec = buf + P;         /* P + 2 */
    double *xs = spec + P + 2;      /* P + 2 */
    size_t Ku = K < n ? K : n;
    double scale = 1.0 / (double)P;
    for (size_t m = 0; m < P; m++) buf[m] = m < Ku ? c[m] * scale : 0.0;
    fc__fft_forward(p, buf, spec);
    for (size_t sg = 0; sg < nsig; sg++) {
        memcpy(buf, x + sg * n, n * sizeof(double));
        memset(buf + n, 0, (P - n) * sizeof(double));
        fc__fft_forward(p, buf, xs);
        fc__spec_mul(p, xs, spec, xs);
        fc__fft_inverse(p, xs, buf);
        memcpy(y + sg * n, buf, n * sizeof(double));
    }
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
        memset(y, 0, nsig * n * sizeof(double));
        for (size_t sg = 0; sg < nsig; sg++)
            direct_accumulate(x + sg * n, n, c, K, y + sg * n);
        return FC_OK;
    }
    if (engine == FC_ENGINE_BLOCKED) {
        part_shape shape;
        int st = part_prepare(ctx, n, c, K, &shape);
        if (st != FC_OK) return st;
        part_run(ctx, &shape, x, nsig, n, c, y);
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
