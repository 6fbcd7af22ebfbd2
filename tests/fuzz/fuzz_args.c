/*
 * fuzz_args.c -- libFuzzer target for the argument checking of the public
 * functions of fracconv.h. The input is decoded into one call (its first
 * byte chooses the function) and its arguments: doubles from a table of
 * edge values (NaN, +-inf, +-0, huge, tiny, subnormal, the documented
 * bounds) or raw bits, enums from a table of good and wrong values, buffer
 * lengths small (0 .. 32, with buffers of that size) or overflowing
 * (SIZE_MAX, 2^63, 2^61: any size computation in bytes overflows, so the
 * call must be refused before it reads a buffer), counts from a table.
 * Checked on every call: the status is one fracconv.h defines; a refused
 * call on an object leaves it exactly as it was (its saved bytes are
 * compared); outputs of accepted pushes are finite. Anything else aborts
 * (a crash for libFuzzer), as does any sanitizer report or leak.
 *
 * Sizes the library is documented to allocate in full (an implicit
 * rectangle solver's floor(horizon)+1 kernel weights, an FFT plan of n) are
 * kept below 2^20 here, so that a run stays within the fuzzer's memory
 * limit; everything else is passed as decoded.
 */
#include <math.h>
#include <stdint.h>
#include <stdlib.h>
#include <string.h>
#include "fracconv.h"

static void check(int cond)
{
    if (!cond) abort();
}

typedef struct {
    const uint8_t *p;
    size_t n, i;
} rd;

static uint8_t u8(rd *r) { return r->i < r->n ? r->p[r->i++] : 0; }

static const double DTAB[] = {
    0.5, 0.3, 1.4, 1.0, 0.01, 1e-9, 1e6, 0.0, -0.0, NAN, INFINITY, -INFINITY,
    1e308, -1.0, 1e-300, 2.0, 10.0, 1e-15, 1e-2, 9007199254740992.0,
    4.9406564584124654e-324, 0.9999999999999999, 1.9999999999999998, 1e-280,
    2.5, 0.7, 100.0, -1e308, 268435456.0, 9007199254740990.0, 1e-16, 0.1};
#define NDTAB (sizeof DTAB / sizeof DTAB[0])

static double dbl(rd *r)
{
    uint8_t t = u8(r);
    if (t < 0xF0) return DTAB[t % NDTAB];
    uint64_t v = 0;
    for (int k = 0; k < 8; k++) v |= (uint64_t)u8(r) << (8 * k);
    double d;
    memcpy(&d, &v, 8);
    return d;
}

static const int ITAB[] = {0, 1, 2, 3, 4, -1, 99, INT32_MIN, INT32_MAX, 16, 5, 64};
static int enm(rd *r) { return ITAB[u8(r) % (sizeof ITAB / sizeof ITAB[0])]; }

#define SMALL 32
static const size_t HUGE_LEN[] = {(size_t)-1, (size_t)1 << 63, (size_t)1 << 61};
/* A buffer length: 0 .. SMALL, or one whose byte size overflows. */
static size_t len(rd *r)
{
    uint8_t t = u8(r);
    if (t >= 0xFC) return HUGE_LEN[t % 3];
    return t % (SMALL + 1);
}
static int is_huge(size_t n) { return n > SMALL; }

static const uint64_t UTAB[] = {
    0, 1, 2, 3, 64, 1000, (UINT64_C(1) << 53) - 2, (UINT64_C(1) << 53) - 1,
    UINT64_C(1) << 53, UINT64_C(1) << 63, UINT64_MAX};
static uint64_t cnt(rd *r)
{
    uint8_t t = u8(r);
    return t < 0xE0 ? (uint64_t)(t % 100) : UTAB[t % (sizeof UTAB / sizeof UTAB[0])];
}

static int known_status(int st)
{
    return (st >= FC_OK && st <= FC_ERR_HORIZON) ||
           (st >= FC_ERR_CALLBACK && st <= FC_ERR_NORHS);
}

