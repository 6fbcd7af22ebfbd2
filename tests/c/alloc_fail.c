/*
 * alloc_fail.c -- allocation failure (issue 14, item 4). Linked with
 * -Wl,--wrap=malloc,--wrap=calloc,--wrap=realloc (make alloc-fail, and
 * under AddressSanitizer by make asan-alloc), so that every allocation the
 * library makes goes through the counters below; the k-th allocation of a
 * call is made to fail, for k = 1, 2, ... until the call makes no more.
 * For each k the call must return FC_ERR_NOMEM (or succeed with the same
 * result, where the library has a fallback), leave the object exactly as
 * it was (its saved bytes and its next outputs unchanged) and leak
 * nothing (LeakSanitizer in make asan-alloc). Calls: create, reserve,
 * push, save, load of exact and compressed streams; create, advance,
 * save, load of solvers; create, update, save, load of controllers; FFT
 * plans; batch calls with and without a context; save_file and
 * load_file of each object (the old file must stay as it was and no
 * temporary may be left); fc_grid_apply; create, push, save, load of
 * streams with a time per sample; batch calls with a context of 3
 * threads (its helpers' memory failing, and thread creation refused
 * through --wrap=pthread_create: the same result either way), threaded
 * compressed and exact stream pushes. Invented signals.
 * The library itself has no hook: the wrapping is done by the linker, in
 * this test binary only.
 */
#define _POSIX_C_SOURCE 200809L   /* mkdtemp, rmdir, unlink, opendir */
#include <dirent.h>
#include <unistd.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <stdint.h>
#include <math.h>
#include "fracconv.h"

void *__real_malloc(size_t n);
void *__real_calloc(size_t n, size_t m);
void *__real_realloc(void *p, size_t n);

static long alloc_count, fail_at = -1; /* fail the fail_at-th (1-based) */
static int injected;
static int hit(void)
{
    if (fail_at < 0) return 0;
    if (++alloc_count == fail_at) { injected = 1; return 1; }
    return 0;
}
void *__wrap_malloc(size_t n) { return hit() ? NULL : __real_malloc(n); }
void *__wrap_calloc(size_t n, size_t m) { return hit() ? NULL : __real_calloc(n, m); }
void *__wrap_realloc(void *p, size_t n) { return hit() ? NULL : __real_realloc(p, n); }

/* Thread creation (the batch engines' threads, csrc/parallel.c) through
   the linker too (--wrap=pthread_create): refused while threads_fail_from
   >= 0 for the creations numbered from it on (0-based within a call). */
#include <pthread.h>
#include <errno.h>
int __real_pthread_create(pthread_t *t, const pthread_attr_t *a, void *(*f)(void *), void *arg);
static long threads_made, threads_fail_from = -1;
int __wrap_pthread_create(pthread_t *t, const pthread_attr_t *a, void *(*f)(void *), void *arg)
{
    if (threads_fail_from >= 0 && threads_made++ >= threads_fail_from) return EAGAIN;
    return __real_pthread_create(t, a, f, arg);
}

static void arm(long k) { alloc_count = 0; injected = 0; fail_at = k; }
static void disarm(void) { fail_at = -1; }

static int fails, checks, injections;

/* Run op for k = 1, 2, ...: with the k-th allocation failing it must give
   FC_ERR_NOMEM and `same` must hold; the first k that injects nothing
   ends the loop (op must then succeed). */
#define FOR_EACH_FAILURE(name, op, on_ok, same)                               \
    do {                                                                    \
        for (long k_ = 1; k_ < 100000; k_++) {                              \
            int st_;                                                        \
            arm(k_);                                                        \
            st_ = (op);                                                     \
            disarm();                                                       \
            checks++;                                                       \
            if (!injected) {                                                \
                if (st_ != FC_OK) { fails++; printf("%s: no failure injected, status %d\n", name, st_); } \
                else { on_ok; }                                             \
                break;                                                      \
            }                                                               \
            injections++;                                                   \
            if (st_ == FC_OK) { on_ok; continue; }                          \
            if (st_ != FC_ERR_NOMEM) {                                      \
                fails++;                                                    \
                printf("%s: allocation %ld failed: status %d (%s)\n", name, k_, st_, fc_strerror(st_)); \
            }                                                               \
            if (!(same)) { fails++; printf("%s: allocation %ld failed: object changed\n", name, k_); } \
        }                                                                   \
    } while (0)

