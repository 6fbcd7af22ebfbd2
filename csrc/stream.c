/*
 * stream.c -- the stream facade: the public fc_stream_* functions.
 *
 * A stream is an engine behind one interface (fc__stream_ops, internal.h):
 * stream_exact.c (FC_MODE_EXACT, rules and user kernels) and
 * stream_compressed.c (FC_MODE_COMPRESSED) and stream_timed.c (compressed,
 * a time per sample). This file keeps what is common
 * to both and nothing of either engine's arithmetic:
 *   - the busy guard (a stream used by two threads at once answers
 *     FC_ERR_BUSY and is left as it was);
 *   - every argument and sample check, each done once here (NULL
 *     pointers, the definition of a new stream, sizes, finiteness of the
 *     samples, overlap of input and output, the horizon policy), so that an
 *     engine sees only calls it may run;
 *   - the defining parameters and their getters;
 *   - the common save header and its checksum; the engine writes and reads
 *     the payload.
 * One sample goes from fc_stream_push to the engine's push operation
 * through here and one engine file.
 */
#include <stdlib.h>
#include <string.h>
#include <math.h>
#include "internal.h"
#include "guard.h"
#include "serial.h"

struct fc_stream {
    fc__guard busy;
    int mode;               /* FC_MODE_* */
    unsigned kind;          /* FC__KIND_* */
    int rule;               /* -1 for a kernel */
    double order, step;     /* 0 for a kernel */
    double tol, horizon;    /* 0 without a horizon (exact mode) */
    int horizon_policy;     /* FC_HORIZON_* (engines with a horizon) */
    size_t C;               /* channels */
    const fc__stream_ops *ops;
    void *eng;              /* the engine's own state */
};

/* The engines, indexed by mode (FC_MODE_*, part of the save format). */
static const fc__stream_ops *const engines[] = {
    [FC_MODE_EXACT] = &fc__exact_ops,
    [FC_MODE_COMPRESSED] = &fc__compressed_ops,
};

const fc__stream_ops *fc__stream_engine(int64_t mode)
{
    const int64_t n = (int64_t)(sizeof engines / sizeof engines[0]);
    return mode >= 0 && mode < n ? engines[mode] : NULL;
}

/* ---------------------------------------------------------------- busy */

/* The busy guard of guard.h (shared with the solver and the controller). */
static void leave(const fc_stream *s)
{
    fc__guard_leave(&s->busy);
}
#define ENTER_OR_RETURN(s) FC__ENTER_OR_RETURN(s)

/* ------------------------------------------------------------ create */

/* A stream for the definition d on the engine ops (the definition is
   checked); the engine is created, or loaded from payload p[0 .. size)
   when p is not NULL. */
static int stream_new(const fc__stream_ops *ops, int mode,
                      const fc__stream_def *d, const unsigned char *p,
                      size_t size, fc_stream **out)
{
    fc_stream *s = calloc(1, sizeof(*s));
    if (!s) return FC_ERR_NOMEM;
    int st = p ? ops->load(d, p, size, &s->eng) : ops->create(d, &s->eng);
    if (st != FC_OK) {
        free(s);
        return st;
    }
    fc__guard_init(&s->busy);
    s->mode = mode;
    s->kind = d->kind;
    s->rule = d->rule;
    s->order = d->order;
    s->step = d->step;
    s->tol = d->tol;
    s->horizon = d->horizon;
    s->horizon_policy = FC_HORIZON_REFUSE;
    s->C = d->channels;
    s->ops = ops;
    *out = s;
    return FC_OK;
}

void fc_stream_free(fc_stream *s)
{
    if (!s) return;
    s->ops->free(s->eng);
    free(s);
}

/* The checks of fc_stream_create, in the order that decides the status
   of a call with several faults; the engine's order range (the rule
   table's, through ops) and, for an engine with a horizon, its tolerance
   and horizon limits. */
