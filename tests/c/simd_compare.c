/*
 * simd_compare.c -- the portable (FC_NO_SIMD) build against the default
 * one (make check-portable). "write FILE" stores this build's outputs,
 * "check FILE" recomputes them and compares:
 *   - bit for bit where the library says results do not depend on the
 *     machine's SIMD support: the direct engine (docs/design.md 2.1), the
 *     compressed streams and everything built on them (docs/design.md,
 *     "Arithmetic"; csrc/stream_compressed.c);
 *   - within twice the componentwise bound of csrc/fracconv.h
 *     (fc_lagged_sum: 1e-13 * sum_k |kernel[i-k] x_k| per build) for the
 *     blocked engine and the exact streams (which equal the batch result
 *     to rounding), as the FFT kernels use explicit FMA in the AVX2 path;
 *   - normwise for FC_ENGINE_FFT and the plain FFT (fracconv.h: "accurate
 *     only normwise"): 1e-13 times the largest componentwise scale (for the
 *     FFT, times sum |x|; Higham 2002, ch. 24, error O(u log n) normwise).
 * Invented test signals from a fixed-seed xorshift generator.
 * Exits 1 on any difference beyond its bound.
 */
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <math.h>
#include "fracconv.h"

static FILE *fp;
static int checking, failures;
static unsigned long long rs = 88172645463325252ULL;
static double rnd(void)
{
    rs ^= rs << 13; rs ^= rs >> 7; rs ^= rs << 17;
    return (double)(rs >> 11) / 9007199254740992.0 - 0.3;
}

/* kind 0: bit for bit; 1: |d_i| <= 2e-13 b_i; 2: |d_i| <= 2e-13 max b */
static void item(const char *name, const double *y, size_t n, int kind,
                 const double *b)
{
    size_t i, bad = 0;
    double bmax = 0.0;
    if (!checking) {
        if (fwrite(y, sizeof *y, n, fp) != n) { printf("write failed\n"); exit(2); }
        return;
    }
    double *r = malloc(n * sizeof *r + 1);
    if (r == NULL || fread(r, sizeof *r, n, fp) != n) { printf("%s: reference file short\n", name); exit(2); }
    if (b != NULL) for (i = 0; i < n; i++) if (b[i] > bmax) bmax = b[i];
    for (i = 0; i < n; i++) {
        double d = fabs(y[i] - r[i]);
        int ok = kind == 0 ? memcmp(&y[i], &r[i], sizeof r[i]) == 0
               : kind == 1 ? d <= 2e-13 * b[i] : d <= 2e-13 * bmax;
        if (!ok && bad++ < 3)
            printf("%s[%zu]: %.17g vs %.17g (bound kind %d)\n", name, i, y[i], r[i], kind);
    }
    if (bad) failures++;
    printf("%-28s %8zu values  %s\n", name, n, bad ? "DIFFER" : (kind == 0 ? "same bits" : "within bound"));
    free(r);
}

static double *arr(size_t n) { double *p = calloc(n ? n : 1, sizeof *p); if (!p) exit(2); return p; }

