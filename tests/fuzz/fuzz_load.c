/*
 * fuzz_load.c -- libFuzzer targets for the state loaders of fracconv.h:
 * fc_stream_load (exact and compressed streams), fc_solver_load and
 * fc_controller_load. Saved state is untrusted input (fracconv.h): any
 * bytes must give FC_OK or FC_ERR_FORMAT (FC_ERR_NOMEM if memory runs
 * out), never a crash, a sanitizer report or a leak.
 *
 * Built once per loader (FUZZ_LOADER) and variant (FUZZ_FIX) by the
 * Makefile (make fuzz):
 *   FUZZ_FIX 0  the bytes go straight into the loader;
 *   FUZZ_FIX 1  every checksum is recomputed first (fixsum.h), so that
 *               the mutations reach the loader's field checks.
 * A blob that loads is then used: its getters, a push / update / advance,
 * and a save that must load again and save to the same bytes (a loaded
 * object behaves exactly like the one that saved it, fracconv.h).
 * Anything else aborts, which libFuzzer reports as a crash.
 */
#include <stdint.h>
#include <stdlib.h>
#include <string.h>
#include "fracconv.h"
#include "fixsum.h"

#define LOAD_STREAM 0
#define LOAD_SOLVER 1
#define LOAD_CONTROLLER 2

#ifndef FUZZ_LOADER
#error "FUZZ_LOADER (0 stream, 1 solver, 2 controller) must be defined"
#endif
#ifndef FUZZ_FIX
#define FUZZ_FIX 0
#endif

static void check(int cond)
{
    if (!cond) abort();
}

/* A loader's status: FC_OK, FC_ERR_FORMAT or FC_ERR_NOMEM only. */
static void check_load_status(int st)
{
    check(st == FC_OK || st == FC_ERR_FORMAT || st == FC_ERR_NOMEM);
}

/* Save twice through a load: the second load must succeed and its save
   must give the first save's bytes. */
typedef int (*save_size_fn)(const void *, size_t *);
typedef int (*save_fn)(const void *, unsigned char *, size_t, size_t *);
typedef int (*load_fn)(const unsigned char *, size_t, void **);
typedef void (*free_fn)(void *);

static void resave(const void *obj, save_size_fn ssz, save_fn sv, load_fn ld,
                   free_fn fr)
{
    size_t n, w, n2, w2;
    void *again = NULL;
    if (ssz(obj, &n) != FC_OK) return;   /* FC_ERR_SIZE: too large to save */
    unsigned char *a = malloc(n ? n : 1);
    if (!a) return;
    if (sv(obj, a, n, &w) != FC_OK) { free(a); return; }
    check(w == n);
    int st = ld(a, w, &again);
    check(st == FC_OK || st == FC_ERR_NOMEM);
    if (st == FC_OK) {
        check(ssz(again, &n2) == FC_OK && n2 == n);
        unsigned char *b = malloc(n2 ? n2 : 1);
        if (b) {
            check(sv(again, b, n2, &w2) == FC_OK && w2 == w);
            check(memcmp(a, b, w) == 0);
            free(b);
        }
        fr(again);
    }
    free(a);
}

#if FUZZ_LOADER == LOAD_STREAM
static int s_size(const void *o, size_t *n) { return fc_stream_save_size((fc_stream *)o, n); }
static int s_save(const void *o, unsigned char *b, size_t n, size_t *w) { return fc_stream_save((fc_stream *)o, b, n, w); }
static int s_load(const unsigned char *b, size_t n, void **o) { return fc_stream_load(b, n, (fc_stream **)o); }
static void s_free(void *o) { fc_stream_free(o); }

static void use(const unsigned char *b, size_t n)
{
    fc_stream *s = NULL;
    int st = fc_stream_load(b, n, &s);
    check_load_status(st);
    if (st != FC_OK) return;
    size_t C, terms, nb;
    uint64_t cnt, rem;
    int mode, pol, past;
    check(fc_stream_channels(s, &C) == FC_OK && C >= 1);
    check(fc_stream_mode(s, &mode) == FC_OK);
    check(fc_stream_count(s, &cnt) == FC_OK);
    check(fc_stream_terms(s, &terms) == FC_OK);
    check(fc_stream_nbytes(s, &nb) == FC_OK);
    check(fc_stream_remaining(s, &rem) == FC_OK);
    check(fc_stream_horizon_policy(s, &pol) == FC_OK && pol == FC_HORIZON_REFUSE);
    check(fc_stream_past_horizon(s, &past) == FC_OK);
    resave(s, s_size, s_save, s_load, s_free);
    /* a push of ones on every channel (the channel count is bounded by the
       blob size, so this buffer is too) */
    int timed = -1;
    check(fc_stream_is_timed(s, &timed) == FC_OK && (timed == 0 || timed == 1));
    if (timed && C <= 4096) {
        /* a stream with a time per sample: the untimed calls are refused
           (fracconv.h), and a timed push far ahead lands past the horizon
           or is refused for its step; both leave the state as it was */
        double *x = malloc(2 * C * sizeof(double)), t = 1e300;
        if (x) {
            for (size_t c = 0; c < C; c++) x[c] = 1.0;
            check(fc_stream_history(s, x + C) == FC_ERR_ARG);
            check(fc_stream_push(s, x, x + C) == FC_ERR_ARG);
            st = fc_stream_push_timed(s, &t, x, 1, x + C);
            check(st == FC_OK || st == FC_ERR_HORIZON || st == FC_ERR_ARG ||
                  st == FC_ERR_RANGE || st == FC_ERR_SIZE || st == FC_ERR_NOMEM);
            free(x);
        }
    } else if (C <= 4096) {
        double *x = malloc(2 * C * sizeof(double));
        if (x) {
            for (size_t c = 0; c < C; c++) x[c] = 1.0;
            st = fc_stream_history(s, x + C);
            check(st == FC_OK || st == FC_ERR_RANGE || st == FC_ERR_HORIZON);
            st = fc_stream_push(s, x, x + C);
            check(st == FC_OK || st == FC_ERR_RANGE || st == FC_ERR_HORIZON ||
                  st == FC_ERR_SIZE || st == FC_ERR_NOMEM);
            if (st == FC_OK)
                for (size_t c = 0; c < C; c++) check(x[C + c] - x[C + c] == 0.0);
            free(x);
        }
    }
    resave(s, s_size, s_save, s_load, s_free);
    fc_stream_free(s);
}
static void fix(unsigned char *b, size_t n) { fix_stream(b, n); }

