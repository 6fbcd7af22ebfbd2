/*
 * solver.c -- Caputo initial value problems D^a y = f(t, y) solved as the
 * Volterra equation y = T + I^a f(., y) with the library's product rules.
 *
 * Built on the public stream interface (fracconv.h) and one internal
 * stream kind (internal.h, fc__stream_create_shifted): the history sums of
 * the f values are kept by fc_stream objects, one rectangle and/or one
 * trapezoid stream per group of components sharing an order.
 *
 * Index conventions (csrc/fracconv.h, rules table). After step n the
 * streams hold f_0 .. f_n (n+1 samples each), f_k = f(t_k, y_k):
 *   rectangle history = output n+1 = u sum_{k<=n} b_{n-k} f_k
 *     (the explicit product rectangle rule for y_{n+1});
 *   trapezoid history = output n+1 - w0 f_{n+1}
 *     = h^a/Gamma(a+2) (A_{n+1} f_0 + sum_{1<=k<=n} a_{n+1-k} f_k),
 *     w0 = h^a/Gamma(a+2) (a_0 = 1).
 * So the product trapezoidal rule for y_{n+1} is T_{n+1} + history + w0 f.
 *
 * The implicit product rectangle rule (right end points),
 *   y_{n+1} = T_{n+1} + u sum_{k<=n} b_{n-k} f_{k+1},
 * has no rule stream of that form (its lag-0 weight is u b_0 = u): with
 * exact memory it uses an exact stream of the rectangle rule's lag kernel
 * shifted by one lag (fc__stream_create_shifted: kernel c_m = u b_m, m >= 0,
 * the rectangle rule's lag kernel at m + 1, computed when the history first
 * reaches it, so that memory and work grow with the steps and no horizon
 * is needed), fed with f_1, f_2, ...; after step n its history is
 * u sum_{1<=k<=n} b_{n+1-k} f_k and y_{n+1} = T_{n+1} + history + u f.
 * Such a stream has no save format: the solver keeps f_1 .. f_n itself for
 * save/load, and a loaded solver rebuilds the stream from the saved f
 * values (work and memory in proportion to the blob).
 *
 * Compressed memory for the implicit rectangle rule. With b_j = (j+1)^a -
 * j^a, the history after step n is H_n = u sum_{1<=k<=n} b_{n+1-k} f_k:
 * its newest sample f_n weighs b_1. A rectangle stream fed with f_1, f_2,
 * ... has the history R_n = u sum_{1<=k<=n} b_{n-k} f_k instead (newest
 * weight b_0): no rule's history and no shift of the samples gives the
 * weights b_1, b_2, ... (every rule's history weighs its newest sample with
 * its lag-1 weight, and the rectangle rule's lag-1 weight is b_0). So the
 * solver writes H_n = R_n + u sum_{1<=k<=n} d_{n-k} f_k with the
 * differences d_j = b_{j+1} - b_j = (j+2)^a - 2 (j+1)^a + j^a, and keeps
 * the second sum with a rule whose weights are these differences, on a
 * second compressed stream fed with 0, f_1, f_2, ... (count n+1):
 *   1 < a < 2: the trapezoid rule of order a - 1 (exact in double), whose
 *     lag weights are h^(a-1)/Gamma(a+1) d_{j-1} (j >= 1); with x_0 = 0 its
 *     starting column drops out, and its history is the second sum over h;
 *   0 < a < 1: the L1 rule of order 1 - a, weights C b'_j on the
 *     differences x_k - x_{k-1}, C = h^(a-1)/Gamma(1+a') ; its output for a
 *     next sample 0 (fc_stream_preview, nothing changed) is, by summation
 *     by parts, C sum_{1<=k<=n} d'_{n-k} f_k (b', d': the same sequences
 *     for a' = 1 - (1 - a) as rounded; a' = a for a >= 1/2, else
 *     |a' - a| <= 2^-54);
 *   a = 1: b_j = 1, d_j = 0, H_n = R_n (no second stream).
 * The second sum is the stream's value times u / w, w the stream rule's
 * lag-0 weight (fc_weights), so that in exact arithmetic H_n is the
 * right-end-point history with the stream's own weights. Exact memory
 * keeps the shifted stream (its results do not change).
 *
 * Methods: Diethelm, Ford and Freed, Nonlinear Dynamics 29 (2002) 3-22
 * (predictor-corrector); Garrappa, Math. Comput. Simul. 110 (2015) 96-112
 * (implicit trapezoidal rule with Newton's method).
 */
#include <math.h>
#include <stdlib.h>
#include <string.h>

#include "fracconv.h"
#include "internal.h"
#include "guard.h"
#include "serial.h"

#define SV_MAGIC "FCSOLVE1"
#define SV_VERSION 1u
#define SV_HDR 112u

typedef struct {
    double order;
    size_t nc;        /* components in the group */
    size_t *idx;      /* their indices, increasing */
    int ident;        /* the group is every component, in order */
    fc_stream *rect;  /* NULL when the method does not need it */
    fc_stream *trap;  /* the trapezoid stream, or the shifted stream of
                         FC_METHOD_IMPLICIT_RECTANGLE with exact memory, or
                         (implicit rectangle, compressed) the stream of the
                         differences d: NULL at order 1 */
    double fac;       /* implicit rectangle, compressed: u / the lag-0
                         weight of that stream's rule */
} sv_group;

struct fc_solver {
    size_t m;
    int method, memory;
    unsigned K;       /* rows of initial values: ceil(max order) */
    double step, t0, tol, horizon; /* tol, horizon: compressed memory
                                      (0 with exact memory) */
    double *orders;   /* m */
    double *init;     /* K*m */
    size_t ng;
    sv_group *g;
    /* state */
    uint64_t n;       /* steps done */
    int f0done;       /* f(t0, y0) evaluated and pushed */
    uint64_t nrhs, njac;
    double *y;        /* y_n */
    /* settings (saved) */
    double ntol;
    unsigned nmax, passes;
    /* callbacks (not saved) */
    fc_rhs_fn rhs;
    void *rhs_user;
    fc_jac_fn jac;
    void *jac_user;
    /* diagnostics (not saved) */
    uint64_t fail_step;
    double fail_t;
    uint64_t reserved; /* samples the streams have room for */
    fc__guard busy;   /* guard.h: one call at a time, callbacks included */
    /* work space */
    double *w0;       /* m: trapezoid lag-0 weight of each component */
    double *hr, *ht;  /* m: rectangle and trapezoid histories */
    double *c;        /* m: known part of the implicit equation */
    double *yc, *fc;  /* m: the buffers passed to the callbacks */
    double *fs;       /* m: saved f (difference Jacobian) */
    double *r;        /* m: Newton residual */
    double *J;        /* m*m */
    size_t *piv;      /* m */
    double *gb;       /* m: gather buffer */
    double *fh;       /* implicit rectangle: f_1 .. f_n, row-major (n x m) */
    size_t fhcap;     /* rows allocated */
};

