/*
 * threads.c -- many objects in many threads give the same results, bit for
 * bit, as the same work done serially (fracconv.h: one object per thread;
 * objects share no mutable state). Each task: a batch fc_apply, an exact
 * and a compressed stream with a save/load in the middle, a controller,
 * a solver and an FFT plan, hashed (FNV-1a 64); then many solvers (every
 * method, both memories, a save/load in the middle) and many controllers
 * (both memories, every rule pair, manual mode and a save/load in the
 * middle). Run serially first, then by NTHREADS threads at once, several
 * tasks each.
 * Then one object used by two threads at once (fracconv.h, threads: the
 * busy guard): a solver held inside fc_solver_advance by its callback
 * refuses every other call (FC_ERR_BUSY, outputs untouched), from another
 * thread and from the callback itself, and finishes bit for bit like an
 * undisturbed run; a controller inside a long fc_controller_update_block
 * refuses the calls of another thread the same way (and the block, when
 * it meets the other thread's call, is refused unchanged and retried).
 * Then the threaded batch engines and streams (threaded_batch below).
 * Built with -fsanitize=thread by `make tsan`, plain by `make
 * check-c-tests`. Test signals are invented (fixed-seed xorshift).
 */
#include <pthread.h>
#include <sched.h>
#include <stdatomic.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <stdint.h>
#include <math.h>
#include "fracconv.h"

#define NTASKS 16
#define NOBJ 24        /* solver/controller tasks */
#define NTHREADS 4

static uint64_t fnv(const void *p, size_t n, uint64_t h)
{
    const unsigned char *c = p;
    for (size_t i = 0; i < n; i++) { h ^= c[i]; h *= 1099511628211ULL; }
    return h;
}
static int rhs(double t, const double *y, double *f, void *u) { (void)u; f[0] = -y[0] + sin(t); return 0; }

static uint64_t task(int id)
{
    uint64_t h = 1469598103934665603ULL, st = 0x9E3779B97F4A7C15ULL * (uint64_t)(id + 1);
    const int rule = id % 4;
    enum { N = 3000 };
    double *x = malloc(N * sizeof *x), *y = malloc(N * sizeof *y);
    size_t sz, wr, done;
    unsigned char *buf;
    if (!x || !y) return 0;
    for (int i = 0; i < N; i++) {
        st ^= st << 13; st ^= st >> 7; st ^= st << 17;
        x[i] = (double)(st >> 11) / 9007199254740992.0 - 0.5;
    }
    if (fc_apply(NULL, rule, 0.45, 0.01, x, 1, N, FC_ENGINE_AUTO, y) != FC_OK) return 0;
    h = fnv(y, N * sizeof *y, h);
    for (int mode = 0; mode < 2; mode++) {
        fc_stream *s, *l;
        if (fc_stream_create(rule, 0.45, 0.01, 1, mode, 1e-9, 1e6, &s) != FC_OK) return 0;
        if (fc_stream_push_block(s, x, N / 2, y) != FC_OK) return 0;
        if (fc_stream_save_size(s, &sz) != FC_OK || !(buf = malloc(sz))) return 0;
        if (fc_stream_save(s, buf, sz, &wr) != FC_OK) return 0;
        fc_stream_free(s);
        if (fc_stream_load(buf, wr, &l) != FC_OK) return 0;
        free(buf);
        if (fc_stream_push_block(l, x + N / 2, N - N / 2, y + N / 2) != FC_OK) return 0;
        fc_stream_free(l);
        h = fnv(y, N * sizeof *y, h);
    }
    {
        fc_controller_params p;
        fc_controller *c;
        double *r = calloc(N, sizeof *r);
        fc_controller_default_params(&p);
        p.ki = 0.3; p.kd = 0.1; p.memory = id % 2;
        if (!r || fc_controller_create(&p, &c) != FC_OK) return 0;
        if (fc_controller_update_block(c, r, x, N, y, NULL) != FC_OK) return 0;
        fc_controller_free(c);
        free(r);
        h = fnv(y, N * sizeof *y, h);
    }
    {
        double o = 0.7, y0 = 1.0;
        fc_solver *s;
        if (fc_solver_create(1, &o, 0.01, 0.0, &y0, id % 3, id % 2, 1e-9, 1e4, &s) != FC_OK) return 0;
        fc_solver_set_rhs(s, rhs, NULL);
        if (fc_solver_advance(s, 500, NULL, y, &done) != FC_OK) return 0;
        fc_solver_free(s);
        h = fnv(y, 500 * sizeof *y, h);
    }
    {
        fc_fft_plan *p;
        if (fc_rfft_create(1024, &p) != FC_OK) return 0;
        fc_rfft_forward(p, x, y);
        fc_rfft_free(p);
        h = fnv(y, 1026 * sizeof *y, h);
    }
    free(x);
    free(y);
    return h;
}