/* the saved bytes of a stream, for "unchanged" checks (allocation off) */
static unsigned char *stream_bytes(fc_stream *s, size_t *n)
{
    size_t sz;
    unsigned char *b;
    if (fc_stream_save_size(s, &sz) != FC_OK) return NULL;
    b = malloc(sz);
    if (b == NULL || fc_stream_save(s, b, sz, n) != FC_OK) { free(b); return NULL; }
    return b;
}
static int stream_same(fc_stream *s, const unsigned char *ref, size_t n)
{
    size_t m;
    unsigned char *b = stream_bytes(s, &m);
    int same = b != NULL && m == n && memcmp(b, ref, n) == 0;
    free(b);
    return same;
}

static void streams(void)
{
    enum { N = 3000, C = 2 };
    double *x = malloc(N * C * sizeof *x), *y = malloc(N * C * sizeof *y), *y2 = malloc(N * C * sizeof *y2);
    for (int i = 0; i < N * C; i++) x[i] = sin(0.01 * i) + 0.3;
    for (int mode = 0; mode < 2; mode++)
        for (int rule = 0; rule < 4; rule++) {
            fc_stream *s = NULL, *l = NULL, *r = NULL;
            unsigned char *ref;
            size_t n, wr;
            char name[64];
            snprintf(name, sizeof name, "stream_create mode %d rule %d", mode, rule);
            FOR_EACH_FAILURE(name, fc_stream_create(rule, 0.4, 0.1, C, mode, 1e-9, 1e6, &s),
                             (void)0, s == NULL);
            if (s == NULL) { fails++; continue; }
            /* a reference twin, pushed without failures */
            if (fc_stream_create(rule, 0.4, 0.1, C, mode, 1e-9, 1e6, &r) != FC_OK) { fails++; continue; }
            for (int part = 0; part < 3; part++) {
                const double *xp = x + part * (N / 3) * C;
                ref = stream_bytes(s, &n);
                snprintf(name, sizeof name, "stream_push_block mode %d rule %d part %d", mode, rule, part);
                FOR_EACH_FAILURE(name, fc_stream_push_block(s, xp, N / 3, y), (void)0, stream_same(s, ref, n));
                free(ref);
                if (fc_stream_push_block(r, xp, N / 3, y2) != FC_OK || memcmp(y, y2, (N / 3) * C * sizeof *y) != 0) {
                    fails++; printf("%s: outputs differ from the twin\n", name);
                }
            }
            ref = stream_bytes(s, &n);
            snprintf(name, sizeof name, "stream_reserve mode %d rule %d", mode, rule);
            FOR_EACH_FAILURE(name, fc_stream_reserve(s, 20000), (void)0, stream_same(s, ref, n));
            {
                size_t sz;
                unsigned char *buf;
                fc_stream_save_size(s, &sz);
                buf = malloc(sz);
                snprintf(name, sizeof name, "stream_save mode %d rule %d", mode, rule);
                FOR_EACH_FAILURE(name, fc_stream_save(s, buf, sz, &wr), (void)0, stream_same(s, ref, n));
                snprintf(name, sizeof name, "stream_load mode %d rule %d", mode, rule);
                l = NULL;
                FOR_EACH_FAILURE(name, fc_stream_load(buf, wr, &l),
                                 (void)0, l == NULL);
                if (l == NULL || !stream_same(l, ref, n)) { fails++; printf("%s: loaded stream differs\n", name); }
                free(buf);
            }
            free(ref);
            fc_stream_free(l);
            fc_stream_free(s);
            fc_stream_free(r);
        }
    {
        double k[300];
        fc_stream *s = NULL;
        for (int i = 0; i < 300; i++) k[i] = 1.0 / (1 + i);
        FOR_EACH_FAILURE("stream_create_kernel", fc_stream_create_kernel(k, 300, 2, &s), (void)0, s == NULL);
        fc_stream_free(s);
    }
    free(x); free(y); free(y2);
}

