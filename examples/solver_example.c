/*
 * solver_example.c -- the solver object from C.
 *
 * Relaxation D^a y = -y, y(0) = 1, a = 1/2, whose solution is
 * E_{1/2}(-t^{1/2}) = exp(t) erfc(sqrt(t)) (the Mittag-Leffler function of
 * order 1/2: Gorenflo, Kilbas, Mainardi and Rogosin, Mittag-Leffler
 * Functions, Springer 2014, chapter 3; the tests check it against the
 * series summed with mpmath), solved by
 * the predictor-corrector (exact and compressed memory) and by the implicit
 * trapezoidal rule with a C Jacobian; then a callback that stops the run,
 * save/load resuming bit for bit, forged saved data refused, bad arguments
 * refused with nothing written.
 *
 * Build: make solver-example   Exit status 0 when every check passes.
 */
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "fracconv.h"

static int failures = 0;
#define CHECK(cond, ...) do { if (!(cond)) { failures++; printf("FAIL: " __VA_ARGS__); printf("\n"); } } while (0)

/* f_i = -lambda_i y_i with lambda = (1, 2, ...) */
static int relax(double t, const double *y, double *f, void *user)
{
    size_t m = *(const size_t *)user;
    (void)t;
    for (size_t i = 0; i < m; i++) f[i] = -(double)(i + 1) * y[i];
    return 0;
}

static int relax_jac(double t, const double *y, double *J, void *user)
{
    size_t m = *(const size_t *)user;
    (void)t; (void)y;
    for (size_t i = 0; i < m * m; i++) J[i] = 0.0;
    for (size_t i = 0; i < m; i++) J[i * m + i] = -(double)(i + 1);
    return 0;
}

/* stops (returns 1) once t > 0.05 */
static int stopper(double t, const double *y, double *f, void *user)
{
    (void)user;
    if (t > 0.05) return 1;
    f[0] = -y[0];
    return 0;
}

static double closed_form(double t) { return exp(t) * erfc(sqrt(t)); }