/* buffers for every call: SMALL*SMALL doubles each, filled from the input */
#define BUF (SMALL * SMALL + 2 * SMALL + 8)
static double X[BUF], Y[BUF], K2[BUF], T[BUF];

/* n times: decoded values, or (one time in two) a start and decoded
   steps, so that increasing grids are common */
static void fill_times(rd *r, size_t n)
{
    int steps = u8(r) & 1;
    for (size_t i = 0; i < n && i < BUF; i++) {
        double v = dbl(r);
        T[i] = steps && i ? T[i - 1] + fabs(v) : v;
    }
}

static void fill(rd *r, double *b, size_t n)
{
    for (size_t i = 0; i < n && i < BUF; i++) b[i] = dbl(r);
}

/* A copy of a stream's saved bytes (NULL when it cannot be saved). */
static unsigned char *stream_bytes(fc_stream *s, size_t *n)
{
    size_t w;
    unsigned char *b;
    if (fc_stream_save_size(s, n) || !(b = malloc(*n ? *n : 1))) return NULL;
    if (fc_stream_save(s, b, *n, &w)) { free(b); return NULL; }
    *n = w;
    return b;
}
static void stream_unchanged(fc_stream *s, const unsigned char *b, size_t n)
{
    size_t n2;
    if (!b) return;
    unsigned char *b2 = stream_bytes(s, &n2);
    if (!b2) return;
    check(n2 == n && memcmp(b, b2, n) == 0);
    free(b2);
}

static void use_stream(rd *r, fc_stream *s)
{
    size_t C;
    check(fc_stream_channels(s, &C) == FC_OK);
    for (int k = 0; k < 6 && r->i < r->n; k++) {
        size_t n;
        unsigned char *before = stream_bytes(s, &n);
        int op = u8(r) % 6, st;
        if (op == 0 || op == 1) {
            size_t count = len(r);
            size_t real = is_huge(count) ? 1 : count;
            if (!is_huge(count) && C * count > SMALL * SMALL) { free(before); continue; }
            fill(r, X, real * C);
            st = op == 0 ? fc_stream_push_block(s, X, count, Y)
                         : fc_stream_push_block(s, X, count, X);   /* in place */
            check(st != FC_OK || !is_huge(count));
            if (st == FC_OK && C * count <= BUF)
                for (size_t i = 0; i < C * count; i++) check(isfinite(op ? X[i] : Y[i]));
        } else if (op == 2) {
            fill(r, X, C <= BUF ? C : 0);
            st = C <= BUF ? fc_stream_preview(s, X, Y) : FC_OK;
        } else if (op == 3) {
            st = fc_stream_reserve(s, cnt(r));
        } else if (op == 4) {
            st = fc_stream_set_horizon_policy(s, enm(r));
        } else {
            st = fc_stream_push1(s, dbl(r), Y);
            if (st == FC_OK) check(isfinite(Y[0]));
        }
        check(known_status(st));
        if (st != FC_OK || op == 2 || op == 3 || op == 4) stream_unchanged(s, before, n);
        free(before);
    }
}

/* f_0 = a y_0 + b (a, b decoded: NaN and huge included), f_i = -y_i */
typedef struct { double a, b; size_t m; } lin;
static int lin_rhs(double t, const double *y, double *f, void *u)
{
    const lin *l = u;
    (void)t;
    f[0] = l->a * y[0] + l->b;
    for (size_t i = 1; i < l->m; i++) f[i] = -y[i];
    return 0;
}

