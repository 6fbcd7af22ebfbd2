/*
 * internal.h -- declarations shared by the C sources; not installed.
 */
#ifndef FC_INTERNAL_H
#define FC_INTERNAL_H

#include <stddef.h>
#include <stdint.h>
#include <math.h>
#include "fracconv.h"
#include "fft.h"
#include <float.h>

/* v, or +0 when |v| < DBL_MIN: the one-pole states of the exponential
   engines set to zero before they decay into the subnormal range, where
   arithmetic is many times slower (the same work on every sample). */
static inline double fc__ftz(double v) { return fabs(v) >= DBL_MIN ? v : 0.0; }

/*
 * FC_NO_SIMD: the portable build (make check-portable). fft.c and lagsum.c
 * then leave their AVX2 versions out; every other run-time CPU probe
 * (__builtin_cpu_supports, compressed.c) answers "not supported", so the
 * portable kernels run, exactly as on a machine without AVX2.
 */
#if defined(FC_NO_SIMD) && (defined(__GNUC__) || defined(__clang__))
#define __builtin_cpu_supports(feature) ((void)(feature), 0)
#endif

/* Largest supported weight index + 1 (2^53: every index exact in double). */
#define FC_INDEX_LIMIT (UINT64_C(1) << 53)

/* a*b with overflow check: returns 0 and sets *r, or returns FC_ERR_SIZE. */
static inline int fc__mul_size(size_t a, size_t b, size_t *r)
{
    if (b != 0 && a > (size_t)-1 / b) return FC_ERR_SIZE;
    *r = a * b;
    return FC_OK;
}
static inline int fc__add_size(size_t a, size_t b, size_t *r)
{
    if (a > (size_t)-1 - b) return FC_ERR_SIZE;
    *r = a + b;
    return FC_OK;
}
/*
 * Tasks 0 .. ntasks-1 of a call run by up to nworkers threads, the calling
 * thread being worker 0 (parallel.c). fn(arg, task, worker): worker <
 * nworkers identifies the thread's own resources. Never fails: fewer
 * threads run them when threads cannot be made.
 */
typedef void (*fc__task_fn)(void *arg, size_t task, size_t worker);
void fc__run_tasks(size_t ntasks, size_t nworkers, fc__task_fn fn, void *arg);
/* 1 if the build has threads (0 with FC_NO_THREADS or no POSIX threads:
   then no helper scratch is made either). */
int fc__have_threads(void);
/* FC_OK if all n values are finite, FC_ERR_NONFINITE otherwise. */
int fc__check_finite(const double *x, size_t n);
/* Largest |v[i]| over n finite values (0 for n == 0). */
double fc__max_abs(const double *v, size_t n);

/*
 * The rule table (rules.c): one descriptor per rule, read by every engine
 * and every range check. Adding a rule is one row, its weight filler
 * (weights.c) and its tests (DEVELOPERS.md, "Adding a rule").
 */
/* A unit weight sequence: filler out[i] = s * w_{start+i} and log2 of a
   generous bound on |w_m| for m < 2^l (it only decides whether the
   one-multiplication scaling path is safe). */
typedef struct {
    void (*fill)(double a, uint64_t start, size_t count, double s,
                 double *out);
    double (*log2_bound)(double a, double l);
} fc__wseq;
extern const fc__wseq fc__seq_rectangle, fc__seq_trapezoid,
    fc__seq_trapezoid_start, fc__seq_grunwald, fc__seq_l1;

/* The scale factor of the unit weights, M 2^E (weights.c). */
enum {
    FC__SCALE_HA_G1 = 1,     /* h^a / Gamma(a+1) */
    FC__SCALE_HA_G2 = 2,     /* h^a / Gamma(a+2) */
    FC__SCALE_HNA = 3,       /* h^-a */
    FC__SCALE_HNA_G2MA = 4   /* h^-a / Gamma(2-a) */
};
/* The Laplace density of the kernel that compressed mode approximates by
   a sum of exponentials (soe_build.c). */
