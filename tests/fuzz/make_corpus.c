/*
 * make_corpus.c -- writes the seed corpus of the fuzz targets
 * (tests/fuzz/corpus/): real saved states of every stateful object, made
 * through the public API, plus argument records for the fuzz_args target.
 *   cbuild/fuzz/make_corpus DIR     (make fuzz-corpus: DIR = tests/fuzz/corpus)
 * Subfolders: stream_exact, stream_compressed, solver, controller, args.
 * Sizes are kept small (short histories) so that the fuzzer's inputs stay
 * short and fast. Signals are invented (fixed formulas); the blobs depend
 * on the library's arithmetic only through the saved running sums.
 */
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <math.h>
#include "fracconv.h"

static const char *dir;
static int failures;

static void put(const char *sub, const char *name, const unsigned char *b, size_t n)
{
    char path[1024];
    snprintf(path, sizeof path, "%s/%s/%s", dir, sub, name);
    FILE *f = fopen(path, "wb");
    if (!f || fwrite(b, 1, n, f) != n) {
        fprintf(stderr, "make_corpus: cannot write %s\n", path);
        failures++;
    }
    if (f) fclose(f);
}

static double sig(size_t i, size_t c)
{
    return sin(0.37 * (double)i + (double)c) + 0.25 * (double)(c + 1);
}

static void save_stream(fc_stream *s, const char *sub, const char *name)
{
    size_t n, w;
    unsigned char *b;
    if (fc_stream_save_size(s, &n) || !(b = malloc(n)) || fc_stream_save(s, b, n, &w)) {
        fprintf(stderr, "make_corpus: %s: save failed\n", name);
        failures++;
        return;
    }
    put(sub, name, b, w);
    free(b);
}

static void push_n(fc_stream *s, size_t C, size_t n)
{
    double x[8], y[8];
    for (size_t i = 0; i < n; i++) {
        for (size_t c = 0; c < C; c++) x[c] = sig(i, c);
        if (fc_stream_push(s, x, y)) { failures++; return; }
    }
}

static void streams(void)
{
    static const struct { int rule; double order; } rk[] = {
        {FC_RULE_RECTANGLE, 0.5}, {FC_RULE_RECTANGLE, 1.5},
        {FC_RULE_TRAPEZOID, 0.7}, {FC_RULE_TRAPEZOID, 1.3},
        {FC_RULE_GRUNWALD, 0.4}, {FC_RULE_L1, 0.6},
    };
    static const size_t counts[] = {0, 1, 5, 70};
    char name[128];
    for (size_t r = 0; r < sizeof rk / sizeof rk[0]; r++)
        for (int mode = 0; mode < 2; mode++)
            for (size_t k = 0; k < 4; k++) {
                size_t C = 1 + (k % 2);
                fc_stream *s;
                if (fc_stream_create(rk[r].rule, rk[r].order, 0.1, C, mode, 1e-8, 500, &s)) {
                    failures++;
                    continue;
                }
                push_n(s, C, counts[k]);
                snprintf(name, sizeof name, "rule%d_a%.1f_c%zu_n%zu.bin", rk[r].rule,
                         rk[r].order, C, counts[k]);
                save_stream(s, mode ? "stream_compressed" : "stream_exact", name);
                fc_stream_free(s);
            }
    /* streams with a time per sample (saved with the compressed mode:
       their seeds go with the compressed streams'), jittered times */
    static const struct { int rule; double order; } tk[] = {
        {FC_RULE_RECTANGLE, 0.5}, {FC_RULE_TRAPEZOID, 0.7}, {FC_RULE_L1, 0.4},
        /* the integral rules at 1 < a < 2: the running integral saved
           (format version 2) */
        {FC_RULE_RECTANGLE, 1.5}, {FC_RULE_TRAPEZOID, 1.5},
    };
    for (size_t r = 0; r < sizeof tk / sizeof tk[0]; r++)
        for (size_t k = 0; k < 4; k++) {
            size_t C = 1 + (k % 2), n = counts[k];
            double t[70], x[140], y[140];
            fc_stream *s;
            if (fc_stream_create_timed(tk[r].rule, tk[r].order, 0.01, C, 1e-8, 100.0, &s)) {
                failures++;
                continue;
            }
            for (size_t i = 0; i < n; i++) {
                t[i] = 0.1 * (double)i + 0.03 * sin(3.0 * (double)i);
                for (size_t c = 0; c < C; c++) x[i * C + c] = sig(i, c);
            }
            if (n && fc_stream_push_timed(s, t, x, n, y)) failures++;
            snprintf(name, sizeof name, "timed_rule%d_a%.1f_c%zu_n%zu.bin", tk[r].rule,
                     tk[r].order, C, n);
            save_stream(s, "stream_compressed", name);
            fc_stream_free(s);
        }
    /* a user kernel (exact mode only) */
    double ker[5] = {1.0, -0.5, 0.25, -0.125, 0.0625};
    for (size_t k = 0; k < 3; k++) {
        fc_stream *s;
        if (fc_stream_create_kernel(ker, 5, 1 + k, &s)) { failures++; continue; }
        push_n(s, 1 + k, 3 * k);
        snprintf(name, sizeof name, "kernel_c%zu_n%zu.bin", 1 + k, 3 * k);
        save_stream(s, "stream_exact", name);
        fc_stream_free(s);
    }
}