int main(void)
{
    enum { N = 1000 };
    const double a = 0.5, h = 1.0 / N, one = 1.0;
    size_t m1 = 1, done;
    static double t[N], y[N], yc[N], yb[2 * N];
    fc_solver *s = NULL, *c = NULL, *r = NULL;
    int st;

    /* predictor-corrector, exact memory */
    st = fc_solver_create(1, &a, h, 0.0, &one, FC_METHOD_PC, FC_MODE_EXACT, 0, 0, &s);
    CHECK(st == FC_OK, "create: %s", fc_solver_strerror(st));
    if (st != FC_OK) return 1;
    st = fc_solver_advance(s, N, t, y, &done);
    CHECK(st == FC_ERR_NORHS && done == 0, "advance without rhs: %d", st);
    fc_solver_set_rhs(s, relax, &m1);
    st = fc_solver_advance(s, N, t, y, &done);
    CHECK(st == FC_OK && done == N, "advance: %s", fc_solver_strerror(st));
    double err = fabs(y[N - 1] - closed_form(1.0));
    printf("predictor-corrector, h = 1e-3: |y(1) - exp(1) erfc(1)| = %.3e\n", err);
    CHECK(err < 2e-6, "predictor-corrector error %.3e", err);
    CHECK(fabs(t[N - 1] - 1.0) < 1e-15, "last time %.17g", t[N - 1]);
    uint64_t nr, nj;
    fc_solver_counts(s, &nr, &nj);
    CHECK(nr == 2 * N + 1 && nj == 0, "counts %llu %llu", (unsigned long long)nr,
          (unsigned long long)nj);

    /* compressed memory within a few tol of exact */
    st = fc_solver_create(1, &a, h, 0.0, &one, FC_METHOD_PC, FC_MODE_COMPRESSED, 1e-10,
                          N, &c);
    CHECK(st == FC_OK, "create compressed: %s", fc_solver_strerror(st));
    fc_solver_set_rhs(c, relax, &m1);
    st = fc_solver_advance(c, N, NULL, yc, &done);
    double dev = 0.0;
    for (int i = 0; i < N; i++) dev = fmax(dev, fabs(yc[i] - y[i]));
    printf("compressed (tol 1e-10) - exact: %.3e\n", dev);
    CHECK(st == FC_OK && dev < 1e-9, "compressed deviation %.3e", dev);
    st = fc_solver_advance(c, 1, NULL, NULL, &done);
    CHECK(st == FC_ERR_HORIZON && done == 0, "past the horizon: %d", st);
    fc_solver_free(c);

    /* implicit trapezoid, 2 components with a Jacobian */
    size_t m2 = 2;
    double orders[2] = { 0.5, 0.5 }, init[2] = { 1.0, 1.0 };
    st = fc_solver_create(2, orders, h, 0.0, init, FC_METHOD_TRAPEZOID, FC_MODE_EXACT, 0, 0, &c);
    CHECK(st == FC_OK, "create trapezoid: %s", fc_solver_strerror(st));
    fc_solver_set_rhs(c, relax, &m2);
    fc_solver_set_jacobian(c, relax_jac, &m2);
    st = fc_solver_advance(c, N, NULL, yb, &done);
    err = fabs(yb[2 * (N - 1)] - closed_form(1.0));
    printf("trapezoid, h = 1e-3: |y_1(1) - exp(1) erfc(1)| = %.3e\n", err);
    CHECK(st == FC_OK && err < 2e-6, "trapezoid error %.3e", err);
    fc_solver_counts(c, &nr, &nj);
    CHECK(nj >= N, "jacobian calls %llu", (unsigned long long)nj);
    fc_solver_free(c);

    /* a callback that stops the run: steps t = 0.001 .. 0.05 are done */
    st = fc_solver_create(1, &a, h, 0.0, &one, FC_METHOD_RECTANGLE, FC_MODE_EXACT, 0, 0, &c);
    fc_solver_set_rhs(c, stopper, NULL);
    st = fc_solver_advance(c, N, t, NULL, &done);
    uint64_t nsteps, fstep;
    double ft;
    fc_solver_steps(c, &nsteps);
    fc_solver_failure(c, &fstep, &ft);
    CHECK(st == FC_ERR_CALLBACK && done == 50 && nsteps == 50 && fstep == 51,
          "stopped: status %d, done %zu, steps %llu, failing step %llu", st, done,
          (unsigned long long)nsteps, (unsigned long long)fstep);
    fc_solver_free(c);

    /* save after 300 steps, load, resume: bit for bit the uninterrupted run */
    st = fc_solver_create(1, &a, h, 0.0, &one, FC_METHOD_PC, FC_MODE_EXACT, 0, 0, &c);
    fc_solver_set_rhs(c, relax, &m1);
    fc_solver_advance(c, 300, NULL, NULL, &done);
    size_t size, written;
    fc_solver_save_size(c, &size);
    unsigned char *blob = malloc(size);
    st = fc_solver_save(c, blob, size, &written);
    CHECK(st == FC_OK && written == size, "save: %s", fc_solver_strerror(st));
    st = fc_solver_load(blob, size, &r);
    CHECK(st == FC_OK, "load: %s", fc_solver_strerror(st));
    if (st == FC_OK) {
        fc_solver_set_rhs(r, relax, &m1);
        double y1[200], y2[200];
        fc_solver_advance(c, 200, NULL, y1, &done);
        fc_solver_advance(r, 200, NULL, y2, &done);
        CHECK(memcmp(y1, y2, sizeof y1) == 0, "resumed run differs");
        CHECK(memcmp(y1, y + 300, sizeof y1) == 0, "resumed run differs from the first run");
        fc_solver_free(r);
        r = NULL;
    }
    /* forged: one byte flipped anywhere, or truncated */
    int refused = 0, tried = 0;
    for (size_t i = 0; i < size; i += 7) {
        blob[i] ^= 0x10;
        fc_solver *x = (fc_solver *)&refused; /* must stay as it is */
        st = fc_solver_load(blob, size, &x);
        tried++;
        refused += st == FC_ERR_FORMAT && x == (fc_solver *)&refused;
        blob[i] ^= 0x10;
    }
    CHECK(refused == tried, "forged blobs refused: %d of %d", refused, tried);
    st = fc_solver_load(blob, size - 1, &r);
    CHECK(st == FC_ERR_FORMAT, "truncated blob: %d", st);
    free(blob);
    fc_solver_free(c);

    /* bad arguments: nothing written */
    double bad = 2.5;
    fc_solver *x = (fc_solver *)&failures;
    st = fc_solver_create(1, &bad, h, 0.0, &one, FC_METHOD_PC, FC_MODE_EXACT, 0, 0, &x);
    CHECK(st == FC_ERR_ORDER && x == (fc_solver *)&failures, "order 2.5: %d", st);
    st = fc_solver_create(1, &a, -h, 0.0, &one, FC_METHOD_PC, FC_MODE_EXACT, 0, 0, &x);
    CHECK(st == FC_ERR_STEP, "negative step: %d", st);
    double a2 = 2.0, two[2] = { 1.0, 0.0 };
    st = fc_solver_create(1, &a2, h, 0.0, two, FC_METHOD_PC, FC_MODE_COMPRESSED, 1e-8, 10, &x);
    CHECK(st == FC_ERR_ORDER, "compressed trapezoid rule at order 2: %d", st);
    /* 1 <= order < 2 is served by compressed memory for every method but
       the implicit rectangle rule */
    double a15 = 1.5;
    fc_solver *y15 = NULL;
    st = fc_solver_create(1, &a15, h, 0.0, two, FC_METHOD_PC, FC_MODE_COMPRESSED, 1e-8, 10, &y15);
    CHECK(st == FC_OK, "compressed predictor-corrector at order 1.5: %d", st);
    fc_solver_free(y15);
    fc_solver_free(NULL);
    fc_solver_free(s);

    if (failures) {
        printf("%d check(s) failed\n", failures);
        return 1;
    }
    printf("all solver checks passed\n");
    return 0;
}