enum {
    FC__DENS_RECT = 1,       /* phi = expm1(s)/s, p = -a */
    FC__DENS_TRAP = 2,       /* phi = (sinh(s/2)/(s/2))^2, p = -a */
    FC__DENS_GRUN = 3,       /* phi = e^{as} ((1-e^{-s})/s)^a, p = a */
    FC__DENS_L1 = 4          /* phi = (1-e^{-s})/s, p = a - 1 */
};
/* An order interval lo < a (lo <= a if lo_incl), a < hi (a <= hi if
   hi_incl). */
typedef struct {
    double lo, hi;
    int lo_incl, hi_incl;
} fc__range;
/* The smallest order compressed mode offers (the lower end of every
   rule's compressed range; soe_build.c explains it). */
#define FC__CS_MIN_ORDER 1e-280
/* A starting-correction column j: y_n += corr_n x_j for every n >= j
   (a stream cannot use x_j before it arrives), with
   corr_n = S_n - c_{n-j}, S the column's start weights (the rule's scale;
   for a rule on u = x, S_n is then the whole weight of x_j in y_n).
   Every engine applies every column of the list (fc__correction); in
   compressed mode a column the construction carries in its terms (soe:
   the trapezoid density's x_0, soe_build.c) is handled by the
   construction, every other one is added at run time from the library's
   weights (stream_compressed.c). What a row must respect (the engines
   rely on it; DEVELOPERS.md, "Adding a rule"): at most FC__CORR_MAX
   columns, all different; soe only on column 0 of an FC__DENS_TRAP rule;
   |S_n| within 2^4 of the rule's own weight bound (the log2_bound of its
   weights: the range checks of rules.c and stream_exact.c assume it). */
#define FC__CORR_MAX 4
typedef struct {
    uint64_t column;
    const fc__wseq *start;
    int soe;                 /* 1: the compressed construction carries it
                                (column 0 with FC__DENS_TRAP only) */
} fc__corr_col;
typedef struct {
    int id;                  /* FC_RULE_* (part of the save format) */
    const char *name;        /* the Python name */
    int is_derivative;       /* 0 integral, 1 derivative */
    fc__range batch;         /* fc_weights, fc_apply */
    fc__range exact;         /* exact streams */
    fc__range compressed;    /* compressed streams (creation) */
    double cumulative_from;  /* compressed: orders >= this run on the
                                running sum x_0 + ... + x_n (INFINITY:
                                never) */
    unsigned lag_shift;      /* c_m = w_{m - shift}, c_m = 0 for m < shift */
    int uses_differences;    /* u_k = x_k - x_{k-1}, u_0 = 0 (else u = x) */
    int scale;               /* FC__SCALE_* */
    const fc__wseq *weights; /* the weights w_m of fc_weights */
    int density;             /* FC__DENS_* */
    size_t ncorr;            /* starting-correction columns */
    const fc__corr_col *corr;
    int zero_first;          /* y_0 = 0 exactly (the trapezoid: its start
                                weight A_0 = 0 cancels c_0); the batch and
                                exact engines set it so, whatever the
                                rounding of c_0 x_0 + corr_0 x_0 */
} fc__rule_desc;

/* The descriptor of a rule, NULL for a number that is not a rule. */
const fc__rule_desc *fc__rule(int rule);
/* The x_0 correction column of a rule, NULL if it has none. */
const fc__corr_col *fc__rule_x0(const fc__rule_desc *d);
/* The column the compressed construction carries in its terms (soe), NULL
   if none; its index in d->corr in *k when k is not NULL. */
const fc__corr_col *fc__rule_soe_col(const fc__rule_desc *d, size_t *k);
/* 1 if order lies in r. */
int fc__in_range(const fc__range *r, double order);
/* The weight sequence and scale of kind (a rule, or FC__START_WEIGHTS);
   kind already checked. */