static int check_create(int rule, double order, double step, size_t channels,
                        const fc__stream_ops *ops, double tol, double horizon)
{
    int st;
    if ((st = fc__check_rule(rule, order, step)) != FC_OK) return st;
    if (channels == 0) return FC_ERR_ARG;
    if (channels > FC__STREAM_CHANNELS_MAX) return FC_ERR_SIZE;
    if (ops == NULL) return FC_ERR_MODE;
    if (ops->has_horizon &&
        (!(tol >= ops->tol_min && tol <= ops->tol_max) ||
         !(horizon >= 1.0) || !isfinite(horizon)))
        return FC_ERR_TOL;
    if (!fc__in_range(ops->order_range(fc__rule(rule)), order))
        return FC_ERR_ORDER;
    /* the count stays below 2^53 (FC_INDEX_LIMIT) */
    if (ops->has_horizon && horizon > ops->horizon_max) return FC_ERR_TOL;
    return FC_OK;
}

int fc_stream_create(int rule, double order, double step, size_t channels,
                     int mode, double tol, double horizon, fc_stream **out)
{
    int st;
    if (!out) return FC_ERR_NULL;
    const fc__stream_ops *ops = fc__stream_engine(mode);
    st = check_create(rule, order, step, channels, ops, tol, horizon);
    if (st != FC_OK) return st;
    fc__stream_def d = {FC__KIND_RULE, rule, order, step, channels,
                        ops->has_horizon ? tol : 0.0,
                        ops->has_horizon ? horizon : 0.0, NULL, 0};
    return stream_new(ops, mode, &d, NULL, 0, out);
}

int fc_stream_create_timed(int rule, double order, double min_step,
                           size_t channels, double tol, double horizon,
                           fc_stream **out)
{
    if (!out) return FC_ERR_NULL;
    int st = fc__timed_params_check(rule, order, min_step, channels, tol, horizon);
    if (st != FC_OK) return st;
    fc__stream_def d = {FC__KIND_TIMED, rule, order, min_step, channels,
                        tol, horizon, NULL, 0};
    return stream_new(&fc__timed_ops, FC_MODE_COMPRESSED, &d, NULL, 0, out);
}

int fc_stream_create_kernel(const double *kernel, size_t klen,
                            size_t channels, fc_stream **out)
{
    if (!out || !kernel) return FC_ERR_NULL;
    if (klen == 0) return FC_ERR_KERNEL;
    if ((uint64_t)klen > FC__KERNEL_LEN_MAX) return FC_ERR_SIZE;
    if (fc__check_finite(kernel, klen) != FC_OK) return FC_ERR_KERNEL;
    if (channels == 0) return FC_ERR_ARG;
    if (channels > FC__STREAM_CHANNELS_MAX) return FC_ERR_SIZE;
    fc__stream_def d = {FC__KIND_KERNEL, -1, 0.0, 0.0, channels, 0.0, 0.0,
                        kernel, klen};
    return stream_new(&fc__exact_ops, FC_MODE_EXACT, &d, NULL, 0, out);
}

int fc__stream_create_shifted(int rule, double order, double step,
                              size_t channels, fc_stream **out)
{
    int st;
    if (!out) return FC_ERR_NULL;
    const fc__stream_ops *ops = &fc__exact_ops;
    st = check_create(rule, order, step, channels, ops, 0.0, 0.0);
    if (st != FC_OK) return st;
    const fc__rule_desc *rd = fc__rule(rule);
    if (rd->ncorr != 0 || rd->uses_differences) return FC_ERR_RULE;
    fc__stream_def d = {FC__KIND_SHIFTED, rule, order, step, channels,
                        0.0, 0.0, NULL, 0};
    return stream_new(ops, FC_MODE_EXACT, &d, NULL, 0, out);
}

/* ------------------------------------------------------------ checks */

/* 1 if x[0 .. n) and y[0 .. n) overlap without being the same array. */
static int partial_overlap(const double *x, const double *y, size_t n)
{
    uintptr_t a = (uintptr_t)x, b = (uintptr_t)y;
    if (a == b || n == 0) return 0;
    uintptr_t len = (uintptr_t)n * sizeof(double);
    return a < b ? b - a < len : a - b < len;
}