#elif FUZZ_LOADER == LOAD_SOLVER
static int v_size(const void *o, size_t *n) { return fc_solver_save_size(o, n); }
static int v_save(const void *o, unsigned char *b, size_t n, size_t *w) { return fc_solver_save(o, b, n, w); }
static int v_load(const unsigned char *b, size_t n, void **o) { return fc_solver_load(b, n, (fc_solver **)o); }
static void v_free(void *o) { fc_solver_free(o); }

/* f_i = -y_i: a right-hand side every loaded solver can take */
static int decay(double t, const double *y, double *f, void *user)
{
    size_t m = *(const size_t *)user;
    (void)t;
    for (size_t i = 0; i < m; i++) f[i] = -y[i];
    return 0;
}

static void use(const unsigned char *b, size_t n)
{
    fc_solver *s = NULL;
    int st = fc_solver_load(b, n, &s);
    check_load_status(st);
    if (st != FC_OK) return;
    size_t m, nb, done;
    uint64_t steps, r, j, fs;
    double t;
    check(fc_solver_dim(s, &m) == FC_OK && m >= 1);
    check(fc_solver_steps(s, &steps) == FC_OK);
    check(fc_solver_time(s, &t) == FC_OK);
    check(fc_solver_counts(s, &r, &j) == FC_OK);
    check(fc_solver_failure(s, &fs, &t) == FC_OK);
    check(fc_solver_nbytes(s, &nb) == FC_OK);
    double *y = malloc(m * sizeof(double));
    if (y) { check(fc_solver_state(s, y) == FC_OK); free(y); }
    resave(s, v_size, v_save, v_load, v_free);
    check(fc_solver_advance(s, 2, NULL, NULL, &done) == FC_ERR_NORHS && done == 0);
    check(fc_solver_set_rhs(s, decay, &m) == FC_OK);
    st = fc_solver_advance(s, 2, NULL, NULL, &done);
    check(st == FC_OK || st == FC_ERR_HORIZON || st == FC_ERR_SIZE ||
          st == FC_ERR_NOMEM || st == FC_ERR_NONFINITE || st == FC_ERR_NEWTON ||
          st == FC_ERR_RANGE);
    resave(s, v_size, v_save, v_load, v_free);
    fc_solver_free(s);
}
static void fix(unsigned char *b, size_t n) { fix_solver(b, n); }

#elif FUZZ_LOADER == LOAD_CONTROLLER
static int c_size(const void *o, size_t *n) { return fc_controller_save_size(o, n); }
static int c_save(const void *o, unsigned char *b, size_t n, size_t *w) { return fc_controller_save(o, b, n, w); }
static int c_load(const unsigned char *b, size_t n, void **o) { return fc_controller_load(b, n, (fc_controller **)o); }
static void c_free(void *o) { fc_controller_free(o); }

static void use(const unsigned char *b, size_t n)
{
    fc_controller *c = NULL;
    int st = fc_controller_load(b, n, &c);
    check_load_status(st);
    if (st != FC_OK) return;
    fc_controller_params p;
    double terms[6], u;
    uint64_t cnt;
    size_t nb;
    int status;
    check(fc_controller_get_params(c, &p) == FC_OK);
    check(fc_controller_status(c, &status) == FC_OK);
    check(fc_controller_terms(c, terms) == FC_OK);
    check(fc_controller_count(c, &cnt) == FC_OK);
    check(fc_controller_nbytes(c, &nb) == FC_OK);
    resave(c, c_size, c_save, c_load, c_free);
    st = fc_controller_update(c, 1.0, 0.25, &u);
    check(st == FC_OK || st == FC_ERR_RANGE || st == FC_ERR_SIZE);
    if (st == FC_OK) check(u >= p.out_min && u <= p.out_max);
    resave(c, c_size, c_save, c_load, c_free);
    fc_controller_free(c);
}
static void fix(unsigned char *b, size_t n) { fix_controller(b, n); }
#endif

int LLVMFuzzerTestOneInput(const uint8_t *data, size_t size)
{
    unsigned char *b = malloc(size ? size : 1);
    if (!b) return 0;
    if (size) memcpy(b, data, size);
    if (FUZZ_FIX) fix(b, size);
    use(b, size);
    free(b);
    return 0;
}
