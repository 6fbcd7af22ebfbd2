// solver_controller.cpp -- the solver and the controller through the C++17
// wrapper (csrc/fracconv.hpp). tests/test_cpp.py builds it with
// -std=c++17 -Wall -Wextra -Werror, runs it and checks what it prints:
//
//   relax a=A t=T y=HEX   D^a y = -y, y(0) = 1, whose solution is the
//                         Mittag-Leffler function E_a(-t^a) (exp(-t) for
//                         a = 1; Gorenflo, Kilbas, Mainardi and Rogosin,
//                         Mittag-Leffler Functions, Springer 2014): the test
//                         computes it with mpmath;
//   ctl n r y u           the controller's inputs and outputs (hex): the
//                         test feeds the same inputs to pyfracconv.Controller
//                         with the same parameters and compares.
//
// Its own checks (a FAIL line each, exit status 1): a lambda with captured
// state as the right-hand side and a Jacobian, an exception thrown by the
// callback arriving unchanged with the completed steps kept, save/load
// continuing bit for bit, a moved-from handle refused, bad arguments
// refused with the C status.
#include <cmath>
#include <cstdio>
#include <stdexcept>
#include <vector>

#include "fracconv.hpp"

namespace fc = pyfracconv;

static int failures = 0;
static void check(bool ok, const char *what)
{
    if (!ok) {
        failures++;
        std::printf("FAIL: %s\n", what);
    }
}

static void relax(double a, int method, int memory, const char *tag)
{
    const double h = 1.0 / 256;
    std::vector<double> orders{a}, init{1.0};
    fc::solver s(orders, h, 0.0, init, method, memory, 1e-10, 1e4);
    double lambda = 1.0;  // captured by reference: f = -lambda y
    s.set_rhs([&lambda](double, const double *y, double *f) { f[0] = -lambda * y[0]; });
    s.set_jacobian([&lambda](double, const double *, double *J) { J[0] = -lambda; });
    std::vector<double> t(512), y(512);
    std::size_t done = s.advance(512, fc::view(t), fc::view(y));
    check(done == 512 && s.steps() == 512, "advance: 512 steps");
    for (int j = 127; j < 512; j += 128)
        std::printf("relax %s a=%.17g t=%.17g y=%a\n", tag, a, t[j], y[j]);
}

int main()
{
    // --- the solver: D^a y = -y
    relax(1.0, FC_METHOD_PC, FC_MODE_EXACT, "pc");
    relax(0.6, FC_METHOD_PC, FC_MODE_EXACT, "pc");
    relax(0.6, FC_METHOD_PC, FC_MODE_COMPRESSED, "pc-compressed");
    relax(0.6, FC_METHOD_TRAPEZOID, FC_MODE_EXACT, "trapezoid");

    {
        // an exception thrown inside the right-hand side stops the run and
        // arrives here unchanged; the steps before it are kept
        std::vector<double> orders{0.5}, init{1.0};
        fc::solver s(orders, 0.01, 0.0, init);
        int calls = 0;
        s.set_rhs([&calls](double t, const double *y, double *f) {
            if (t > 0.105) throw std::domain_error("stop here");
            calls++;
            f[0] = -y[0];
        });
        bool caught = false;
        try {
            s.advance(100);
        } catch (const std::domain_error &e) {
            caught = std::string(e.what()) == "stop here";
        }
        check(caught, "the callback's exception is rethrown");
        check(s.steps() == 10, "the steps before the exception are kept");
        // an int-returning callable: non-zero stops with FC_ERR_CALLBACK
        s.set_rhs([](double, const double *, double *) { return 1; });
        int st = 0;
        try {
            s.advance(1);
        } catch (const fc::error &e) {
            st = e.status();
        }
        check(st == FC_ERR_CALLBACK, "a non-zero return is FC_ERR_CALLBACK");
    }
    {
        // save / load continues bit for bit; the move keeps the callback
        std::vector<double> orders{0.7, 1.4}, init{1.0, 0.5, 0.0, 0.25};
        fc::solver a(orders, 0.02, 0.0, init);
        auto f = [](double t, const double *y, double *o) {
            o[0] = -y[0] + std::sin(t);
            o[1] = -0.5 * y[1] + y[0];
        };
        a.set_rhs(f);
        a.advance(40);
        fc::solver b = fc::solver::load(a.save());
        b.set_rhs(f);
        fc::solver moved = std::move(a);
        std::vector<double> ya = moved.advance_states(30), yb = b.advance_states(30);
        check(ya == yb, "save/load continues bit for bit");
        int st = 0;
        try {
            a.advance(1);
        } catch (const fc::error &e) {
            st = e.status();
        }
        check(st == FC_ERR_NULL, "a moved-from solver refuses");
        try {
            fc::solver bad(std::vector<double>{2.5}, 0.01, 0.0, std::vector<double>{1.0, 0.0});
            check(false, "order 2.5 refused");
        } catch (const fc::error &e) {
            check(e.status() == FC_ERR_ORDER, "order 2.5: FC_ERR_ORDER");
            std::printf("refused: %s\n", e.what());
        }
    }

    // --- the controller: limits, rate limit, setpoint weights, filter,
    // conditional integration, manual and back
    fc_controller_params p = fc::controller_defaults();
    p.kp = 2.0; p.ki = 1.5; p.kd = 0.3;
    p.integral_order = 0.7; p.derivative_order = 0.4;
    p.step = 0.01;
    p.out_min = -1.0; p.out_max = 1.2;
    p.rate_limit = 40.0;
    p.setpoint_weight_p = 0.8; p.setpoint_weight_d = 0.0;
    p.filter_time = 0.05;
    fc::controller c(p);
    std::vector<unsigned char> blob;
    std::vector<double> rest_r, rest_y, rest_u;
    for (int n = 0; n < 600; n++) {
        double r = n < 10 ? 0.0 : (n < 350 ? 1.0 : -0.5);
        double y = 0.4 * std::sin(0.031 * n) + 0.002 * n;
        if (n == 200) c.set_manual(0.25);
        if (n == 260) c.set_auto();
        if (n == 400) blob = c.save();
        double u = c.update(r, y);
        if (n >= 400) { rest_r.push_back(r); rest_y.push_back(y); rest_u.push_back(u); }
        std::printf("ctl %d %a %a %a\n", n, r, y, u);
    }
    fc::controller d = fc::controller::load(blob);
    check(d.update_block(rest_r, rest_y) == rest_u, "controller save/load bit for bit");
    check(c.count() == 600 && !c.manual(), "controller count and mode");
    try {
        fc_controller_params q = p;
        q.out_min = 2.0;  // above out_max
        fc::controller bad(q);
        check(false, "out_min > out_max refused");
    } catch (const fc::error &e) {
        check(e.status() == FC_ERR_ARG, "out_min > out_max: FC_ERR_ARG");
    }
    if (failures == 0) std::printf("all solver and controller checks passed\n");
    return failures ? 1 : 0;
}
