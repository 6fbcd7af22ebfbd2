/*
 * controller.c -- the fractional PID controller of fracconv.h, built on the
 * public stream API only (fc_stream_create / preview / push1 / save / load).
 *
 * Law: Podlubny, "Fractional-order systems and PI^lambda D^mu controllers",
 * IEEE Trans. Automatic Control 44 (1999). Setpoint weighting, the
 * first-order derivative filter, conditional integration against windup and
 * bumpless transfer by output tracking: Astrom and Hagglund, Advanced PID
 * Control, ISA 2006.
 *
 * One update, all-or-nothing: every stream output is first obtained by
 * fc_stream_preview (which changes nothing and refuses exactly what the push
 * would refuse); only when every preview has succeeded are the samples
 * pushed, so a refused update leaves the controller exactly as it was.
 */
#include <math.h>
#include <stdlib.h>
#include <string.h>

#include "fracconv.h"
#include "guard.h"
#include "serial.h"

struct fc_controller {
    fc_controller_params p;
    fc_stream *si;      /* integral stream, NULL when ki == 0 */
    fc_stream *sd;      /* derivative stream, NULL when kd == 0 */
    fc__guard busy;     /* guard.h: one call at a time */
    int manual;
    double u_manual;
    int have_prev;      /* == (count > 0) */
    double u_prev;      /* last output */
    double dfilt;       /* filtered derivative action */
    double bias;        /* tracking bias (bumpless transfer) */
    uint64_t count;
    int limited;
    double terms[6];
};

#define TWO53 9007199254740992.0

int fc_controller_default_params(fc_controller_params *p)
{
    if (!p) return FC_ERR_NULL;
    memset(p, 0, sizeof *p);
    p->kp = 1.0;
    p->ki = 0.0;
    p->kd = 0.0;
    p->integral_order = 0.5;
    p->derivative_order = 0.5;
    p->step = 1.0;
    p->integral_rule = FC_RULE_TRAPEZOID;
    p->derivative_rule = FC_RULE_GRUNWALD;
    p->out_min = -INFINITY;
    p->out_max = INFINITY;
    p->rate_limit = INFINITY;
    p->setpoint_weight_p = 1.0;
    p->setpoint_weight_d = 1.0;
    p->filter_time = 0.0;
    p->anti_windup = FC_AW_CONDITIONAL;
    p->memory = FC_MODE_COMPRESSED;
    p->tol = 1e-10;
    p->horizon = 1e9;
    return FC_OK;
}

/* Every parameter checked; *q gets the normalised copy (exact mode: tol and
   horizon 0). */
static int check_params(const fc_controller_params *p, fc_controller_params *q)
{
    if (!isfinite(p->kp) || !isfinite(p->ki) || !isfinite(p->kd)) return FC_ERR_ARG;
    if (!isfinite(p->step) || !(p->step > 0)) return FC_ERR_STEP;
    if (p->integral_rule != FC_RULE_RECTANGLE && p->integral_rule != FC_RULE_TRAPEZOID)
        return FC_ERR_RULE;
    if (p->derivative_rule != FC_RULE_GRUNWALD && p->derivative_rule != FC_RULE_L1)
        return FC_ERR_RULE;
    if (!isfinite(p->integral_order) || !(p->integral_order > 0) || p->integral_order > 10)
        return FC_ERR_ORDER;
    if (!isfinite(p->derivative_order) || !(p->derivative_order > 0) || p->derivative_order > 10)
        return FC_ERR_ORDER;
    if (isnan(p->out_min) || isnan(p->out_max) || !(p->out_min < p->out_max)
        || p->out_min == INFINITY || p->out_max == -INFINITY)
        return FC_ERR_ARG;
    if (isnan(p->rate_limit) || !(p->rate_limit > 0)) return FC_ERR_ARG;
    if (!isfinite(p->setpoint_weight_p) || !isfinite(p->setpoint_weight_d)) return FC_ERR_ARG;
    if (!isfinite(p->filter_time) || !(p->filter_time >= 0)) return FC_ERR_ARG;
    if (p->anti_windup != FC_AW_NONE && p->anti_windup != FC_AW_CONDITIONAL) return FC_ERR_ARG;
    if (p->memory != FC_MODE_EXACT && p->memory != FC_MODE_COMPRESSED) return FC_ERR_MODE;
    *q = *p;
    if (p->memory == FC_MODE_COMPRESSED) {
        if (!(p->tol >= 1e-15 && p->tol <= 1e-2)) return FC_ERR_TOL;
        if (!(p->horizon >= 1 && p->horizon <= TWO53 - 2)) return FC_ERR_TOL;
    } else {
        q->tol = 0;
        q->horizon = 0;
    }
    return FC_OK;
}

