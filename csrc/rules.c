/*
 * rules.c -- every rule written as a lagged sum (see internal.h):
 *     y_n = sum_{k<=n} c_{n-k} u_k + sum_{columns j <= n} corr^j_n x_j,
 * in unit form (without the step factor, for the batch engines, which
 * apply the factor as mantissa and power of two) and scaled (for streams).
 */
#include "internal.h"

#include <float.h>

/*
 * The rule table. Rule numbers are part of the save format and never
 * change; a new rule gets the next number.
 *   batch and exact: 0 < a <= 10 (L1: 0 < a < 1);
 *   compressed: the construction needs a completely monotone kernel and
 *   a < 1 (for the rectangle and trapezoid rules also 1 <= a < 2, on the
 *   running sum),
 *   and a >= 1e-280 (FC__CS_MIN_ORDER, soe_build.c: below it the kernel's
 *   far lags are subnormal).
 */
/* A row's column list: its count and the list (at most FC__CORR_MAX). */
#define COLS(list) sizeof list / sizeof list[0], list
#define NO_COLS 0, NULL
static const fc__corr_col trapezoid_corr[] = {
    {0, &fc__seq_trapezoid_start, 1}};
_Static_assert(sizeof trapezoid_corr / sizeof trapezoid_corr[0] <= FC__CORR_MAX,
               "at most FC__CORR_MAX columns");
#ifdef FC_TEST_RULES
/* Test builds only (tests/test_rule_columns.py compiles the library with
   -DFC_TEST_RULES; never in a shipped library, whose rule count is the
   public table's): the trapezoid rule with a second column, j = 1, whose
   start weights are the trapezoid weights themselves (S_n = a_n: x_1
   weighs a_n instead of a_{n-1}). Not a published rule: it exercises the
   engines' general column path against a direct sum. */
static const fc__corr_col test_two_corr[] = {
    {0, &fc__seq_trapezoid_start, 1}, {1, &fc__seq_trapezoid, 0}};
_Static_assert(sizeof test_two_corr / sizeof test_two_corr[0] <= FC__CORR_MAX,
               "at most FC__CORR_MAX columns");
#endif

#define R_ALL {0.0, 10.0, 0, 1}
#define R_BELOW1 {0.0, 1.0, 0, 0}
#define R_CS1 {FC__CS_MIN_ORDER, 1.0, 1, 0}
#define R_CS2 {FC__CS_MIN_ORDER, 2.0, 1, 0}

/* id, name, derivative, ranges (batch, exact, compressed), compressed
   cumulative from, lag shift, uses differences, scale, weights, density,
   correction columns (COLS(list) or NO_COLS), y_0 = 0 exactly */
static const fc__rule_desc rule_table[] = {
    {FC_RULE_RECTANGLE, "rectangle", 0, R_ALL, R_ALL, R_CS2, 1.0,
     1, 0, FC__SCALE_HA_G1, &fc__seq_rectangle, FC__DENS_RECT, NO_COLS, 0},
    {FC_RULE_TRAPEZOID, "trapezoid", 0, R_ALL, R_ALL, R_CS2, 1.0,
     0, 0, FC__SCALE_HA_G2, &fc__seq_trapezoid, FC__DENS_TRAP,
     COLS(trapezoid_corr), 1},
    {FC_RULE_GRUNWALD, "grunwald", 1, R_ALL, R_ALL, R_CS1, INFINITY,
     0, 0, FC__SCALE_HNA, &fc__seq_grunwald, FC__DENS_GRUN, NO_COLS, 0},
    {FC_RULE_L1, "l1", 1, R_BELOW1, R_BELOW1, R_CS1, INFINITY,
     0, 1, FC__SCALE_HNA_G2MA, &fc__seq_l1, FC__DENS_L1, NO_COLS, 0},
#ifdef FC_TEST_RULES
    {FC_RULE_L1 + 1, "test_two_columns", 0, R_ALL, R_ALL, R_CS2, 1.0,
     0, 0, FC__SCALE_HA_G2, &fc__seq_trapezoid, FC__DENS_TRAP,
     COLS(test_two_corr), 1},
#endif
};
#define NRULES (sizeof rule_table / sizeof rule_table[0])

const fc__rule_desc *fc__rule(int rule)
{
    if (rule < 0 || (size_t)rule >= NRULES) return NULL;
    return &rule_table[rule]; /* rows are in FC_RULE_* order (test_structure) */
}

const fc__corr_col *fc__rule_x0(const fc__rule_desc *d)
{
    for (size_t i = 0; i < d->ncorr; i++)
        if (d->corr[i].column == 0) return &d->corr[i];
    return NULL;
}

const fc__corr_col *fc__rule_soe_col(const fc__rule_desc *d, size_t *k)
{
    for (size_t i = 0; i < d->ncorr; i++)
        if (d->corr[i].soe) {
            if (k) *k = i;
            return &d->corr[i];
        }
    return NULL;
}

int fc__in_range(const fc__range *r, double a)
{
    if (!isfinite(a)) return 0;
    if (r->lo_incl ? !(a >= r->lo) : !(a > r->lo)) return 0;
    if (r->hi_incl ? !(a <= r->hi) : !(a < r->hi)) return 0;
    return 1;
}

const fc__wseq *fc__weight_seq(int kind)
{
    if (kind == FC__START_WEIGHTS)
        return fc__rule_x0(fc__rule(FC_RULE_TRAPEZOID))->start;
    return fc__rule(kind)->weights;
}