/* A new exact stream of 8 channels fed T samples by 3 threads (its large
   frames shared); outputs to y, saved bytes to *b (malloc'd, size *nb). */
enum { EX_C = 8, EX_T = 17000 };
static int threaded_exact(const double *x, double *y, unsigned char **b, size_t *nb)
{
    fc_stream *s;
    int st = fc_stream_create(FC_RULE_GRUNWALD, 0.45, 0.01, EX_C, FC_MODE_EXACT, 1e-9, 1e6, &s);
    *b = NULL;
    if (st != FC_OK) return st;
    st = fc_stream_push_block_threads(s, x, EX_T, y, 3);
    if (st == FC_OK) {
        long saved = fail_at;
        fail_at = -1; /* the check's own copy is not under test */
        *b = stream_bytes(s, nb);
        fail_at = saved;
    }
    fc_stream_free(s);
    return st;
}

/* fc_apply with a new context of the given threads (freed after). */
static int threaded_apply(const double *x, size_t nsig, size_t n, int engine,
                          size_t threads, double *y)
{
    fc_context *c;
    int st = fc_context_create(&c);
    if (st != FC_OK) return st;
    if ((st = fc_context_set_threads(c, threads)) == FC_OK)
        st = fc_apply(c, FC_RULE_TRAPEZOID, 0.6, 0.01, x, nsig, n, engine, y);
    fc_context_free(c);
    return st;
}