/* ------------------------------------------------------------ helpers */

static int mul_size(size_t a, size_t b, size_t *r)
{
    if (b != 0 && a > (size_t)-1 / b) return FC_ERR_SIZE;
    *r = a * b;
    return FC_OK;
}

static int add_size(size_t a, size_t b, size_t *r)
{
    if (a > (size_t)-1 - b) return FC_ERR_SIZE;
    *r = a + b;
    return FC_OK;
}

static int all_finite(const double *x, size_t n)
{
    for (size_t i = 0; i < n; i++)
        if (!isfinite(x[i])) return 0;
    return 1;
}

static int needs_rect(int method, int memory)
{
    return method == FC_METHOD_RECTANGLE || method == FC_METHOD_PC ||
           (method == FC_METHOD_IMPLICIT_RECTANGLE && memory == FC_MODE_COMPRESSED);
}
/* the second stream slot: trapezoid, (implicit rectangle, exact) shifted,
   or (implicit rectangle, compressed) the differences' stream, none at
   order 1 */
static int needs_trap(int method, int memory, double order)
{
    if (method == FC_METHOD_IMPLICIT_RECTANGLE && memory == FC_MODE_COMPRESSED)
        return order != 1.0;
    return method != FC_METHOD_RECTANGLE;
}
/* the streams are saved as blobs (not the exact implicit rectangle's
   shifted streams, rebuilt from the saved f values) */
static int saves_streams(int method, int memory)
{
    return !(method == FC_METHOD_IMPLICIT_RECTANGLE && memory == FC_MODE_EXACT);
}
/* Implicit rectangle, compressed: the rule and order of the stream of the
   differences d for order a != 1 (see the top of the file). */
static void diff_rule(double a, int *rule, double *order)
{
    if (a < 1.0) { *rule = FC_RULE_L1; *order = 1.0 - a; }
    else { *rule = FC_RULE_TRAPEZOID; *order = a - 1.0; }
}
static int is_implicit(int method)
{
    return method == FC_METHOD_TRAPEZOID || method == FC_METHOD_IMPLICIT_RECTANGLE;
}

/* 1 if a compressed stream of the rule accepts order a (the rule table's
   range, fc_rule_order_range). */
static int compressed_order_ok(int rule, double a)
{
    double lo, hi;
    int li, hii;
    if (fc_rule_order_range(rule, FC_MODE_COMPRESSED, &lo, &li, &hi, &hii) != FC_OK)
        return 0;
    if (!isfinite(a)) return 0;
    if (li ? !(a >= lo) : !(a > lo)) return 0;
    if (hii ? !(a <= hi) : !(a < hi)) return 0;
    return 1;
}

static int check_params(size_t m, const double *orders, double step,
                        double t0, int method, int memory, double tol,
                        double horizon, unsigned *K)
{
    if (m == 0) return FC_ERR_SIZE;
    if (!(step > 0.0) || !isfinite(step)) return FC_ERR_STEP;
    if (!isfinite(t0)) return FC_ERR_ARG;
    if (method != FC_METHOD_RECTANGLE && method != FC_METHOD_PC &&
        method != FC_METHOD_TRAPEZOID && method != FC_METHOD_IMPLICIT_RECTANGLE)
        return FC_ERR_RULE;
    if (memory != FC_MODE_EXACT && memory != FC_MODE_COMPRESSED)
        return FC_ERR_MODE;
    double amax = 0.0;
    for (size_t i = 0; i < m; i++) {
        double a = orders[i];
        if (!(a > 0.0 && a <= 2.0)) return FC_ERR_ORDER;
        if (memory == FC_MODE_COMPRESSED) {
            /* the rule table's compressed ranges (rules.c): the rectangle
               method runs the rectangle rule, the implicit rectangle
               method the rectangle rule and (a != 1) the rule of its
               differences, the others the rectangle and the trapezoid
               rule */
            if (!compressed_order_ok(FC_RULE_RECTANGLE, a))
                return FC_ERR_ORDER;
            if (method == FC_METHOD_IMPLICIT_RECTANGLE) {
                int dr;
                double da;
                diff_rule(a, &dr, &da);
                if (a != 1.0 && !compressed_order_ok(dr, da))
                    return FC_ERR_ORDER;
            }
            else if (method != FC_METHOD_RECTANGLE &&
                     !compressed_order_ok(FC_RULE_TRAPEZOID, a))
                return FC_ERR_ORDER;
        }
        if (a > amax) amax = a;
    }
    if (memory == FC_MODE_COMPRESSED &&
        (!(tol >= 1e-15 && tol <= 1e-2) || !(horizon >= 1.0) ||
         !(horizon <= 9007199254740990.0)))
        return FC_ERR_TOL;
    *K = amax > 1.0 ? 2u : 1u;
    return FC_OK;
}

static void free_groups(sv_group *g, size_t ng)
{
    if (!g) return;
    for (size_t j = 0; j < ng; j++) {
        free(g[j].idx);
        fc_stream_free(g[j].rect);
        fc_stream_free(g[j].trap);
    }
    free(g);
}

static void free_solver(fc_solver *s)
{
    if (!s) return;
    free_groups(s->g, s->ng);
    free(s->orders); free(s->init); free(s->y); free(s->w0);
    free(s->hr); free(s->ht); free(s->c); free(s->yc); free(s->fc);
    free(s->fs); free(s->r); free(s->J); free(s->piv); free(s->gb);
    free(s->fh);
    free(s);
}

void fc_solver_free(fc_solver *s)
{
    free_solver(s);
}

/* The solver's memory without streams; groups by order (first appearance
   order); the parameters were checked. */