int main(int argc, char **argv)
{
    const int rules[4] = {FC_RULE_RECTANGLE, FC_RULE_TRAPEZOID, FC_RULE_GRUNWALD, FC_RULE_L1};
    const double ords[4] = {0.5, 0.7, 0.3, 0.6};
    const size_t sizes[] = {5, 300, 4097, 70000};
    char name[64];
    if (argc != 3 || (strcmp(argv[1], "write") && strcmp(argv[1], "check"))) {
        printf("usage: simd_compare write|check FILE\n");
        return 2;
    }
    checking = argv[1][0] == 'c';
    fp = fopen(argv[2], checking ? "rb" : "wb");
    if (fp == NULL) { printf("cannot open %s\n", argv[2]); return 2; }

    /* lagged sums with the rules' weights as kernels, every engine */
    for (int ri = 0; ri < 4; ri++)
        for (size_t si = 0; si < sizeof sizes / sizeof *sizes; si++) {
            size_t n = sizes[si];
            double *k = arr(n), *ka = arr(n), *x = arr(n), *xa = arr(n), *y = arr(n), *b = arr(n);
            if (fc_weights(rules[ri], ords[ri], 1.0, 0, n, k) != FC_OK) return 2;
            for (size_t i = 0; i < n; i++) {
                x[i] = rnd() + 0.1 * sin((double)i);
                xa[i] = fabs(x[i]);
                ka[i] = fabs(k[i]);
            }
            /* the componentwise scale sum_k |c_{i-k} x_k| */
            if (fc_lagged_sum(NULL, xa, 1, n, ka, n, FC_ENGINE_DIRECT, b) != FC_OK) return 2;
            for (int e = 0; e < 4; e++) {
                if (e == FC_ENGINE_DIRECT && n > 5000) continue;
                if (fc_lagged_sum(NULL, x, 1, n, k, n, e, y) != FC_OK) return 2;
                snprintf(name, sizeof name, "lagged r%d e%d n%zu", ri, e, n);
                item(name, y, n, e == FC_ENGINE_DIRECT ? 0 : e == FC_ENGINE_FFT ? 2 : 1, b);
            }
            /* an exact stream with the same kernel, two channels */
            if (n <= 4097) {
                fc_stream *s;
                double *x2 = arr(2 * n), *y2 = arr(2 * n), *b2 = arr(2 * n);
                for (size_t i = 0; i < n; i++) {
                    x2[2 * i] = x[i]; x2[2 * i + 1] = -x[i];
                    b2[2 * i] = b2[2 * i + 1] = b[i];
                }
                if (fc_stream_create_kernel(k, n, 2, &s) != FC_OK) return 2;
                if (fc_stream_push_block(s, x2, n, y2) != FC_OK) return 2;
                fc_stream_free(s);
                snprintf(name, sizeof name, "exact stream r%d n%zu", ri, n);
                item(name, y2, 2 * n, 1, b2);
                free(x2); free(y2); free(b2);
            }
            free(k); free(ka); free(x); free(xa); free(y); free(b);
        }
    /* compressed streams of every rule: bit for bit */
    for (int ri = 0; ri < 4; ri++) {
        fc_stream *s;
        size_t n = 20000;
        double *x = arr(3 * n), *y = arr(3 * n);
        for (size_t i = 0; i < 3 * n; i++) x[i] = rnd();
        if (fc_stream_create(rules[ri], ords[ri], 0.01, 3, FC_MODE_COMPRESSED, 1e-10, 1e6, &s) != FC_OK) return 2;
        if (fc_stream_push_block(s, x, n, y) != FC_OK) return 2;
        fc_stream_free(s);
        snprintf(name, sizeof name, "compressed stream r%d", ri);
        item(name, y, 3 * n, 0, NULL);
        free(x); free(y);
    }
    /* the plain FFT, forward then inverse */
    for (size_t lg = 1; lg <= 18; lg++) {
        size_t n = (size_t)1 << lg;
        fc_fft_plan *p;
        double *x = arr(n), *X = arr(n + 2), *z = arr(n), *b = arr(n + 2), sx = 0.0;
        for (size_t i = 0; i < n; i++) { x[i] = rnd(); sx += fabs(x[i]); }
        for (size_t i = 0; i < n + 2; i++) b[i] = sx;
        if (fc_rfft_create(n, &p) != FC_OK) return 2;
        fc_rfft_forward(p, x, X);
        fc_rfft_inverse(p, X, z);
        fc_rfft_free(p);
        snprintf(name, sizeof name, "rfft forward n%zu", n);
        item(name, X, n + 2, 2, b);
        snprintf(name, sizeof name, "rfft inverse n%zu", n);
        item(name, z, n, 2, b);
        free(x); free(X); free(z); free(b);
    }
    /* a controller on compressed streams: bit for bit */
    {
        fc_controller_params pr;
        fc_controller *c;
        size_t n = 5000;
        double *r = arr(n), *ym = arr(n), *u = arr(n);
        fc_controller_default_params(&pr);
        pr.ki = 0.5; pr.kd = 0.2; pr.out_min = -1.0; pr.out_max = 1.0; pr.filter_time = 0.1;
        for (size_t i = 0; i < n; i++) { r[i] = 1.0; ym[i] = rnd(); }
        if (fc_controller_create(&pr, &c) != FC_OK) return 2;
        if (fc_controller_update_block(c, r, ym, n, u, NULL) != FC_OK) return 2;
        fc_controller_free(c);
        item("controller compressed", u, n, 0, NULL);
        free(r); free(ym); free(u);
    }
    fclose(fp);
    if (checking) printf(failures ? "simd_compare: %d items differ\n" : "simd_compare: all items agree\n", failures);
    return failures ? 1 : 0;
}