static void batch(void)
{
    enum { N = 5000 };
    double *x = malloc(N * sizeof *x), *y = malloc(N * sizeof *y), *yr = malloc(N * sizeof *yr);
    fc_context *ctx = NULL;
    for (int i = 0; i < N; i++) x[i] = cos(0.003 * i);
    for (int e = 0; e < 4; e++) {
        char name[64];
        if (fc_apply(NULL, FC_RULE_GRUNWALD, 0.6, 0.01, x, 1, N, e, yr) != FC_OK) { fails++; continue; }
        snprintf(name, sizeof name, "apply engine %d", e);
        memset(y, 0, N * sizeof *y);
        FOR_EACH_FAILURE(name, fc_apply(NULL, FC_RULE_GRUNWALD, 0.6, 0.01, x, 1, N, e, y),
                         if (memcmp(y, yr, N * sizeof *y)) { fails++; printf("%s: result differs\n", name); },
                         1);
    }
    /* a context with 3 threads, made afresh for each failure, so that the
       helpers' contexts, plans and work space are made (and made to fail)
       every time: a failure there is no error, fewer threads give the
       same bits; a failure of the call's own memory is FC_ERR_NOMEM */
    {
        enum { S = 28 }; /* 1 x 140000 or 3 x 45000 samples: split signals */
        double *xs = malloc(S * N * sizeof *xs), *ys = malloc(S * N * sizeof *ys),
               *yt = malloc(S * N * sizeof *yt);
        for (int i = 0; i < S * N; i++) xs[i] = cos(0.003 * i) + (i / N);
        for (int e = 0; e < 4; e++) {
            for (size_t nsig = 1; nsig <= 3; nsig += 2) { /* 1 and 3 signals */
                char name[80];
                size_t n = nsig == 1 ? S * N : 9 * N;
                if (e == FC_ENGINE_DIRECT) n = N; /* keep it short */
                if (fc_apply(NULL, FC_RULE_TRAPEZOID, 0.6, 0.01, xs, nsig, n, e, ys) != FC_OK) { fails++; continue; }
                snprintf(name, sizeof name, "threaded apply engine %d, %zu signals", e, nsig);
                FOR_EACH_FAILURE(name, threaded_apply(xs, nsig, n, e, 3, yt),
                                 if (memcmp(yt, ys, nsig * n * sizeof *yt)) { fails++; printf("%s: result differs\n", name); },
                                 1);
                /* thread creation refused: from the first, from the second */
                for (long from = 0; from < 2; from++) {
                    int st;
                    threads_made = 0;
                    threads_fail_from = from;
                    memset(yt, 0, nsig * n * sizeof *yt);
                    st = threaded_apply(xs, nsig, n, e, 3, yt);
                    threads_fail_from = -1;
                    checks++;
                    if (st != FC_OK || memcmp(yt, ys, nsig * n * sizeof *yt)) {
                        fails++;
                        printf("%s: thread creation refused from the %ld-th: status %d%s\n", name, from + 1, st,
                               st == FC_OK ? ", result differs" : "");
                    }
                }
            }
        }
        free(xs); free(ys); free(yt);
    }
    /* a compressed stream of 3 channels pushed by 3 threads: its scratch
       failing leaves the work to the calling thread, same outputs and
       state; thread creation refused, the same */
    {
        enum { C = 3, T = 3000 };
        double *xs = malloc(C * T * sizeof *xs), *yr = malloc(C * T * sizeof *yr),
               *yt = malloc(C * T * sizeof *yt);
        unsigned char *br, *bt;
        size_t nr, nt;
        fc_stream *sr, *s;
        for (int i = 0; i < C * T; i++) xs[i] = sin(0.01 * i);
        if (fc_stream_create(FC_RULE_TRAPEZOID, 1.4, 0.01, C, FC_MODE_COMPRESSED, 1e-9, 1e6, &sr) != FC_OK ||
            fc_stream_push_block(sr, xs, T, yr) != FC_OK || !(br = stream_bytes(sr, &nr))) { fails++; }
        else {
            for (long from = -1; from < 1; from++) {
                if (fc_stream_create(FC_RULE_TRAPEZOID, 1.4, 0.01, C, FC_MODE_COMPRESSED, 1e-9, 1e6, &s) != FC_OK) { fails++; break; }
                threads_made = 0;
                threads_fail_from = from; /* -1: threads allowed, the scratch fails */
                if (from < 0) arm(1);
                int st = fc_stream_push_block_threads(s, xs, T, yt, 3);
                if (from < 0) { if (!injected) { fails++; printf("threaded compressed push: no allocation\n"); } disarm(); }
                threads_fail_from = -1;
                checks++;
                bt = stream_bytes(s, &nt);
                if (st != FC_OK || memcmp(yt, yr, C * T * sizeof *yt) || !bt || nt != nr || memcmp(bt, br, nr)) {
                    fails++;
                    printf("threaded compressed push (%s): status %d, outputs or state differ\n",
                           from < 0 ? "scratch failing" : "threads refused", st);
                }
                free(bt);
                fc_stream_free(s);
            }
            free(br);
        }
        fc_stream_free(sr);
        free(xs); free(yr); free(yt);
    }
    /* the exact stream's threaded frames: a helper's plans or buffer
       failing leaves the frames to fewer threads, same outputs and state */
    {
        double *xs = malloc(EX_C * EX_T * sizeof *xs), *yr = malloc(EX_C * EX_T * sizeof *yr),
               *yt = malloc(EX_C * EX_T * sizeof *yt);
        unsigned char *br = NULL, *bt = NULL;
        size_t nr = 0, nt = 0;
        fc_stream *sr;
        for (int i = 0; i < EX_C * EX_T; i++) xs[i] = sin(0.01 * i) + (i % 9 == 0);
        if (fc_stream_create(FC_RULE_GRUNWALD, 0.45, 0.01, EX_C, FC_MODE_EXACT, 1e-9, 1e6, &sr) != FC_OK ||
            fc_stream_push_block(sr, xs, EX_T, yr) != FC_OK || !(br = stream_bytes(sr, &nr))) fails++;
        else
            FOR_EACH_FAILURE("threaded exact push", threaded_exact(xs, yt, &bt, &nt),
                             if (memcmp(yt, yr, EX_C * EX_T * sizeof *yt) || !bt || nt != nr || memcmp(bt, br, nr)) { fails++; printf("threaded exact push: outputs or state differ\n"); } free(bt); bt = NULL,
                             1);
        fc_stream_free(sr);
        free(br); free(xs); free(yr); free(yt);
    }
    FOR_EACH_FAILURE("context_create", fc_context_create(&ctx), (void)0, ctx == NULL);
    for (int rep = 0; rep < 2; rep++)
        FOR_EACH_FAILURE("apply with context", fc_apply(ctx, FC_RULE_L1, 0.3, 0.01, x, 1, N, FC_ENGINE_AUTO, y),
                         (void)0, 1);
    fc_context_free(ctx);
    {
        fc_fft_plan *p = NULL;
        FOR_EACH_FAILURE("rfft_create", fc_rfft_create(1 << 18, &p), (void)0, p == NULL);
        fc_rfft_free(p);
    }
    free(x); free(y); free(yr);
}

