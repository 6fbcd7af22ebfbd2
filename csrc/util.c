/*
 * util.c -- version, status messages, small shared checks.
 */
#include "internal.h"

/* FC_VERSION_NUMBER is a literal (cffi reads it) that must follow the
   three numbers. */
_Static_assert(FC_VERSION_NUMBER == FC_VERSION_MAJOR * 10000 +
               FC_VERSION_MINOR * 100 + FC_VERSION_PATCH,
               "FC_VERSION_NUMBER does not match FC_VERSION_MAJOR/MINOR/PATCH");

int fc_version(void)
{
    return FC_VERSION_NUMBER;
}

const char *fc_version_string(void)
{
    return FC_VERSION_STRING;
}

const char *fc_strerror(int status)
{
    switch (status) {
    case FC_OK: return "success";
    case FC_ERR_NULL: return "a required pointer argument is NULL";
    case FC_ERR_RULE: return "unknown rule, or a rule not valid for this operation";
    case FC_ERR_ORDER: return "order must be finite and > 0 and within the rule's range";
    case FC_ERR_STEP: return "step must be finite and > 0";
    case FC_ERR_SIZE: return "size is zero where it must not be, or too large";
    case FC_ERR_NONFINITE: return "a sample is NaN or infinite";
    case FC_ERR_NOMEM: return "out of memory";
    case FC_ERR_MODE: return "unknown or unsupported stream mode";
    case FC_ERR_TOL: return "tolerance or horizon out of range";
    case FC_ERR_FORMAT: return "saved state is truncated, corrupted, foreign or of an unknown version";
    case FC_ERR_BUSY: return "the object is being used by another call";
    case FC_ERR_KERNEL: return "kernel is empty or has non-finite values";
    case FC_ERR_ARG: return "invalid argument";
    case FC_ERR_INDEX: return "index range beyond 2^53";
    case FC_ERR_RANGE: return "a result is beyond the range of double precision (samples, step or order too large for this operator)";
    case FC_ERR_HORIZON: return "the push would take the compressed stream past its horizon, beyond which its tolerance is not promised";
    case FC_ERR_IO: return "a file could not be opened, read, written, synced or renamed";
    case FC_ERR_CALLBACK: return "a callback (right-hand side or Jacobian) returned non-zero";
    case FC_ERR_NEWTON: return "Newton's method did not converge within the iteration limit";
    case FC_ERR_NORHS: return "no right-hand side set (fc_solver_set_rhs)";
    default: return "unknown status";
    }
}

int fc__check_finite(const double *x, size_t n)
{
    /* Branch-free accumulation: x - x is 0 for finite x and NaN otherwise. */
    double acc = 0.0;
    size_t i = 0;
    for (; i + 4 <= n; i += 4) {
        acc += (x[i] - x[i]) + (x[i + 1] - x[i + 1])
             + (x[i + 2] - x[i + 2]) + (x[i + 3] - x[i + 3]);
    }
    for (; i < n; i++) acc += x[i] - x[i];
    return acc == 0.0 ? FC_OK : FC_ERR_NONFINITE;
}

double fc__max_abs(const double *v, size_t n)
{
    /* four chains, so that the loop vectorises; the maximum is exact, so
       the order does not matter */
    double m0 = 0.0, m1 = 0.0, m2 = 0.0, m3 = 0.0;
    size_t i = 0;
    for (; i + 4 <= n; i += 4) {
        double t0 = fabs(v[i]), t1 = fabs(v[i + 1]);
        double t2 = fabs(v[i + 2]), t3 = fabs(v[i + 3]);
        m0 = t0 > m0 ? t0 : m0;
        m1 = t1 > m1 ? t1 : m1;
        m2 = t2 > m2 ? t2 : m2;
        m3 = t3 > m3 ? t3 : m3;
    }
    for (; i < n; i++) {
        double t = fabs(v[i]);
        m0 = t > m0 ? t : m0;
    }
    m0 = m1 > m0 ? m1 : m0;
    m2 = m3 > m2 ? m3 : m2;
    return m2 > m0 ? m2 : m0;
}
