/*
 * api_driver.c -- every public function of csrc/fracconv.h with valid and
 * invalid arguments (NULL, zero, huge and overflowing sizes, NaN orders and
 * steps, wrong enums), and every object (context, exact and compressed
 * streams, solver, controller, FFT plan) through its whole life: create,
 * use, save, load, truncated and forged saved data, free. Each call's
 * status is compared with the one fracconv.h documents ("Statuses:"
 * lines); exit 1 on any other. Built and run under AddressSanitizer and
 * UndefinedBehaviorSanitizer by `make asan` (no report, no leak), and plain
 * by `make check-c-tests`. Test signals are invented (fixed values).
 * Checkpoint files (fc_file_*, fc_*_save_file, fc_*_load_file) in a
 * temporary directory (mkdtemp): round trips, missing directory and file,
 * a directory as target, truncated and too long files, no temporary left.
 */
#define _POSIX_C_SOURCE 200809L   /* mkdtemp, rmdir, unlink, opendir */
#include <dirent.h>
#include <sys/stat.h>
#include <errno.h>
#include <unistd.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <stdint.h>
#include <math.h>
#include "fracconv.h"

static int fails, checks;
#define EXPECT(call, want) do {                                              \
        int got_ = (call);                                                   \
        checks++;                                                            \
        if (got_ != (want)) {                                                \
            fails++;                                                         \
            printf("line %d: %s returned %d (%s), expected %d\n", __LINE__,  \
                   #call, got_, fc_strerror(got_), (want));                  \
        }                                                                    \
    } while (0)