const fc__wseq *fc__weight_seq(int kind);
int fc__weight_scale(int kind);

/*
 * Validation of (rule, order, step) for an operator (integral or
 * derivative), from the rule table's batch range: FC_ERR_RULE,
 * FC_ERR_ORDER, FC_ERR_STEP or FC_OK.
 */
int fc__check_rule(int rule, double order, double step);

/*
 * Every rule in lagged-sum form (rules.c):
 *     y_n = sum_{k<=n} c_{n-k} u_k + sum_{columns j <= n} corr^j_n x_j
 * where u = x, except for L1, where u_0 = 0 and u_k = x_k - x_{k-1};
 * the columns are the rule's list (fc__corr_col): today only the
 * trapezoid rule has one, j = 0.
 *   rectangle: c_0 = 0, c_m = weights(m-1) (m >= 1)
 *   trapezoid: c_m = weights(m); column 0: corr_0 = -c_0 (so y_0 = 0),
 *              corr_n = start(n) - weights(n) for n >= 1
 *   grunwald:  c_m = weights(m)
 *   l1:        c_m = weights(m)
 * The functions below fill c (or corr^j of the rule's column k, d->corr[k])
 * for the indices start..start+count-1 (corr^j_n = 0 for n < j)
 * and assume fc__check_rule passed. They return FC_ERR_RANGE (the contents
 * of c or corr then unspecified) when a value is out of the normal double
 * range: one that overflows, or a non-zero one that would be subnormal or
 * zero (a relative accuracy cannot hold there), so that a stream never
 * runs with an infinite kernel or one flushed to zero.
 */
int fc__lag_kernel(int rule, double order, double step, uint64_t start,
                   size_t count, double *c);
int fc__correction(int rule, size_t k, double order, double step,
                   uint64_t start, size_t count, double *corr);
/*
 * Unit forms (weights.c, rules.c): every weight sequence is a unit sequence
 * (the formulas of fracconv.h without the step factor; moderate numbers:
 * roughly between 2^-700 and 2^600 for every index below 2^53) times the
 * rule's scale factor M 2^E, 0.5 <= M < 1 (h^a/Gamma(a+1), h^a/Gamma(a+2),
 * h^-a, h^-a/Gamma(2-a)), which may itself be far outside the double
 * range. kind: a rule, or FC__START_WEIGHTS for the trapezoid start weights
 * (whose scale is that of FC_RULE_TRAPEZOID). Arguments already checked.
 */
#define FC__START_WEIGHTS (-1)
void fc__unit_weights(int kind, double a, uint64_t start, size_t count,
                      double *out);
void fc__rule_scale(int kind, double a, double h, long double *M, long *E);
/* log2 of an upper bound of the unit weights of kind for indices < M. */
double fc__unit_log2_bound(int kind, double a, uint64_t M);
/* w M 2^E rounded to double: inf on overflow, gradual underflow. */
double fc__scale_value(double w, long double M, long E);
/*
 * The unit lagged-sum kernel c (as fc__lag_kernel, without the factor) and
 * the unit correction of column k, for indices start .. start+count-1; the
 * factor of both is fc__rule_scale(rule, ...).
 */
void fc__unit_lag_kernel(int rule, double order, uint64_t start,
                         size_t count, double *c);
/* Both at once for the engines: the unit kernel c and its scale M 2^E. */
void fc__unit_kernel(int rule, double order, double step, uint64_t start,
                     size_t count, double *c, long double *M, long *E);
void fc__unit_correction(int rule, size_t k, double order, uint64_t start,
                         size_t count, double *corr);
static inline int fc__rule_uses_differences(int rule)
{
    const fc__rule_desc *d = fc__rule(rule);
    return d != NULL && d->uses_differences;
}
/* The number of correction columns of a rule (0 for a number that is not
   a rule). */