static int make_stream(int rule, double order, const fc_controller_params *p,
                       fc_stream **out)
{
    fc_stream *s = NULL;
    int st = fc_stream_create(rule, order, p->step, 1, p->memory, p->tol,
                              p->horizon, &s);
    if (st) return st;
    if (p->memory == FC_MODE_COMPRESSED) {
        st = fc_stream_set_horizon_policy(s, FC_HORIZON_CONTINUE);
        if (st) { fc_stream_free(s); return st; }
    }
    *out = s;
    return FC_OK;
}

static void clear_state(fc_controller *c)
{
    c->manual = 0;
    c->u_manual = 0;
    c->have_prev = 0;
    c->u_prev = 0;
    c->dfilt = 0;
    c->bias = 0;
    c->count = 0;
    c->limited = 0;
    for (int k = 0; k < 6; k++) c->terms[k] = 0;
}

int fc_controller_create(const fc_controller_params *p, fc_controller **out)
{
    if (!p || !out) return FC_ERR_NULL;
    fc_controller_params q;
    int st = check_params(p, &q);
    if (st) return st;
    fc_controller *c = calloc(1, sizeof *c);
    if (!c) return FC_ERR_NOMEM;
    fc__guard_init(&c->busy);
    c->p = q;
    clear_state(c);
    if (q.ki != 0) {
        st = make_stream(q.integral_rule, q.integral_order, &q, &c->si);
        if (st) { free(c); return st; }
    }
    if (q.kd != 0) {
        st = make_stream(q.derivative_rule, q.derivative_order, &q, &c->sd);
        if (st) { fc_stream_free(c->si); free(c); return st; }
    }
    *out = c;
    return FC_OK;
}

void fc_controller_free(fc_controller *c)
{
    if (!c) return;
    fc_stream_free(c->si);
    fc_stream_free(c->sd);
    free(c);
}

static double clamp(double v, double lo, double hi)
{
    return v < lo ? lo : (v > hi ? hi : v);
}

/* The limits and the rate limit applied to v. */
static double limit(const fc_controller *c, double v)
{
    double u = clamp(v, c->p.out_min, c->p.out_max);
    if (c->have_prev && c->p.rate_limit < INFINITY) {
        double d = c->p.rate_limit * c->p.step;
        u = clamp(u, c->u_prev - d, c->u_prev + d);
        u = clamp(u, c->p.out_min, c->p.out_max);
    }
    return u;
}

/* An exact stream (NULL or compressed: nothing to do) made ready for one
   more sample without allocating in the push: room for the next power of
   two of samples (at least 64), so the growth stays geometric. Reserving
   does not change a stream's outputs or saved state. */
static int room_for_one(fc_stream *s)
{
    uint64_t n, want = 64;
    int mode, st;
    if (!s) return FC_OK;
    if ((st = fc_stream_mode(s, &mode)) != FC_OK || mode != FC_MODE_EXACT) return st;
    if ((st = fc_stream_count(s, &n)) != FC_OK) return st;
    while (want < n + 1 && want <= UINT64_MAX / 2) want *= 2;
    return fc_stream_reserve(s, want);
}

