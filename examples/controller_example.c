/* The fractional PID controller of fracconv.h from C (tests/test_control_c.py
 * builds and runs it). Checks: the first outputs against the closed-form
 * weights (rectangle rule b_m = (m+1)^a - m^a, Grunwald g_m), save/load bit
 * for bit, a forged blob refused, bad arguments refused with nothing
 * changed. Prints "all controller checks passed" at the end. */
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "fracconv.h"

static int fails = 0;
#define CHECK(c) do { if (!(c)) { printf("FAIL line %d: %s\n", __LINE__, #c); fails++; } } while (0)

int main(void)
{
    fc_controller_params p;
    CHECK(fc_controller_default_params(&p) == FC_OK);
    p.kp = 2.0; p.ki = 0.5; p.kd = 0.25;
    p.integral_order = 0.5; p.derivative_order = 0.5; p.step = 0.1;
    p.integral_rule = FC_RULE_RECTANGLE; p.memory = FC_MODE_EXACT;
    fc_controller *c = NULL;
    CHECK(fc_controller_create(&p, &c) == FC_OK);
    double y[3] = {0.0, 0.2, 0.5}, e[3] = {1.0, 0.8, 0.5}, u;
    double h = 0.1, a = 0.5, w = pow(h, a) / tgamma(a + 1), s = pow(h, -0.5);
    double I[3] = {0, w * e[0], w * ((sqrt(2.0) - 1) * e[0] + e[1])};
    double D[3] = {s * e[0], s * (-0.5 * e[0] + e[1]),
                   s * (-0.125 * e[0] - 0.5 * e[1] + e[2])};
    for (int n = 0; n < 3; n++) {
        CHECK(fc_controller_update(c, 1.0, y[n], &u) == FC_OK);
        double want = 2.0 * e[n] + 0.5 * I[n] + 0.25 * D[n];
        CHECK(fabs(u - want) <= 1e-14 * fabs(want) + 1e-15);
    }
    /* refusals change nothing */
    uint64_t n0, n1;
    fc_controller_count(c, &n0);
    CHECK(fc_controller_update(c, NAN, 0.0, &u) == FC_ERR_NONFINITE);
    CHECK(fc_controller_update(NULL, 0.0, 0.0, &u) == FC_ERR_NULL);
    fc_controller_count(c, &n1);
    CHECK(n0 == n1);
    fc_controller_params bad = p;
    fc_controller *c2 = (fc_controller *)&bad; /* must stay untouched */
    bad.step = -1;
    CHECK(fc_controller_create(&bad, &c2) == FC_ERR_STEP);
    CHECK(c2 == (fc_controller *)&bad);
    bad = p; bad.out_min = 1; bad.out_max = 1;
    CHECK(fc_controller_create(&bad, &c2) == FC_ERR_ARG);
    /* compressed, limited, saved and resumed bit for bit */
    p.memory = FC_MODE_COMPRESSED; p.integral_rule = FC_RULE_TRAPEZOID;
    p.out_min = -1; p.out_max = 1; p.rate_limit = 5; p.filter_time = 0.05;
    fc_controller *d = NULL, *e2 = NULL;
    CHECK(fc_controller_create(&p, &d) == FC_OK);
    for (int k = 0; k < 1000; k++) fc_controller_update(d, 1.0, sin(0.01 * k), &u);
    size_t sz = 0, wr = 0;
    CHECK(fc_controller_save_size(d, &sz) == FC_OK);
    unsigned char *buf = malloc(sz);
    CHECK(buf && fc_controller_save(d, buf, sz, &wr) == FC_OK && wr == sz);
    CHECK(fc_controller_load(buf, sz, &e2) == FC_OK);
    int same = 1;
    for (int k = 0; k < 1000 && e2; k++) {
        double u1, u2;
        fc_controller_update(d, 1.0, cos(0.02 * k), &u1);
        fc_controller_update(e2, 1.0, cos(0.02 * k), &u2);
        if (memcmp(&u1, &u2, sizeof u1) != 0) same = 0;
    }
    CHECK(same);
    buf[20] ^= 1;
    fc_controller *f = NULL;
    CHECK(fc_controller_load(buf, sz, &f) == FC_ERR_FORMAT && f == NULL);
    CHECK(fc_controller_load(buf, 10, &f) == FC_ERR_FORMAT && f == NULL);
    free(buf);
    fc_controller_free(c);
    fc_controller_free(d);
    fc_controller_free(e2);
    fc_controller_free(NULL);
    if (fails) { printf("%d checks failed\n", fails); return 1; }
    printf("all controller checks passed\n");
    return 0;
}