/* ------------------------------------------------ many solvers, controllers */

static int rhs2(double t, const double *y, double *f, void *u)
{
    const double *k = u;
    f[0] = -k[0] * y[0] + cos(t) * y[1];
    f[1] = -y[1] + k[1] * sin(3 * t);
    return 0;
}

static uint64_t save_hash_solver(fc_solver *s, uint64_t h)
{
    size_t n, w;
    unsigned char *b;
    if (fc_solver_save_size(s, &n) || !(b = malloc(n))) return 0;
    if (fc_solver_save(s, b, n, &w)) { free(b); return 0; }
    h = fnv(b, w, h);
    free(b);
    return h;
}

/* One solver task: method id % 4, memory (id / 4) % 2 (the implicit
   rectangle rule: exact only), two components of orders 0.6 and 1.3 (or
   0.6 and 0.8 under compressed memory), 300 steps, saved and reloaded
   after 120. */
static uint64_t solver_task(int id)
{
    int method = id % 4, memory = (id / 4) % 2;
    if (method == FC_METHOD_IMPLICIT_RECTANGLE) memory = FC_MODE_EXACT;
    double o[2] = {0.6, memory ? 0.8 : 1.3}, init[4] = {1.0, 0.5, 0.0, -0.2};
    double k[2] = {1.0 + 0.1 * id, 0.5};
    double y[2 * 300], t[300];
    fc_solver *s, *l;
    size_t done, n, w;
    unsigned char *b;
    uint64_t h = 1469598103934665603ULL;
    if (fc_solver_create(2, o, 0.02, 0.0, init, method, memory, 1e-9,
                         memory || method == 3 ? 1000 : 0, &s) != FC_OK) return 0;
    fc_solver_set_rhs(s, rhs2, k);
    if (fc_solver_advance(s, 120, t, y, &done) != FC_OK) return 0;
    if (fc_solver_save_size(s, &n) || !(b = malloc(n)) || fc_solver_save(s, b, n, &w)) return 0;
    fc_solver_free(s);
    if (fc_solver_load(b, w, &l) != FC_OK) return 0;
    free(b);
    fc_solver_set_rhs(l, rhs2, k);
    if (fc_solver_advance(l, 180, t + 120, y + 240, &done) != FC_OK) return 0;
    h = fnv(t, sizeof t, h);
    h = fnv(y, sizeof y, h);
    h = save_hash_solver(l, h);
    fc_solver_free(l);
    return h;
}

/* One controller task: memory id % 2, rules by (id / 2) % 4, limits and a
   rate limit, manual mode for a while, saved and reloaded in the middle. */