static inline size_t fc__rule_ncorr(int rule)
{
    const fc__rule_desc *d = fc__rule(rule);
    return d != NULL ? d->ncorr : 0;
}
/* 1 if the compressed construction carries a column of the rule. */
static inline int fc__rule_has_soe_col(int rule)
{
    const fc__rule_desc *d = fc__rule(rule);
    return d != NULL && fc__rule_soe_col(d, NULL) != NULL;
}

/*
 * The first segment of a partitioned convolution (lagsum.c): the power-law
 * exponent of |c_m| estimated over the octaves [m, 2m] for m = m0, 2 m0,
 * ... with 2m < K (c read through at(ctx, m, &v)), into *gamma (1e9 when a
 * sampled value is zero), and the first segment p0 in {2, 4, 8, 16} that
 * keeps the FFT rounding of every segment at the scale of the terms it
 * adds. Used by the batch engine (m0 = 8) and the exact stream (m0 = 64).
 * Returns what at() returns on failure, FC_OK otherwise.
 */
typedef int (*fc__kernel_at)(const void *ctx, uint64_t m, double *v);
int fc__segment_start(fc__kernel_at at, const void *ctx, uint64_t m0,
                      uint64_t K, double *gamma, size_t *p0);

/*
 * The sum of exponentials of a compressed stream (soe_build.c, the offline
 * design step): lags m < FC__CS_BAND are summed exactly with the band
 * cband[m] = c_m, every lag B <= m <= horizon by
 * c_m ~= sum_{l<L} beta_l (1 - q_l)^(m-B) (the factor (1 - q_l)^B folded
 * into beta_l); the trapezoid rule's x_0 enters term l as inj_l x_0 at
 * step B and its corrections corr_n, n < B, are ctab[n]. cum: the rule
 * runs on the running sum X of x with the kernel f (rectangle and
 * trapezoid, a >= 1); the trapezoid's x_0 then does not enter the terms
 * (inj = 1): corr_n x_0 for n >= B comes from the library's weights at
 * run time (stream_compressed.c).
 */
/* The tolerances and horizons compressed mode offers (fc_stream_create;
   the loader checks a saved stream's against the same). */
#define FC__CS_TOL_MIN 1e-15
#define FC__CS_TOL_MAX 1e-2
#define FC__CS_HORIZON_MAX ((double)(FC_INDEX_LIMIT - 2))
#define FC__CS_BAND 64
#define FC__CS_MAX_TERMS 200
typedef struct {
    size_t L;                       /* terms, <= FC__CS_MAX_TERMS */
    int cum;
    double q[FC__CS_MAX_TERMS], beta[FC__CS_MAX_TERMS], inj[FC__CS_MAX_TERMS];
    double cband[FC__CS_BAND];      /* c_0 .. c_{B-1} (cum: f_0 .. f_{B-1}) */
    double ctab[FC__CS_BAND];       /* corr_n, n < B (0 without x_0 term) */
    double corrmax;                 /* trapezoid, a >= 1: max |corr_n| over
                                       B <= n < 2^53 (else 0) */
} fc__soe;
int fc__soe_build(int rule, double order, double step, double tol,
                  double horizon, fc__soe *out);

/*
 * The sum of exponentials of the continuous kernel tau^(g-1)/Gamma(g) on
 * 1 <= tau <= R (soe_build.c, fc__soe_power; the grid engine, grid_soe.c,
 * and the time-stamped stream): k(tau) ~= sum_l w[l] exp(-s[l] tau) with
 * relative error <= 0.6 tol + 16 eps, checked. gm1 = g - 1 in (-1, 0)
 * (0 < g < 1) or 0 (g = 1: one exact term). s and w malloc'ed (L each).
 */
/* The one-pole coefficients of the grid engine and the time-stamped
   stream (grid_soe.c, stream_timed.c): over a step of z = s h,
   e^-z - 1, phi1(z) = (1 - e^-z)/z and f2(z) = (1 - phi1(z))/z. */
