/*
 * lagsum.c -- batch lagged sums y_n = sum_{k<=n} c_{n-k} x_k, and the rules
 * applied to whole records.
 *
 * Engines:
 *   direct   O(N*K) summation, blocked so that a chunk of outputs stays in
 *            cache while every lag is added to it.
 *   blocked  the dyadic split of the lower triangular Toeplitz matrix (Hairer,
 *            Lubich and Schlichte, SIAM J. Sci. Stat. Comput. 6 (1985)):
 *            triangles of size FC_LEAF near the diagonal are summed directly;
 *            a square of size s (inputs [lo, lo+s), outputs [lo+s, lo+2s),
 *            lags 1 .. 2s-1) is one FFT convolution of size 2s, with one
 *            kernel spectrum per level shared by every square and signal of
 *            that level. Each square's rounding error is at the scale of its
 *            own terms, so small early outputs keep their digits.
 *            For a kernel much shorter than the record, the levels stop at the
 *            first size s* >= K-1 and squares of size s* are placed at every
 *            multiple of s* (block convolution), so the work is
 *            O(N log^2 K) instead of O(N log^2 N).
 *   fft      one FFT convolution of the whole record: O(N log N), accurate
 *            only normwise (small outputs next to large ones lose digits).
 */
#include "internal.h"

#include <stdlib.h>
#include <string.h>

#define FC_LEAF 64           /* size of the directly summed triangles */
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
 * Outputs are taken in cache-sized chunks; within a chunk the lags are added
 * in increasing order (an axpy per lag, which the compiler vectorises).
 */
static void direct_accumulate(const double *restrict x, size_t len,
                              const double *restrict c, size_t K,
                              double *restrict y)
{
    for (size_t i0 = 0; i0 < len; i0 += FC_DIRECT_CHUNK) {
        size_t i1 = i0 + FC_DIRECT_CHUNK < len ? i0 + FC_DIRECT_CHUNK : len;
        size_t mmax = K < i1 ? K : i1; /* lags 0 .. mmax-1 */
        for (size_t m = 0; m < mmax; m++) {
            const double cm = c[m];
            size_t ib = i0 > m ? i0 : m;
            double *restrict yy = y + ib;
            const double *restrict xx = x + (ib - m);
            size_t cnt = i1 - ib;
            for (size_t j = 0; j < cnt; j++) yy[j] += cm * xx[j];
        }
    }
}

/*
 * The kernel spectrum of one level: FFT of size 2s of
 * [0, c_1, ..., c_{2s-1}] (zero beyond K), scaled by 1/(2s) so that the
 * unnormalised inverse FFT gives the convolution directly.
 */
static void level_spectrum(fc_fft_plan *p, size_t s, const double *c, size_t K,
                           double *tmp, double *spec)
{
    size_t n2 = 2 * s;
    double scale = 1.0 / (double)n2;
    tmp[0] = 0.0;
    for (size_t m = 1; m < n2; m++) tmp[m] = m < K ? c[m] * scale : 0.0;
    fc__fft_forward(p, tmp, spec);
}

/*
 * One square: y[lo+s+t] += sum_{i<s} x[lo+i] * c_{s+t-i}, t < tcount, using
 * the level spectrum. work: 2s + (2s+2) + (2s+2) doubles.
 */
static void square(fc_fft_plan *p, size_t s, const double *spec,
                   const double *x, size_t lo, size_t tcount, double *y,
                   double *work)
{
    size_t n2 = 2 * s;
    double *buf = work;             /* 2s */
    double *xs = work + n2;         /* 2s + 2 */
    double *out = xs + n2 + 2;      /* 2s */
    memcpy(buf, x + lo, s * sizeof(double));
    memset(buf + s, 0, s * sizeof(double));
    fc__fft_forward(p, buf, xs);
    fc__spec_mul(n2, xs, spec, xs);
    fc__fft_inverse(p, xs, out);
    double *yy = y + lo + s;
    const double *oo = out + s;
    for (size_t t = 0; t < tcount; t++) yy[t] += oo[t];
}

/* Plan of the blocked engine for a record of n samples and K lags in use. */
typedef struct {
    size_t top;      /* largest square size */
    int banded;      /* top level squares at every multiple of top */
} blocked_shape;

static blocked_shape blocked_shape_of(size_t n, size_t K)
{
    blocked_shape b;
    /* triangle of size T = FC_LEAF * 2^j >= n; levels FC_LEAF .. T/2 */
    size_t T = FC_LEAF;
    while (T < n) T *= 2;
    b.top = T / 2;
    b.banded = 0;
    /* smallest level s* >= K-1: then every used lag joins a block to itself
       or to the next one */
    size_t s = FC_LEAF;
    while (s + 1 < K) s *= 2;
    if (s < b.top) {
        b.top = s;
        b.banded = 1;
    }
    return b;
}

static int blocked_prepare(fc_context *ctx, size_t n, size_t K,
                           blocked_shape *shape)
{
    *shape = blocked_shape_of(n, K);
    if (n <= FC_LEAF) return FC_OK;
    for (size_t s = FC_LEAF; s <= shape->top; s *= 2) {
        int st = ensure_plan(ctx, 2 * s);
        if (st != FC_OK) return st;
    }
    size_t n2 = 2 * shape->top;
    /* tmp (2s) + spec (2s+2) + square work (6s+4) */
    return ensure_work(ctx, 10 * n2 / 2 + 16);
}