int fc__weight_scale(int kind)
{
    return fc__rule(kind == FC__START_WEIGHTS ? FC_RULE_TRAPEZOID : kind)->scale;
}

int fc__check_rule(int rule, double order, double step)
{
    const fc__rule_desc *d = fc__rule(rule);
    if (d == NULL) return FC_ERR_RULE;
    if (!fc__in_range(&d->batch, order)) return FC_ERR_ORDER;
    if (!isfinite(step) || step <= 0.0) return FC_ERR_STEP;
    return FC_OK;
}

int fc_rule_count(int *count)
{
    if (count == NULL) return FC_ERR_NULL;
    *count = (int)NRULES;
    return FC_OK;
}

int fc_rule_info(int rule, const char **name, int *is_derivative)
{
    const fc__rule_desc *d = fc__rule(rule);
    if (d == NULL) return FC_ERR_RULE;
    if (name == NULL || is_derivative == NULL) return FC_ERR_NULL;
    *name = d->name;
    *is_derivative = d->is_derivative;
    return FC_OK;
}

int fc_rule_order_range(int rule, int mode, double *lo, int *lo_inclusive,
                        double *hi, int *hi_inclusive)
{
    const fc__rule_desc *d = fc__rule(rule);
    if (d == NULL) return FC_ERR_RULE;
    const fc__stream_ops *ops = fc__stream_engine(mode);
    if (ops == NULL) return FC_ERR_MODE;
    if (!lo || !lo_inclusive || !hi || !hi_inclusive) return FC_ERR_NULL;
    const fc__range *r = ops->order_range(d);
    *lo = r->lo;
    *lo_inclusive = r->lo_incl;
    *hi = r->hi;
    *hi_inclusive = r->hi_incl;
    return FC_OK;
}

void fc__unit_lag_kernel(int rule, double order, uint64_t start,
                         size_t count, double *c)
{
    if (count == 0) return;
    /* c_m = w_{m - shift}, zero for m < shift (rectangle: c_0 = 0,
       c_m = b_{m-1}) */
    uint64_t sh = fc__rule(rule)->lag_shift;
    size_t lead = 0;
    while (lead < count && start + lead < sh) c[lead++] = 0.0;
    if (lead < count)
        fc__unit_weights(rule, order, start + lead - sh, count - lead,
                         c + lead);
}

void fc__unit_kernel(int rule, double order, double step, uint64_t start,
                     size_t count, double *c, long double *M, long *E)
{
    fc__rule_scale(rule, order, step, M, E);
    fc__unit_lag_kernel(rule, order, start, count, c);
}

void fc__unit_correction(int rule, size_t k, double order, uint64_t start,
                         size_t count, double *corr)
{
    if (count == 0) return;
    const fc__corr_col *col = &fc__rule(rule)->corr[k];
    /* corr_n = S_n - c_{n-j} for n >= j, 0 before (trapezoid, j = 0:
       A_0 = 0 gives corr_0 = -c_0, y_0 = 0). */
    uint64_t j0 = col->column;
    size_t lead = 0;
    while (lead < count && start + lead < j0) corr[lead++] = 0.0;
    if (lead == count) return;
    uint64_t s0 = start + lead;
    col->start->fill(order, s0, count - lead, 1.0, corr + lead);
    double w[1024];
    for (size_t j = lead; j < count; j += 1024) {
        size_t m = count - j < 1024 ? count - j : 1024;
        fc__unit_lag_kernel(rule, order, start + j - j0, m, w);
        for (size_t i = 0; i < m; i++) corr[j + i] -= w[i];
    }
}

/*
 * v[i] *= M 2^E for i < count, FC_ERR_RANGE if a value overflows or a
 * non-zero one falls below DBL_MIN. One multiplication when the factor is
 * a normal double and the unit values cannot overflow with it (kind and
 * end give the bound), else fc__scale_value per value.
 */
static int scale_strict(int kind, double a, double h, uint64_t end,
                        size_t count, double *v)
{
    long double M;
    long E;
    fc__rule_scale(kind, a, h, &M, &E);
    double lb = fc__unit_log2_bound(kind, a, end);
    if (fc__rule_ncorr(kind)) lb += 5.0; /* corr: start - weights */
    int bad = 0;
    if (E > -958 && (double)E + lb < 1022.0) {
        double s = (double)ldexpl(M, (int)E);
        for (size_t i = 0; i < count; i++) {
            double w = v[i], r = w * s;
            bad |= (w != 0.0) & (fabs(r) < DBL_MIN);
            v[i] = r;
        }
    } else {
        for (size_t i = 0; i < count; i++) {
            double w = v[i], r = fc__scale_value(w, M, E);
            bad |= (!isfinite(r)) | ((w != 0.0) & (fabs(r) < DBL_MIN));
            v[i] = r;
        }
    }
    return bad ? FC_ERR_RANGE : FC_OK;
}

int fc__lag_kernel(int rule, double order, double step, uint64_t start,
                   size_t count, double *c)
{
    if (count == 0) return FC_OK;
    fc__unit_lag_kernel(rule, order, start, count, c);
    return scale_strict(rule, order, step, start + count, count, c);
}

int fc__correction(int rule, size_t k, double order, double step,
                   uint64_t start, size_t count, double *corr)
{
    if (count == 0) return FC_OK;
    fc__unit_correction(rule, k, order, start, count, corr);
    return scale_strict(rule, order, step, start + count, count, corr);
}