/* 1 if a[0 .. na) and b[0 .. nb) share an element. */
static int any_overlap(const double *a, size_t na, const double *b, size_t nb)
{
    uintptr_t pa = (uintptr_t)a, pb = (uintptr_t)b;
    if (na == 0 || nb == 0) return 0;
    return pa < pb + nb * sizeof(double) && pb < pa + na * sizeof(double);
}

/* Outputs 0 .. floor(horizon) are under the promise of a stream with a
   horizon: the samples it can still take under it. */
static uint64_t horizon_remaining(const fc_stream *s)
{
    uint64_t n = s->ops->count(s->eng);
    uint64_t lim = (uint64_t)floor(s->horizon) + 1; /* horizon < 2^53 */
    return n < lim ? lim - n : 0;
}

/* FC_ERR_HORIZON when a block of count samples would pass the horizon and
   the policy refuses it. */
static int horizon_check(const fc_stream *s, size_t count)
{
    if (!s->ops->has_horizon || s->horizon_policy != FC_HORIZON_REFUSE)
        return FC_OK;
    return (uint64_t)count > horizon_remaining(s) ? FC_ERR_HORIZON : FC_OK;
}

/* ------------------------------------------------------------ push */

static int push_block(fc_stream *s, const double *x, size_t count,
                      double *y, size_t threads)
{
    int st;
    size_t tot;
    if (!s) return FC_ERR_NULL;
    if (count && (!x || !y)) return FC_ERR_NULL;
    if (threads == 0 || threads > FC_THREADS_MAX) return FC_ERR_ARG;
    if ((st = fc__guard_enter(&s->busy)) != FC_OK) return st;
    if (fc__mul_size(count, s->C, &tot) || tot > (size_t)-1 / sizeof(double))
        st = FC_ERR_SIZE;
    else if (partial_overlap(x, y, tot)) st = FC_ERR_ARG;
    else if (tot && (st = fc__check_finite(x, tot)) != FC_OK) {}
    else if ((st = horizon_check(s, count)) != FC_OK) {}
    else if (count) st = s->ops->push_block(s->eng, x, count, y, threads);
    leave(s);
    return st;
}

int fc_stream_push_block(fc_stream *s, const double *x, size_t count,
                         double *y)
{
    return push_block(s, x, count, y, 1);
}

int fc_stream_push_block_threads(fc_stream *s, const double *x, size_t count,
                                 double *y, size_t threads)
{
    return push_block(s, x, count, y, threads);
}

int fc_stream_push_timed(fc_stream *s, const double *t, const double *x,
                         size_t count, double *y)
{
    int st;
    size_t tot;
    if (!s) return FC_ERR_NULL;
    if (count && (!t || !x || !y)) return FC_ERR_NULL;
    if ((st = fc__guard_enter(&s->busy)) != FC_OK) return st;
    if (fc__mul_size(count, s->C, &tot) || tot > (size_t)-1 / sizeof(double))
        st = FC_ERR_SIZE;
    else if (!s->ops->push_timed) st = FC_ERR_ARG;
    else if (partial_overlap(x, y, tot) || any_overlap(t, count, y, tot))
        st = FC_ERR_ARG;
    else if (count && (st = fc__check_finite(t, count)) != FC_OK) {}
    else if (tot && (st = fc__check_finite(x, tot)) != FC_OK) {}
    else if (count)
        st = s->ops->push_timed(s->eng, t, x, count, y,
                                s->horizon_policy == FC_HORIZON_REFUSE);
    leave(s);
    return st;
}

int fc_stream_preview_timed(fc_stream *s, double t, const double *x, double *y)
{
    int st;
    if (!s) return FC_ERR_NULL;
    if (!x || !y) return FC_ERR_NULL;
    if ((st = fc__guard_enter(&s->busy)) != FC_OK) return st;
    if (!s->ops->preview_timed) st = FC_ERR_ARG;
    else if (partial_overlap(x, y, s->C)) st = FC_ERR_ARG;
    else if (!isfinite(t)) st = FC_ERR_NONFINITE;
    else if ((st = fc__check_finite(x, s->C)) != FC_OK) {}
    else
        st = s->ops->preview_timed(s->eng, t, x, y,
                                   s->horizon_policy == FC_HORIZON_REFUSE);
    leave(s);
    return st;
}