static int build(size_t m, const double *orders, double step, double t0,
                 const double *init, int method, int memory, double tol,
                 double horizon, unsigned K, fc_solver **out)
{
    size_t vb, mm, kb;
    if (mul_size(m, sizeof(double), &vb) || mul_size(m, m, &mm) ||
        mul_size(mm, sizeof(double), &mm) || mul_size(vb, K, &kb))
        return FC_ERR_SIZE;
    fc_solver *s = calloc(1, sizeof *s);
    if (s) fc__guard_init(&s->busy);
    if (!s) return FC_ERR_NOMEM;
    s->m = m; s->method = method; s->memory = memory; s->K = K;
    s->step = step; s->t0 = t0;
    s->tol = memory == FC_MODE_COMPRESSED ? tol : 0.0;
    s->horizon = memory == FC_MODE_COMPRESSED ? horizon : 0.0;
    s->ntol = 1e-12; s->nmax = 50; s->passes = 1;
    s->fail_step = UINT64_MAX; s->fail_t = 0.0;
    s->orders = malloc(vb); s->init = malloc(kb); s->y = malloc(vb);
    s->w0 = malloc(vb); s->hr = calloc(m, sizeof(double));
    s->ht = calloc(m, sizeof(double)); s->c = malloc(vb);
    s->yc = malloc(vb); s->fc = calloc(m, sizeof(double)); s->fs = malloc(vb);
    s->r = malloc(vb); s->gb = malloc(vb);
    s->piv = calloc(m, sizeof(size_t));
    s->J = is_implicit(method) ? malloc(mm) : malloc(sizeof(double));
    if (!s->orders || !s->init || !s->y || !s->w0 || !s->hr || !s->ht ||
        !s->c || !s->yc || !s->fc || !s->fs || !s->r || !s->gb || !s->piv ||
        !s->J) {
        free_solver(s);
        return FC_ERR_NOMEM;
    }
    memcpy(s->orders, orders, vb);
    memcpy(s->init, init, kb);
    memcpy(s->y, init, vb);
    /* groups */
    size_t ng = 0;
    for (size_t i = 0; i < m; i++) {
        size_t j = 0;
        for (; j < i; j++)
            if (orders[j] == orders[i]) break;
        if (j == i) ng++;
    }
    s->g = calloc(ng, sizeof(sv_group));
    if (!s->g) { free_solver(s); return FC_ERR_NOMEM; }
    s->ng = ng;
    size_t gi = 0;
    for (size_t i = 0; i < m; i++) {
        size_t j = 0;
        for (; j < i; j++)
            if (orders[j] == orders[i]) break;
        if (j != i) continue;
        sv_group *g = &s->g[gi++];
        g->order = orders[i];
        for (size_t k = i; k < m; k++)
            if (orders[k] == orders[i]) g->nc++;
        g->idx = malloc(g->nc * sizeof(size_t));
        if (!g->idx) { free_solver(s); return FC_ERR_NOMEM; }
        size_t c = 0;
        for (size_t k = i; k < m; k++)
            if (orders[k] == orders[i]) g->idx[c++] = k;
        g->ident = g->nc == m;
        double w;
        int st = method == FC_METHOD_IMPLICIT_RECTANGLE
               ? fc_weights(FC_RULE_RECTANGLE, g->order, step, 0, 1, &w)
               : fc_weights(FC_RULE_TRAPEZOID, g->order, step, 0, 1, &w);
        if (st != FC_OK) { free_solver(s); return st; }
        for (size_t k = 0; k < g->nc; k++) s->w0[g->idx[k]] = w;
        g->fac = 0.0;
        if (method == FC_METHOD_IMPLICIT_RECTANGLE &&
            memory == FC_MODE_COMPRESSED && g->order != 1.0) {
            int dr;
            double da, wd;
            diff_rule(g->order, &dr, &da);
            st = fc_weights(dr, da, step, 0, 1, &wd);
            if (st != FC_OK) { free_solver(s); return st; }
            g->fac = w / wd;
            if (!isfinite(g->fac) || !(g->fac > 0.0)) {
                free_solver(s);
                return FC_ERR_RANGE;
            }
        }
    }
    *out = s;
    return FC_OK;
}

static int make_streams(fc_solver *s)
{
    int st = FC_OK;
    for (size_t j = 0; j < s->ng && st == FC_OK; j++) {
        sv_group *g = &s->g[j];
        if (needs_rect(s->method, s->memory))
            st = fc_stream_create(FC_RULE_RECTANGLE, g->order, s->step, g->nc,
                                  s->memory, s->tol, s->horizon, &g->rect);
        if (st != FC_OK || !needs_trap(s->method, s->memory, g->order))
            continue;
        if (s->method == FC_METHOD_IMPLICIT_RECTANGLE &&
            s->memory == FC_MODE_EXACT)
            st = fc__stream_create_shifted(FC_RULE_RECTANGLE, g->order,
                                           s->step, g->nc, &g->trap);
        else if (s->method == FC_METHOD_IMPLICIT_RECTANGLE) {
            int dr;
            double da;
            diff_rule(g->order, &dr, &da);
            st = fc_stream_create(dr, da, s->step, g->nc, s->memory, s->tol,
                                  s->horizon, &g->trap);
        }
        else
            st = fc_stream_create(FC_RULE_TRAPEZOID, g->order, s->step, g->nc,
                                  s->memory, s->tol, s->horizon, &g->trap);
    }
    return st;
}

int fc_solver_create(size_t m, const double *orders, double step, double t0,
                     const double *init, int method, int memory, double tol,
                     double horizon, fc_solver **out)
{
    unsigned K;
    int st;
    size_t km;
    if (!orders || !init || !out) return FC_ERR_NULL;
    if ((st = check_params(m, orders, step, t0, method, memory, tol, horizon,
                           &K)) != FC_OK)
        return st;
    if (mul_size(m, K, &km)) return FC_ERR_SIZE;
    if (!all_finite(init, km)) return FC_ERR_NONFINITE;
    fc_solver *s;
    if ((st = build(m, orders, step, t0, init, method, memory, tol, horizon,
                    K, &s)) != FC_OK)
        return st;
    if ((st = make_streams(s)) != FC_OK) { free_solver(s); return st; }
    *out = s;
    return FC_OK;
}

/* ------------------------------------------------------------ settings */

int fc_solver_set_rhs(fc_solver *s, fc_rhs_fn fn, void *user)
{
    if (!fn) return FC_ERR_NULL;
    FC__ENTER_OR_RETURN(s);
    s->rhs = fn;
    s->rhs_user = user;
    fc__guard_leave(&s->busy);
    return FC_OK;
}

int fc_solver_set_jacobian(fc_solver *s, fc_jac_fn fn, void *user)
{
    FC__ENTER_OR_RETURN(s);
    s->jac = fn;
    s->jac_user = fn ? user : NULL;
    fc__guard_leave(&s->busy);
    return FC_OK;
}

int fc_solver_set_newton(fc_solver *s, double tol, unsigned maxiter)
{
    if (!s) return FC_ERR_NULL;
    if (!(tol >= 1e-15 && tol <= 1e-2)) return FC_ERR_TOL;
    if (maxiter < 1 || maxiter > 1000) return FC_ERR_ARG;
    FC__ENTER_OR_RETURN(s);
    s->ntol = tol;
    s->nmax = maxiter;
    fc__guard_leave(&s->busy);
    return FC_OK;
}