static uint64_t controller_task(int id)
{
    enum { N = 2000 };
    fc_controller_params p;
    fc_controller *c, *l;
    double *r = malloc(N * sizeof *r), *y = malloc(N * sizeof *y), *u = malloc(N * sizeof *u);
    uint64_t h = 1469598103934665603ULL, st = 0x2545F4914F6CDD1DULL * (uint64_t)(id + 7);
    size_t n, w;
    unsigned char *b;
    if (!r || !y || !u) return 0;
    for (int i = 0; i < N; i++) {
        st ^= st << 13; st ^= st >> 7; st ^= st << 17;
        r[i] = (i / 400) % 2 ? 1.0 : -0.5;
        y[i] = 0.3 * sin(0.01 * i) + ((double)(st >> 11) / 9007199254740992.0 - 0.5) * 0.05;
    }
    fc_controller_default_params(&p);
    p.kp = 1.2; p.ki = 0.4 + 0.01 * id; p.kd = 0.15; p.step = 0.01;
    p.memory = id % 2;
    p.integral_rule = (id / 2) % 2 ? FC_RULE_RECTANGLE : FC_RULE_TRAPEZOID;
    p.derivative_rule = (id / 4) % 2 ? FC_RULE_L1 : FC_RULE_GRUNWALD;
    p.integral_order = 0.7; p.derivative_order = 0.4;
    p.out_min = -1.0; p.out_max = 1.0; p.rate_limit = 50.0; p.filter_time = 0.02;
    p.horizon = 1e5;
    if (fc_controller_create(&p, &c) != FC_OK) return 0;
    if (fc_controller_update_block(c, r, y, N / 4, u, NULL) != FC_OK) return 0;
    if (fc_controller_set_manual(c, 0.25) != FC_OK) return 0;
    if (fc_controller_update_block(c, r + N / 4, y + N / 4, N / 4, u + N / 4, NULL) != FC_OK) return 0;
    if (fc_controller_set_auto(c) != FC_OK) return 0;
    if (fc_controller_save_size(c, &n) || !(b = malloc(n)) || fc_controller_save(c, b, n, &w)) return 0;
    fc_controller_free(c);
    if (fc_controller_load(b, w, &l) != FC_OK) return 0;
    free(b);
    for (int i = N / 2; i < N; i++)
        if (fc_controller_update(l, r[i], y[i], &u[i]) != FC_OK) return 0;
    h = fnv(u, N * sizeof *u, h);
    if (fc_controller_save_size(l, &n) || !(b = malloc(n)) || fc_controller_save(l, b, n, &w)) return 0;
    h = fnv(b, w, h);
    free(b);
    fc_controller_free(l);
    free(r); free(y); free(u);
    return h;
}

static uint64_t obj_task(int i) { return i % 2 ? controller_task(i / 2) : solver_task(i / 2); }

static uint64_t opar[NOBJ];
static void *obj_worker(void *arg)
{
    int t = (int)(intptr_t)arg;
    for (int i = t; i < NOBJ; i += NTHREADS) opar[i] = obj_task(i);
    return NULL;
}

/* ------------------------------------------------ one object, two threads */

static atomic_int inside, release_, reentry;
static int hold_rhs(double t, const double *y, double *f, void *u)
{
    fc_solver *self = *(fc_solver **)u;
    static int calls;   /* only the advancing thread calls it */
    if (++calls == 40) {
        uint64_t n = 77;
        /* the callback re-entering its own solver is refused too */
        atomic_store(&reentry, fc_solver_steps(self, &n) == FC_ERR_BUSY && n == 77);
        atomic_store(&inside, 1);
        while (!atomic_load(&release_)) sched_yield();
    }
    f[0] = -y[0] + sin(t);
    return 0;
}

static fc_solver *held;
static size_t held_done;
static int held_st;
static double held_y[100];
static void *advance_worker(void *arg)
{
    (void)arg;
    held_st = fc_solver_advance(held, 100, NULL, held_y, &held_done);
    return NULL;
}

static int plain_rhs(double t, const double *y, double *f, void *u) { (void)u; f[0] = -y[0] + sin(t); return 0; }