static int rhs(double t, const double *y, double *f, void *u)
{
    size_t m = *(size_t *)u;
    for (size_t i = 0; i < m; i++) f[i] = -y[i] + cos(t + (double)i);
    return 0;
}

static void solvers(void)
{
    char name[128];
    for (int method = 0; method < 4; method++)
        for (int mem = 0; mem < 2; mem++)
            for (size_t m = 1; m <= 2; m++) {
                double o[2] = {0.6, m == 2 ? 1.4 : 0.6}, init[4] = {1, -0.5, 0, 0.2};
                fc_solver *s;
                size_t done, n, w;
                unsigned char *b;
                int st = fc_solver_create(m, o, 0.05, 0.0, init, method, mem,
                                          mem ? 1e-8 : 0.0, mem ? 500.0 : 0.0, &s);
                if (st) { fprintf(stderr, "solver %d %d %zu: %d\n", method, mem, m, st); failures++; continue; }
                for (int steps = 0; steps <= 12; steps += 12) {
                    if (steps) {
                        fc_solver_set_rhs(s, rhs, &m);
                        if (fc_solver_advance(s, (size_t)steps, NULL, NULL, &done)) failures++;
                    }
                    if (fc_solver_save_size(s, &n) || !(b = malloc(n)) ||
                        fc_solver_save(s, b, n, &w)) { failures++; continue; }
                    snprintf(name, sizeof name, "method%d_mem%d_m%zu_n%d.bin", method, mem, m, steps);
                    put("solver", name, b, w);
                    free(b);
                }
                fc_solver_free(s);
            }
}

static void controllers(void)
{
    char name[128];
    for (int mem = 0; mem < 2; mem++)
        for (int k = 0; k < 4; k++) {
            fc_controller_params p;
            fc_controller *c;
            double u;
            size_t n, w;
            unsigned char *b;
            fc_controller_default_params(&p);
            p.memory = mem;
            p.ki = (k & 1) ? 0.4 : 0.0;
            p.kd = (k & 2) ? 0.2 : 0.0;
            p.step = 0.1;
            p.integral_rule = k == 3 ? FC_RULE_RECTANGLE : FC_RULE_TRAPEZOID;
            p.derivative_rule = k == 3 ? FC_RULE_L1 : FC_RULE_GRUNWALD;
            p.out_min = -2.0;
            p.out_max = 2.0;
            p.rate_limit = k == 1 ? 5.0 : INFINITY;
            p.filter_time = k == 2 ? 0.3 : 0.0;
            p.horizon = 1000;
            if (fc_controller_create(&p, &c)) { failures++; continue; }
            int nup = k * 7;
            for (int i = 0; i < nup; i++) {
                if (i == 9) fc_controller_set_manual(c, 0.5);
                if (i == 14) fc_controller_set_auto(c);
                if (fc_controller_update(c, 1.0, sig((size_t)i, 0), &u)) failures++;
            }
            if (fc_controller_save_size(c, &n) || !(b = malloc(n)) ||
                fc_controller_save(c, b, n, &w)) { failures++; continue; }
            snprintf(name, sizeof name, "mem%d_ki%d_kd%d_n%d.bin", mem, k & 1, (k >> 1) & 1, nup);
            put("controller", name, b, w);
            free(b);
            fc_controller_free(c);
        }
}

/* Argument records of fuzz_args.c: a selector byte, then the values the
   target decodes (tagged bytes; see its getters). These seeds are valid
   calls of each function, so that the fuzzer starts from accepted
   arguments and mutates them into refused ones. */
static void args(void)
{
    char name[64];
    for (int f = 0; f < 16; f++) {
        unsigned char b[64];
        for (int i = 0; i < 64; i++) b[i] = (unsigned char)(i * 4 + 4 * (f % 3));
        b[0] = (unsigned char)f;
        snprintf(name, sizeof name, "fn%02d.bin", f);
        put("args", name, b, sizeof b);
    }
}

int main(int argc, char **argv)
{
    if (argc != 2) { fprintf(stderr, "usage: make_corpus DIR\n"); return 2; }
    dir = argv[1];
    streams();
    solvers();
    controllers();
    args();
    if (failures) fprintf(stderr, "make_corpus: %d failures\n", failures);
    return failures != 0;
}