int fc_solver_set_corrections(fc_solver *s, unsigned passes)
{
    if (!s) return FC_ERR_NULL;
    if (passes < 1 || passes > 100) return FC_ERR_ARG;
    FC__ENTER_OR_RETURN(s);
    s->passes = passes;
    fc__guard_leave(&s->busy);
    return FC_OK;
}

/* ------------------------------------------------------------ stepping */

static int eval(fc_solver *s, double t, uint64_t stepi)
{
    s->nrhs++;
    if (s->rhs(t, s->yc, s->fc, s->rhs_user) != 0) {
        s->fail_step = stepi; s->fail_t = t;
        return FC_ERR_CALLBACK;
    }
    if (!all_finite(s->fc, s->m)) {
        s->fail_step = stepi; s->fail_t = t;
        return FC_ERR_NONFINITE;
    }
    return FC_OK;
}

/* Push f (component order) into every stream; room was reserved, so the
   pushes do not allocate and cannot fail on valid finite samples. */
static int push_all(fc_solver *s, const double *f)
{
    double dummy[1];
    for (size_t j = 0; j < s->ng; j++) {
        sv_group *g = &s->g[j];
        const double *x = f;
        if (!g->ident) {
            for (size_t k = 0; k < g->nc; k++) s->gb[k] = f[g->idx[k]];
            x = s->gb;
        }
        double *yo = g->nc == 1 ? dummy : s->r; /* outputs unused */
        int st;
        if (g->rect) {
            st = g->nc == 1 ? fc_stream_push1(g->rect, x[0], dummy)
                            : fc_stream_push(g->rect, x, yo);
            if (st != FC_OK) return st;
        }
        if (g->trap) {
            st = g->nc == 1 ? fc_stream_push1(g->trap, x[0], dummy)
                            : fc_stream_push(g->trap, x, yo);
            if (st != FC_OK) return st;
        }
    }
    return FC_OK;
}

/* Push 0 into the implicit rectangle's streams of the differences
   (compressed memory; their x_0, see the top of the file). */
static int push_zero_diffs(fc_solver *s)
{
    for (size_t j = 0; j < s->ng; j++) {
        sv_group *g = &s->g[j];
        if (!g->trap) continue;
        for (size_t k = 0; k < g->nc; k++) s->gb[k] = 0.0;
        int st = fc_stream_push(g->trap, s->gb, s->gb);
        if (st != FC_OK) return st;
    }
    return FC_OK;
}

static int histories(fc_solver *s)
{
    int irc = s->method == FC_METHOD_IMPLICIT_RECTANGLE &&
              s->memory == FC_MODE_COMPRESSED;
    for (size_t j = 0; j < s->ng; j++) {
        sv_group *g = &s->g[j];
        int st;
        if (g->rect) {
            double *h = g->ident ? s->hr : s->gb;
            if ((st = fc_stream_history(g->rect, h)) != FC_OK) return st;
            if (!g->ident)
                for (size_t k = 0; k < g->nc; k++) s->hr[g->idx[k]] = h[k];
        }
        if (irc) {
            /* H = R + fac * (the differences' sum), see the top */
            double *h = s->gb;
            if (g->trap && g->order < 1.0) {
                /* L1: the output for a next sample 0 */
                for (size_t k = 0; k < g->nc; k++) h[k] = 0.0;
                if ((st = fc_stream_preview(g->trap, h, h)) != FC_OK) return st;
            }
            else if (g->trap) {
                if ((st = fc_stream_history(g->trap, h)) != FC_OK) return st;
            }
            for (size_t k = 0; k < g->nc; k++) {
                size_t i = g->idx[k];
                s->ht[i] = g->trap ? s->hr[i] + g->fac * h[k] : s->hr[i];
            }
        }
        else if (g->trap) {
            double *h = g->ident ? s->ht : s->gb;
            if ((st = fc_stream_history(g->trap, h)) != FC_OK) return st;
            if (!g->ident)
                for (size_t k = 0; k < g->nc; k++) s->ht[g->idx[k]] = h[k];
        }
    }
    return FC_OK;
}

/* Taylor polynomial of the initial values at t0 + j*step into out. */
static void taylor(const fc_solver *s, uint64_t j, double *out)
{
    size_t m = s->m;
    if (s->K == 1) {
        memcpy(out, s->init, m * sizeof(double));
        return;
    }
    double dt = (double)j * s->step;
    for (size_t i = 0; i < m; i++)
        out[i] = s->init[i] + (s->orders[i] > 1.0 ? s->init[m + i] * dt : 0.0);
}

/* LU with partial pivoting of the m x m matrix A (in place) and solve
   A d = b (b overwritten by d). 0 if singular. */
static int lu_solve(double *A, size_t m, size_t *piv, double *b)
{
    for (size_t k = 0; k < m; k++) {
        size_t p = k;
        double big = fabs(A[k * m + k]);
        for (size_t i = k + 1; i < m; i++)
            if (fabs(A[i * m + k]) > big) { big = fabs(A[i * m + k]); p = i; }
        if (!(big > 0.0) || !isfinite(big)) return 0;
        piv[k] = p;
        if (p != k) {
            for (size_t j = 0; j < m; j++) {
                double tmp = A[k * m + j];
                A[k * m + j] = A[p * m + j];
                A[p * m + j] = tmp;
            }
            double tb = b[k]; b[k] = b[p]; b[p] = tb;
        }
        double d = A[k * m + k];
        for (size_t i = k + 1; i < m; i++) {
            double l = A[i * m + k] / d;
            A[i * m + k] = l;
            if (l != 0.0) {
                for (size_t j = k + 1; j < m; j++) A[i * m + j] -= l * A[k * m + j];
                b[i] -= l * b[k];
            }
        }
    }
    for (size_t k = m; k-- > 0;) {
        double v = b[k];
        for (size_t j = k + 1; j < m; j++) v -= A[k * m + j] * b[j];
        b[k] = v / A[k * m + k];
    }
    return all_finite(b, m);
}

/* Newton's method for yc = c + w0 .* f(t, yc); on success yc and fc hold
   the converged point and f there. */