/* 1/(i+2)! with alternating sign, i = 0 .. 17: f2(z) = sum c_i z^i. */
static const double fc__gs_c[18] = {
    1.0 / 2, -1.0 / 6, 1.0 / 24, -1.0 / 120, 1.0 / 720, -1.0 / 5040,
    1.0 / 40320, -1.0 / 362880, 1.0 / 3628800, -1.0 / 39916800,
    1.0 / 479001600, -1.0 / 6227020800.0, 1.0 / 87178291200.0,
    -1.0 / 1307674368000.0, 1.0 / 20922789888000.0,
    -1.0 / 355687428096000.0, 1.0 / 6402373705728000.0,
    -1.0 / 121645100408832000.0,
};

/* e^-z - 1, phi1(z) = (1 - e^-z)/z, f2(z) = (1 - phi1)/z for z >= 0,
   each to a few units of 2^-53 (no cancellation: the series for z < 1,
   truncated where the next term is below 2^-60 of the sum; expm1 above,
   where 1 - phi1 >= 1/e loses at most a factor 3). */
static inline void fc__gs_phi(double z, double *em1, double *p1, double *f2)
{
    double r;
    if (z < 1.0) {
        int J = z < 1e-4 ? 4 : z < 1.0 / 64 ? 8 : z < 0.25 ? 12 : 18;
        r = fc__gs_c[J - 1];
        for (int i = J - 2; i >= 0; i--) r = r * z + fc__gs_c[i];
        double f1 = 1.0 - z * r;
        *f2 = r;
        *p1 = f1;
        *em1 = -z * f1;
    } else {
        double e = expm1(-z);
        double f1 = -e / z;
        *em1 = e;
        *p1 = f1;
        *f2 = (1.0 - f1) / z;
    }
}

/* (-1)^i / (i+3)!, i = 0 .. 25: phi3(z) = sum c3_i z^i */
static const double fc__gs_c3[26] = {
    1.0 / 6, -1.0 / 24, 1.0 / 120, -1.0 / 720, 1.0 / 5040, -1.0 / 40320,
    1.0 / 362880, -1.0 / 3628800, 1.0 / 39916800, -1.0 / 479001600,
    1.0 / 6227020800.0, -1.0 / 87178291200.0, 1.0 / 1307674368000.0,
    -1.0 / 20922789888000.0, 1.0 / 355687428096000.0,
    -1.0 / 6402373705728000.0, 1.0 / 121645100408832000.0,
    -1.0 / 2432902008176640000.0, 1.0 / 51090942171709440000.0,
    -1.0 / 1124000727777607680000.0, 1.0 / 25852016738884976640000.0,
    -1.0 / 620448401733239439360000.0, 1.0 / 15511210043330985984000000.0,
    -1.0 / 403291461126605635584000000.0, 1.0 / 10888869450418352160768000000.0,
    -1.0 / 304888344611713860501504000000.0,
};

/* phi3(z) = int_0^1 e^(-z v) (1 - v)^2 / 2 dv (z >= 0) to a few units
   of 2^-53, for the trapezoid rule at 1 < a < 2 (grid_soe.c,
   stream_timed.c): the series sum_i (-z)^i / (i+3)! for z < 2 (truncated
   where the next term is below 2^-60 of the sum; the alternating sum
   loses at most a factor 3 there) and phi3 = (1/2 - f2(z)) / z above,
   where 1/2 - f2 >= 0.43 / 2 loses at most a factor 2.3 (f2 = phi2 from
   fc__gs_phi). */
static inline double fc__gs_phi3(double z, double f2)
{
    if (z < 2.0) {
        int J = z < 1e-4 ? 4 : z < 1.0 / 64 ? 8 : z < 0.25 ? 12 : z < 1.0 ? 18 : 26;
        double r = fc__gs_c3[J - 1];
        for (int i = J - 2; i >= 0; i--) r = r * z + fc__gs_c3[i];
        return r;
    }
    return (0.5 - f2) / z;
}