int fc_stream_is_timed(const fc_stream *s, int *timed)
{
    if (!s || !timed) return FC_ERR_NULL;
    *timed = s->kind == FC__KIND_TIMED; /* immutable */
    return FC_OK;
}

int fc_stream_push(fc_stream *s, const double *x, double *y)
{
    if (!s || !x || !y) return FC_ERR_NULL;
    return fc_stream_push_block(s, x, 1, y);
}

int fc_stream_push1(fc_stream *s, double x, double *y)
{
    int st;
    if (!s || !y) return FC_ERR_NULL;
    if ((st = fc__guard_enter(&s->busy)) != FC_OK) return st;
    if (s->C != 1) st = FC_ERR_ARG;
    else if (!isfinite(x)) st = FC_ERR_NONFINITE;
    else if ((st = horizon_check(s, 1)) == FC_OK)
        st = s->ops->push1(s->eng, x, y);
    leave(s);
    return st;
}

double fc_stream_push1_value(fc_stream *s, double x, int *status)
{
    double y;
    int st = status ? fc_stream_push1(s, x, &y) : FC_ERR_NULL;
    if (st == FC_OK) return y;
    if (status) *status = st;
    return NAN;
}

int fc_stream_preview(fc_stream *s, const double *x, double *y)
{
    int st;
    if (!s || !x || !y) return FC_ERR_NULL;
    if ((st = fc__guard_enter(&s->busy)) != FC_OK) return st;
    if ((st = fc__check_finite(x, s->C)) != FC_OK) {}
    else if (partial_overlap(x, y, s->C)) st = FC_ERR_ARG;
    else if ((st = horizon_check(s, 1)) == FC_OK)
        st = s->ops->preview(s->eng, x, y);
    leave(s);
    return st;
}

int fc_stream_history(fc_stream *s, double *h)
{
    int st;
    if (!s || !h) return FC_ERR_NULL;
    if ((st = fc__guard_enter(&s->busy)) != FC_OK) return st;
    if ((st = horizon_check(s, 1)) == FC_OK) /* the next output's */
        st = s->ops->history(s->eng, h);
    leave(s);
    return st;
}

/* ------------------------------------------------------------ state */

int fc_stream_reset(fc_stream *s)
{
    ENTER_OR_RETURN(s);
    s->ops->reset(s->eng);
    leave(s);
    return FC_OK;
}

int fc_stream_count(const fc_stream *s, uint64_t *count)
{
    if (!count) return FC_ERR_NULL;
    ENTER_OR_RETURN(s);
    *count = s->ops->count(s->eng);
    leave(s);
    return FC_OK;
}

int fc_stream_channels(const fc_stream *s, size_t *channels)
{
    if (!s || !channels) return FC_ERR_NULL;
    *channels = s->C; /* immutable */
    return FC_OK;
}

int fc_stream_mode(const fc_stream *s, int *mode)
{
    if (!s || !mode) return FC_ERR_NULL;
    *mode = s->mode; /* immutable */
    return FC_OK;
}

int fc_stream_nbytes(const fc_stream *s, size_t *nbytes)
{
    if (!nbytes) return FC_ERR_NULL;
    ENTER_OR_RETURN(s);
    *nbytes = sizeof(*s) + s->ops->nbytes(s->eng);
    leave(s);
    return FC_OK;
}

int fc_stream_terms(const fc_stream *s, size_t *terms)
{
    if (!terms) return FC_ERR_NULL;
    ENTER_OR_RETURN(s);
    *terms = s->ops->terms(s->eng);
    leave(s);
    return FC_OK;
}

int fc_stream_reserve(fc_stream *s, uint64_t n)
{
    int st = FC_OK;
    ENTER_OR_RETURN(s);
    if (s->ops->reserve) st = s->ops->reserve(s->eng, n);
    leave(s);
    return st;
}

