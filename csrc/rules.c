/*
 * rules.c -- every rule written as a lagged sum (see internal.h):
 *     y_n = sum_{k<=n} c_{n-k} u_k + corr_n * x_0,
 * in unit form (without the step factor, for the batch engines, which
 * apply the factor as mantissa and power of two) and scaled (for streams).
 */
#include "internal.h"

#include <float.h>
#include <string.h>

int fc__check_rule(int rule, double order, double step)
{
    if (rule < FC_RULE_RECTANGLE || rule > FC_RULE_L1) return FC_ERR_RULE;
    if (!isfinite(order) || order <= 0.0 || order > 10.0) return FC_ERR_ORDER;
    if (rule == FC_RULE_L1 && order >= 1.0) return FC_ERR_ORDER;
    if (!isfinite(step) || step <= 0.0) return FC_ERR_STEP;
    return FC_OK;
}

void fc__unit_lag_kernel(int rule, double order, uint64_t start,
                         size_t count, double *c)
{
    if (count == 0) return;
    if (rule != FC_RULE_RECTANGLE) {
        fc__unit_weights(rule, order, start, count, c);
        return;
    }
    /* rectangle: c_0 = 0, c_m = b_{m-1} */
    if (start == 0) {
        c[0] = 0.0;
        fc__unit_weights(rule, order, 0, count - 1, c + 1);
        return;
    }
    fc__unit_weights(rule, order, start - 1, count, c);
}

void fc__unit_kernel(int rule, double order, double step, uint64_t start,
                     size_t count, double *c, long double *M, long *E)
{
    fc__rule_scale(rule, order, step, M, E);
    fc__unit_lag_kernel(rule, order, start, count, c);
}

void fc__unit_x0_correction(int rule, double order, uint64_t start,
                            size_t count, double *corr)
{
    if (count == 0) return;
    if (rule != FC_RULE_TRAPEZOID) {
        memset(corr, 0, count * sizeof *corr);
        return;
    }
    /* corr_n = start(n) - weights(n); A_0 = 0 gives corr_0 = -c_0, y_0 = 0. */
    fc__unit_weights(FC__START_WEIGHTS, order, start, count, corr);
    double w[1024];
    for (size_t j = 0; j < count; j += 1024) {
        size_t m = count - j < 1024 ? count - j : 1024;
        fc__unit_weights(rule, order, start + j, m, w);
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
    if (kind == FC_RULE_TRAPEZOID) lb += 5.0; /* corr: start - weights */
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

int fc__x0_correction(int rule, double order, double step, uint64_t start,
                      size_t count, double *corr)
{
    if (count == 0) return FC_OK;
    fc__unit_x0_correction(rule, order, start, count, corr);
    if (rule != FC_RULE_TRAPEZOID) return FC_OK;
    return scale_strict(rule, order, step, start + count, count, corr);
}