/* The four coefficients of the trapezoid rule at 1 < a < 2 at once:
   e^-z - 1, phi1, f2 = phi2 and phi3 (as fc__gs_phi and fc__gs_phi3).
   For z < 1 one series (phi3's, J terms as in fc__gs_phi) gives all four:
   f2 = 1/2 - z phi3, phi1 = 1 - z f2, e^-z - 1 = -z phi1, each step
   losing at most a factor 1.4 (z phi3 <= 0.28 f2 there); for z >= 1 the
   two functions above. */
static inline void fc__gs_phi4(double z, double *em1, double *p1, double *f2, double *f3)
{
    if (z < 1.0) {
        int J = z < 1e-4 ? 4 : z < 1.0 / 64 ? 8 : z < 0.25 ? 12 : 18;
        double r = fc__gs_c3[J - 1];
        for (int i = J - 2; i >= 0; i--) r = r * z + fc__gs_c3[i];
        double g2 = 0.5 - z * r, g1 = 1.0 - z * g2;
        *f3 = r;
        *f2 = g2;
        *p1 = g1;
        *em1 = -z * g1;
        return;
    }
    fc__gs_phi(z, em1, p1, f2);
    *f3 = fc__gs_phi3(z, *f2);
}

#define FC__GRID_RATIO_MAX 1.2676506002282294e30   /* 2^100 */
typedef struct {
    size_t L;
    double *s, *w;
} fc__soe_pow;
int fc__soe_power(long double gm1, double tol, double R, fc__soe_pow *out);

/*
 * Stream engines behind one interface. stream.c (the facade) owns struct
 * fc_stream: the busy guard, every argument and sample check (done once,
 * there), the common save header, and dispatch through the engine's
 * operations below; the engine's own state is an opaque pointer.
 * stream_exact.c implements FC_MODE_EXACT (rules and user kernels),
 * stream_compressed.c FC_MODE_COMPRESSED.
 */
/* What a stream is: its definition, read from fc_stream_create /
   fc_stream_create_kernel (checked) or from a saved header (untrusted:
   the engine's load checks what it needs). */
#define FC__KIND_RULE 0u     /* part of the save format */
#define FC__KIND_KERNEL 1u
#define FC__KIND_TIMED 2u    /* a time per sample (stream_timed.c); step
                                holds the smallest step, horizon a time */
#define FC__KIND_SHIFTED 3u  /* exact mode, internal (the solver's): the
                                rule's lag kernel shifted by one lag,
                                c_m = c^rule_{m+1}; never saved */
typedef struct {
    unsigned kind;           /* FC__KIND_* */
    int rule;                /* -1 for a kernel */
    double order, step;      /* 0 for a kernel */
    size_t channels;
    double tol, horizon;     /* compressed mode; 0 in exact mode */
    const double *kernel;    /* kind kernel (create only) */
    size_t klen;
} fc__stream_def;
/* Channel limit of every stream (the exact engine's buffers of up to 8
   rows of 1024 doubles per channel stay addressable). */
#define FC__STREAM_CHANNELS_MAX (((size_t)-1) / (8 * sizeof(double) * 1024))
/* The longest user kernel: the lags the exact engine's default geometry
   covers (stream_exact.c checks this equals its FC_S_LAG_LIMIT). */
#define FC__KERNEL_LEN_MAX (UINT64_C(64) + UINT64_C(64) * 8 * \
                            ((UINT64_C(1) << 24) - 1))
/*
 * Engine operations. The facade has checked, before any call: the
 * pointers are non-NULL; samples are finite; x and y are the same array
 * or do not overlap; count * channels doubles fit in size_t; under the
 * horizon policy FC_HORIZON_REFUSE (has_horizon) no output would pass the
 * horizon. A refused call leaves the engine as it was.
 */