static int newton(fc_solver *s, double t, uint64_t stepi)
{
    size_t m = s->m;
    int st;
    for (unsigned it = 0;; it++) {
        if ((st = eval(s, t, stepi)) != FC_OK) return st;
        int ok = 1;
        for (size_t i = 0; i < m; i++) {
            double wf = s->w0[i] * s->fc[i];
            double ri = s->yc[i] - s->c[i] - wf;
            s->r[i] = ri;
            if (!(fabs(ri) <= s->ntol * (fabs(s->yc[i]) + fabs(s->c[i]) + fabs(wf))))
                ok = 0;
        }
        if (ok) return FC_OK;
        if (it >= s->nmax) break;
        /* Jacobian df/dy at yc into J */
        if (s->jac) {
            s->njac++;
            if (s->jac(t, s->yc, s->J, s->jac_user) != 0) {
                s->fail_step = stepi; s->fail_t = t;
                return FC_ERR_CALLBACK;
            }
            if (!all_finite(s->J, m * m)) {
                s->fail_step = stepi; s->fail_t = t;
                return FC_ERR_NONFINITE;
            }
        }
        else {
            memcpy(s->fs, s->fc, m * sizeof(double));
            for (size_t j = 0; j < m; j++) {
                double yj = s->yc[j];
                double d = 1.4901161193847656e-08 * (fabs(yj) > 1.0 ? fabs(yj) : 1.0);
                volatile double yp = yj + d;
                d = yp - yj;
                s->yc[j] = yp;
                st = eval(s, t, stepi);
                s->yc[j] = yj;
                if (st != FC_OK) return st;
                for (size_t i = 0; i < m; i++)
                    s->J[i * m + j] = (s->fc[i] - s->fs[i]) / d;
            }
            memcpy(s->fc, s->fs, m * sizeof(double));
        }
        /* A = I - diag(w0) J */
        for (size_t i = 0; i < m; i++) {
            for (size_t j = 0; j < m; j++) s->J[i * m + j] *= -s->w0[i];
            s->J[i * m + i] += 1.0;
        }
        if (!lu_solve(s->J, m, s->piv, s->r)) break;
        for (size_t i = 0; i < m; i++) s->yc[i] -= s->r[i];
        if (!all_finite(s->yc, m)) break;
    }
    s->fail_step = stepi; s->fail_t = t;
    return FC_ERR_NEWTON;
}

/* One step n -> n+1 into yc (and fc = f(t_{n+1}, y_{n+1})). */
static int one_step(fc_solver *s, double t)
{
    size_t m = s->m;
    uint64_t stepi = s->n + 1;
    int st = histories(s);
    if (st != FC_OK) return st;
    taylor(s, stepi, s->c);
    switch (s->method) {
    case FC_METHOD_RECTANGLE:
        for (size_t i = 0; i < m; i++) s->yc[i] = s->c[i] + s->hr[i];
        return eval(s, t, stepi);
    case FC_METHOD_PC:
        for (size_t i = 0; i < m; i++) {
            s->yc[i] = s->c[i] + s->hr[i];
            s->c[i] += s->ht[i];
        }
        for (unsigned p = 0; p < s->passes; p++) {
            if ((st = eval(s, t, stepi)) != FC_OK) return st;
            for (size_t i = 0; i < m; i++)
                s->yc[i] = s->c[i] + s->w0[i] * s->fc[i];
        }
        return eval(s, t, stepi);
    default: /* FC_METHOD_TRAPEZOID, FC_METHOD_IMPLICIT_RECTANGLE */
        for (size_t i = 0; i < m; i++) s->c[i] += s->ht[i];
        memcpy(s->yc, s->y, m * sizeof(double));
        return newton(s, t, stepi);
    }
}

/* Room for n rows of f history (implicit rectangle), doubling. */
static int grow_history(fc_solver *s, uint64_t n)
{
    if (n <= s->fhcap) return FC_OK;
    uint64_t want = n;
    if (s->fhcap <= UINT64_MAX / 2 && 2 * (uint64_t)s->fhcap > want)
        want = 2 * (uint64_t)s->fhcap;
    size_t bytes;
    for (int pass = 0; pass < 2; pass++) {
        if (want <= (uint64_t)((size_t)-1) &&
            !mul_size((size_t)want, s->m, &bytes) &&
            !mul_size(bytes, sizeof(double), &bytes)) {
            double *p = realloc(s->fh, bytes);
            if (p) { s->fh = p; s->fhcap = (size_t)want; return FC_OK; }
        }
        if (want == n) break;
        want = n;
    }
    return FC_ERR_NOMEM;
}

static int reserve(fc_solver *s, uint64_t need)
{
    if (need <= s->reserved) return FC_OK;
    uint64_t want = need;
    if (s->reserved <= UINT64_MAX / 2 && 2 * s->reserved > want)
        want = 2 * s->reserved;
    for (int pass = 0; pass < 2; pass++) {
        int st = FC_OK;
        for (size_t j = 0; j < s->ng && st == FC_OK; j++) {
            if (s->g[j].rect) st = fc_stream_reserve(s->g[j].rect, want);
            if (st == FC_OK && s->g[j].trap)
                st = fc_stream_reserve(s->g[j].trap, want);
        }
        if (st == FC_OK) { s->reserved = want; return FC_OK; }
        if (want == need) return st;
        want = need;
    }
    return FC_ERR_NOMEM; /* not reached */
}

static int advance(fc_solver *s, size_t nsteps, double *t_out,
                   double *y_out, size_t *done)
{
    *done = 0;
    if (!s->rhs) return FC_ERR_NORHS;
    if (nsteps == 0) return FC_OK;
    size_t m = s->m, tot;
    if (y_out && mul_size(nsteps, m, &tot)) return FC_ERR_SIZE;
    /* samples each stream holds at the end */
    if ((uint64_t)nsteps > UINT64_MAX - 1 - s->n) return FC_ERR_SIZE;
    uint64_t n_end = s->n + (uint64_t)nsteps;
    if (s->memory == FC_MODE_COMPRESSED) {
        if ((double)n_end > floor(s->horizon)) return FC_ERR_HORIZON;
    }
    else if (n_end >= (UINT64_C(1) << 53)) return FC_ERR_SIZE;
    if (s->memory == FC_MODE_EXACT) {
        for (size_t j = 0; j < s->ng; j++) {
            uint64_t left, cnt = s->f0done ? s->n + 1 : 0;
            fc_stream *x = s->g[j].rect ? s->g[j].rect : s->g[j].trap;
            int st = fc_stream_remaining(x, &left);
            if (st != FC_OK) return st;
            if (n_end + 1 - cnt > left) return FC_ERR_SIZE;
        }
        int st = reserve(s, n_end + 1);
        if (st != FC_OK) return st;
        if (s->method == FC_METHOD_IMPLICIT_RECTANGLE &&
            (st = grow_history(s, n_end)) != FC_OK)
            return st;
    }
    int st = FC_OK;
    if (!s->f0done && s->method == FC_METHOD_IMPLICIT_RECTANGLE) {
        /* f_0 does not enter the right-end-point rule; compressed memory
           starts the streams of the differences with x_0 = 0 */
        if (s->memory == FC_MODE_COMPRESSED) st = push_zero_diffs(s);
        if (st == FC_OK) s->f0done = 1;
    }
    if (!s->f0done) {
        memcpy(s->yc, s->y, m * sizeof(double));
        st = eval(s, s->t0, 0);
        if (st == FC_OK) st = push_all(s, s->fc);
        if (st == FC_OK) s->f0done = 1;
    }
    size_t j = 0;
    for (; st == FC_OK && j < nsteps; j++) {
        double t = s->t0 + (double)(s->n + 1) * s->step;
        if ((st = one_step(s, t)) != FC_OK) break;
        if ((st = push_all(s, s->fc)) != FC_OK) break;
        if (s->fh) memcpy(s->fh + s->n * m, s->fc, m * sizeof(double));
        memcpy(s->y, s->yc, m * sizeof(double));
        s->n++;
        if (t_out) t_out[j] = t;
        if (y_out) memcpy(y_out + j * m, s->yc, m * sizeof(double));
    }
    *done = j;
    return st;
}