#define TRUE_(cond) do { checks++; if (!(cond)) { fails++;                   \
        printf("line %d: %s is false\n", __LINE__, #cond); } } while (0)

static const double NaN_ = NAN;
#define HUGE_SZ ((size_t)-1)

/* Saved bytes: truncated at every length in a sample, and with one byte
   flipped at sample positions, must be refused or (for a flip the checksum
   cannot see) give a valid object; never crash. */
typedef int (*load_fn)(const unsigned char *, size_t, void **);
typedef void (*free_fn)(void *);
static void blob_faults(const char *what, const unsigned char *buf, size_t n,
                        load_fn load, free_fn fr)
{
    unsigned char *cp = malloc(n + 1);
    void *obj = NULL;
    size_t cut, step = n / 97 + 1;
    if (cp == NULL) { fails++; return; }
    for (cut = 0; cut < n; cut += step) {
        memcpy(cp, buf, cut);
        checks++;
        if (load(cp, cut, &obj) != FC_ERR_FORMAT) {
            fails++;
            printf("%s: truncated to %zu bytes not refused\n", what, cut);
            fr(obj);
        }
    }
    for (cut = 0; cut < n; cut += step) {
        int st;
        memcpy(cp, buf, n);
        cp[cut] ^= 0x5a;
        obj = NULL;
        st = load(cp, n, &obj);
        checks++;
        if (st != FC_ERR_FORMAT) {
            fails++;
            printf("%s: byte %zu flipped: status %d\n", what, cut, st);
            fr(obj);
        }
    }
    /* a forged header: the first bytes (magic) replaced */
    memcpy(cp, buf, n);
    memcpy(cp, "XXXXXXXX", n < 8 ? n : 8);
    EXPECT(load(cp, n, &obj), FC_ERR_FORMAT);
    /* one byte of garbage appended */
    memcpy(cp, buf, n);
    cp[n] = 0;
    EXPECT(load(cp, n + 1, &obj), FC_ERR_FORMAT);
    free(cp);
}
static int ld_stream(const unsigned char *b, size_t n, void **o) { return fc_stream_load(b, n, (fc_stream **)o); }
static void fr_stream(void *o) { fc_stream_free(o); }
static int ld_solver(const unsigned char *b, size_t n, void **o) { return fc_solver_load(b, n, (fc_solver **)o); }
static void fr_solver(void *o) { fc_solver_free(o); }
static int ld_ctrl(const unsigned char *b, size_t n, void **o) { return fc_controller_load(b, n, (fc_controller **)o); }
static void fr_ctrl(void *o) { fc_controller_free(o); }

static void test_info(void)
{
    int cnt, isd, loi, hii;
    const char *nm;
    double lo, hi;
    TRUE_(fc_version() == FC_VERSION_NUMBER);
    TRUE_(strcmp(fc_version_string(), FC_VERSION_STRING) == 0);
    for (int st = -2; st < 70; st++) TRUE_(fc_strerror(st) != NULL);
    TRUE_(fc_solver_strerror(FC_ERR_NEWTON) != NULL && fc_solver_strerror(12345) != NULL);
    EXPECT(fc_rule_count(NULL), FC_ERR_NULL);
    EXPECT(fc_rule_count(&cnt), FC_OK);
    TRUE_(cnt == 4);
    for (int r = 0; r < cnt; r++) {
        EXPECT(fc_rule_info(r, &nm, &isd), FC_OK);
        for (int m = 0; m < 2; m++) {
            int st = fc_rule_order_range(r, m, &lo, &loi, &hi, &hii);
            TRUE_(st == FC_OK || st == FC_ERR_MODE);
        }
    }
    EXPECT(fc_rule_info(-1, &nm, &isd), FC_ERR_RULE);
    EXPECT(fc_rule_info(cnt, &nm, &isd), FC_ERR_RULE);
    EXPECT(fc_rule_info(0, NULL, &isd), FC_ERR_NULL);
    EXPECT(fc_rule_order_range(0, 7, &lo, &loi, &hi, &hii), FC_ERR_MODE);
    EXPECT(fc_rule_order_range(99, 0, &lo, &loi, &hi, &hii), FC_ERR_RULE);
    EXPECT(fc_rule_order_range(0, 0, NULL, &loi, &hi, &hii), FC_ERR_NULL);
}

static void test_weights(void)
{
    double w[16];
    EXPECT(fc_weights(FC_RULE_RECTANGLE, 0.5, 1.0, 0, 16, w), FC_OK);
    EXPECT(fc_weights(FC_RULE_RECTANGLE, 0.5, 1.0, 0, 0, NULL), FC_OK);
    EXPECT(fc_weights(FC_RULE_RECTANGLE, 0.5, 1.0, 0, 4, NULL), FC_ERR_NULL);
    EXPECT(fc_weights(77, 0.5, 1.0, 0, 4, w), FC_ERR_RULE);
    EXPECT(fc_weights(-1, 0.5, 1.0, 0, 4, w), FC_ERR_RULE);
    EXPECT(fc_weights(FC_RULE_GRUNWALD, NaN_, 1.0, 0, 4, w), FC_ERR_ORDER);
    EXPECT(fc_weights(FC_RULE_GRUNWALD, -0.5, 1.0, 0, 4, w), FC_ERR_ORDER);
    EXPECT(fc_weights(FC_RULE_GRUNWALD, INFINITY, 1.0, 0, 4, w), FC_ERR_ORDER);
    EXPECT(fc_weights(FC_RULE_L1, 1.5, 1.0, 0, 4, w), FC_ERR_ORDER);
    EXPECT(fc_weights(FC_RULE_GRUNWALD, 0.5, NaN_, 0, 4, w), FC_ERR_STEP);
    EXPECT(fc_weights(FC_RULE_GRUNWALD, 0.5, 0.0, 0, 4, w), FC_ERR_STEP);
    EXPECT(fc_weights(FC_RULE_GRUNWALD, 0.5, -INFINITY, 0, 4, w), FC_ERR_STEP);
    EXPECT(fc_weights(FC_RULE_GRUNWALD, 0.5, 1.0, UINT64_MAX - 1, 4, w), FC_ERR_INDEX);
    EXPECT(fc_weights(FC_RULE_GRUNWALD, 0.5, 1.0, (UINT64_C(1) << 53) - 2, 4, w), FC_ERR_INDEX);
    EXPECT(fc_weights(FC_RULE_RECTANGLE, 10.0, 1e300, 0, 4, w), FC_ERR_RANGE);
    EXPECT(fc_trapezoid_start(0.5, 1.0, 0, 16, w), FC_OK);
    EXPECT(fc_trapezoid_start(0.5, 1.0, 0, 4, NULL), FC_ERR_NULL);
    EXPECT(fc_trapezoid_start(NaN_, 1.0, 0, 4, w), FC_ERR_ORDER);
    EXPECT(fc_trapezoid_start(0.5, NaN_, 0, 4, w), FC_ERR_STEP);
    EXPECT(fc_trapezoid_start(0.5, 1.0, UINT64_MAX, 4, w), FC_ERR_INDEX);
}

static void test_batch(void)
{
    fc_context *ctx;
    size_t nb;
    double x[600], y[600], k[40], y0[600];
    for (int i = 0; i < 600; i++) x[i] = sin(0.1 * i) + 0.01 * i;
    for (int i = 0; i < 40; i++) k[i] = 1.0 / (1.0 + i);
    EXPECT(fc_context_create(NULL), FC_ERR_NULL);
    EXPECT(fc_context_create(&ctx), FC_OK);
    EXPECT(fc_context_nbytes(NULL, &nb), FC_ERR_NULL);
    EXPECT(fc_context_nbytes(ctx, NULL), FC_ERR_NULL);
    EXPECT(fc_context_nbytes(ctx, &nb), FC_OK);
    {
        size_t th = 0;
        EXPECT(fc_context_threads(ctx, &th), FC_OK);
        TRUE_(th == 1);
        EXPECT(fc_context_set_threads(NULL, 2), FC_ERR_NULL);
        EXPECT(fc_context_set_threads(ctx, 0), FC_ERR_ARG);
        EXPECT(fc_context_set_threads(ctx, FC_THREADS_MAX + 1), FC_ERR_ARG);
        EXPECT(fc_context_set_threads(ctx, HUGE_SZ), FC_ERR_ARG);
        EXPECT(fc_context_threads(ctx, &th), FC_OK);
        TRUE_(th == 1); /* refusals leave it */
        EXPECT(fc_context_threads(NULL, &th), FC_ERR_NULL);
        EXPECT(fc_context_threads(ctx, NULL), FC_ERR_NULL);
        EXPECT(fc_context_set_threads(ctx, FC_THREADS_MAX), FC_OK);
        EXPECT(fc_context_threads(ctx, &th), FC_OK);
        TRUE_(th == FC_THREADS_MAX);
        EXPECT(fc_context_set_threads(ctx, 3), FC_OK);
    }
    for (int e = 0; e < 4; e++) {
        EXPECT(fc_lagged_sum(ctx, x, 2, 300, k, 40, e, y), FC_OK);
        EXPECT(fc_lagged_sum(NULL, x, 2, 300, k, 40, e, y), FC_OK);
        for (int r = 0; r < 4; r++) {
            EXPECT(fc_apply(ctx, r, 0.5, 0.01, x, 3, 200, e, y), FC_OK);
            EXPECT(fc_apply(NULL, r, 0.5, 0.01, x, 1, 600, e, y), FC_OK);
        }
    }
    EXPECT(fc_lagged_sum(ctx, x, 0, 300, k, 40, 0, y), FC_OK);
    EXPECT(fc_lagged_sum(ctx, x, 2, 0, k, 40, 0, y), FC_OK);
    EXPECT(fc_lagged_sum(ctx, NULL, 2, 300, k, 40, 0, y), FC_ERR_NULL);
    EXPECT(fc_lagged_sum(ctx, x, 2, 300, NULL, 40, 0, y), FC_ERR_NULL);
    EXPECT(fc_lagged_sum(ctx, x, 2, 300, k, 40, 0, NULL), FC_ERR_NULL);
    EXPECT(fc_lagged_sum(ctx, x, 2, 300, k, 0, 0, y), FC_ERR_KERNEL);
    EXPECT(fc_lagged_sum(ctx, x, 2, 300, k, 40, 9, y), FC_ERR_ARG);
    EXPECT(fc_lagged_sum(ctx, x, 2, 300, k, 40, -1, y), FC_ERR_ARG);
    EXPECT(fc_lagged_sum(ctx, x, 2, 300, k, 40, 0, x + 5), FC_ERR_ARG);
    EXPECT(fc_lagged_sum(ctx, x, HUGE_SZ, HUGE_SZ, k, 40, 0, y), FC_ERR_SIZE);
    EXPECT(fc_lagged_sum(ctx, x, (size_t)1 << 33, (size_t)1 << 33, k, 40, 0, y), FC_ERR_SIZE);
    EXPECT(fc_apply(ctx, 0, 0.5, 0.01, x, HUGE_SZ / 2, 4, 0, y), FC_ERR_SIZE);
    memcpy(y0, y, sizeof y);
    {
        double xb[10] = {1, 2, 3, NAN, 5, 6, 7, 8, 9, 10}, kb[3] = {1, INFINITY, 2};
        EXPECT(fc_lagged_sum(ctx, xb, 1, 10, k, 3, 0, y), FC_ERR_NONFINITE);
        EXPECT(fc_lagged_sum(ctx, x, 1, 10, kb, 3, 0, y), FC_ERR_KERNEL);
        EXPECT(fc_apply(ctx, 0, 0.5, 0.01, xb, 1, 10, 0, y), FC_ERR_NONFINITE);
        TRUE_(memcmp(y, y0, sizeof y) == 0); /* y untouched */
    }
    EXPECT(fc_apply(ctx, 9, 0.5, 0.01, x, 1, 10, 0, y), FC_ERR_RULE);
    EXPECT(fc_apply(ctx, 0, NaN_, 0.01, x, 1, 10, 0, y), FC_ERR_ORDER);
    EXPECT(fc_apply(ctx, 0, 0.5, NaN_, x, 1, 10, 0, y), FC_ERR_STEP);
    EXPECT(fc_apply(ctx, 0, 0.5, 0.01, x, 1, 10, 5, y), FC_ERR_ARG);
    EXPECT(fc_apply(ctx, 0, 0.5, 0.01, x, 1, 10, 0, x), FC_ERR_ARG);
    EXPECT(fc_apply(ctx, 0, 0.5, 0.01, NULL, 1, 10, 0, y), FC_ERR_NULL);
    {
        double big[4] = {1e308, -1e308, 1e308, 1e308}, yb[4];
        EXPECT(fc_apply(ctx, FC_RULE_RECTANGLE, 2.0, 1e10, big, 1, 4, 0, yb), FC_ERR_RANGE);
    }
    fc_context_free(ctx);
    fc_context_free(NULL);
}

static void stream_life(fc_stream *s, size_t ch, int compressed)
{
    double x[64 * 4], y[64 * 4], y2[64 * 4], h[4], v;
    uint64_t cnt, rem;
    size_t sz, wr, nb, terms, chs;
    int mode, pol, flag, rule;
    unsigned char *buf;
    fc_stream *l;
    for (size_t i = 0; i < 64 * ch; i++) x[i] = cos(0.3 * (double)i);
    EXPECT(fc_stream_push(s, x, y), FC_OK);
    EXPECT(fc_stream_push_block(s, x, 64, y), FC_OK);
    EXPECT(fc_stream_push_block(s, x, 0, y), FC_OK);
    EXPECT(fc_stream_preview(s, x, y), FC_OK);
    EXPECT(fc_stream_history(s, h), FC_OK);
    EXPECT(fc_stream_count(s, &cnt), FC_OK);
    TRUE_(cnt == 65);
    EXPECT(fc_stream_channels(s, &chs), FC_OK);
    TRUE_(chs == ch);
    EXPECT(fc_stream_mode(s, &mode), FC_OK);
    TRUE_(mode == (compressed ? FC_MODE_COMPRESSED : FC_MODE_EXACT));
    EXPECT(fc_stream_nbytes(s, &nb), FC_OK);
    EXPECT(fc_stream_terms(s, &terms), FC_OK);
    EXPECT(fc_stream_reserve(s, 1000), FC_OK);
    EXPECT(fc_stream_set_horizon_policy(s, FC_HORIZON_CONTINUE), FC_OK);
    EXPECT(fc_stream_set_horizon_policy(s, 7), FC_ERR_ARG);
    EXPECT(fc_stream_set_horizon_policy(s, FC_HORIZON_REFUSE), FC_OK);
    EXPECT(fc_stream_horizon_policy(s, &pol), FC_OK);
    EXPECT(fc_stream_past_horizon(s, &flag), FC_OK);
    EXPECT(fc_stream_remaining(s, &rem), FC_OK);
    EXPECT(fc_stream_rule(s, &rule), FC_OK);
    EXPECT(fc_stream_order(s, &v), FC_OK);
    EXPECT(fc_stream_step(s, &v), FC_OK);
    EXPECT(fc_stream_tol(s, &v), FC_OK);
    EXPECT(fc_stream_horizon(s, &v), FC_OK);
    /* bad arguments: refused, nothing changes */
    {
        double bad[4] = {1, NAN, 1, 1};
        EXPECT(fc_stream_push(s, bad, y), ch >= 2 ? FC_ERR_NONFINITE : FC_OK);
        if (ch == 1) EXPECT(fc_stream_push(s, bad + 1, y), FC_ERR_NONFINITE);
        EXPECT(fc_stream_count(s, &cnt), FC_OK);
        TRUE_(cnt == (ch >= 2 ? 65u : 66u));
    }
    EXPECT(fc_stream_push(NULL, x, y), FC_ERR_NULL);
    EXPECT(fc_stream_push(s, NULL, y), FC_ERR_NULL);
    EXPECT(fc_stream_push(s, x, NULL), FC_ERR_NULL);
    EXPECT(fc_stream_push_block(s, x, 64, x + 1), FC_ERR_ARG);
    EXPECT(fc_stream_push_block(s, x, HUGE_SZ, y), FC_ERR_SIZE);
    EXPECT(fc_stream_push_block_threads(s, x, 64, y, 0), FC_ERR_ARG);
    EXPECT(fc_stream_push_block_threads(s, x, 64, y, FC_THREADS_MAX + 1), FC_ERR_ARG);
    EXPECT(fc_stream_push_block_threads(NULL, x, 64, y, 2), FC_ERR_NULL);
    EXPECT(fc_stream_push_block_threads(s, x, 64, x + 1, 2), FC_ERR_ARG);
    EXPECT(fc_stream_preview(s, NULL, y), FC_ERR_NULL);
    EXPECT(fc_stream_history(s, NULL), FC_ERR_NULL);
    /* a compressed stream never allocates after creation: any n is fine */
    EXPECT(fc_stream_reserve(s, UINT64_MAX), compressed ? FC_OK : FC_ERR_SIZE);
    EXPECT(fc_stream_count(NULL, &cnt), FC_ERR_NULL);
    EXPECT(fc_stream_terms(s, NULL), FC_ERR_NULL);
    EXPECT(fc_stream_order(NULL, &v), FC_ERR_NULL);
    EXPECT(fc_stream_push1(s, 1.0, y), ch == 1 ? FC_OK : FC_ERR_ARG);
    EXPECT(fc_stream_push1(s, NAN, y), ch == 1 ? FC_ERR_NONFINITE : FC_ERR_ARG);
    {   /* the value form: the output, or NaN with the status in the cell */
        int cell = -1;
        double v = fc_stream_push1_value(s, 1.0, &cell);
        TRUE_(ch == 1 ? (isfinite(v) && cell == -1) : (isnan(v) && cell == FC_ERR_ARG));
        cell = -1;
        v = fc_stream_push1_value(s, NAN, &cell);
        TRUE_(isnan(v) && cell == (ch == 1 ? FC_ERR_NONFINITE : FC_ERR_ARG));
        TRUE_(isnan(fc_stream_push1_value(NULL, 1.0, &cell)) && cell == FC_ERR_NULL);
        TRUE_(isnan(fc_stream_push1_value(s, 1.0, NULL)));
    }
    /* save, load, resume bit for bit */
    EXPECT(fc_stream_save_size(s, &sz), FC_OK);
    buf = malloc(sz);
    EXPECT(fc_stream_save(s, buf, sz - 1, &wr), FC_ERR_ARG);
    EXPECT(fc_stream_save(s, NULL, sz, &wr), FC_ERR_NULL);
    EXPECT(fc_stream_save(s, buf, sz, &wr), FC_OK);
    EXPECT(fc_stream_load(NULL, sz, &l), FC_ERR_NULL);
    EXPECT(fc_stream_load(buf, sz, NULL), FC_ERR_NULL);
    EXPECT(fc_stream_load(buf, 0, &l), FC_ERR_FORMAT);
    EXPECT(fc_stream_load(buf, wr, &l), FC_OK);
    EXPECT(fc_stream_push_block(s, x, 64, y), FC_OK);
    EXPECT(fc_stream_push_block(l, x, 64, y2), FC_OK);
    TRUE_(memcmp(y, y2, 64 * ch * sizeof *y) == 0);
    fc_stream_free(l);
    blob_faults(compressed ? "compressed stream" : "exact stream", buf, wr, ld_stream, fr_stream);
    free(buf);
    EXPECT(fc_stream_reset(s), FC_OK);
    EXPECT(fc_stream_count(s, &cnt), FC_OK);
    TRUE_(cnt == 0);
    EXPECT(fc_stream_reset(NULL), FC_ERR_NULL);
}

/* The rules on a grid of times and the stream with a time per sample. */
static void test_grid(void)
{
    enum { N = 500 };
    double t[N], x[N], y[N], yb[N];
    for (int i = 0; i < N; i++) { t[i] = 0.01 * i + 0.003 * sin(i); x[i] = sin(0.05 * i); }
    size_t K = 0;
    EXPECT(fc_grid_apply(FC_RULE_TRAPEZOID, 0.5, t, x, 1, N, 1e-10, y, &K), FC_OK);
    TRUE_(K > 0 && y[0] == 0.0);
    EXPECT(fc_grid_apply(FC_RULE_GRUNWALD, 0.5, t, x, 1, N, 1e-10, y, NULL), FC_ERR_RULE);
    EXPECT(fc_grid_apply(FC_RULE_L1, 1.0, t, x, 1, N, 1e-10, y, NULL), FC_ERR_ORDER);
    EXPECT(fc_grid_apply(FC_RULE_TRAPEZOID, 1.5, t, x, 1, N, 1e-10, y, NULL), FC_OK);
    EXPECT(fc_grid_apply(FC_RULE_RECTANGLE, 2.0, t, x, 1, N, 1e-10, y, NULL), FC_ERR_ORDER);
    EXPECT(fc_grid_apply(FC_RULE_RECTANGLE, 0.5, t, x, 1, N, 0.5, y, NULL), FC_ERR_TOL);
    EXPECT(fc_grid_apply(FC_RULE_RECTANGLE, 0.5, NULL, x, 1, N, 1e-10, y, NULL), FC_ERR_NULL);
    EXPECT(fc_grid_apply(FC_RULE_RECTANGLE, 0.5, t, x, 1, N, 1e-10, x, NULL), FC_ERR_ARG);
    EXPECT(fc_grid_apply(FC_RULE_RECTANGLE, 0.5, t, x, HUGE_SZ, 2, 1e-10, y, NULL), FC_ERR_SIZE);
    fc_stream *s = NULL, *l = NULL;
    EXPECT(fc_stream_create_timed(FC_RULE_TRAPEZOID, 0.5, 0.005, 1, 1e-10, 10.0, NULL), FC_ERR_NULL);
    EXPECT(fc_stream_create_timed(FC_RULE_TRAPEZOID, 0.5, NaN_, 1, 1e-10, 10.0, &s), FC_ERR_STEP);
    EXPECT(fc_stream_create_timed(FC_RULE_TRAPEZOID, 0.5, 0.005, 1, 1e-10, 10.0, &s), FC_OK);
    EXPECT(fc_stream_push_timed(s, t, x, N / 2, yb), FC_OK);
    double pv = -1.0, pv2 = -2.0;
    EXPECT(fc_stream_preview_timed(s, t[N / 2], x + N / 2, &pv), FC_OK);
    EXPECT(fc_stream_preview_timed(s, t[N / 2], x + N / 2, &pv2), FC_OK);
    TRUE_(pv == pv2);                                                  /* nothing changed */
    EXPECT(fc_stream_preview_timed(s, t[N / 2 - 1], x, &pv), FC_ERR_ARG); /* time not after */
    EXPECT(fc_stream_preview_timed(s, NaN_, x, &pv), FC_ERR_NONFINITE);
    EXPECT(fc_stream_preview_timed(s, t[N / 2], x, NULL), FC_ERR_NULL);
    EXPECT(fc_stream_preview_timed(NULL, t[N / 2], x, &pv), FC_ERR_NULL);
    EXPECT(fc_stream_push_timed(s, t + N / 2, x + N / 2, N - N / 2, yb + N / 2), FC_OK);
    TRUE_(yb[N / 2] == pv);                                            /* the push's bits */
    int timed = 0;
    EXPECT(fc_stream_is_timed(s, &timed), FC_OK);
    TRUE_(timed == 1);
    EXPECT(fc_stream_push_timed(s, t, x, 1, yb), FC_ERR_ARG);          /* time not after */
    EXPECT(fc_stream_push_timed(NULL, t, x, 1, yb), FC_ERR_NULL);
    EXPECT(fc_stream_push(s, x, yb), FC_ERR_ARG);
    size_t sz, wr;
    EXPECT(fc_stream_save_size(s, &sz), FC_OK);
    unsigned char *buf = malloc(sz);
    EXPECT(fc_stream_save(s, buf, sz, &wr), FC_OK);
    EXPECT(fc_stream_load(buf, wr, &l), FC_OK);
    blob_faults("timed stream", buf, wr, ld_stream, fr_stream);
    free(buf);
    fc_stream_free(l);
    fc_stream_free(s);
    /* at order 1.5 (the running integral, saved as format version 2) */
    s = l = NULL;
    EXPECT(fc_stream_create_timed(FC_RULE_TRAPEZOID, 1.5, 0.005, 1, 1e-10, 10.0, &s), FC_OK);
    EXPECT(fc_stream_create_timed(FC_RULE_RECTANGLE, 2.0, 0.005, 1, 1e-10, 10.0, &l), FC_ERR_ORDER);
    EXPECT(fc_stream_push_timed(s, t, x, N, yb), FC_OK);
    EXPECT(fc_stream_save_size(s, &sz), FC_OK);
    buf = malloc(sz);
    EXPECT(fc_stream_save(s, buf, sz, &wr), FC_OK);
    EXPECT(fc_stream_load(buf, wr, &l), FC_OK);
    blob_faults("timed stream 1.5", buf, wr, ld_stream, fr_stream);
    free(buf);
    fc_stream_free(l);
    fc_stream_free(s);
}

static void test_streams(void)
{
    fc_stream *s;
    double k[5] = {1, 0.5, 0.25, 0.125, 0.0625};
    for (int r = 0; r < 4; r++)
        for (size_t ch = 1; ch <= 3; ch += 2) {
            EXPECT(fc_stream_create(r, 0.4, 0.1, ch, FC_MODE_EXACT, 0, 0, &s), FC_OK);
            stream_life(s, ch, 0);
            fc_stream_free(s);
            EXPECT(fc_stream_create(r, 0.4, 0.1, ch, FC_MODE_COMPRESSED, 1e-8, 1e5, &s), FC_OK);
            stream_life(s, ch, 1);
            fc_stream_free(s);
        }
    EXPECT(fc_stream_create_kernel(k, 5, 2, &s), FC_OK);
    stream_life(s, 2, 0);
    fc_stream_free(s);
    fc_stream_free(NULL);
    EXPECT(fc_stream_create(0, 0.5, 0.1, 1, 0, 0, 0, NULL), FC_ERR_NULL);
    EXPECT(fc_stream_create(42, 0.5, 0.1, 1, 0, 0, 0, &s), FC_ERR_RULE);
    EXPECT(fc_stream_create(0, NaN_, 0.1, 1, 0, 0, 0, &s), FC_ERR_ORDER);
    EXPECT(fc_stream_create(0, 0.5, NaN_, 1, 0, 0, 0, &s), FC_ERR_STEP);
    EXPECT(fc_stream_create(0, 0.5, 0.1, 0, 0, 0, 0, &s), FC_ERR_ARG);
    EXPECT(fc_stream_create(0, 0.5, 0.1, HUGE_SZ, 0, 0, 0, &s), FC_ERR_SIZE);
    EXPECT(fc_stream_create(0, 0.5, 0.1, 1, 5, 0, 0, &s), FC_ERR_MODE);
    EXPECT(fc_stream_create(0, 0.5, 0.1, 1, 1, NaN_, 1e5, &s), FC_ERR_TOL);
    EXPECT(fc_stream_create(0, 0.5, 0.1, 1, 1, 1e-8, NaN_, &s), FC_ERR_TOL);
    EXPECT(fc_stream_create(0, 0.5, 0.1, 1, 1, 1.0, 1e5, &s), FC_ERR_TOL);
    EXPECT(fc_stream_create(FC_RULE_GRUNWALD, 1.5, 0.1, 1, 1, 1e-8, 1e5, &s), FC_ERR_ORDER);
    EXPECT(fc_stream_create_kernel(NULL, 5, 1, &s), FC_ERR_NULL);
    EXPECT(fc_stream_create_kernel(k, 0, 1, &s), FC_ERR_KERNEL);
    EXPECT(fc_stream_create_kernel(k, 5, 0, &s), FC_ERR_ARG);
    EXPECT(fc_stream_create_kernel(k, HUGE_SZ, 1, &s), FC_ERR_SIZE);
    EXPECT(fc_stream_create_kernel(k, 5, HUGE_SZ, &s), FC_ERR_SIZE);
    /* horizon refusal */
    EXPECT(fc_stream_create(0, 0.5, 0.1, 1, 1, 1e-8, 3, &s), FC_OK);
    {
        double x = 1, y;
        for (int i = 0; i < 4; i++) EXPECT(fc_stream_push(s, &x, &y), FC_OK);
        EXPECT(fc_stream_push(s, &x, &y), FC_ERR_HORIZON);
        EXPECT(fc_stream_set_horizon_policy(s, FC_HORIZON_CONTINUE), FC_OK);
        EXPECT(fc_stream_push(s, &x, &y), FC_OK);
    }
    fc_stream_free(s);
}

static int rhs(double t, const double *y, double *f, void *u) { (void)t; (void)u; f[0] = -y[0]; f[1] = -0.5 * y[1] + y[0]; return 0; }
static int rhs_fail(double t, const double *y, double *f, void *u) { (void)y; (void)f; (void)u; return t > 0.05; }
static int jac(double t, const double *y, double *J, void *u) { (void)t; (void)y; (void)u; J[0] = -1; J[1] = 0; J[2] = 1; J[3] = -0.5; return 0; }

static void test_solver(void)
{
    double o[2] = {0.6, 0.9}, init[2] = {1, 0.5}, t, yv[2], yo[40], yo2[40];
    uint64_t n, a, b;
    size_t done, m, sz, wr, nb;
    fc_solver *s, *l;
    unsigned char *buf;
    for (int meth = 0; meth < 4; meth++)
        for (int mem = 0; mem < 2; mem++) {
            int st = fc_solver_create(2, o, 0.01, 0.0, init, meth, mem, 1e-8, 1000, &s);
            EXPECT(st, FC_OK);
            if (st) continue;
            EXPECT(fc_solver_advance(s, 5, NULL, NULL, &done), FC_ERR_NORHS);
            EXPECT(fc_solver_set_rhs(s, rhs, NULL), FC_OK);
            EXPECT(fc_solver_set_jacobian(s, meth >= 2 ? jac : NULL, NULL), FC_OK);
            EXPECT(fc_solver_set_newton(s, 1e-12, 20), FC_OK);
            EXPECT(fc_solver_set_newton(s, NaN_, 20), FC_ERR_TOL);
            EXPECT(fc_solver_set_newton(s, 1e-12, 0), FC_ERR_ARG);
            EXPECT(fc_solver_set_corrections(s, 2), FC_OK);
            EXPECT(fc_solver_set_corrections(s, 0), FC_ERR_ARG);
            EXPECT(fc_solver_set_corrections(s, 101), FC_ERR_ARG);
            EXPECT(fc_solver_advance(s, 20, NULL, yo, &done), FC_OK);
            EXPECT(fc_solver_advance(s, 0, NULL, NULL, &done), FC_OK);
            EXPECT(fc_solver_advance(s, HUGE_SZ, NULL, NULL, &done), FC_ERR_SIZE);
            EXPECT(fc_solver_advance(s, 5, NULL, NULL, NULL), FC_ERR_NULL);
            EXPECT(fc_solver_time(s, &t), FC_OK);
            EXPECT(fc_solver_state(s, yv), FC_OK);
            EXPECT(fc_solver_steps(s, &n), FC_OK);
            TRUE_(n == 20);
            EXPECT(fc_solver_dim(s, &m), FC_OK);
            EXPECT(fc_solver_counts(s, &a, &b), FC_OK);
            EXPECT(fc_solver_failure(s, &n, &t), FC_OK);
            EXPECT(fc_solver_nbytes(s, &nb), FC_OK);
            EXPECT(fc_solver_save_size(s, &sz), FC_OK);
            buf = malloc(sz);
            EXPECT(fc_solver_save(s, buf, sz - 1, &wr), FC_ERR_ARG);
            EXPECT(fc_solver_save(s, buf, sz, &wr), FC_OK);
            EXPECT(fc_solver_load(buf, wr, &l), FC_OK);
            EXPECT(fc_solver_set_rhs(l, rhs, NULL), FC_OK);
            if (meth >= 2) EXPECT(fc_solver_set_jacobian(l, jac, NULL), FC_OK);
            if (meth == FC_METHOD_PC) EXPECT(fc_solver_set_corrections(l, 2), FC_OK);
            EXPECT(fc_solver_set_newton(l, 1e-12, 20), FC_OK);
            EXPECT(fc_solver_advance(s, 20, NULL, yo, &done), FC_OK);
            EXPECT(fc_solver_advance(l, 20, NULL, yo2, &done), FC_OK);
            TRUE_(memcmp(yo, yo2, sizeof yo) == 0);
            fc_solver_free(l);
            blob_faults("solver", buf, wr, ld_solver, fr_solver);
            free(buf);
            if (mem) {
                /* horizon 1000 steps: refused before any work */
                EXPECT(fc_solver_advance(s, 2000, NULL, NULL, &done), FC_ERR_HORIZON);
                TRUE_(done == 0);
            }
            else {
                /* exact memory has no horizon (the 1000 given is not used) */
                EXPECT(fc_solver_advance(s, 2000, NULL, NULL, &done), FC_OK);
                TRUE_(done == 2000);
            }
            EXPECT(fc_solver_set_rhs(s, rhs_fail, NULL), FC_OK);
            EXPECT(fc_solver_advance(s, 20, NULL, NULL, &done), FC_ERR_CALLBACK);
            fc_solver_free(s);
        }
    fc_solver_free(NULL);
    EXPECT(fc_solver_create(2, o, 0.01, 0, init, 0, 0, 0, 0, NULL), FC_ERR_NULL);
    EXPECT(fc_solver_create(2, NULL, 0.01, 0, init, 0, 0, 0, 0, &s), FC_ERR_NULL);
    EXPECT(fc_solver_create(0, o, 0.01, 0, init, 0, 0, 0, 0, &s), FC_ERR_SIZE);
    {
        double bo[2] = {NAN, 0.5};
        EXPECT(fc_solver_create(2, bo, 0.01, 0, init, 0, 0, 0, 0, &s), FC_ERR_ORDER);
    }
    EXPECT(fc_solver_create(2, o, NaN_, 0, init, 0, 0, 0, 0, &s), FC_ERR_STEP);
    EXPECT(fc_solver_create(2, o, 0.01, NaN_, init, 0, 0, 0, 0, &s), FC_ERR_ARG);
    {
        double bi[2] = {1, INFINITY};
        EXPECT(fc_solver_create(2, o, 0.01, 0, bi, 0, 0, 0, 0, &s), FC_ERR_NONFINITE);
    }
    EXPECT(fc_solver_create(2, o, 0.01, 0, init, 17, 0, 0, 0, &s), FC_ERR_RULE);
    /* the implicit rectangle rule with exact memory needs no horizon */
    EXPECT(fc_solver_create(2, o, 0.01, 0, init, FC_METHOD_IMPLICIT_RECTANGLE, 0, 0, 0, &s), FC_OK);
    fc_solver_free(s);
    {
        /* implicit rectangle, compressed: 1 - a rounds to 1 (no L1 stream
           of order 1), and order 2 */
        double so[2] = {1e-17, 0.5}, o2[2] = {2.0, 0.5}, in2[4] = {1, 1, 0, 0};
        EXPECT(fc_solver_create(2, so, 0.01, 0, init, FC_METHOD_IMPLICIT_RECTANGLE, 1, 1e-8, 100, &s), FC_ERR_ORDER);
        EXPECT(fc_solver_create(2, o2, 0.01, 0, in2, FC_METHOD_IMPLICIT_RECTANGLE, 1, 1e-8, 100, &s), FC_ERR_ORDER);
        /* with compressed memory the horizon may pass 2^28 */
        EXPECT(fc_solver_create(2, o, 0.01, 0, init, FC_METHOD_IMPLICIT_RECTANGLE, 1, 1e-8, 1e12, &s), FC_OK);
        fc_solver_free(s);
    }
    EXPECT(fc_solver_create(2, o, 0.01, 0, init, 0, 9, 0, 0, &s), FC_ERR_MODE);
    EXPECT(fc_solver_create(2, o, 0.01, 0, init, 0, 1, NaN_, 100, &s), FC_ERR_TOL);
    EXPECT(fc_solver_set_rhs(NULL, rhs, NULL), FC_ERR_NULL);
    EXPECT(fc_solver_time(NULL, &t), FC_ERR_NULL);
    EXPECT(fc_solver_load(NULL, 10, &s), FC_ERR_NULL);
}

static void test_controller(void)
{
    fc_controller_params p, q;
    fc_controller *c, *l;
    double u, t[6], r[50], ym[50], uu[50], uu2[50];
    int st;
    uint64_t cnt;
    size_t sz, wr, nb, done;
    unsigned char *buf;
    for (int i = 0; i < 50; i++) { r[i] = 1.0; ym[i] = 0.02 * i; }
    EXPECT(fc_controller_default_params(NULL), FC_ERR_NULL);
    for (int mem = 0; mem < 2; mem++) {
        EXPECT(fc_controller_default_params(&p), FC_OK);
        p.ki = 0.4; p.kd = 0.1; p.memory = mem; p.out_min = -1; p.out_max = 1;
        p.filter_time = 0.05; p.rate_limit = 100;
        EXPECT(fc_controller_create(&p, &c), FC_OK);
        EXPECT(fc_controller_update(c, 1.0, 0.0, &u), FC_OK);
        EXPECT(fc_controller_update(c, NAN, 0.0, &u), FC_ERR_NONFINITE);
        EXPECT(fc_controller_update(c, 1.0, 0.0, NULL), FC_ERR_NULL);
        EXPECT(fc_controller_update_block(c, r, ym, 50, uu, &done), FC_OK);
        EXPECT(fc_controller_update_block(c, r, ym, 50, (double *)r, &done), FC_ERR_ARG);
        EXPECT(fc_controller_update_block(c, r, ym, HUGE_SZ, uu, &done), FC_ERR_SIZE);
        EXPECT(fc_controller_set_manual(c, NAN), FC_ERR_NONFINITE);
        EXPECT(fc_controller_set_manual(c, 0.3), FC_OK);
        EXPECT(fc_controller_update(c, 1.0, 0.0, &u), FC_OK);
        EXPECT(fc_controller_set_auto(c), FC_OK);
        EXPECT(fc_controller_get_params(c, &q), FC_OK);
        EXPECT(fc_controller_status(c, &st), FC_OK);
        EXPECT(fc_controller_terms(c, t), FC_OK);
        EXPECT(fc_controller_count(c, &cnt), FC_OK);
        TRUE_(cnt == 52);
        EXPECT(fc_controller_nbytes(c, &nb), FC_OK);
        EXPECT(fc_controller_save_size(c, &sz), FC_OK);
        buf = malloc(sz);
        EXPECT(fc_controller_save(c, buf, sz - 1, &wr), FC_ERR_ARG);
        EXPECT(fc_controller_save(c, buf, sz, &wr), FC_OK);
        EXPECT(fc_controller_load(buf, wr, &l), FC_OK);
        EXPECT(fc_controller_update_block(c, r, ym, 50, uu, NULL), FC_OK);
        EXPECT(fc_controller_update_block(l, r, ym, 50, uu2, NULL), FC_OK);
        TRUE_(memcmp(uu, uu2, sizeof uu) == 0);
        fc_controller_free(l);
        blob_faults("controller", buf, wr, ld_ctrl, fr_ctrl);
        free(buf);
        EXPECT(fc_controller_reset(c), FC_OK);
        fc_controller_free(c);
    }
    fc_controller_free(NULL);
    fc_controller_default_params(&p);
    EXPECT(fc_controller_create(NULL, &c), FC_ERR_NULL);
    EXPECT(fc_controller_create(&p, NULL), FC_ERR_NULL);
    q = p; q.kp = NAN; EXPECT(fc_controller_create(&q, &c), FC_ERR_ARG);
    q = p; q.out_min = 2; q.out_max = 1; EXPECT(fc_controller_create(&q, &c), FC_ERR_ARG);
    q = p; q.anti_windup = 9; EXPECT(fc_controller_create(&q, &c), FC_ERR_ARG);
    q = p; q.ki = 1; q.integral_rule = FC_RULE_GRUNWALD; EXPECT(fc_controller_create(&q, &c), FC_ERR_RULE);
    q = p; q.ki = 1; q.integral_order = NAN; EXPECT(fc_controller_create(&q, &c), FC_ERR_ORDER);
    q = p; q.step = NAN; EXPECT(fc_controller_create(&q, &c), FC_ERR_STEP);
    q = p; q.memory = 5; EXPECT(fc_controller_create(&q, &c), FC_ERR_MODE);
    q = p; q.ki = 1; q.tol = NAN; EXPECT(fc_controller_create(&q, &c), FC_ERR_TOL);
    EXPECT(fc_controller_update(NULL, 1, 1, &u), FC_ERR_NULL);
    EXPECT(fc_controller_load(NULL, 4, &c), FC_ERR_NULL);
}

static void test_fft(void)
{
    fc_fft_plan *p;
    double x[64], X[66], z[64];
    for (int i = 0; i < 64; i++) x[i] = sin(0.7 * i);
    EXPECT(fc_rfft_create(64, NULL), FC_ERR_NULL);
    EXPECT(fc_rfft_create(0, &p), FC_ERR_SIZE);
    EXPECT(fc_rfft_create(1, &p), FC_ERR_SIZE);
    EXPECT(fc_rfft_create(96, &p), FC_ERR_SIZE);
    EXPECT(fc_rfft_create((size_t)1 << 31, &p), FC_ERR_SIZE);
    EXPECT(fc_rfft_create(HUGE_SZ, &p), FC_ERR_SIZE);
    for (size_t n = 2; n <= 64; n *= 2) {
        EXPECT(fc_rfft_create(n, &p), FC_OK);
        EXPECT(fc_rfft_forward(p, x, X), FC_OK);
        EXPECT(fc_rfft_inverse(p, X, z), FC_OK);
        for (size_t i = 0; i < n; i++) TRUE_(fabs(z[i] - x[i]) < 1e-13);
        EXPECT(fc_rfft_forward(p, x, x + 1), FC_ERR_ARG);
        EXPECT(fc_rfft_inverse(p, X, X + 1), FC_ERR_ARG);
        EXPECT(fc_rfft_forward(NULL, x, X), FC_ERR_NULL);
        EXPECT(fc_rfft_forward(p, NULL, X), FC_ERR_NULL);
        EXPECT(fc_rfft_inverse(p, X, NULL), FC_ERR_NULL);
        fc_rfft_free(p);
    }
    fc_rfft_free(NULL);
}

/* ------------------------------------------------------------ files */

static int dir_entries(const char *dir)
{
    int n = 0;
    DIR *d = opendir(dir);
    struct dirent *e;
    if (d == NULL) return -1;
    while ((e = readdir(d)) != NULL)
        if (strcmp(e->d_name, ".") && strcmp(e->d_name, "..")) n++;
    closedir(d);
    return n;
}

static int file_equals(const char *path, const unsigned char *b, size_t n)
{
    unsigned char *d = NULL;
    size_t m = 0;
    int same;
    if (fc_file_read(path, n + 10, &d, &m) != FC_OK) return 0;
    same = m == n && memcmp(d, b, n) == 0;
    fc_file_data_free(d);
    return same;
}

static void test_files(void)
{
    char dir[] = "/tmp/fc_api_driver_XXXXXX";
    char path[96], missing[128], sub[96];
    unsigned char *d = NULL, *buf;
    size_t n = 0, sz, wr;
    const unsigned char old[] = "an old checkpoint";
    double x[40], y[40], y2[40];
    fc_stream *s, *l = NULL;
    fc_solver *sv, *lv = NULL;
    fc_controller_params p;
    fc_controller *c, *lc = NULL;
    uint64_t cnt;
    if (mkdtemp(dir) == NULL) { fails++; printf("mkdtemp failed\n"); return; }
    snprintf(path, sizeof path, "%s/state.bin", dir);
    snprintf(missing, sizeof missing, "%s/no-such-dir/state.bin", dir);
    snprintf(sub, sizeof sub, "%s/sub", dir);

    /* the generic pair */
    EXPECT(fc_file_write(NULL, old, sizeof old), FC_ERR_NULL);
    EXPECT(fc_file_write(path, NULL, 4), FC_ERR_NULL);
    EXPECT(fc_file_write("", old, sizeof old), FC_ERR_ARG);
    EXPECT(fc_file_write("x/", old, sizeof old), FC_ERR_ARG);
    EXPECT(fc_file_write(missing, old, sizeof old), FC_ERR_IO);
    TRUE_(errno == ENOENT);
    EXPECT(fc_file_write(path, NULL, 0), FC_OK);          /* an empty file */
    EXPECT(fc_file_read(path, 0, &d, &n), FC_OK);
    TRUE_(n == 0);
    fc_file_data_free(d);
    EXPECT(fc_file_write(path, old, sizeof old), FC_OK);  /* replaced */
    TRUE_(file_equals(path, old, sizeof old));
    EXPECT(fc_file_read(NULL, 10, &d, &n), FC_ERR_NULL);
    EXPECT(fc_file_read(path, 10, NULL, &n), FC_ERR_NULL);
    EXPECT(fc_file_read(path, 10, &d, NULL), FC_ERR_NULL);
    EXPECT(fc_file_read("", 10, &d, &n), FC_ERR_ARG);
    d = NULL; n = 7;
    EXPECT(fc_file_read(path, sizeof old - 1, &d, &n), FC_ERR_SIZE);
    TRUE_(d == NULL && n == 7);                            /* untouched */
    EXPECT(fc_file_read(path, sizeof old, &d, &n), FC_OK);
    TRUE_(n == sizeof old);
    fc_file_data_free(d);
    EXPECT(fc_file_read(path, HUGE_SZ, &d, &n), FC_OK);
    fc_file_data_free(d);
    EXPECT(fc_file_read(missing, 10, &d, &n), FC_ERR_IO);
    TRUE_(errno == ENOENT);
    EXPECT(fc_file_read(dir, 10, &d, &n), FC_ERR_IO);
    TRUE_(errno == EISDIR);
    EXPECT(fc_file_read("/dev/null", 10, &d, &n), FC_ERR_IO);
    TRUE_(errno == EINVAL);
    fc_file_data_free(NULL);
    TRUE_(mkdir(sub, 0700) == 0);
    EXPECT(fc_file_write(sub, old, sizeof old), FC_ERR_IO); /* rename onto a directory */
    TRUE_(dir_entries(dir) == 2);                            /* state.bin, sub: no temporary */
    TRUE_(rmdir(sub) == 0);

    /* streams */
    for (int i = 0; i < 40; i++) x[i] = cos(0.3 * i);
    for (int mode = 0; mode < 2; mode++) {
        EXPECT(fc_stream_create(FC_RULE_L1, 0.4, 0.1, 1, mode, 1e-9, 1000, &s), FC_OK);
        EXPECT(fc_stream_push_block(s, x, 20, y), FC_OK);
        EXPECT(fc_stream_save_file(NULL, path), FC_ERR_NULL);
        EXPECT(fc_stream_save_file(s, NULL), FC_ERR_NULL);
        EXPECT(fc_stream_save_file(s, ""), FC_ERR_ARG);
        EXPECT(fc_stream_save_file(s, missing), FC_ERR_IO);
        EXPECT(fc_stream_save_file(s, path), FC_OK);
        EXPECT(fc_stream_load_file(NULL, 1 << 20, &l), FC_ERR_NULL);
        EXPECT(fc_stream_load_file(path, 1 << 20, NULL), FC_ERR_NULL);
        EXPECT(fc_stream_load_file(missing, 1 << 20, &l), FC_ERR_IO);
        EXPECT(fc_stream_load_file(path, 10, &l), FC_ERR_SIZE);
        EXPECT(fc_stream_load_file(path, 1 << 20, &l), FC_OK);
        EXPECT(fc_stream_push_block(s, x + 20, 20, y), FC_OK);
        EXPECT(fc_stream_push_block(l, x + 20, 20, y2), FC_OK);
        TRUE_(memcmp(y, y2, sizeof(double) * 20) == 0);
        fc_stream_free(l);
        l = NULL;
        /* a truncated file is refused, nothing made */
        EXPECT(fc_stream_save_size(s, &sz), FC_OK);
        buf = malloc(sz);
        EXPECT(fc_stream_save(s, buf, sz, &wr), FC_OK);
        EXPECT(fc_file_write(path, buf, wr / 2), FC_OK);
        EXPECT(fc_stream_load_file(path, 1 << 20, &l), FC_ERR_FORMAT);
        TRUE_(l == NULL);
        free(buf);
        fc_stream_free(s);
    }
    /* solver */
    {
        double o[2] = {0.6, 0.9}, init[2] = {1, 0.5};
        EXPECT(fc_solver_create(2, o, 0.01, 0.0, init, FC_METHOD_PC, FC_MODE_EXACT, 0, 0, &sv), FC_OK);
        EXPECT(fc_solver_set_rhs(sv, rhs, NULL), FC_OK);
        EXPECT(fc_solver_advance(sv, 10, NULL, y, &wr), FC_OK);
        EXPECT(fc_solver_save_file(NULL, path), FC_ERR_NULL);
        EXPECT(fc_solver_save_file(sv, missing), FC_ERR_IO);
        EXPECT(fc_solver_save_file(sv, path), FC_OK);
        EXPECT(fc_solver_load_file(path, 1 << 20, NULL), FC_ERR_NULL);
        EXPECT(fc_solver_load_file(path, 10, &lv), FC_ERR_SIZE);
        EXPECT(fc_solver_load_file(missing, 1 << 20, &lv), FC_ERR_IO);
        EXPECT(fc_solver_load_file(path, 1 << 20, &lv), FC_OK);
        EXPECT(fc_solver_set_rhs(lv, rhs, NULL), FC_OK);
        EXPECT(fc_solver_advance(sv, 10, NULL, y, &wr), FC_OK);
        EXPECT(fc_solver_advance(lv, 10, NULL, y2, &wr), FC_OK);
        TRUE_(memcmp(y, y2, sizeof(double) * 20) == 0);
        EXPECT(fc_stream_load_file(path, 1 << 20, &l), FC_ERR_FORMAT);  /* a solver file */
        fc_solver_free(lv);
        fc_solver_free(sv);
    }
    /* controller */
    EXPECT(fc_controller_default_params(&p), FC_OK);
    p.ki = 0.4; p.kd = 0.1;
    EXPECT(fc_controller_create(&p, &c), FC_OK);
    EXPECT(fc_controller_update_block(c, x, x + 1, 20, y, NULL), FC_OK);
    EXPECT(fc_controller_save_file(NULL, path), FC_ERR_NULL);
    EXPECT(fc_controller_save_file(c, missing), FC_ERR_IO);
    EXPECT(fc_controller_save_file(c, path), FC_OK);
    EXPECT(fc_controller_load_file(NULL, 1 << 20, &lc), FC_ERR_NULL);
    EXPECT(fc_controller_load_file(path, 10, &lc), FC_ERR_SIZE);
    EXPECT(fc_controller_load_file(missing, 1 << 20, &lc), FC_ERR_IO);
    EXPECT(fc_controller_load_file(path, 1 << 20, &lc), FC_OK);
    EXPECT(fc_controller_count(lc, &cnt), FC_OK);
    TRUE_(cnt == 20);
    EXPECT(fc_controller_update_block(c, x + 10, x + 11, 20, y, NULL), FC_OK);
    EXPECT(fc_controller_update_block(lc, x + 10, x + 11, 20, y2, NULL), FC_OK);
    TRUE_(memcmp(y, y2, sizeof(double) * 20) == 0);
    fc_controller_free(lc);
    fc_controller_free(c);

    TRUE_(dir_entries(dir) == 1);        /* state.bin only: no temporary left */
    unlink(path);
    TRUE_(rmdir(dir) == 0);
}

int main(void)
{
    test_grid();
    test_info();
    test_weights();
    test_batch();
    test_streams();
    test_solver();
    test_controller();
    test_fft();
    test_files();
    printf("api_driver: %d checks, %d failed\n", checks, fails);
    return fails ? 1 : 0;
}
