/*
 * rules.c -- every rule written as a lagged sum (see internal.h):
 *     y_n = sum_{k<=n} c_{n-k} u_k + corr_n * x_0.
 */
#include "internal.h"

#include <string.h>

int fc__check_rule(int rule, double order, double step)
{
    if (rule < FC_RULE_RECTANGLE || rule > FC_RULE_L1) return FC_ERR_RULE;
    if (!isfinite(order) || order <= 0.0 || order > 10.0) return FC_ERR_ORDER;
    if (rule == FC_RULE_L1 && order >= 1.0) return FC_ERR_ORDER;
    if (!isfinite(step) || step <= 0.0) return FC_ERR_STEP;
    return FC_OK;
}

int fc__lag_kernel(int rule, double order, double step, uint64_t start,
                   size_t count, double *c)
{
    if (count == 0) return FC_OK;
    if (rule != FC_RULE_RECTANGLE)
        return fc_weights(rule, order, step, start, count, c);
    /* rectangle: c_0 = 0, c_m = b_{m-1} */
    if (start == 0) {
        c[0] = 0.0;
        return count > 1 ? fc_weights(rule, order, step, 0, count - 1, c + 1)
                         : FC_OK;
    }
    return fc_weights(rule, order, step, start - 1, count, c);
}

int fc__x0_correction(int rule, double order, double step, uint64_t start,
                      size_t count, double *corr)
{
    if (count == 0) return FC_OK;
    if (rule != FC_RULE_TRAPEZOID) {
        memset(corr, 0, count * sizeof *corr);
        return FC_OK;
    }
    /* corr_n = start(n) - weights(n); A_0 = 0 gives corr_0 = -c_0, y_0 = 0. */
    int st = fc_trapezoid_start(order, step, start, count, corr);
    if (st != FC_OK) return st;
    double w[1024];
    for (size_t j = 0; j < count; j += 1024) {
        size_t m = count - j < 1024 ? count - j : 1024;
        st = fc_weights(rule, order, step, start + j, m, w);
        if (st != FC_OK) return st;
        for (size_t i = 0; i < m; i++) corr[j + i] -= w[i];
    }
    return FC_OK;
}