/* The guard is held for the whole advance: a callback that calls back
   into its own solver gets FC_ERR_BUSY, as does another thread. */
int fc_solver_advance(fc_solver *s, size_t nsteps, double *t_out,
                      double *y_out, size_t *done)
{
    if (!done) return FC_ERR_NULL;
    FC__ENTER_OR_RETURN(s);
    int st = advance(s, nsteps, t_out, y_out, done);
    fc__guard_leave(&s->busy);
    return st;
}

/* ------------------------------------------------------------ queries */

int fc_solver_time(const fc_solver *s, double *t)
{
    if (!t) return FC_ERR_NULL;
    FC__ENTER_OR_RETURN(s);
    *t = s->t0 + (double)s->n * s->step;
    fc__guard_leave(&s->busy);
    return FC_OK;
}

int fc_solver_state(const fc_solver *s, double *y)
{
    if (!y) return FC_ERR_NULL;
    FC__ENTER_OR_RETURN(s);
    memcpy(y, s->y, s->m * sizeof(double));
    fc__guard_leave(&s->busy);
    return FC_OK;
}

int fc_solver_steps(const fc_solver *s, uint64_t *n)
{
    if (!n) return FC_ERR_NULL;
    FC__ENTER_OR_RETURN(s);
    *n = s->n;
    fc__guard_leave(&s->busy);
    return FC_OK;
}

int fc_solver_dim(const fc_solver *s, size_t *m)
{
    if (!s || !m) return FC_ERR_NULL;
    *m = s->m;
    return FC_OK;
}

int fc_solver_counts(const fc_solver *s, uint64_t *rhs_calls,
                     uint64_t *jac_calls)
{
    if (!rhs_calls || !jac_calls) return FC_ERR_NULL;
    FC__ENTER_OR_RETURN(s);
    *rhs_calls = s->nrhs;
    *jac_calls = s->njac;
    fc__guard_leave(&s->busy);
    return FC_OK;
}

int fc_solver_failure(const fc_solver *s, uint64_t *step, double *t)
{
    if (!step || !t) return FC_ERR_NULL;
    FC__ENTER_OR_RETURN(s);
    *step = s->fail_step;
    *t = s->fail_t;
    fc__guard_leave(&s->busy);
    return FC_OK;
}

int fc_solver_nbytes(const fc_solver *s, size_t *nbytes)
{
    if (!nbytes) return FC_ERR_NULL;
    FC__ENTER_OR_RETURN(s);
    size_t m = s->m;
    size_t b = sizeof *s + s->ng * sizeof(sv_group) + m * sizeof(size_t) * 2
             + (12 + (size_t)s->K) * m * sizeof(double);
    if (is_implicit(s->method)) b += m * m * sizeof(double);
    b += s->fhcap * m * sizeof(double);
    for (size_t j = 0; j < s->ng; j++) {
        size_t x;
        if (s->g[j].rect && fc_stream_nbytes(s->g[j].rect, &x) == FC_OK) b += x;
        if (s->g[j].trap && fc_stream_nbytes(s->g[j].trap, &x) == FC_OK) b += x;
    }
    *nbytes = b;
    fc__guard_leave(&s->busy);
    return FC_OK;
}

const char *fc_solver_strerror(int status)
{
    switch (status) {
    case FC_ERR_CALLBACK: return "a callback (right-hand side or Jacobian) returned non-zero";
    case FC_ERR_NEWTON: return "Newton's method did not converge within the iteration limit";
    case FC_ERR_NORHS: return "no right-hand side set (fc_solver_set_rhs)";
    default: return fc_strerror(status);
    }
}

/* ------------------------------------------------------------ save/load */

/* The shared little-endian serializer and checksum (serial.h). */
#define put_u64 fc__put64
#define get_u64 fc__get64
#define put_u32 fc__put32
#define get_u32 fc__get32
#define put_f64 fc__putd
#define get_f64 fc__getd
static uint64_t fnv1a(const unsigned char *p, size_t n)
{
    return fc__fnv1a(FC__FNV_OFFSET, p, n);
}

/*
 * Layout (little-endian):
 *    0  8 bytes "FCSOLVE1"         8  u32 version (1)
 *   12  u32 method                16  u32 memory
 *   20  u32 K                     24  u64 m
 *   32  f64 step, t0, tol, horizon, newton tol (5 x 8) (tol and horizon
 *       0 with exact memory; see fc_solver_load for older blobs)
 *   72  u32 newton maxiter        76  u32 corrector passes
 *   80  u64 steps, f0 done (0/1), rhs calls, jac calls
 *  112  f64 orders[m], init[K*m], y[m]
 *       u64 number of groups; per group, for the rectangle then the
 *       trapezoid stream (implicit rectangle, compressed: the stream of
 *       the differences, none at order 1): u64 size (0: none) and the
 *       fc_stream_save bytes (implicit rectangle, exact: both 0)
 *       u64 rows r (implicit rectangle, exact: steps; else 0), f_1 .. f_r
 *       (r*m f64)
 *  end  u64 FNV-1a 64 of everything before
 */
static int save_size(const fc_solver *s, size_t *size)
{
    size_t v, tot = SV_HDR;
    if (mul_size(s->m, 2 + (size_t)s->K, &v) || mul_size(v, 8, &v) ||
        add_size(tot, v, &tot) || add_size(tot, 16, &tot))
        return FC_ERR_SIZE;
    for (size_t j = 0; j < s->ng; j++) {
        fc_stream *st2[2] = { s->g[j].rect, s->g[j].trap };
        for (int k = 0; k < 2; k++) {
            size_t b = 0;
            if (st2[k] && saves_streams(s->method, s->memory)) {
                int st = fc_stream_save_size(st2[k], &b);
                if (st != FC_OK) return st;
            }
            if (add_size(tot, 8, &tot) || add_size(tot, b, &tot))
                return FC_ERR_SIZE;
        }
    }
    size_t rows = 0;
    if (!saves_streams(s->method, s->memory)) {
        if (s->n > (uint64_t)((size_t)-1)) return FC_ERR_SIZE;
        rows = (size_t)s->n;
    }
    if (mul_size(rows, s->m, &v) || mul_size(v, 8, &v) ||
        add_size(tot, 8, &tot) || add_size(tot, v, &tot))
        return FC_ERR_SIZE;
    *size = tot;
    return FC_OK;
}

