/* Controller updates per second from C (fc_controller_update), compressed
 * and exact memory. N updates per run, REPS runs; each update is timed with
 * clock_gettime, and for every position the fastest of the runs is kept
 * (so a preemption in one run does not count); the median and the worst
 * of these per-position times are printed (and the worst after the first
 * update, which runs with cold caches), with the timer's own overhead
 * (an empty pair of reads) beside them. Build: make bench-c; run
 * cbuild/bench_controller [N]. */
#define _POSIX_C_SOURCE 199309L
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <time.h>

#include "fracconv.h"

static double now(void)
{
    struct timespec t;
    clock_gettime(CLOCK_MONOTONIC, &t);
    return t.tv_sec * 1e9 + t.tv_nsec;
}

static int cmp(const void *a, const void *b)
{
    double x = *(const double *)a, y = *(const double *)b;
    return (x > y) - (x < y);
}

static void run(int memory, size_t n, int reps)
{
    double *best = malloc(n * sizeof *best), *tmp = malloc(n * sizeof *tmp);
    if (!best || !tmp) { printf("no memory\n"); exit(1); }
    for (size_t i = 0; i < n; i++) best[i] = INFINITY;
    double total = INFINITY, sink = 0;
    for (int r = 0; r < reps; r++) {
        fc_controller_params p;
        fc_controller_default_params(&p);
        p.kp = 1.0; p.ki = 0.5; p.kd = 0.1;
        p.integral_order = 0.7; p.derivative_order = 0.5; p.step = 1e-3;
        p.out_min = -10; p.out_max = 10; p.memory = memory; p.horizon = 1e7;
        fc_controller *c = NULL;
        if (fc_controller_create(&p, &c)) { printf("create failed\n"); exit(1); }
        double t0 = now();
        for (size_t i = 0; i < n; i++) {
            double u, a = now();
            fc_controller_update(c, 1.0, sin(1e-3 * (double)i), &u);
            double b = now();
            sink += u;
            if (b - a < best[i]) best[i] = b - a;
        }
        double t1 = now();
        if (t1 - t0 < total) total = t1 - t0;
        fc_controller_free(c);
    }
    double ov = INFINITY;
    for (int k = 0; k < 100000; k++) { double a = now(), b = now(); if (b - a < ov) ov = b - a; }
    /* the worst after the first update, whose code and data the creation
       has not brought into the caches yet */
    double later = 0;
    for (size_t i = 1; i < n; i++) if (best[i] > later) later = best[i];
    memcpy(tmp, best, n * sizeof *tmp);
    qsort(tmp, n, sizeof *tmp, cmp);
    printf("%-10s n=%zu reps=%d: median %.0f ns, worst %.0f ns (worst/median %.2f; "
           "after the first update %.0f ns, %.2f), p99.9 %.0f ns, timer overhead "
           "%.0f ns; whole run %.1f ns/update (%.2e updates/s) [%g]\n",
           memory == FC_MODE_COMPRESSED ? "compressed" : "exact", n, reps,
           tmp[n / 2], tmp[n - 1], tmp[n - 1] / tmp[n / 2], later, later / tmp[n / 2],
           tmp[(size_t)(n * 0.999)], ov, total / n, 1e9 * n / total, sink * 0);
    free(best);
    free(tmp);
}

int main(int argc, char **argv)
{
    size_t n = argc > 1 ? (size_t)atof(argv[1]) : 1000000;
    run(FC_MODE_COMPRESSED, n, 5);
    run(FC_MODE_EXACT, n, 5);
    return 0;
}