static int rhs(double t, const double *y, double *f, void *u) { (void)u; f[0] = -y[0] + cos(t); return 0; }

static void solvers(void)
{
    for (int meth = 0; meth < 4; meth++)
        for (int mem = 0; mem < 2; mem++) {
            double o = 0.7, y0 = 1.0, yo[400], yo2[400];
            fc_solver *s = NULL, *r = NULL, *l = NULL;
            size_t done = 0, sz, wr;
            unsigned char *buf;
            uint64_t n0, n1;
            char name[64];
            snprintf(name, sizeof name, "solver_create %d %d", meth, mem);
            FOR_EACH_FAILURE(name, fc_solver_create(1, &o, 0.01, 0, &y0, meth, mem, 1e-9, 5000, &s),
                             (void)0, s == NULL);
            if (s == NULL || fc_solver_create(1, &o, 0.01, 0, &y0, meth, mem, 1e-9, 5000, &r) != FC_OK) { fails++; continue; }
            fc_solver_set_rhs(s, rhs, NULL);
            fc_solver_set_rhs(r, rhs, NULL);
            for (int part = 0; part < 2; part++) {
                /* each k on a fresh copy (loaded with allocation on), as
                   the solver may succeed after a failure (it retries its
                   streams' room with a smaller size): then its outputs
                   must be the twin's; after FC_ERR_NOMEM the copy must be
                   unchanged, so a second advance gives the twin's too */
                unsigned char *cp;
                size_t csz, cwr;
                fc_solver_advance(r, 400, NULL, yo2, &done);
                fc_solver_save_size(s, &csz);
                cp = malloc(csz);
                fc_solver_save(s, cp, csz, &cwr);
                snprintf(name, sizeof name, "solver_advance %d %d part %d", meth, mem, part);
                for (long k = 1; k < 100000; k++) {
                    fc_solver *t = NULL;
                    int st;
                    if (fc_solver_load(cp, cwr, &t) != FC_OK) { fails++; break; }
                    fc_solver_set_rhs(t, rhs, NULL);
                    fc_solver_steps(t, &n0);
                    arm(k);
                    st = fc_solver_advance(t, 400, NULL, yo, &done);
                    disarm();
                    checks++;
                    if (injected) injections++;
                    if (st == FC_ERR_NOMEM && injected) {
                        fc_solver_steps(t, &n1);
                        if (n1 != n0 || done != 0) { fails++; printf("%s: k %ld: steps changed\n", name, k); }
                        st = fc_solver_advance(t, 400, NULL, yo, &done);
                    } else if (st != FC_OK) {
                        fails++;
                        printf("%s: allocation %ld failed: status %d (%s)\n", name, k, st, fc_strerror(st));
                    }
                    if (st == FC_OK && memcmp(yo, yo2, sizeof yo)) { fails++; printf("%s: k %ld: differs from the twin\n", name, k); }
                    fc_solver_free(t);
                    if (!injected) break;
                }
                free(cp);
                fc_solver_advance(s, 400, NULL, yo, &done);
            }
            fc_solver_save_size(s, &sz);
            buf = malloc(sz);
            snprintf(name, sizeof name, "solver_save %d %d", meth, mem);
            FOR_EACH_FAILURE(name, fc_solver_save(s, buf, sz, &wr), (void)0, 1);
            snprintf(name, sizeof name, "solver_load %d %d", meth, mem);
            FOR_EACH_FAILURE(name, fc_solver_load(buf, wr, &l), (void)0, l == NULL);
            if (l != NULL) {
                fc_solver_set_rhs(l, rhs, NULL);
                fc_solver_advance(l, 100, NULL, yo, &done);
                fc_solver_advance(r, 100, NULL, yo2, &done);
                if (memcmp(yo, yo2, 100 * sizeof *yo)) { fails++; printf("%s: loaded solver differs\n", name); }
            }
            free(buf);
            fc_solver_free(s); fc_solver_free(r); fc_solver_free(l);
        }
}