int LLVMFuzzerTestOneInput(const uint8_t *data, size_t size)
{
    rd r = {data, size, 0};
    int st = FC_OK;
    switch (u8(&r) % 14) {
    case 0: {   /* weights */
        int rule = enm(&r);
        double a = dbl(&r), h = dbl(&r);
        uint64_t start = cnt(&r);
        size_t n = len(&r);
        st = fc_weights(rule, a, h, start, n, (u8(&r) & 1) ? NULL : Y);
        check(st != FC_OK || !is_huge(n));
        break;
    }
    case 1: {
        double a = dbl(&r), h = dbl(&r);
        uint64_t start = cnt(&r);
        size_t n = len(&r);
        st = fc_trapezoid_start(a, h, start, n, (u8(&r) & 1) ? NULL : Y);
        check(st != FC_OK || !is_huge(n));
        break;
    }
    case 2: {   /* batch apply */
        int rule = enm(&r), engine = enm(&r);
        double a = dbl(&r), h = dbl(&r);
        size_t nsig = len(&r) % 5, n = len(&r);
        if (u8(&r) & 1) nsig = HUGE_LEN[u8(&r) % 3];
        if (!is_huge(n) && !is_huge(nsig)) fill(&r, X, nsig * n);
        fc_context *ctx = NULL;
        if (u8(&r) & 1) check(fc_context_create(&ctx) == FC_OK);
        st = fc_apply(ctx, rule, a, h, X, nsig, n, engine, (u8(&r) & 3) ? Y : X);
        if (st == FC_OK && !is_huge(n) && !is_huge(nsig))
            for (size_t i = 0; i < nsig * n; i++) check(isfinite(Y[i]) || isfinite(X[i]));
        fc_context_free(ctx);
        break;
    }
    case 3: {   /* lagged sums */
        int engine = enm(&r);
        size_t nsig = len(&r) % 5, n = len(&r), kl = len(&r);
        if (!is_huge(n)) fill(&r, X, nsig * n);
        if (!is_huge(kl)) fill(&r, K2, kl);
        st = fc_lagged_sum(NULL, X, nsig, n, (u8(&r) & 7) ? K2 : NULL, kl, engine, Y);
        break;
    }
    case 4: case 5: {   /* a rule stream and its life */
        int rule = enm(&r), mode = enm(&r);
        double a = dbl(&r), h = dbl(&r), tol = dbl(&r), hz = dbl(&r);
        size_t C = len(&r) % 5;
        if (u8(&r) == 0xFF) C = HUGE_LEN[u8(&r) % 3];
        fc_stream *s = NULL;
        st = fc_stream_create(rule, a, h, C, mode, tol, hz, &s);
        if (st == FC_OK) { use_stream(&r, s); fc_stream_free(s); }
        break;
    }
    case 6: {   /* a kernel stream */
        size_t kl = len(&r), C = len(&r) % 4;
        if (!is_huge(kl)) fill(&r, K2, kl);
        fc_stream *s = NULL;
        st = fc_stream_create_kernel((u8(&r) & 7) ? K2 : NULL, kl, C, &s);
        if (st == FC_OK) { use_stream(&r, s); fc_stream_free(s); }
        break;
    }
    case 7: case 8: {   /* a solver and its life */
        size_t m = 1 + u8(&r) % 4;
        if (u8(&r) == 0xFF) m = 0;
        double o[4], init[8];
        lin ab;
        fill(&r, o, m);
        fill(&r, init, 2 * m);
        double h = dbl(&r), t0 = dbl(&r), tol = dbl(&r), hz = dbl(&r);
        int method = enm(&r), memory = enm(&r);
        if (method == FC_METHOD_IMPLICIT_RECTANGLE && hz > 1048576.0) hz = 1048576.0;
        fc_solver *s = NULL;
        st = fc_solver_create(m, o, h, t0, init, method, memory, tol, hz, &s);
        if (st != FC_OK) break;
        ab.a = dbl(&r);
        ab.b = dbl(&r);
        ab.m = m;
        size_t done;
        st = fc_solver_advance(s, 1, NULL, NULL, &done);
        check(st == FC_ERR_NORHS && done == 0);
        check(fc_solver_set_rhs(s, lin_rhs, &ab) == FC_OK);
        for (int k = 0; k < 4 && r.i < r.n; k++) {
            int op = u8(&r) % 4;
            if (op == 0) st = fc_solver_set_newton(s, dbl(&r), (unsigned)cnt(&r));
            else if (op == 1) st = fc_solver_set_corrections(s, (unsigned)cnt(&r));
            else {
                size_t ns = len(&r);
                if (is_huge(ns)) ns = ((size_t)1 << 60) + (size_t)cnt(&r);
                uint64_t before;
                check(fc_solver_steps(s, &before) == FC_OK);
                st = fc_solver_advance(s, ns, op == 2 ? X : NULL, op == 2 ? Y : NULL, &done);
                uint64_t after;
                check(fc_solver_steps(s, &after) == FC_OK && after == before + done);
                if (ns > SMALL) check(st != FC_OK);
            }
            check(known_status(st));
        }
        fc_solver_free(s);
        break;
    }
    case 9: case 10: {   /* a controller and its life */
        fc_controller_params p;
        fc_controller_default_params(&p);
        double *dp[] = {&p.kp, &p.ki, &p.kd, &p.integral_order, &p.derivative_order,
                        &p.step, &p.out_min, &p.out_max, &p.rate_limit,
                        &p.setpoint_weight_p, &p.setpoint_weight_d, &p.filter_time,
                        &p.tol, &p.horizon};
        int *ip[] = {&p.integral_rule, &p.derivative_rule, &p.anti_windup, &p.memory};
        uint8_t mask = u8(&r), imask = u8(&r);
        for (int k = 0; k < 14; k++) if (mask & (1u << (k % 8)) && (k < 8 || (imask & 0x10))) *dp[k] = dbl(&r);
        for (int k = 0; k < 4; k++) if (imask & (1u << k)) *ip[k] = enm(&r);
        fc_controller *c = NULL;
        st = fc_controller_create(&p, &c);
        if (st != FC_OK) break;
        for (int k = 0; k < 6 && r.i < r.n; k++) {
            size_t n0, w;
            unsigned char *b0 = NULL;
            if (fc_controller_save_size(c, &n0) == FC_OK && (b0 = malloc(n0)))
                if (fc_controller_save(c, b0, n0, &w) != FC_OK) { free(b0); b0 = NULL; }
            int op = u8(&r) % 5;
            double u;
            if (op == 0) {
                st = fc_controller_update(c, dbl(&r), dbl(&r), &u);
                if (st == FC_OK) check(u >= p.out_min && u <= p.out_max);
            } else if (op == 1) {
                size_t n = len(&r), done = 0;
                if (!is_huge(n)) { fill(&r, X, n); fill(&r, K2, n); }
                st = fc_controller_update_block(c, X, K2, n, Y, &done);
                check(st != FC_OK || !is_huge(n));
            } else if (op == 2) st = fc_controller_set_manual(c, dbl(&r));
            else if (op == 3) st = fc_controller_set_auto(c);
            else st = fc_controller_reset(c);
            check(known_status(st));
            /* refused: unchanged (update_block keeps the samples before a
               stop, so only its refusals before any work are compared) */
            if (st != FC_OK && b0 && op != 1) {
                size_t n1, w1;
                unsigned char *b1;
                check(fc_controller_save_size(c, &n1) == FC_OK && n1 == n0);
                if ((b1 = malloc(n1))) {
                    check(fc_controller_save(c, b1, n1, &w1) == FC_OK);
                    check(memcmp(b0, b1, n1) == 0);
                    free(b1);
                }
            }
            free(b0);
        }
        fc_controller_free(c);
        break;
    }
    case 12: {  /* the rules on a grid of times */
        int rule = enm(&r);
        double a = dbl(&r), tol = dbl(&r);
        size_t nsig = len(&r) % 5, n = len(&r);
        if (u8(&r) == 0xFF) nsig = HUGE_LEN[u8(&r) % 3];
        int small = !is_huge(n) && !is_huge(nsig) && nsig * n <= SMALL * SMALL;
        if (!is_huge(n) && !small) break;
        if (small) { fill_times(&r, n); fill(&r, X, nsig * n); }
        for (size_t i = 0; i < BUF; i++) Y[i] = -7.0;
        st = fc_grid_apply(rule, a, (u8(&r) & 15) ? T : NULL, X, nsig, n, tol, Y, NULL);
        check(st != FC_OK || small || n == 0);
        if (st == FC_OK)
            for (size_t i = 0; i < nsig * n; i++) check(isfinite(Y[i]));
        else
            for (size_t i = 0; i < BUF; i++) check(Y[i] == -7.0);  /* nothing written */
        break;
    }
    case 13: {  /* a stream with a time per sample and its life */
        int rule = enm(&r);
        double a = dbl(&r), h = dbl(&r), tol = dbl(&r), hz = dbl(&r);
        size_t C = len(&r) % 4;
        if (u8(&r) == 0xFF) C = HUGE_LEN[u8(&r) % 3];
        fc_stream *s = NULL;
        st = fc_stream_create_timed(rule, a, h, C, tol, hz, &s);
        if (st != FC_OK) break;
        if (u8(&r) & 1) check(fc_stream_set_horizon_policy(s, FC_HORIZON_CONTINUE) == FC_OK);
        for (int k = 0; k < 6 && r.i < r.n; k++) {
            size_t nb;
            unsigned char *before = stream_bytes(s, &nb);
            int op = u8(&r) % 3, s2;
            if (op == 0) {
                size_t count = len(&r);
                if (is_huge(count)) {
                    s2 = fc_stream_push_timed(s, T, X, count, Y);
                    check(s2 != FC_OK);
                } else {
                    fill_times(&r, count);
                    fill(&r, X, C * count);
                    s2 = fc_stream_push_timed(s, T, X, count, Y);
                    if (s2 == FC_OK)
                        for (size_t i = 0; i < C * count; i++) check(isfinite(Y[i]));
                }
            } else if (op == 1) {
                fill(&r, X, C);
                s2 = fc_stream_preview_timed(s, dbl(&r), X, Y);
                if (s2 == FC_OK)
                    for (size_t i = 0; i < C; i++) check(isfinite(Y[i]));
            } else {
                /* save and load: the same bytes */
                fc_stream *l = NULL;
                s2 = before ? fc_stream_load(before, nb, &l) : FC_OK;
                if (before) check(s2 == FC_OK);
                if (l) stream_unchanged(l, before, nb);
                fc_stream_free(l);
            }
            check(known_status(s2));
            if (s2 != FC_OK || op != 0) stream_unchanged(s, before, nb);
            free(before);
        }
        fc_stream_free(s);
        break;
    }
    default: {  /* FFT plans and the tables */
        static const size_t NT[] = {0, 1, 2, 3, 4, 8, 16, 64, 1024, 1536,
                                    (size_t)1 << 31, (size_t)-1};
        size_t n = NT[u8(&r) % (sizeof NT / sizeof NT[0])];
        fc_fft_plan *pl = NULL;
        st = fc_rfft_create(n, &pl);
        if (st == FC_OK) {
            fill(&r, X, n + 2);
            check(fc_rfft_forward(pl, X, Y) == FC_OK);
            check(fc_rfft_inverse(pl, Y, K2) == FC_OK);
            check(fc_rfft_forward(pl, X, X) == FC_ERR_ARG);
            fc_rfft_free(pl);
        }
        double lo, hi;
        int loi, hii, isd;
        const char *nm;
        int rule = enm(&r), mode = enm(&r);
        check(known_status(fc_rule_order_range(rule, mode, &lo, &loi, &hi, &hii)));
        check(known_status(fc_rule_info(rule, &nm, &isd)));
        check(fc_strerror(enm(&r)) != NULL && fc_solver_strerror(enm(&r)) != NULL);
        break;
    }
    }
    check(known_status(st));
    return 0;
}