static int update1(fc_controller *c, double r, double y, double *uout)
{
    if (!isfinite(r) || !isfinite(y)) return FC_ERR_NONFINITE;
    const fc_controller_params *p = &c->p;
    double e = r - y;
    double ep = p->setpoint_weight_p * r - y;
    double ed = p->setpoint_weight_d * r - y;
    if (!isfinite(e) || !isfinite(ep) || !isfinite(ed)) return FC_ERR_RANGE;
    double P = p->kp * ep;
    double draw = 0, iv = 0, xi = c->manual ? 0.0 : e;
    int st;
    if (c->sd) {
        st = fc_stream_preview(c->sd, &ed, &draw);
        if (st) return st;
    }
    if (c->si) {
        st = fc_stream_preview(c->si, &xi, &iv);
        if (st) return st;
    }
    double D = p->kd * draw;
    if (p->filter_time > 0)
        D = (p->filter_time * c->dfilt + p->step * D) / (p->filter_time + p->step);
    double I = p->ki * iv;
    double v, u, bias = c->bias;
    int limited = 0;
    if (c->manual) {
        u = clamp(c->u_manual, p->out_min, p->out_max);
        bias = u - (P + I + D);
        v = u;
    } else {
        v = P + I + D + bias;
        u = limit(c, v);
        if (u != v && c->si && p->anti_windup == FC_AW_CONDITIONAL && xi != 0) {
            double push = p->ki * xi;
            if ((v > u && push > 0) || (v < u && push < 0)) {
                /* Integrate only the part of e that takes the unlimited
                   output to the limit (0 if it is there without e): the
                   integral is affine in the new sample. */
                double ve = v, ue = u, e0 = xi;
                xi = 0;
                st = fc_stream_preview(c->si, &xi, &iv);
                if (st) return st;
                I = p->ki * iv;
                v = P + I + D + bias;
                u = limit(c, v);
                if ((ve > ue && v < ue) || (ve < ue && v > ue)) {
                    double f = (ue - v) / (ve - v);
                    if (f > 0 && f < 1) {
                        xi = e0 * f;
                        st = fc_stream_preview(c->si, &xi, &iv);
                        if (st) return st;
                        I = p->ki * iv;
                        v = P + I + D + bias;
                        u = limit(c, v);
                    }
                }
            }
        }
        limited = (u != v);
    }
    if (!isfinite(P) || !isfinite(I) || !isfinite(D) || !isfinite(v)
        || !isfinite(bias) || !isfinite(u))
        return FC_ERR_RANGE;
    /* Room for this sample in both streams first (an exact stream grows;
       a failed allocation refuses the update here, with nothing changed). */
    if (p->memory == FC_MODE_EXACT) {
        if ((st = room_for_one(c->sd)) != FC_OK) return st;
        if ((st = room_for_one(c->si)) != FC_OK) return st;
    }
    /* Every refusal is behind us: the pushes repeat the previews. */
    double tmp;
    if (c->sd && (st = fc_stream_push1(c->sd, ed, &tmp)) != FC_OK) return st;
    if (c->si && (st = fc_stream_push1(c->si, xi, &tmp)) != FC_OK) return st;
    c->dfilt = D;
    c->bias = bias;
    c->u_prev = u;
    c->have_prev = 1;
    c->count++;
    c->limited = limited;
    c->terms[0] = P;
    c->terms[1] = I;
    c->terms[2] = D;
    c->terms[3] = bias;
    c->terms[4] = v;
    c->terms[5] = u;
    *uout = u;
    return FC_OK;
}

int fc_controller_update(fc_controller *c, double r, double y, double *u)
{
    if (!u) return FC_ERR_NULL;
    FC__ENTER_OR_RETURN(c);
    double out;
    int st = update1(c, r, y, &out);
    if (!st) *u = out;
    fc__guard_leave(&c->busy);
    return st;
}

static int overlaps(const double *a, size_t n, const double *b, size_t m)
{
    const char *a0 = (const char *)a, *b0 = (const char *)b;
    return a0 < b0 + m * sizeof(double) && b0 < a0 + n * sizeof(double);
}

int fc_controller_update_block(fc_controller *c, const double *r,
                               const double *y, size_t n, double *u,
                               size_t *done)
{
    if (!c) return FC_ERR_NULL;
    if (n > 0 && (!r || !y || !u)) return FC_ERR_NULL;
    if (n > SIZE_MAX / sizeof(double)) return FC_ERR_SIZE;
    if (n > 0 && (overlaps(u, n, r, n) || overlaps(u, n, y, n))) return FC_ERR_ARG;
    FC__ENTER_OR_RETURN(c);
    for (size_t i = 0; i < n; i++)
        if (!isfinite(r[i]) || !isfinite(y[i])) {
            fc__guard_leave(&c->busy);
            return FC_ERR_NONFINITE;
        }
    size_t i = 0;
    int st = FC_OK;
    for (; i < n; i++) {
        st = update1(c, r[i], y[i], &u[i]);
        if (st) break;
    }
    if (done) *done = i;
    fc__guard_leave(&c->busy);
    return st;
}

int fc_controller_set_manual(fc_controller *c, double u_manual)
{
    if (!c) return FC_ERR_NULL;
    if (!isfinite(u_manual)) return FC_ERR_NONFINITE;
    FC__ENTER_OR_RETURN(c);
    c->manual = 1;
    c->u_manual = u_manual;
    fc__guard_leave(&c->busy);
    return FC_OK;
}