static void controllers(void)
{
    for (int mem = 0; mem < 2; mem++) {
        fc_controller_params p;
        fc_controller *c = NULL, *r = NULL, *l = NULL;
        double rr[500], ym[500], u[500], u2[500];
        size_t sz, wr, done;
        uint64_t n0, n1;
        unsigned char *buf;
        char name[64];
        for (int i = 0; i < 500; i++) { rr[i] = 1.0; ym[i] = 0.5 * sin(0.02 * i); }
        fc_controller_default_params(&p);
        p.ki = 0.4; p.kd = 0.2; p.memory = mem;
        snprintf(name, sizeof name, "controller_create %d", mem);
        FOR_EACH_FAILURE(name, fc_controller_create(&p, &c), (void)0, c == NULL);
        if (c == NULL || fc_controller_create(&p, &r) != FC_OK) { fails++; continue; }
        snprintf(name, sizeof name, "controller_update_block %d", mem);
        fc_controller_update_block(r, rr, ym, 500, u2, NULL);
        {
            /* each k on a fresh copy: after FC_ERR_NOMEM at sample done the
               copy is as after done samples (fracconv.h), so finishing the
               block from there gives the twin's outputs */
            unsigned char *cp;
            size_t csz, cwr;
            fc_controller_save_size(c, &csz);
            cp = malloc(csz);
            fc_controller_save(c, cp, csz, &cwr);
            for (long k = 1; k < 100000; k++) {
                fc_controller *t = NULL;
                int st;
                if (fc_controller_load(cp, cwr, &t) != FC_OK) { fails++; break; }
                fc_controller_count(t, &n0);
                memset(u, 0, sizeof u);
                arm(k);
                st = fc_controller_update_block(t, rr, ym, 500, u, &done);
                disarm();
                checks++;
                if (injected) injections++;
                if (st == FC_ERR_NOMEM && injected) {
                    fc_controller_count(t, &n1);
                    if (n1 != n0 + done) { fails++; printf("%s: k %ld: count %llu after %zu done\n", name, k, (unsigned long long)n1, done); }
                    st = fc_controller_update_block(t, rr + done, ym + done, 500 - done, u + done, NULL);
                } else if (st != FC_OK) {
                    fails++;
                    printf("%s: allocation %ld failed: status %d (%s)\n", name, k, st, fc_strerror(st));
                }
                if (st == FC_OK && memcmp(u, u2, sizeof u)) { fails++; printf("%s: k %ld: differs from the twin\n", name, k); }
                fc_controller_free(t);
                if (!injected) break;
            }
            free(cp);
        }
        fc_controller_update_block(c, rr, ym, 500, u, NULL);
        fc_controller_save_size(c, &sz);
        buf = malloc(sz);
        snprintf(name, sizeof name, "controller_save %d", mem);
        FOR_EACH_FAILURE(name, fc_controller_save(c, buf, sz, &wr), (void)0, 1);
        snprintf(name, sizeof name, "controller_load %d", mem);
        FOR_EACH_FAILURE(name, fc_controller_load(buf, wr, &l), (void)0, l == NULL);
        if (l != NULL) {
            fc_controller_update_block(l, rr, ym, 500, u, NULL);
            fc_controller_update_block(r, rr, ym, 500, u2, NULL);
            if (memcmp(u, u2, sizeof u)) { fails++; printf("%s: loaded controller differs\n", name); }
        }
        free(buf);
        fc_controller_free(c); fc_controller_free(r); fc_controller_free(l);
    }
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

/* the file holds exactly b[0 .. n) and is alone in dir (allocation off) */
static int file_is(const char *dir, const char *path, const unsigned char *b, size_t n)
{
    unsigned char *d = NULL;
    size_t m = 0;
    int same;
    if (fc_file_read(path, n + 10, &d, &m) != FC_OK) return 0;
    same = m == n && memcmp(d, b, n) == 0 && dir_entries(dir) == 1;
    fc_file_data_free(d);
    return same;
}

static void files(void)
{
    char dir[] = "/tmp/fc_alloc_fail_XXXXXX";
    char path[96];
    static const unsigned char old[] = "an old checkpoint";
    double x[200], y[200];
    if (mkdtemp(dir) == NULL) { fails++; printf("mkdtemp failed\n"); return; }
    snprintf(path, sizeof path, "%s/state.bin", dir);
    for (int i = 0; i < 200; i++) x[i] = sin(0.05 * i) + 0.2;
    for (int mode = 0; mode < 2; mode++) {
        fc_stream *s = NULL, *l = NULL;
        unsigned char *ref;
        size_t n;
        char name[64];
        if (fc_stream_create(FC_RULE_TRAPEZOID, 0.6, 0.1, 1, mode, 1e-9, 1e4, &s) != FC_OK) { fails++; continue; }
        fc_stream_push_block(s, x, 200, y);
        ref = stream_bytes(s, &n);
        fc_file_write(path, old, sizeof old);
        snprintf(name, sizeof name, "stream_save_file mode %d", mode);
        /* the last (successful) pass replaces the file */
        FOR_EACH_FAILURE(name, fc_stream_save_file(s, path), (void)0,
                         stream_same(s, ref, n) && file_is(dir, path, old, sizeof old));
        if (!file_is(dir, path, ref, n)) { fails++; printf("%s: file is not the saved stream\n", name); }
        snprintf(name, sizeof name, "stream_load_file mode %d", mode);
        FOR_EACH_FAILURE(name, fc_stream_load_file(path, 1 << 20, &l), (void)0, l == NULL);
        if (l == NULL || !stream_same(l, ref, n)) { fails++; printf("%s: loaded stream differs\n", name); }
        free(ref);
        fc_stream_free(l);
        fc_stream_free(s);
    }
    {
        double o = 0.7, y0 = 1.0;
        fc_solver *s = NULL, *l = NULL;
        if (fc_solver_create(1, &o, 0.01, 0, &y0, FC_METHOD_PC, FC_MODE_COMPRESSED, 1e-9, 5000, &s) == FC_OK) {
            size_t done;
            fc_solver_set_rhs(s, rhs, NULL);
            fc_solver_advance(s, 100, NULL, NULL, &done);
            fc_file_write(path, old, sizeof old);
            FOR_EACH_FAILURE("solver_save_file", fc_solver_save_file(s, path), (void)0,
                             file_is(dir, path, old, sizeof old));
            FOR_EACH_FAILURE("solver_load_file", fc_solver_load_file(path, 1 << 20, &l), (void)0, l == NULL);
            if (l == NULL) fails++;
        } else {
            fails++;
        }
        fc_solver_free(l);
        fc_solver_free(s);
    }
    {
        fc_controller_params p;
        fc_controller *c = NULL, *l = NULL;
        fc_controller_default_params(&p);
        p.ki = 0.4; p.kd = 0.1;
        if (fc_controller_create(&p, &c) == FC_OK) {
            fc_controller_update_block(c, x, x + 1, 100, y, NULL);
            fc_file_write(path, old, sizeof old);
            FOR_EACH_FAILURE("controller_save_file", fc_controller_save_file(c, path), (void)0,
                             file_is(dir, path, old, sizeof old));
            FOR_EACH_FAILURE("controller_load_file", fc_controller_load_file(path, 1 << 20, &l), (void)0,
                             l == NULL);
            if (l == NULL) fails++;
        } else {
            fails++;
        }
        fc_controller_free(l);
        fc_controller_free(c);
    }
    unlink(path);
    if (rmdir(dir) != 0) { fails++; printf("files: a temporary was left in %s\n", dir); }
}

/* The rules on a grid of times (fc_grid_apply) and the stream with a time
   per sample: NOMEM leaves y (resp. the stream) as it was. */
static void grids(void)
{
    enum { N = 2000, C = 2 };
    double *t = malloc(N * sizeof *t), *x = malloc(N * C * sizeof *x);
    double *y = malloc(N * C * sizeof *y), *yr = malloc(N * C * sizeof *yr);
    t[0] = 0.0;
    for (int i = 1; i < N; i++) t[i] = t[i - 1] + 0.001 * (1.0 + 0.4 * sin(3.0 * i));
    for (int i = 0; i < N * C; i++) x[i] = cos(0.002 * i) + (i % 97 == 0 ? 1e6 : 0.0);
    /* the rules at 0.4, and the integral rules at 1.5 (the running
       integral path, csrc/grid_soe.c gs_cum, and its stream) */
    static const int rules[5] = {FC_RULE_RECTANGLE, FC_RULE_TRAPEZOID, FC_RULE_L1,
                                 FC_RULE_RECTANGLE, FC_RULE_TRAPEZOID};
    static const double orders[5] = {0.4, 0.4, 0.4, 1.5, 1.5};
    for (int r = 0; r < 5; r++) {
        char name[64];
        const double a = orders[r];
        if (fc_grid_apply(rules[r], a, t, x, C, N, 1e-11, yr, NULL) != FC_OK) { fails++; continue; }
        snprintf(name, sizeof name, "grid_apply rule %d order %g", rules[r], a);
        for (int i = 0; i < N * C; i++) y[i] = -7.0;
        FOR_EACH_FAILURE(name, fc_grid_apply(rules[r], a, t, x, C, N, 1e-11, y, NULL),
                         if (memcmp(y, yr, N * C * sizeof *y)) { fails++; printf("%s: result differs\n", name); },
                         y[0] == -7.0 && y[N * C - 1] == -7.0);
        /* the stream with a time per sample */
        fc_stream *s = NULL, *l = NULL;
        snprintf(name, sizeof name, "stream_create_timed rule %d", rules[r]);
        FOR_EACH_FAILURE(name, fc_stream_create_timed(rules[r], a, 0.0005, C, 1e-10, 10.0, &s),
                         (void)0, s == NULL);
        if (s == NULL) { fails++; continue; }
        {
            unsigned char *ref;
            size_t n, sz, wr;
            ref = stream_bytes(s, &n);
            snprintf(name, sizeof name, "stream_push_timed rule %d", rules[r]);
            FOR_EACH_FAILURE(name, fc_stream_push_timed(s, t, x, N / 2, y), (void)0, stream_same(s, ref, n));
            free(ref);
            ref = stream_bytes(s, &n);
            fc_stream_save_size(s, &sz);
            unsigned char *buf = malloc(sz);
            snprintf(name, sizeof name, "stream_save timed rule %d", rules[r]);
            FOR_EACH_FAILURE(name, fc_stream_save(s, buf, sz, &wr), (void)0, stream_same(s, ref, n));
            snprintf(name, sizeof name, "stream_load timed rule %d", rules[r]);
            FOR_EACH_FAILURE(name, fc_stream_load(buf, wr, &l), (void)0, l == NULL);
            if (l == NULL || !stream_same(l, ref, n)) { fails++; printf("%s: loaded stream differs\n", name); }
            free(buf);
            free(ref);
        }
        fc_stream_free(l);
        fc_stream_free(s);
    }
    free(t); free(x); free(y); free(yr);
}

int main(void)
{
    grids();
    streams();
    batch();
    solvers();
    controllers();
    files();
    printf("alloc_fail: %d calls, %d injected failures, %d problems\n", checks, injections, fails);
    if (injections == 0) { printf("alloc_fail: no allocation was intercepted (not linked with --wrap?)\n"); return 1; }
    return fails ? 1 : 0;
}