int fc_solver_save_size(const fc_solver *s, size_t *size)
{
    if (!size) return FC_ERR_NULL;
    FC__ENTER_OR_RETURN(s);
    int st = save_size(s, size);
    fc__guard_leave(&s->busy);
    return st;
}

static int save(const fc_solver *s, unsigned char *buf, size_t size,
                size_t *written)
{
    size_t need;
    int st = save_size(s, &need);
    if (st != FC_OK) return st;
    if (size < need) return FC_ERR_ARG;
    unsigned char *p = buf;
    memcpy(p, SV_MAGIC, 8);
    put_u32(p + 8, SV_VERSION);
    put_u32(p + 12, (uint32_t)s->method);
    put_u32(p + 16, (uint32_t)s->memory);
    put_u32(p + 20, s->K);
    put_u64(p + 24, (uint64_t)s->m);
    put_f64(p + 32, s->step);
    put_f64(p + 40, s->t0);
    put_f64(p + 48, s->tol);
    put_f64(p + 56, s->horizon);
    put_f64(p + 64, s->ntol);
    put_u32(p + 72, s->nmax);
    put_u32(p + 76, s->passes);
    put_u64(p + 80, s->n);
    put_u64(p + 88, (uint64_t)s->f0done);
    put_u64(p + 96, s->nrhs);
    put_u64(p + 104, s->njac);
    size_t off = SV_HDR, m = s->m;
    for (size_t i = 0; i < m; i++, off += 8) put_f64(p + off, s->orders[i]);
    for (size_t i = 0; i < s->K * m; i++, off += 8) put_f64(p + off, s->init[i]);
    for (size_t i = 0; i < m; i++, off += 8) put_f64(p + off, s->y[i]);
    put_u64(p + off, (uint64_t)s->ng);
    off += 8;
    for (size_t j = 0; j < s->ng; j++) {
        fc_stream *st2[2] = { s->g[j].rect, s->g[j].trap };
        for (int k = 0; k < 2; k++) {
            size_t w = 0;
            if (st2[k] && saves_streams(s->method, s->memory)) {
                st = fc_stream_save(st2[k], p + off + 8, size - (off + 8), &w);
                if (st != FC_OK) return st; /* buf contents unspecified */
            }
            put_u64(p + off, (uint64_t)w);
            off += 8 + w;
        }
    }
    uint64_t rows = saves_streams(s->method, s->memory) ? 0 : s->n;
    put_u64(p + off, rows);
    off += 8;
    for (size_t i = 0; i < (size_t)rows * m; i++, off += 8) put_f64(p + off, s->fh[i]);
    put_u64(p + off, fnv1a(p, off));
    off += 8;
    *written = off;
    return FC_OK;
}

int fc_solver_save(const fc_solver *s, unsigned char *buf, size_t size,
                   size_t *written)
{
    if (!buf || !written) return FC_ERR_NULL;
    FC__ENTER_OR_RETURN(s);
    int st = save(s, buf, size, written);
    fc__guard_leave(&s->busy);
    return st;
}

/* Implicit rectangle, load: push the saved f_1 .. f_rows into the fresh
   shifted streams (the result depends only on the samples, not on how they
   were split into blocks, so later steps agree bit for bit). */
static int refeed(fc_solver *s, size_t rows)
{
    size_t m = s->m;
    for (size_t j = 0; j < s->ng; j++) {
        sv_group *g = &s->g[j];
        size_t tot;
        if (mul_size(rows, g->nc, &tot) || mul_size(tot, sizeof(double), &tot))
            return FC_ERR_SIZE;
        double *x = malloc(tot ? tot : 1);
        double *yo = malloc(tot ? tot : 1);
        if (!x || !yo) { free(x); free(yo); return FC_ERR_NOMEM; }
        for (size_t r = 0; r < rows; r++)
            for (size_t c = 0; c < g->nc; c++)
                x[r * g->nc + c] = s->fh[r * m + g->idx[c]];
        int st = fc_stream_reserve(g->trap, (uint64_t)rows + 1);
        if (st == FC_OK && rows) st = fc_stream_push_block(g->trap, x, rows, yo);
        free(x);
        free(yo);
        if (st != FC_OK) return st;
    }
    return FC_OK;
}

/* A loaded stream must be what the solver would have made. */
static int check_stream(fc_stream *x, int rule, double order,
                        const sv_group *g, const fc_solver *s, uint64_t count)
{
    int r, mode;
    double a, h, tol, hz;
    size_t ch;
    uint64_t cnt;
    if (fc_stream_rule(x, &r) || fc_stream_order(x, &a) ||
        fc_stream_step(x, &h) || fc_stream_channels(x, &ch) ||
        fc_stream_mode(x, &mode) || fc_stream_tol(x, &tol) ||
        fc_stream_horizon(x, &hz) || fc_stream_count(x, &cnt))
        return FC_ERR_FORMAT;
    if (r != rule || a != order || h != s->step || ch != g->nc ||
        mode != s->memory || cnt != count)
        return FC_ERR_FORMAT;
    if (s->memory == FC_MODE_COMPRESSED && (tol != s->tol || hz != s->horizon))
        return FC_ERR_FORMAT;
    return FC_OK;
}