int fc_controller_set_auto(fc_controller *c)
{
    FC__ENTER_OR_RETURN(c);
    c->manual = 0;
    c->u_manual = 0;
    fc__guard_leave(&c->busy);
    return FC_OK;
}

int fc_controller_reset(fc_controller *c)
{
    FC__ENTER_OR_RETURN(c);
    int st = FC_OK;
    if (c->si) st = fc_stream_reset(c->si);
    if (!st && c->sd) st = fc_stream_reset(c->sd);
    if (!st) clear_state(c);
    fc__guard_leave(&c->busy);
    return st;
}

int fc_controller_get_params(const fc_controller *c, fc_controller_params *p)
{
    if (!c || !p) return FC_ERR_NULL;
    *p = c->p;
    return FC_OK;
}

int fc_controller_status(const fc_controller *c, int *status)
{
    if (!status) return FC_ERR_NULL;
    FC__ENTER_OR_RETURN(c);
    int s = 0, f;
    if (c->limited) s |= FC_CTRL_LIMITED;
    if (c->manual) s |= FC_CTRL_MANUAL;
    if (c->si && !fc_stream_past_horizon(c->si, &f) && f) s |= FC_CTRL_PAST_HORIZON;
    if (c->sd && !fc_stream_past_horizon(c->sd, &f) && f) s |= FC_CTRL_PAST_HORIZON;
    *status = s;
    fc__guard_leave(&c->busy);
    return FC_OK;
}

int fc_controller_terms(const fc_controller *c, double *t)
{
    if (!t) return FC_ERR_NULL;
    FC__ENTER_OR_RETURN(c);
    memcpy(t, c->terms, sizeof c->terms);
    fc__guard_leave(&c->busy);
    return FC_OK;
}

int fc_controller_count(const fc_controller *c, uint64_t *count)
{
    if (!count) return FC_ERR_NULL;
    FC__ENTER_OR_RETURN(c);
    *count = c->count;
    fc__guard_leave(&c->busy);
    return FC_OK;
}

int fc_controller_nbytes(const fc_controller *c, size_t *nbytes)
{
    if (!nbytes) return FC_ERR_NULL;
    FC__ENTER_OR_RETURN(c);
    size_t n = sizeof *c, b;
    int st = FC_OK;
    if (c->si) { if (fc_stream_nbytes(c->si, &b)) st = FC_ERR_ARG; else n += b; }
    if (!st && c->sd) { if (fc_stream_nbytes(c->sd, &b)) st = FC_ERR_ARG; else n += b; }
    if (!st) *nbytes = n;
    fc__guard_leave(&c->busy);
    return st;
}

/* ------------------------------------------------------------ save/load
 * Layout (little-endian):
 *   0   8 bytes magic "FCCTRL01"
 *   8   u32 version (1), u32 0
 *   16  24 doubles (as u64 bit patterns): kp ki kd integral_order
 *       derivative_order step out_min out_max rate_limit setpoint_weight_p
 *       setpoint_weight_d filter_time tol horizon u_manual u_prev dfilt bias
 *       terms[0..5]
 *   208 8 u32: integral_rule derivative_rule anti_windup memory manual
 *       have_prev limited 0
 *   240 u64 count
 *   248 u64 n_i, n_i bytes of the integral stream (fc_stream_save)
 *       u64 n_d, n_d bytes of the derivative stream
 *   end u64 FNV-1a 64 of everything before
 */
#define NDBL 24
#define NINT 8
#define FIXED (16 + 8 * NDBL + 4 * NINT + 8)
static const unsigned char MAGIC[8] = {'F', 'C', 'C', 'T', 'R', 'L', '0', '1'};

/* The controller's checksum is FNV-1a 64 (serial.h) started from this
   basis: the save format's first version used a basis one digit short of
   the published offset basis (14695981039346656037). It stays part of the
   format, so that every controller saved so far still loads. */
#define CTRL_FNV_BASIS UINT64_C(1469598103934665603)

static int stream_size(fc_stream *s, size_t *n)
{
    *n = 0;
    return s ? fc_stream_save_size(s, n) : FC_OK;
}

static int save_size(const fc_controller *c, size_t *size)
{
    size_t a, b;
    int st;
    if ((st = stream_size(c->si, &a)) || (st = stream_size(c->sd, &b))) return st;
    size_t fixed = FIXED + 8 + 8 + 8;
    if (a > SIZE_MAX - fixed || b > SIZE_MAX - fixed - a) return FC_ERR_SIZE;
    *size = fixed + a + b;
    return FC_OK;
}