static int solver_busy_test(void)
{
    double o = 0.7, y0 = 1.0, ref[100];
    fc_solver *r;
    size_t done;
    int bad = 0;
    if (fc_solver_create(1, &o, 0.01, 0.0, &y0, FC_METHOD_PC, FC_MODE_EXACT, 0, 0, &r) != FC_OK) return 1;
    fc_solver_set_rhs(r, plain_rhs, NULL);
    if (fc_solver_advance(r, 100, NULL, ref, &done) != FC_OK) return 1;
    if (fc_solver_create(1, &o, 0.01, 0.0, &y0, FC_METHOD_PC, FC_MODE_EXACT, 0, 0, &held) != FC_OK) return 1;
    fc_solver_set_rhs(held, hold_rhs, &held);
    pthread_t th;
    if (pthread_create(&th, NULL, advance_worker, NULL) != 0) return 1;
    while (!atomic_load(&inside)) sched_yield();
    {
        /* every guarded call from this thread while the other advances */
        double t = -1, yv = -1, tt[4];
        uint64_t n = 5, a = 5, b = 5;
        size_t nb = 5, d = 5;
        unsigned char buf[16] = {0};
#define BUSY(call) do { int st_ = (call); if (st_ != FC_ERR_BUSY) { \
            printf("solver in use: %s returned %d, not FC_ERR_BUSY\n", #call, st_); bad = 1; } } while (0)
        BUSY(fc_solver_advance(held, 1, tt, tt, &d));
        BUSY(fc_solver_set_rhs(held, plain_rhs, NULL));
        BUSY(fc_solver_set_jacobian(held, NULL, NULL));
        BUSY(fc_solver_set_newton(held, 1e-10, 20));
        BUSY(fc_solver_set_corrections(held, 2));
        BUSY(fc_solver_time(held, &t));
        BUSY(fc_solver_state(held, &yv));
        BUSY(fc_solver_steps(held, &n));
        BUSY(fc_solver_counts(held, &a, &b));
        BUSY(fc_solver_failure(held, &a, &t));
        BUSY(fc_solver_nbytes(held, &nb));
        BUSY(fc_solver_save_size(held, &nb));
        BUSY(fc_solver_save(held, buf, sizeof buf, &nb));
        if (t != -1 || yv != -1 || n != 5 || a != 5 || b != 5 || nb != 5 || d != 5 || buf[0] != 0) {
            printf("solver in use: a refused call wrote an output\n");
            bad = 1;
        }
    }
    atomic_store(&release_, 1);
    pthread_join(th, NULL);
    if (!atomic_load(&reentry)) { printf("solver: its callback re-entered it\n"); bad = 1; }
    if (held_st != FC_OK || held_done != 100 || memcmp(held_y, ref, sizeof ref) != 0) {
        printf("solver: the held run differs from the undisturbed one\n");
        bad = 1;
    }
    fc_solver_free(held);
    fc_solver_free(r);
    return bad;
}

enum { CN = 200000 };
static fc_controller *ctl;
static double *cr, *cy, *cu;
static atomic_int cdone;
static int cst;
static void *update_worker(void *arg)
{
    (void)arg;
    /* the other thread may hold the guard at this moment: a refused block
       changed nothing and is simply tried again */
    do cst = fc_controller_update_block(ctl, cr, cy, CN, cu, NULL);
    while (cst == FC_ERR_BUSY);
    atomic_store(&cdone, 1);
    return NULL;
}

/* Another thread's calls during a long update_block: each returns
   FC_ERR_BUSY with its outputs untouched, or FC_OK before the block takes
   the guard or after it gives it back (the calls made here change nothing
   either way: set_auto on an automatic controller). The run's outputs
   must equal an undisturbed run's; a trial that saw no refusal (the other
   thread was not scheduled during the block) is repeated. */
static int controller_busy_test(void)
{
    fc_controller_params p;
    fc_controller *ref;
    double *ru = malloc(CN * sizeof *ru);
    int bad = 0, seen = 0;
    cr = malloc(CN * sizeof *cr); cy = malloc(CN * sizeof *cy); cu = malloc(CN * sizeof *cu);
    if (!ru || !cr || !cy || !cu) return 1;
    for (int i = 0; i < CN; i++) { cr[i] = 1.0; cy[i] = sin(0.001 * i); }
    fc_controller_default_params(&p);
    p.ki = 0.5; p.kd = 0.1; p.step = 0.01; p.horizon = 1e6;
    if (fc_controller_create(&p, &ref) != FC_OK) return 1;
    if (fc_controller_update_block(ref, cr, cy, CN, ru, NULL) != FC_OK) return 1;
    fc_controller_free(ref);
    for (int trial = 0; trial < 20 && !seen; trial++) {
        if (fc_controller_create(&p, &ctl) != FC_OK) return 1;
        atomic_store(&cdone, 0);
        pthread_t th;
        if (pthread_create(&th, NULL, update_worker, NULL) != 0) return 1;
        while (!atomic_load(&cdone)) {
            uint64_t n = 9;
            double t6[6] = {9, 9, 9, 9, 9, 9};
            int s = 9;
            size_t nb = 9;
            int st[6];
            st[0] = fc_controller_count(ctl, &n);
            st[1] = fc_controller_terms(ctl, t6);
            st[2] = fc_controller_status(ctl, &s);
            st[3] = fc_controller_nbytes(ctl, &nb);
            st[4] = fc_controller_save_size(ctl, &nb);
            st[5] = fc_controller_set_auto(ctl);
            for (int k = 0; k < 6; k++) {
                if (st[k] == FC_ERR_BUSY) seen = 1;
                else if (st[k] != FC_OK) { printf("controller in use: call %d returned %d\n", k, st[k]); bad = 1; }
            }
            if ((st[0] == FC_ERR_BUSY && n != 9) || (st[1] == FC_ERR_BUSY && t6[0] != 9) ||
                (st[2] == FC_ERR_BUSY && s != 9)) {
                printf("controller in use: a refused call wrote an output\n");
                bad = 1;
            }
        }
        pthread_join(th, NULL);
        if (cst != FC_OK || memcmp(cu, ru, CN * sizeof *cu) != 0) {
            int i = 0;
            while (i < CN && cu[i] == ru[i]) i++;
            printf("controller: the run differs from the undisturbed one (status %d, sample %d)\n", cst, i);
            bad = 1;
        }
        fc_controller_free(ctl);
    }
    if (!seen) { printf("controller: no call met the block in 20 trials\n"); bad = 1; }
    free(ru); free(cr); free(cy); free(cu);
    return bad;
}

static uint64_t par[NTASKS];
static void *worker(void *arg)
{
    int t = (int)(intptr_t)arg;
    for (int i = t; i < NTASKS; i += NTHREADS) par[i] = task(i);
    return NULL;
}

/*
 * The threaded batch (fc_context_set_threads): fc_apply and fc_lagged_sum
 * with 2, 3 and 4 threads give the bytes of 1 thread, for 1 long signal
 * (the segment products split), 3 signals (split too: 3 is not a
 * multiple of the threads), 4 signals (whole signals) and short signals
 * (run serially), every engine; compressed streams of 3 and 4 channels
 * and an exact stream of 8 channels (its large frames shared) pushed with
 * fc_stream_push_block_threads (outputs and saved bytes); and
 * all of it with 2 threads each, in NTHREADS threads at once (threads
 * inside threads).
 */
static const size_t batch_shapes[][2] = {{1, 140000}, {3, 45000}, {4, 6000}, {2, 700}, {1, 1}, {3, 9000}};
#define NSHAPES (sizeof batch_shapes / sizeof batch_shapes[0])

static uint64_t batch_hash(size_t threads, int which)
{
    uint64_t h = 1469598103934665603ULL, st = 0x243F6A8885A308D3ULL;
    fc_context *ctx;
    double k[3000];
    if (fc_context_create(&ctx) != FC_OK || fc_context_set_threads(ctx, threads) != FC_OK) return 0;
    for (int i = 0; i < 3000; i++) k[i] = 1.0 / ((i + 1.0) * sqrt(i + 1.0));
    for (size_t sh = 0; sh < NSHAPES; sh++) {
        size_t nsig = batch_shapes[sh][0], n = batch_shapes[sh][1];
        double *x = malloc(nsig * n * sizeof *x), *y = malloc(nsig * n * sizeof *y);
        if (!x || !y) return 0;
        for (size_t i = 0; i < nsig * n; i++) {
            st ^= st << 13; st ^= st >> 7; st ^= st << 17;
            x[i] = (double)(st >> 11) / 9007199254740992.0 - 0.5 + (double)(i % 7 == (size_t)which);
        }
        for (int e = 0; e < 4; e++) {
            if (e == FC_ENGINE_DIRECT && n > 10000) continue;
            if (fc_apply(ctx, (e + which) % 4, 0.45, 0.01, x, nsig, n, e, y) != FC_OK) return 0;
            h = fnv(y, nsig * n * sizeof *y, h);
            if (fc_lagged_sum(ctx, x, nsig, n, k, 3000, e, y) != FC_OK) return 0;
            h = fnv(y, nsig * n * sizeof *y, h);
        }
        free(x);
        free(y);
    }
    fc_context_free(ctx);
    /* compressed streams of 16 and 20 channels (ranges of at least 8
       channels go to the threads: 2 and 2 ranges), their channels shared
       by the threads (fc_stream_push_block_threads): outputs and saved
       state */
    for (size_t C = 16; C <= 20; C += 4) {
        enum { T = 3000 };
        fc_stream *s;
        double *x = malloc(T * C * sizeof *x), *y = malloc(T * C * sizeof *y);
        unsigned char *buf;
        size_t sz, wr;
        if (!x || !y) return 0;
        for (size_t i = 0; i < T * C; i++) {
            st ^= st << 13; st ^= st >> 7; st ^= st << 17;
            x[i] = (double)(st >> 11) / 9007199254740992.0 - 0.5;
        }
        if (fc_stream_create((C == 16 ? 0 : 1) + which, 0.45, 0.01, C, FC_MODE_COMPRESSED, 1e-9, 1e6, &s) != FC_OK) return 0;
        if (fc_stream_push_block_threads(s, x, 2000, y, threads) != FC_OK) return 0;
        if (fc_stream_push_block_threads(s, x + 2000 * C, T - 2000, y + 2000 * C, threads) != FC_OK) return 0;
        h = fnv(y, T * C * sizeof *y, h);
        if (fc_stream_save_size(s, &sz) != FC_OK || !(buf = malloc(sz))) return 0;
        if (fc_stream_save(s, buf, sz, &wr) != FC_OK) return 0;
        h = fnv(buf, wr, h);
        free(buf);
        fc_stream_free(s);
        free(x);
        free(y);
    }
    /* an exact stream of 8 channels, long enough for frames of 2048
       samples (shared by the threads: block size times channels >= 2^14) */
    {
        enum { C = 8, T = 17000 };
        fc_stream *s;
        double *x = malloc(T * C * sizeof *x), *y = malloc(T * C * sizeof *y);
        unsigned char *buf;
        size_t sz, wr;
        if (!x || !y) return 0;
        for (size_t i = 0; i < T * C; i++) {
            st ^= st << 13; st ^= st >> 7; st ^= st << 17;
            x[i] = (double)(st >> 11) / 9007199254740992.0 - 0.5;
        }
        if (fc_stream_create(which ? FC_RULE_GRUNWALD : FC_RULE_TRAPEZOID, 0.45, 0.01, C, FC_MODE_EXACT, 1e-9, 1e6, &s) != FC_OK) return 0;
        if (fc_stream_push_block_threads(s, x, 5000, y, threads) != FC_OK) return 0;
        if (fc_stream_push_block_threads(s, x + 5000 * C, T - 5000, y + 5000 * C, threads) != FC_OK) return 0;
        h = fnv(y, T * C * sizeof *y, h);
        if (fc_stream_save_size(s, &sz) != FC_OK || !(buf = malloc(sz))) return 0;
        if (fc_stream_save(s, buf, sz, &wr) != FC_OK) return 0;
        h = fnv(buf, wr, h);
        free(buf);
        fc_stream_free(s);
        free(x);
        free(y);
    }
    return h;
}

static uint64_t nested[NTHREADS];
static void *nested_worker(void *arg)
{
    int t = (int)(intptr_t)arg;
    nested[t] = batch_hash(2, t % 2);
    return NULL;
}

static int threaded_batch(void)
{
    int bad = 0;
    pthread_t th[NTHREADS];
    uint64_t ref[2];
    for (int which = 0; which < 2; which++) {
        ref[which] = batch_hash(1, which);
        if (ref[which] == 0) { printf("threaded batch: a call failed (1 thread)\n"); return 1; }
        for (size_t t = 2; t <= 4; t++) {
            uint64_t h = batch_hash(t, which);
            if (h != ref[which]) { printf("threaded batch: %zu threads %016llx != 1 thread %016llx\n", t, (unsigned long long)h, (unsigned long long)ref[which]); bad = 1; }
        }
    }
    for (int t = 0; t < NTHREADS; t++)
        if (pthread_create(&th[t], NULL, nested_worker, (void *)(intptr_t)t) != 0) { printf("pthread_create failed\n"); return 1; }
    for (int t = 0; t < NTHREADS; t++) pthread_join(th[t], NULL);
    for (int t = 0; t < NTHREADS; t++)
        if (nested[t] != ref[t % 2]) { printf("threaded batch: context of 2 threads in thread %d differs\n", t); bad = 1; }
    printf("threads: batch, compressed and exact streams with 1-4 threads %s\n", bad ? "DIFFER" : "match 1 thread bit for bit");
    return bad;
}

int main(void)
{
    uint64_t ser[NTASKS];
    pthread_t th[NTHREADS];
    int bad = 0;
    for (int i = 0; i < NTASKS; i++) {
        ser[i] = task(i);
        if (ser[i] == 0) { printf("task %d failed (serial)\n", i); bad = 1; }
    }
    for (int t = 0; t < NTHREADS; t++)
        if (pthread_create(&th[t], NULL, worker, (void *)(intptr_t)t) != 0) { printf("pthread_create failed\n"); return 1; }
    for (int t = 0; t < NTHREADS; t++) pthread_join(th[t], NULL);
    for (int i = 0; i < NTASKS; i++)
        if (par[i] != ser[i]) { printf("task %d: threaded %016llx != serial %016llx\n", i, (unsigned long long)par[i], (unsigned long long)ser[i]); bad = 1; }
    printf("threads: %d tasks on %d threads %s\n", NTASKS, NTHREADS, bad ? "DIFFER" : "match the serial run");

    uint64_t oser[NOBJ];
    int obad = 0;
    for (int i = 0; i < NOBJ; i++) {
        oser[i] = obj_task(i);
        if (oser[i] == 0) { printf("object task %d failed (serial)\n", i); obad = 1; }
    }
    for (int t = 0; t < NTHREADS; t++)
        if (pthread_create(&th[t], NULL, obj_worker, (void *)(intptr_t)t) != 0) { printf("pthread_create failed\n"); return 1; }
    for (int t = 0; t < NTHREADS; t++) pthread_join(th[t], NULL);
    for (int i = 0; i < NOBJ; i++)
        if (opar[i] != oser[i]) { printf("object task %d: threaded %016llx != serial %016llx\n", i, (unsigned long long)opar[i], (unsigned long long)oser[i]); obad = 1; }
    printf("threads: %d solvers and %d controllers on %d threads %s\n", NOBJ / 2, NOBJ / 2,
           NTHREADS, obad ? "DIFFER" : "match the serial run");
    int sb = solver_busy_test(), cb = controller_busy_test();
    printf("threads: one solver, one controller used by two threads: %s, %s\n",
           sb ? "NOT refused cleanly" : "refused cleanly", cb ? "NOT refused cleanly" : "refused cleanly");
    int tb = threaded_batch();
    return bad || obad || sb || cb || tb;
}