int fc_stream_set_horizon_policy(fc_stream *s, int policy)
{
    if (policy != FC_HORIZON_REFUSE && policy != FC_HORIZON_CONTINUE)
        return FC_ERR_ARG;
    ENTER_OR_RETURN(s);
    s->horizon_policy = policy;
    leave(s);
    return FC_OK;
}

int fc_stream_horizon_policy(const fc_stream *s, int *policy)
{
    if (!policy) return FC_ERR_NULL;
    ENTER_OR_RETURN(s);
    *policy = s->horizon_policy;
    leave(s);
    return FC_OK;
}

int fc_stream_past_horizon(const fc_stream *s, int *flag)
{
    if (!flag) return FC_ERR_NULL;
    ENTER_OR_RETURN(s);
    /* outputs 0 .. n-1 have been produced */
    if (s->ops->past) *flag = s->ops->past(s->eng);
    else *flag = s->ops->has_horizon &&
            (double)s->ops->count(s->eng) > floor(s->horizon) + 1.0;
    leave(s);
    return FC_OK;
}

int fc_stream_remaining(const fc_stream *s, uint64_t *remaining)
{
    if (!remaining) return FC_ERR_NULL;
    ENTER_OR_RETURN(s);
    *remaining = s->ops->has_horizon ? horizon_remaining(s)
                                     : s->ops->remaining(s->eng);
    leave(s);
    return FC_OK;
}

/* The defining parameters are immutable after creation: no busy guard. */
int fc_stream_rule(const fc_stream *s, int *rule)
{
    if (!s || !rule) return FC_ERR_NULL;
    *rule = s->kind == FC__KIND_KERNEL ? -1 : s->rule;
    return FC_OK;
}
int fc_stream_order(const fc_stream *s, double *order)
{
    if (!s || !order) return FC_ERR_NULL;
    *order = s->order;
    return FC_OK;
}
int fc_stream_step(const fc_stream *s, double *step)
{
    if (!s || !step) return FC_ERR_NULL;
    *step = s->step;
    return FC_OK;
}
int fc_stream_tol(const fc_stream *s, double *tol)
{
    if (!s || !tol) return FC_ERR_NULL;
    *tol = s->tol;
    return FC_OK;
}
int fc_stream_horizon(const fc_stream *s, double *horizon)
{
    if (!s || !horizon) return FC_ERR_NULL;
    *horizon = s->horizon;
    return FC_OK;
}

/* ------------------------------------------------------------ save/load */

/*
 * Format (all integers and doubles little-endian, doubles as IEEE-754
 * bit patterns; serial.h):
 *   0  magic "FCSTREAM"          8 bytes
 *   8  u32 format version (1)
 *  12  u32 mode
 *  16  u32 kind (0 rule, 1 kernel, 2 a time per sample: then mode 1,
 *      step the smallest step and horizon a time; stream_timed.c)
 *  20  i32 rule (-1 for a kernel)
 *  24  f64 order, 32 f64 step, 40 u64 channels, 48 f64 tol, 56 f64 horizon
 *  64  u64 payload size
 *  72  u64 FNV-1a 64 of bytes [0, 72) followed by the payload
 *  80  payload: the engine's (stream_exact.c: ex_save_size;
 *      stream_compressed.c: cs_save)
 * The numbers of modes, kinds and rules are part of the format.
 */
#define FC_S_HDR 80
#define FC_S_SUM_AT 72
#define FC_S_FMT_VERSION 1u
static const unsigned char fc_s_magic[8] = {'F', 'C', 'S', 'T', 'R', 'E', 'A', 'M'};

static int save_total(const fc_stream *s, size_t *payload, size_t *total)
{
    /* a shifted kernel (internal, fc__stream_create_shifted) has no format */
    if (s->kind == FC__KIND_SHIFTED) return FC_ERR_MODE;
    int st = s->ops->save_size(s->eng, payload);
    if (st == FC_OK && fc__add_size(*payload, FC_S_HDR, total)) st = FC_ERR_SIZE;
    return st;
}