int fc_controller_save_size(const fc_controller *c, size_t *size)
{
    if (!size) return FC_ERR_NULL;
    FC__ENTER_OR_RETURN(c);
    int st = save_size(c, size);
    fc__guard_leave(&c->busy);
    return st;
}

static int save(const fc_controller *c, unsigned char *buf, size_t size,
                size_t *written)
{
    size_t need;
    int st = save_size(c, &need);
    if (st) return st;
    if (size < need) return FC_ERR_ARG;
    const fc_controller_params *p = &c->p;
    double d[NDBL] = {p->kp, p->ki, p->kd, p->integral_order,
                      p->derivative_order, p->step, p->out_min, p->out_max,
                      p->rate_limit, p->setpoint_weight_p, p->setpoint_weight_d,
                      p->filter_time, p->tol, p->horizon, c->u_manual, c->u_prev,
                      c->dfilt, c->bias, c->terms[0], c->terms[1], c->terms[2],
                      c->terms[3], c->terms[4], c->terms[5]};
    uint32_t in[NINT] = {(uint32_t)p->integral_rule, (uint32_t)p->derivative_rule,
                         (uint32_t)p->anti_windup, (uint32_t)p->memory,
                         (uint32_t)c->manual, (uint32_t)c->have_prev,
                         (uint32_t)c->limited, 0};
    /* Written to a private copy first: the caller's buffer is touched only
       once every part (the streams' own saves included) has succeeded. */
    unsigned char *tmp = malloc(need);
    if (!tmp) return FC_ERR_NOMEM;
    size_t off = 0;
    memcpy(tmp, MAGIC, 8);
    fc__put32(tmp + 8, 1);
    fc__put32(tmp + 12, 0);
    off = 16;
    for (int k = 0; k < NDBL; k++, off += 8) fc__putd(tmp + off, d[k]);
    for (int k = 0; k < NINT; k++, off += 4) fc__put32(tmp + off, in[k]);
    fc__put64(tmp + off, c->count);
    off += 8;
    fc_stream *ss[2] = {c->si, c->sd};
    for (int k = 0; k < 2; k++) {
        size_t w = 0;
        if (ss[k]) {
            st = fc_stream_save(ss[k], tmp + off + 8, need - 8 - off - 8, &w);
            if (st) { free(tmp); return st; }
        }
        fc__put64(tmp + off, (uint64_t)w);
        off += 8 + w;
    }
    fc__put64(tmp + off, fc__fnv1a(CTRL_FNV_BASIS, tmp, off));
    off += 8;
    memcpy(buf, tmp, off);
    free(tmp);
    *written = off;
    return FC_OK;
}

int fc_controller_save(const fc_controller *c, unsigned char *buf, size_t size,
                       size_t *written)
{
    if (!buf || !written) return FC_ERR_NULL;
    FC__ENTER_OR_RETURN(c);
    int st = save(c, buf, size, written);
    fc__guard_leave(&c->busy);
    return st;
}

static int same_stream(fc_stream *s, int rule, double order,
                       const fc_controller_params *p, uint64_t count)
{
    int r, m;
    double o, h, tol, hor;
    size_t ch;
    uint64_t n;
    if (fc_stream_rule(s, &r) || fc_stream_order(s, &o) || fc_stream_step(s, &h)
        || fc_stream_mode(s, &m) || fc_stream_tol(s, &tol)
        || fc_stream_horizon(s, &hor) || fc_stream_channels(s, &ch)
        || fc_stream_count(s, &n))
        return 0;
    return r == rule && o == order && h == p->step && m == p->memory
           && tol == p->tol && hor == p->horizon && ch == 1 && n == count;
}

