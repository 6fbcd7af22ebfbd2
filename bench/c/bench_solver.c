/*
 * bench_solver.c -- cost per step of the solver with a C right-hand side.
 *
 * Invented test problem: D^a y = -y + 0.1 sin(t) (scalar) and a system of
 * 100 decoupled components of the same kind, a = 0.6, step 1e-4, solved by
 * each method with exact and compressed memory. Prints the median of 3
 * runs in microseconds per step (and per component-step for the system).
 *
 * Build: make bench-c; run: cbuild/bench_solver [steps]   (default 1e6)
 */
#define _POSIX_C_SOURCE 199309L
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <time.h>

#include "fracconv.h"

static int rhs(double t, const double *y, double *f, void *user)
{
    size_t m = *(const size_t *)user;
    double s = 0.1 * sin(t);
    for (size_t i = 0; i < m; i++) f[i] = -y[i] + s;
    return 0;
}

static double now(void)
{
    struct timespec ts;
    clock_gettime(CLOCK_MONOTONIC, &ts);
    return ts.tv_sec + 1e-9 * ts.tv_nsec;
}

static int cmp(const void *a, const void *b)
{
    double x = *(const double *)a, y = *(const double *)b;
    return (x > y) - (x < y);
}

static double run(size_t m, int method, int memory, size_t n)
{
    double times[3];
    double *orders = malloc(m * sizeof(double)), *init = malloc(m * sizeof(double));
    for (size_t i = 0; i < m; i++) { orders[i] = 0.6; init[i] = 1.0; }
    for (int r = 0; r < 3; r++) {
        fc_solver *s;
        size_t done;
        if (fc_solver_create(m, orders, 1e-4, 0.0, init, method, memory, 1e-10,
                             (double)n, &s) != FC_OK) {
            printf("create failed\n");
            exit(1);
        }
        fc_solver_set_rhs(s, rhs, &m);
        double t0 = now();
        int st = fc_solver_advance(s, n, NULL, NULL, &done);
        times[r] = now() - t0;
        if (st != FC_OK) { printf("advance: %s\n", fc_solver_strerror(st)); exit(1); }
        fc_solver_free(s);
    }
    free(orders);
    free(init);
    qsort(times, 3, sizeof(double), cmp);
    return times[1] / (double)n * 1e6;
}

int main(int argc, char **argv)
{
    size_t n = argc > 1 ? (size_t)atof(argv[1]) : 1000000;
    const char *mn[] = { "rectangle", "predictor-corrector", "trapezoid", "implicit-rectangle" };
    printf("steps %zu, median of 3, microseconds per step\n", n);
    for (int meth = 0; meth < 4; meth++)
        for (int mem = 0; mem < 2; mem++) {
            double us1 = run(1, meth, mem, n);
            double us100 = run(100, meth, mem, n / 10);
            printf("%-20s %-10s scalar %7.3f us/step   m=100 %8.3f us/step (%.4f per component)\n",
                   mn[meth], mem ? "compressed" : "exact", us1, us100, us100 / 100);
            fflush(stdout);
        }
    return 0;
}
