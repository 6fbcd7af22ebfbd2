/*
 * threads.c -- many objects in many threads give the same results, bit for
 * bit, as the same work done serially (fracconv.h: one object per thread;
 * objects share no mutable state). Each task: a batch fc_apply, an exact
 * and a compressed stream with a save/load in the middle, a controller,
 * a solver and an FFT plan, hashed (FNV-1a 64). Run serially first, then
 * by NTHREADS threads at once, several tasks each. Then the threaded
 * batch engines (threaded_batch below); built with
 * -fsanitize=thread by `make tsan`, plain by `make check-c-tests`.
 * Test signals are invented (fixed-seed xorshift).
 */
#include <pthread.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <stdint.h>
#include <math.h>
#include "fracconv.h"

#define NTASKS 16
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
    /* compressed streams of 3 and 4 channels, their channels shared by the
       threads (fc_stream_push_block_threads): outputs and saved state */
    for (size_t C = 3; C <= 4; C++) {
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
        if (fc_stream_create((int)C - 3 + which, 0.45, 0.01, C, FC_MODE_COMPRESSED, 1e-9, 1e6, &s) != FC_OK) return 0;
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
    if (threaded_batch()) bad = 1;
    return bad;
}