int fc_controller_load(const unsigned char *buf, size_t size,
                       fc_controller **out)
{
    if (!buf || !out) return FC_ERR_NULL;
    if (size < FIXED + 24) return FC_ERR_FORMAT;
    if (memcmp(buf, MAGIC, 8) != 0) return FC_ERR_FORMAT;
    if (fc__get32(buf + 8) != 1 || fc__get32(buf + 12) != 0) return FC_ERR_FORMAT;
    if (fc__get64(buf + size - 8) != fc__fnv1a(CTRL_FNV_BASIS, buf, size - 8)) return FC_ERR_FORMAT;
    double d[NDBL];
    uint32_t in[NINT];
    size_t off = 16;
    for (int k = 0; k < NDBL; k++, off += 8) d[k] = fc__getd(buf + off);
    for (int k = 0; k < NINT; k++, off += 4) in[k] = fc__get32(buf + off);
    uint64_t count = fc__get64(buf + off);
    off += 8;
    for (int k = 0; k < 6; k++) if (in[k] > 16) return FC_ERR_FORMAT;
    if (in[6] > 1 || in[7] != 0) return FC_ERR_FORMAT;
    fc_controller_params p, q;
    memset(&p, 0, sizeof p);
    p.kp = d[0]; p.ki = d[1]; p.kd = d[2];
    p.integral_order = d[3]; p.derivative_order = d[4]; p.step = d[5];
    p.out_min = d[6]; p.out_max = d[7]; p.rate_limit = d[8];
    p.setpoint_weight_p = d[9]; p.setpoint_weight_d = d[10];
    p.filter_time = d[11]; p.tol = d[12]; p.horizon = d[13];
    p.integral_rule = (int)in[0]; p.derivative_rule = (int)in[1];
    p.anti_windup = (int)in[2]; p.memory = (int)in[3];
    if (check_params(&p, &q)) return FC_ERR_FORMAT;
    if (memcmp(&p, &q, sizeof p) != 0) return FC_ERR_FORMAT; /* not normalised */
    int manual = (int)in[4], have_prev = (int)in[5], limited = (int)in[6];
    if (manual > 1 || have_prev > 1) return FC_ERR_FORMAT;
    if (have_prev != (count > 0)) return FC_ERR_FORMAT;
    if (count >= (uint64_t)TWO53) return FC_ERR_FORMAT;
    for (int k = 14; k < NDBL; k++) if (!isfinite(d[k])) return FC_ERR_FORMAT;
    double u_manual = d[14], u_prev = d[15];
    if (!manual && u_manual != 0) return FC_ERR_FORMAT;
    if (count == 0) {
        for (int k = 15; k < NDBL; k++) if (d[k] != 0) return FC_ERR_FORMAT;
        if (limited) return FC_ERR_FORMAT;
    } else {
        if (u_prev < p.out_min || u_prev > p.out_max) return FC_ERR_FORMAT;
        if (d[23] != u_prev || d[21] != d[17] || d[20] != d[16]) return FC_ERR_FORMAT;
        if (limited != (d[22] != d[23])) return FC_ERR_FORMAT;
    }
    /* Embedded streams: lengths bounded by the blob before anything is
       allocated. */
    const unsigned char *sb[2];
    size_t sn[2];
    for (int k = 0; k < 2; k++) {
        if (size - 8 - off < 8) return FC_ERR_FORMAT;
        uint64_t n = fc__get64(buf + off);
        off += 8;
        if (n > (uint64_t)(size - 8 - off)) return FC_ERR_FORMAT;
        sb[k] = buf + off;
        sn[k] = (size_t)n;
        off += (size_t)n;
    }
    if (off != size - 8) return FC_ERR_FORMAT;
    if ((sn[0] != 0) != (p.ki != 0) || (sn[1] != 0) != (p.kd != 0)) return FC_ERR_FORMAT;
    fc_controller *c = calloc(1, sizeof *c);
    if (!c) return FC_ERR_NOMEM;
    fc__guard_init(&c->busy);
    c->p = p;
    int st = FC_OK;
    if (sn[0]) {
        st = fc_stream_load(sb[0], sn[0], &c->si);
        if (!st && !same_stream(c->si, p.integral_rule, p.integral_order, &p, count))
            st = FC_ERR_FORMAT;
    }
    if (!st && sn[1]) {
        st = fc_stream_load(sb[1], sn[1], &c->sd);
        if (!st && !same_stream(c->sd, p.derivative_rule, p.derivative_order, &p, count))
            st = FC_ERR_FORMAT;
    }
    if (!st && p.memory == FC_MODE_COMPRESSED) {
        if (c->si) st = fc_stream_set_horizon_policy(c->si, FC_HORIZON_CONTINUE);
        if (!st && c->sd) st = fc_stream_set_horizon_policy(c->sd, FC_HORIZON_CONTINUE);
    }
    if (st) {
        fc_controller_free(c);
        return st == FC_ERR_NOMEM ? st : FC_ERR_FORMAT;
    }
    c->manual = manual;
    c->u_manual = u_manual;
    c->have_prev = have_prev;
    c->u_prev = u_prev;
    c->dfilt = d[16];
    c->bias = d[17];
    c->count = count;
    c->limited = limited;
    for (int k = 0; k < 6; k++) c->terms[k] = d[18 + k];
    *out = c;
    return FC_OK;
}