/* Blocked engine; every allocation already made by blocked_prepare. */
static void blocked_run(fc_context *ctx, const blocked_shape *shape,
                        const double *x, size_t nsig, size_t n,
                        const double *c, size_t K, double *y)
{
    memset(y, 0, nsig * n * sizeof(double));
    /* leaves: triangles of size FC_LEAF on the diagonal */
    for (size_t sg = 0; sg < nsig; sg++) {
        const double *xs = x + sg * n;
        double *ys = y + sg * n;
        for (size_t lo = 0; lo < n; lo += FC_LEAF) {
            size_t len = n - lo < FC_LEAF ? n - lo : FC_LEAF;
            direct_accumulate(xs + lo, len, c, K < len ? K : len, ys + lo);
        }
    }
    if (n <= FC_LEAF) return;
    for (size_t s = FC_LEAF; s <= shape->top; s *= 2) {
        size_t n2 = 2 * s;
        fc_fft_plan *p = plan_of(ctx, n2);
        double *tmp = ctx->work;
        double *spec = tmp + n2;
        double *sqwork = spec + n2 + 2;
        level_spectrum(p, s, c, K, tmp, spec);
        size_t stride = (shape->banded && s == shape->top) ? s : 2 * s;
        for (size_t sg = 0; sg < nsig; sg++) {
            const double *xs = x + sg * n;
            double *ys = y + sg * n;
            for (size_t lo = 0; lo + s < n; lo += stride) {
                size_t tcount = n - (lo + s) < s ? n - (lo + s) : s;
                square(p, s, spec, xs, lo, tcount, ys, sqwork);
            }
        }
    }
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
        fc__spec_mul(P, xs, spec, xs);
        fc__fft_inverse(p, xs, buf);
        memcpy(y + sg * n, buf, n * sizeof(double));
    }
}

/* Choice of engine by size: direct while it costs less than the FFT work. */
static int choose_engine(size_t n, size_t K)
{
    size_t Ku = K < n ? K : n;
    if (Ku <= 2 * FC_LEAF || n <= 2 * FC_LEAF) return FC_ENGINE_DIRECT;
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
        blocked_shape shape;
        int st = blocked_prepare(ctx, n, K, &shape);
        if (st != FC_OK) return st;
        blocked_run(ctx, &shape, x, nsig, n, c, K, y);
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

int fc_lagged_sum(fc_context *ctx, const double *x, size_t nsig, size_t n,
                  const double *kernel, size_t klen, int engine, double *y)
{
    size_t total;
    if (fc__mul_size(nsig, n, &total) != FC_OK) return FC_ERR_SIZE;
    if (total > ((size_t)-1) / sizeof(double)) return FC_ERR_SIZE;
    if (kernel == NULL) return FC_ERR_NULL;
    if (klen == 0) return FC_ERR_KERNEL;
    if (check_engine(engine) != FC_OK) return FC_ERR_ARG;
    if (total == 0) return FC_OK;
    if (x == NULL || y == NULL) return FC_ERR_NULL;
    if (fc__check_finite(kernel, klen) != FC_OK) return FC_ERR_KERNEL;
    if (fc__check_finite(x, total) != FC_OK) return FC_ERR_NONFINITE;
    fc_context *own = NULL;
    if (ctx == NULL) {
        int st = fc_context_create(&own);
        if (st != FC_OK) return st;
        ctx = own;
    }
    int st = lagsum_checked(ctx, x, nsig, n, kernel, klen, engine, y);
    fc_context_free(own);
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
    if (total > ((size_t)-1) / sizeof(double) / 2) return FC_ERR_SIZE;
    if (total == 0) return FC_OK;
    if (x == NULL || y == NULL) return FC_ERR_NULL;
    if (fc__check_finite(x, total) != FC_OK) return FC_ERR_NONFINITE;

    int diffs = fc__rule_uses_differences(rule);
    int corr = rule == FC_RULE_TRAPEZOID;
    /* kernel n, correction n (trapezoid), differences nsig*n (l1) */
    size_t extra = n + (corr ? n : 0) + (diffs ? total : 0);
    double *mem = malloc(extra * sizeof(double));
    if (mem == NULL) return FC_ERR_NOMEM;
    double *c = mem;
    double *cr = corr ? c + n : NULL;
    double *u = diffs ? c + n + (corr ? n : 0) : NULL;

    fc_context *own = NULL;
    if (ctx == NULL) {
        st = fc_context_create(&own);
        if (st != FC_OK) goto done;
        ctx = own;
    }
    st = fc__lag_kernel(rule, order, step, 0, n, c);
    if (st == FC_OK && corr) st = fc__x0_correction(rule, order, step, 0, n, cr);
    if (st != FC_OK) goto done;
    const double *in = x;
    if (diffs) {
        for (size_t sg = 0; sg < nsig; sg++) {
            const double *xs = x + sg * n;
            double *us = u + sg * n;
            us[0] = 0.0;
            for (size_t i = 1; i < n; i++) us[i] = xs[i] - xs[i - 1];
        }
        in = u;
    }
    st = lagsum_checked(ctx, in, nsig, n, c, n, engine, y);
    if (st == FC_OK && corr) {
        for (size_t sg = 0; sg < nsig; sg++) {
            double x0 = x[sg * n];
            double *ys = y + sg * n;
            for (size_t i = 0; i < n; i++) ys[i] += cr[i] * x0;
            ys[0] = 0.0; /* exactly, whatever the rounding above */
        }
    }
done:
    fc_context_free(own);
    free(mem);
    return st;
}
