// example.cpp -- calling libfracconv from C++17 through fracconv.hpp.
//
// The product rectangle rule is exact on constants: I^a 1 at t_n = n h is
// h^a n^a / Gamma(a+1) (common practice; the closed form I^a 1 = t^a /
// Gamma(a+1) is in Podlubny, Fractional Differential Equations, 1999).
// Checks: the batch call against that closed form; the wrapper against the
// C API called directly (bit for bit: the wrapper adds no arithmetic); an
// exact stream against the batch call; a compressed stream against its
// stated tolerance; save/load continuing bit for bit; a refused call as a
// pyfracconv::error carrying the status; move-only ownership.
//
// Build: make cpp-example   (or: g++ -std=c++17 -Icsrc examples/example.cpp
//        cbuild/libfracconv.a -lm)
// Exit status 0 when every check passes.
#include <cmath>
#include <cstdio>
#include <cstring>
#include <type_traits>
#include <vector>

#include "fracconv.hpp"

namespace fc = pyfracconv;

static_assert(!std::is_copy_constructible<fc::stream>::value, "stream is move-only");
static_assert(std::is_nothrow_move_constructible<fc::stream>::value, "stream moves");

static int failures = 0;
static void expect(bool ok, const char *what)
{
    std::printf("%s: %s\n", ok ? "ok  " : "FAIL", what);
    if (!ok) failures++;
}

int main()
{
    const double a = 0.6, h = 0.01;
    const std::size_t N = 500;
    std::printf("libfracconv %s (header %s)\n", fc::version_string().c_str(), FC_VERSION_STRING);
    expect(fc::version() == FC_VERSION_NUMBER, "library version equals the header's");

    // Batch: rectangle rule on x = 1 against the closed form.
    std::vector<double> ones(N, 1.0);
    std::vector<double> y = fc::apply(FC_RULE_RECTANGLE, a, h, ones);
    double maxrel = 0.0;
    for (std::size_t n = 1; n < N; n++) {
        double exact = std::pow(h * n, a) / std::tgamma(a + 1.0);
        maxrel = std::fmax(maxrel, std::fabs(y[n] - exact) / exact);
    }
    std::printf("rectangle I^%.1f 1 on %zu points: max rel err %.2e\n", a, N, maxrel);
    expect(y[0] == 0.0 && maxrel < 1e-13, "batch equals h^a n^a / Gamma(a+1)");

    // The wrapper against the C API on the same arguments.
    std::vector<double> x(N), yc(N);
    for (std::size_t n = 0; n < N; n++) x[n] = std::sin(0.05 * n) + 0.3;
    fc::context ctx;
    std::vector<double> yw = fc::apply(FC_RULE_GRUNWALD, a, h, x, 1, FC_ENGINE_AUTO, &ctx);
    int st = fc_apply(nullptr, FC_RULE_GRUNWALD, a, h, x.data(), 1, N, FC_ENGINE_AUTO, yc.data());
    expect(st == FC_OK && std::memcmp(yw.data(), yc.data(), N * sizeof(double)) == 0,
           "fc::apply equals fc_apply bit for bit");
    std::vector<double> w = fc::weights(FC_RULE_GRUNWALD, a, h, 8), wc(8);
    st = fc_weights(FC_RULE_GRUNWALD, a, h, 0, 8, wc.data());
    expect(st == FC_OK && w == wc, "fc::weights equals fc_weights");
    std::vector<double> yl = fc::lagged_sum(x, w);
    std::vector<double> ylc(N);
    st = fc_lagged_sum(nullptr, x.data(), 1, N, wc.data(), 8, FC_ENGINE_AUTO, ylc.data());
    expect(st == FC_OK && yl == ylc, "fc::lagged_sum equals fc_lagged_sum");

    // Exact stream, one sample at a time, against the batch call.
    fc::stream s(FC_RULE_GRUNWALD, a, h);
    double maxd = 0.0;
    for (std::size_t n = 0; n < N; n++) maxd = std::fmax(maxd, std::fabs(s.push(x[n]) - yc[n]));
    std::printf("exact stream vs batch: max abs diff %.2e\n", maxd);
    expect(maxd <= 1e-12 && s.count() == N, "exact stream equals the batch call to rounding");

    // Compressed stream in blocks, against the batch call and its tolerance.
    fc::stream cs = fc::stream::compressed(FC_RULE_RECTANGLE, a, h, 1e-10, 1e6);
    std::vector<double> yb = cs.push_block(fc::cview(x.data(), 200));
    std::vector<unsigned char> blob = cs.save();
    std::vector<double> rest(x.begin() + 200, x.end());
    std::vector<double> y1 = cs.push_block(rest);
    fc::stream loaded = fc::stream::load(blob);
    std::vector<double> y2 = loaded.push_block(rest);
    expect(y1 == y2, "a loaded stream continues bit for bit");
    std::vector<double> yr = fc::apply(FC_RULE_RECTANGLE, a, h, x);
    double worst = 0.0;
    std::vector<double> absx(N), bound;
    for (std::size_t n = 0; n < N; n++) absx[n] = std::fabs(x[n]);
    bound = fc::apply(FC_RULE_RECTANGLE, a, h, absx);  // sum_k |c_{n-k} x_k|
    for (std::size_t n = 0; n < N; n++) {
        double v = n < 200 ? yb[n] : y1[n - 200];
        if (bound[n] > 0) worst = std::fmax(worst, std::fabs(v - yr[n]) / bound[n]);
    }
    std::printf("compressed (tol 1e-10, %zu terms): max err / bound %.2e\n", cs.terms(), worst);
    expect(worst <= 1e-10 + 64 * 2.220446049250313e-16,
           "compressed stream within its stated tolerance");

    // A refused call: pyfracconv::error with the status and the message.
    bool caught = false;
    try {
        fc::stream bad(FC_RULE_L1, 1.5, h);
    } catch (const fc::error &e) {
        caught = e.status() == FC_ERR_ORDER &&
                 std::strstr(e.what(), fc_strerror(FC_ERR_ORDER)) != nullptr;
        std::printf("order 1.5 for L1 refused: %s\n", e.what());
    }
    expect(caught, "a bad order throws pyfracconv::error with FC_ERR_ORDER");
    caught = false;
    try {
        double big[2] = {1.0, 2.0}, out[1];
        s.push(fc::cview(big, 2), fc::view(out, 0));
    } catch (const fc::error &e) {
        caught = e.status() == FC_ERR_ARG;
    }
    expect(caught && s.count() == N, "a too-small buffer is refused before the C call");

    // Ownership moves; the moved-from object refuses use.
    fc::stream moved = std::move(s);
    caught = false;
    try {
        (void)s.count();
    } catch (const fc::error &e) {
        caught = e.status() == FC_ERR_NULL;
    }
    expect(caught && moved.count() == N, "a moved-from stream refuses, the new owner works");

    std::printf(failures ? "FAILED\n" : "all checks passed\n");
    return failures ? 1 : 0;
}
