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
   a sum of exponentials (soe construction, compressed.c). */
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
   rule's compressed range; compressed.c explains it). */
#define FC__CS_MIN_ORDER 1e-280
/* A starting-correction column: y_n += corr_n x_column with
   corr_n = S_n - c_n, S the start weights (same scale as the rule). The
   engines implement column 0 (x_0) only; fc__rule_x0 finds it. */
typedef struct {
    uint64_t column;
    const fc__wseq *start;
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
} fc__rule_desc;

/* The descriptor of a rule, NULL for a number that is not a rule. */
const fc__rule_desc *fc__rule(int rule);
/* The x_0 correction column of a rule, NULL if it has none. */
const fc__corr_col *fc__rule_x0(const fc__rule_desc *d);
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
 *     y_n = sum_{k<=n} c_{n-k} u_k + corr_n * x_0
 * where u = x, except for L1, where u_0 = 0 and u_k = x_k - x_{k-1};
 * corr_n is zero except for the trapezoid rule.
 *   rectangle: c_0 = 0, c_m = weights(m-1) (m >= 1)
 *   trapezoid: c_m = weights(m); corr_0 = -c_0 (so y_0 = 0),
 *              corr_n = start(n) - weights(n) for n >= 1
 *   grunwald:  c_m = weights(m)
 *   l1:        c_m = weights(m)
 * The functions below fill c (or corr) for the indices start..start+count-1
 * and assume fc__check_rule passed. They return FC_ERR_RANGE (the contents
 * of c or corr then unspecified) when a value is out of the normal double
 * range: one that overflows, or a non-zero one that would be subnormal or
 * zero (a relative accuracy cannot hold there), so that a stream never
 * runs with an infinite kernel or one flushed to zero.
 */
int fc__lag_kernel(int rule, double order, double step, uint64_t start,
                   size_t count, double *c);
int fc__x0_correction(int rule, double order, double step, uint64_t start,
                      size_t count, double *corr);
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
 * the unit x_0 correction, for indices start .. start+count-1; the factor
 * of both is fc__rule_scale(rule, ...).
 */
void fc__unit_lag_kernel(int rule, double order, uint64_t start,
                         size_t count, double *c);
/* Both at once for the engines: the unit kernel c and its scale M 2^E. */
void fc__unit_kernel(int rule, double order, double step, uint64_t start,
                     size_t count, double *c, long double *M, long *E);
void fc__unit_x0_correction(int rule, double order, uint64_t start,
                            size_t count, double *corr);
static inline int fc__rule_uses_differences(int rule)
{
    const fc__rule_desc *d = fc__rule(rule);
    return d != NULL && d->uses_differences;
}
static inline int fc__rule_has_x0(int rule)
{
    const fc__rule_desc *d = fc__rule(rule);
    return d != NULL && fc__rule_x0(d) != NULL;
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
 * Compressed stream engine (compressed.c); the public fc_stream_* functions
 * in stream.c validate the handle and the busy flag and dispatch here when
 * the stream's mode is FC_MODE_COMPRESSED. Arguments are as for the public
 * functions; the caller has checked pointers are non-NULL and samples are
 * finite.
 */
typedef struct fc_cstream fc_cstream;
int fc__cs_create(int rule, double order, double step, size_t channels,
                  double tol, double horizon, fc_cstream **out);
void fc__cs_free(fc_cstream *cs);
int fc__cs_push_block(fc_cstream *cs, const double *x, size_t count,
                      double *y);
int fc__cs_preview(const fc_cstream *cs, const double *x, double *y);
int fc__cs_history(const fc_cstream *cs, double *h);
void fc__cs_reset(fc_cstream *cs);
uint64_t fc__cs_count(const fc_cstream *cs);
size_t fc__cs_nbytes(const fc_cstream *cs);
size_t fc__cs_terms(const fc_cstream *cs);
/* Payload after the common header written by stream.c: the size, the
   writer, and the reader (which validates everything it reads and returns
   FC_ERR_FORMAT on any inconsistency). */
size_t fc__cs_save_size(const fc_cstream *cs);
int fc__cs_save(const fc_cstream *cs, unsigned char *buf, size_t size);
int fc__cs_load(const unsigned char *buf, size_t size, fc_cstream **out);
/* The defining parameters of a compressed stream (for the loader's
   cross-check of the outer header). */
void fc__cs_params(const fc_cstream *cs, int *rule, double *order,
                   double *step, size_t *channels, double *tol,
                   double *horizon);

#endif
