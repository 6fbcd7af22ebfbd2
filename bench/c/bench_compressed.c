/*
 * bench_compressed.c -- per-sample cost of the compressed stream
 * (FC_MODE_COMPRESSED), one channel, through the public API.
 *
 * For each rule and tolerance: the mean cost per sample of fc_stream_push_block
 * over 10^6 samples in blocks of 1000, the mean of 10^6 single pushes, and the
 * distribution of single-push times (median, 99.9th percentile, worst)
 * measured with clock_gettime around each push (the timer's own cost, some
 * 20 ns, is included in those columns and subtracted from nothing).
 * "worst/pos" is the worst over positions n of the minimum over REPS
 * repetitions of the same sequence (reset in between): it removes
 * preemption by the operating system, which the plain worst includes, and
 * keeps every cost that depends on the position or the data ("at n": where;
 * "w/pos n>0": the same without the first push after a reset, which pays
 * for cold branch predictors and caches). The last
 * table repeats this for an impulse followed by zeros (states decaying
 * through the subnormal range).
 *
 * Build: gcc -O2 -I csrc bench/c/bench_compressed.c -L build -lfracconv -lm
 * Run:   ./a.out [samples]      (LD_LIBRARY_PATH=build for the shared library)
 */
#define _POSIX_C_SOURCE 199309L
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <time.h>
#include "fracconv.h"

#define REPS 9

static double now_ns(void)
{
    struct timespec t;
    clock_gettime(CLOCK_MONOTONIC, &t);
    return 1e9 * (double)t.tv_sec + (double)t.tv_nsec;
}

static int cmp(const void *a, const void *b)
{
    double x = *(const double *)a, y = *(const double *)b;
    return (x > y) - (x < y);
}

int main(int argc, char **argv)
{
    size_t N = argc > 1 ? (size_t)strtoull(argv[1], NULL, 10) : 1000000;
    if (N < 1000) N = 1000;
    const char *names[4] = {"rectangle", "trapezoid", "grunwald", "l1"};
    const double tols[3] = {1e-6, 1e-12, 1e-13};
    double *x = malloc(N * sizeof *x), *y = malloc(N * sizeof *y);
    double *dt = malloc(N * sizeof *dt), *best = malloc(N * sizeof *best);
    double *imp = calloc(N, sizeof *imp);
    if (!x || !y || !dt || !best || !imp) { fprintf(stderr, "out of memory\n"); return 1; }
    unsigned long long seed = 12345;
    for (size_t i = 0; i < N; i++) {
        seed = seed * 6364136223846793005ULL + 1442695040888963407ULL;
        x[i] = (double)(seed >> 11) / 9007199254740992.0 - 0.5;
    }
    printf("compressed stream, order 0.5, horizon 1e8, 1 channel, %zu samples\n", N);
    printf("%-10s %7s %5s %9s %11s %10s %9s %9s %10s %9s %7s %9s %9s\n", "rule", "tol",
           "terms", "nbytes", "block ns/s", "push ns/s", "median ns",
           "p99.9 ns", "worst ns", "worst/pos", "at n", "w/pos n>0", "create ms");
    double sink = 0.0;
    for (int r = 0; r < 4; r++) {
        for (int ti = 0; ti < 3; ti++) {
            fc_stream *s;
            double t0 = now_ns();
            int st = fc_stream_create(r, 0.5, 0.01, 1, FC_MODE_COMPRESSED,
                                      tols[ti], 1e8, &s);
            double tc = now_ns() - t0;
            if (st != FC_OK) {
                printf("%-10s %7.0e  create failed: %s\n", names[r], tols[ti],
                       fc_strerror(st));
                continue;
            }
            size_t terms = 0, nb = 0;
            fc_stream_terms(s, &terms);
            fc_stream_nbytes(s, &nb);
            /* blocks */
            t0 = now_ns();
            for (size_t i = 0; i < N; i += 1000)
                fc_stream_push_block(s, x + i, N - i < 1000 ? N - i : 1000, y + i);
            double tb = (now_ns() - t0) / (double)N;
            sink += y[N - 1];
            /* single pushes, total */
            fc_stream_reset(s);
            t0 = now_ns();
            for (size_t i = 0; i < N; i++) fc_stream_push(s, x + i, y + i);
            double tp = (now_ns() - t0) / (double)N;
            sink += y[N - 1];
            /* single pushes, one by one */
            fc_stream_reset(s);
            for (size_t i = 0; i < N; i++) {
                double a = now_ns();
                fc_stream_push(s, x + i, y + i);
                dt[i] = now_ns() - a;
            }
            sink += y[N - 1];
            memcpy(best, dt, N * sizeof *dt);
            for (int rep = 1; rep < REPS; rep++) {
                fc_stream_reset(s);
                for (size_t i = 0; i < N; i++) {
                    double a = now_ns();
                    fc_stream_push(s, x + i, y + i);
                    double d = now_ns() - a;
                    if (d < best[i]) best[i] = d;
                }
            }
            double wpos = 0.0, wpos1 = 0.0;
            size_t ipos = 0;
            for (size_t i = 0; i < N; i++) {
                if (best[i] > wpos) { wpos = best[i]; ipos = i; }
                if (i > 0 && best[i] > wpos1) wpos1 = best[i];
            }
            qsort(dt, N, sizeof *dt, cmp);
            printf("%-10s %7.0e %5zu %9zu %11.1f %10.1f %9.0f %9.0f %10.0f %9.0f %7zu %9.0f %9.2f\n",
                   names[r], tols[ti], terms, nb, tb, tp, dt[N / 2],
                   dt[(size_t)(0.999 * (double)N)], dt[N - 1], wpos, ipos,
                   wpos1, tc * 1e-6);
            fc_stream_free(s);
        }
    }
    /* impulse then zeros: the states decay through the subnormal range */
    imp[0] = 1.0;
    printf("\nimpulse then zeros, tol 1e-12 (ns per push)\n%-10s %9s %9s %9s\n",
           "rule", "median", "p99.9", "worst/pos");
    for (int r = 0; r < 4; r++) {
        fc_stream *s;
        if (fc_stream_create(r, 0.5, 0.01, 1, FC_MODE_COMPRESSED, 1e-12, 1e8, &s))
            continue;
        for (size_t i = 0; i < N; i++) best[i] = 1e300;
        for (int rep = 0; rep < REPS; rep++) {
            fc_stream_reset(s);
            for (size_t i = 0; i < N; i++) {
                double a = now_ns();
                fc_stream_push(s, imp + i, y + i);
                double d = now_ns() - a;
                if (d < best[i]) best[i] = d;
            }
        }
        sink += y[N - 1];
        double wpos = 0.0;
        for (size_t i = 0; i < N; i++) if (best[i] > wpos) wpos = best[i];
        memcpy(dt, best, N * sizeof *dt);
        qsort(dt, N, sizeof *dt, cmp);
        printf("%-10s %9.0f %9.0f %9.0f\n", names[r], dt[N / 2],
               dt[(size_t)(0.999 * (double)N)], wpos);
        fc_stream_free(s);
    }
    if (sink == 12345.678) printf("%g\n", sink);
    free(x); free(y); free(dt); free(best); free(imp);
    return 0;
}