int fc_stream_save_size(fc_stream *s, size_t *size)
{
    int st;
    size_t p, total;
    if (!size) return FC_ERR_NULL;
    ENTER_OR_RETURN(s);
    if ((st = save_total(s, &p, &total)) == FC_OK) *size = total;
    leave(s);
    return st;
}

int fc_stream_save(fc_stream *s, unsigned char *buf, size_t size,
                   size_t *written)
{
    int st;
    size_t p, total;
    if (!buf || !written) return FC_ERR_NULL;
    ENTER_OR_RETURN(s);
    st = save_total(s, &p, &total);
    if (st == FC_OK && size < total) st = FC_ERR_ARG;
    if (st == FC_OK) st = s->ops->save(s->eng, buf + FC_S_HDR, p);
    if (st != FC_OK) { leave(s); return st; }

    memcpy(buf, fc_s_magic, 8);
    fc__put32(buf + 8, FC_S_FMT_VERSION);
    fc__put32(buf + 12, (uint32_t)s->mode);
    fc__put32(buf + 16, s->kind);
    fc__put32(buf + 20, (uint32_t)s->rule);
    fc__putd(buf + 24, s->order);
    fc__putd(buf + 32, s->step);
    fc__put64(buf + 40, (uint64_t)s->C);
    fc__putd(buf + 48, s->tol);
    fc__putd(buf + 56, s->horizon);
    fc__put64(buf + 64, (uint64_t)p);
    uint64_t h = fc__fnv1a(FC__FNV_OFFSET, buf, FC_S_SUM_AT);
    h = fc__fnv1a(h, buf + FC_S_HDR, p);
    fc__put64(buf + FC_S_SUM_AT, h);
    *written = total;
    leave(s);
    return FC_OK;
}

/* The saved state is untrusted: the common header is checked here (size,
   magic, version, checksum, a known mode, channels a creation accepts);
   the engine's load checks the rest of the definition and its payload. */
int fc_stream_load(const unsigned char *buf, size_t size, fc_stream **out)
{
    fc__rd r;
    if (!buf || !out) return FC_ERR_NULL;
    fc__rd_init(&r, buf, size);
    const unsigned char *magic = fc__rd_bytes(&r, 8);
    uint32_t version = fc__rd_u32(&r), mode = fc__rd_u32(&r);
    fc__stream_def d;
    memset(&d, 0, sizeof d);
    d.kind = fc__rd_u32(&r);
    d.rule = (int)(int32_t)fc__rd_u32(&r);
    d.order = fc__rd_d(&r);
    d.step = fc__rd_d(&r);
    uint64_t C64 = fc__rd_u64(&r);
    d.tol = fc__rd_d(&r);
    d.horizon = fc__rd_d(&r);
    uint64_t p = fc__rd_u64(&r), sum = fc__rd_u64(&r);
    if (r.bad || memcmp(magic, fc_s_magic, 8) != 0 ||
        version != FC_S_FMT_VERSION)
        return FC_ERR_FORMAT;
    if (p != (uint64_t)(size - FC_S_HDR)) return FC_ERR_FORMAT;
    const unsigned char *q = fc__rd_bytes(&r, (size_t)p);
    uint64_t h = fc__fnv1a(FC__FNV_OFFSET, buf, FC_S_SUM_AT);
    if (!q || fc__fnv1a(h, q, (size_t)p) != sum) return FC_ERR_FORMAT;

    const fc__stream_ops *ops = fc__stream_engine(mode);
    if (d.kind == FC__KIND_TIMED)
        /* a time per sample: saved with the compressed mode */
        ops = ops == &fc__compressed_ops ? &fc__timed_ops : NULL;
    if (C64 == 0 || C64 > FC__STREAM_CHANNELS_MAX || ops == NULL)
        return FC_ERR_FORMAT;
    d.channels = (size_t)C64;
    int st = stream_new(ops, (int)mode, &d, q, (size_t)p, out);
    return st == FC_OK || st == FC_ERR_NOMEM ? st : FC_ERR_FORMAT;
}