typedef struct fc__stream_ops {
    int has_horizon;         /* tol and horizon are defining parameters */
    /* with a horizon: the tolerances tol_min <= tol <= tol_max and the
       horizons 1 <= horizon <= horizon_max a creation accepts */
    double tol_min, tol_max, horizon_max;
    /* the orders this engine runs for a rule: its range in the rule
       table (fc_stream_create, fc_rule_order_range) */
    const fc__range *(*order_range)(const fc__rule_desc *d);
    /* definition checked by the facade */
    int (*create)(const fc__stream_def *d, void **eng);
    /* payload p[0 .. size) of a blob whose common header gave d: validates
       everything (FC_ERR_FORMAT, or FC_ERR_NOMEM) */
    int (*load)(const fc__stream_def *d, const unsigned char *p, size_t size,
                void **eng);
    void (*free)(void *eng);
    /* threads: up to that many threads (1 .. FC_THREADS_MAX) may share the
       work; the result is the same bit for bit for every count */
    int (*push_block)(void *eng, const double *x, size_t count, double *y,
                      size_t threads);
    int (*push1)(void *eng, double x, double *y);    /* one channel */
    int (*preview)(void *eng, const double *x, double *y);
    int (*history)(void *eng, double *h);
    void (*reset)(void *eng);
    int (*reserve)(void *eng, uint64_t n);           /* NULL: nothing to do */
    uint64_t (*count)(const void *eng);
    uint64_t (*remaining)(const void *eng);          /* without a horizon */
    size_t (*nbytes)(const void *eng);
    size_t (*terms)(const void *eng);
    /* the payload after the common header: its size, and the writer into
       a buffer of exactly that size */
    int (*save_size)(const void *eng, size_t *size);
    int (*save)(const void *eng, unsigned char *buf, size_t size);
    /* a time per sample (stream_timed.c; NULL for the other engines):
       count steps of times t[count] (finite, checked by the facade) and
       samples x[count*channels]; refuse_past: FC_HORIZON_REFUSE */
    int (*push_timed)(void *eng, const double *t, const double *x,
                      size_t count, double *y, int refuse_past);
    /* what push_timed of one step (t, x) would return, into y; nothing
       changed (NULL for the other engines) */
    int (*preview_timed)(void *eng, double t, const double *x, double *y,
                         int refuse_past);
    /* 1 once an output past the horizon was produced (NULL: the facade
       counts samples against the horizon) */
    int (*past)(const void *eng);
} fc__stream_ops;
extern const fc__stream_ops fc__exact_ops, fc__compressed_ops, fc__timed_ops;
/* The engine of a mode (FC_MODE_*: the index of the facade's engine
   table), NULL for a number that is not a mode (stream.c). Streams with a
   time per sample are created and loaded through their own checks. */
const fc__stream_ops *fc__stream_engine(int64_t mode);
/*
 * An exact stream (fc__exact_ops) of kind FC__KIND_SHIFTED: kernel c_m =
 * the rule's lag kernel at lag m + 1 (m >= 0), computed on demand like a
 * rule stream's, so that memory and work grow with the samples only. For
 * a rule without correction columns that sums x itself (u = x); else
 * FC_ERR_RULE. Other checks as fc_stream_create in exact mode. Such a
 * stream cannot be saved (fc_stream_save_size and fc_stream_save answer
 * FC_ERR_MODE): its owner (solver.c) keeps the samples and rebuilds it.
 */
int fc__stream_create_shifted(int rule, double order, double step,
                              size_t channels, fc_stream **out);
/* The definition checks of a stream with a time per sample (stream_timed.c;
   fc_stream_create_timed and the loader). */
int fc__timed_params_check(int rule, double order, double minstep,
                           size_t channels, double tol, double horizon);

#endif