int fc_solver_load(const unsigned char *buf, size_t size, fc_solver **out)
{
    if (!buf || !out) return FC_ERR_NULL;
    if (size < SV_HDR + 16) return FC_ERR_FORMAT;
    if (memcmp(buf, SV_MAGIC, 8) != 0) return FC_ERR_FORMAT;
    if (get_u32(buf + 8) != SV_VERSION) return FC_ERR_FORMAT;
    if (get_u64(buf + size - 8) != fnv1a(buf, size - 8)) return FC_ERR_FORMAT;
    uint32_t method = get_u32(buf + 12), memory = get_u32(buf + 16);
    uint32_t K = get_u32(buf + 20);
    uint64_t m64 = get_u64(buf + 24);
    if (method > 3 || memory > 1 || (K != 1 && K != 2)) return FC_ERR_FORMAT;
    /* every component takes (2 + K) * 8 bytes of the blob */
    if (m64 == 0 || m64 > (size - SV_HDR - 16) / (8 * (2 + (uint64_t)K)))
        return FC_ERR_FORMAT;
    size_t m = (size_t)m64;
    double step = get_f64(buf + 32), t0 = get_f64(buf + 40);
    double tol = get_f64(buf + 48), horizon = get_f64(buf + 56);
    double ntol = get_f64(buf + 64);
    uint32_t nmax = get_u32(buf + 72), passes = get_u32(buf + 76);
    uint64_t n = get_u64(buf + 80), f0 = get_u64(buf + 88);
    uint64_t nrhs = get_u64(buf + 96), njac = get_u64(buf + 104);
    /* every step evaluates f at least once, and so does the start except
       for the implicit rectangle rule (f_0 does not enter it: its f0done
       is set without an evaluation, see advance) */
    uint64_t min_rhs = (method == FC_METHOD_IMPLICIT_RECTANGLE ? 0 : f0) + n;
    if (!(ntol >= 1e-15 && ntol <= 1e-2) || nmax < 1 || nmax > 1000 ||
        passes < 1 || passes > 100 || f0 > 1 || (f0 == 0 && n != 0) ||
        n >= (UINT64_C(1) << 53) || nrhs < min_rhs)
        return FC_ERR_FORMAT;
    /* exact memory has no tolerance and no horizon (0); a blob of the
       exact implicit rectangle rule written before its stream grew on
       demand holds the horizon its creation required, 1 <= horizon <=
       2^28, at least the steps done: accepted, and not used */
    if (memory == FC_MODE_EXACT) {
        if (tol != 0.0) return FC_ERR_FORMAT;
        if (horizon != 0.0 && (method != FC_METHOD_IMPLICIT_RECTANGLE ||
                               !(horizon >= 1.0 && horizon <= 268435456.0) ||
                               (double)n > floor(horizon)))
            return FC_ERR_FORMAT;
        horizon = 0.0;
    }
    else if ((double)n > floor(horizon))
        return FC_ERR_FORMAT;
    size_t off = SV_HDR;
    double *orders = malloc(m * sizeof(double));
    if (!orders) return FC_ERR_NOMEM;
    for (size_t i = 0; i < m; i++) orders[i] = get_f64(buf + off + 8 * i);
    unsigned Kc;
    int st = check_params(m, orders, step, t0, (int)method, (int)memory,
                          tol, horizon, &Kc);
    if (st != FC_OK || Kc != K) { free(orders); return FC_ERR_FORMAT; }
    off += 8 * m;
    const unsigned char *pinit = buf + off;
    off += 8 * (size_t)K * m;
    const unsigned char *py = buf + off;
    off += 8 * m;
    double *init = malloc((size_t)K * m * sizeof(double));
    if (!init) { free(orders); return FC_ERR_NOMEM; }
    for (size_t i = 0; i < K * m; i++) init[i] = get_f64(pinit + 8 * i);
    fc_solver *s = NULL;
    if (all_finite(init, K * m))
        st = build(m, orders, step, t0, init, (int)method, (int)memory, tol,
                   horizon, K, &s);
    else
        st = FC_ERR_FORMAT;
    free(orders);
    free(init);
    if (st != FC_OK) return st == FC_ERR_NOMEM ? st : FC_ERR_FORMAT;
    for (size_t i = 0; i < m; i++) s->y[i] = get_f64(py + 8 * i);
    if (!all_finite(s->y, m)) { free_solver(s); return FC_ERR_FORMAT; }
    s->ntol = ntol; s->nmax = nmax; s->passes = passes;
    s->n = n; s->f0done = (int)f0; s->nrhs = nrhs; s->njac = njac;
    size_t end = size - 8;
    if (end - off < 8 || get_u64(buf + off) != (uint64_t)s->ng) {
        free_solver(s);
        return FC_ERR_FORMAT;
    }
    off += 8;
    uint64_t count = f0 ? n + 1 : 0;
    /* implicit rectangle, exact: shifted streams rebuilt from the f rows */
    int impl = !saves_streams((int)method, (int)memory);
    int irc = (int)method == FC_METHOD_IMPLICIT_RECTANGLE && !impl;
    for (size_t j = 0; j < s->ng; j++) {
        sv_group *g = &s->g[j];
        for (int k = 0; k < 2; k++) {
            int want = !impl && (k == 0 ? needs_rect((int)method, (int)memory)
                                        : needs_trap((int)method, (int)memory,
                                                     g->order));
            if (end - off < 8) { free_solver(s); return FC_ERR_FORMAT; }
            uint64_t b = get_u64(buf + off);
            off += 8;
            if ((b == 0) != !want || b > end - off) {
                free_solver(s);
                return FC_ERR_FORMAT;
            }
            if (!want) continue;
            fc_stream *x = NULL;
            st = fc_stream_load(buf + off, (size_t)b, &x);
            int rule = k == 0 ? FC_RULE_RECTANGLE : FC_RULE_TRAPEZOID;
            double order = g->order;
            uint64_t cnt = count;
            if (irc && k == 0) cnt = n; /* f_1 .. f_n */
            if (irc && k == 1) diff_rule(g->order, &rule, &order);
            if (st == FC_OK) st = check_stream(x, rule, order, g, s, cnt);
            if (st != FC_OK) {
                fc_stream_free(x);
                free_solver(s);
                return st == FC_ERR_NOMEM ? st : FC_ERR_FORMAT;
            }
            if (k == 0) g->rect = x; else g->trap = x;
            off += (size_t)b;
        }
    }
    if (end - off < 8) { free_solver(s); return FC_ERR_FORMAT; }
    uint64_t rows = get_u64(buf + off);
    off += 8;
    if (rows != (impl ? n : 0) || rows > (end - off) / 8 / m ||
        rows * m * 8 != end - off) {
        free_solver(s);
        return FC_ERR_FORMAT;
    }
    if (impl) {
        /* the f history bounded by the blob: rebuild the shifted streams
           (their memory and work in proportion to the rows) */
        if ((st = grow_history(s, rows)) != FC_OK ||
            (st = make_streams(s)) != FC_OK) {
            free_solver(s);
            return st == FC_ERR_NOMEM ? st : FC_ERR_FORMAT;
        }
        for (size_t i = 0; i < (size_t)rows * m; i++)
            s->fh[i] = get_f64(buf + off + 8 * i);
        if (!all_finite(s->fh, (size_t)rows * m) ||
            (st = refeed(s, (size_t)rows)) != FC_OK) {
            free_solver(s);
            return st == FC_ERR_NOMEM ? st : FC_ERR_FORMAT;
        }
        off += (size_t)rows * m * 8;
    }
    if (off != end) { free_solver(s); return FC_ERR_FORMAT; }
    *out = s;
    return FC_OK;
}
