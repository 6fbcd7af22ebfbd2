/*
 * fracconv.hpp -- header-only C++17 wrapper over the public C API in
 * fracconv.h (link the same libfracconv; nothing here is compiled into the
 * library).
 *
 *   - errors: every failing C status becomes a pyfracconv::error (derived
 *     from std::runtime_error) whose what() is "<function>: <fc_strerror>"
 *     and whose status() is the FC_ERR_* code; a refused call changes
 *     nothing, as in C;
 *   - ownership: pyfracconv::stream and pyfracconv::context own their C
 *     object (RAII), are move-only, and free it in the destructor;
 *   - buffers: views are pyfracconv::cview / pyfracconv::view (pointer and
 *     size, constructible from std::vector and std::array); every function
 *     taking one also has an overload that returns a new std::vector.
 *     Sizes are checked before the C call (pyfracconv::error with
 *     FC_ERR_ARG when a buffer is too small).
 *
 * Names: namespace pyfracconv; rules, engines and modes are the C constants
 * (FC_RULE_*, FC_ENGINE_*, FC_MODE_*). Further objects of the C API get a
 * class of the same shape (a handle, a deleter, methods that check).
 */
#ifndef FRACCONV_HPP
#define FRACCONV_HPP

#include <array>
#include <cstddef>
#include <cstdint>
#include <stdexcept>
#include <string>
#include <utility>
#include <vector>

#include "fracconv.h"

namespace pyfracconv {

/* A failed call of the C library: status() is its FC_ERR_* code. */
class error : public std::runtime_error {
public:
    error(int status, const std::string &where)
        : std::runtime_error(where + ": " + fc_strerror(status)), status_(status) {}
    int status() const noexcept { return status_; }
private:
    int status_;
};

namespace detail {
inline void check(int st, const char *where)
{
    if (st != FC_OK) throw error(st, where);
}
inline void need(std::size_t have, std::size_t want, const char *where)
{
    if (have < want) throw error(FC_ERR_ARG, std::string(where) + " (buffer too small)");
}
inline std::size_t mul(std::size_t a, std::size_t b, const char *where)
{
    if (a != 0 && b > static_cast<std::size_t>(-1) / a) throw error(FC_ERR_SIZE, where);
    return a * b;
}
}  // namespace detail

/* Read-only view of doubles: a pointer and a count. */
struct cview {
    const double *data = nullptr;
    std::size_t size = 0;
    cview() = default;
    cview(const double *p, std::size_t n) : data(p), size(n) {}
    cview(const std::vector<double> &v) : data(v.data()), size(v.size()) {}
    template <std::size_t N>
    cview(const std::array<double, N> &a) : data(a.data()), size(N) {}
};

/* Writable view of doubles. */
struct view {
    double *data = nullptr;
    std::size_t size = 0;
    view() = default;
    view(double *p, std::size_t n) : data(p), size(n) {}
    view(std::vector<double> &v) : data(v.data()), size(v.size()) {}
    template <std::size_t N>
    view(std::array<double, N> &a) : data(a.data()), size(N) {}
};

inline int version() { return fc_version(); }
inline std::string version_string() { return fc_version_string(); }

/* ------------------------------------------------------------- weights */

inline void weights(int rule, double order, double step, std::uint64_t start, view out)
{
    detail::check(fc_weights(rule, order, step, start, out.size, out.data), "fc_weights");
}
inline std::vector<double> weights(int rule, double order, double step,
                                   std::size_t count, std::uint64_t start = 0)
{
    std::vector<double> w(count);
    weights(rule, order, step, start, view(w));
    return w;
}
inline void trapezoid_start(double order, double step, std::uint64_t start, view out)
{
    detail::check(fc_trapezoid_start(order, step, start, out.size, out.data),
                  "fc_trapezoid_start");
}

/* ------------------------------------------------------------- context */

/* Batch context (FFT plans and work space kept between calls). */
class context {
public:
    context() { detail::check(fc_context_create(&p_), "fc_context_create"); }
    ~context() { fc_context_free(p_); }
    context(const context &) = delete;
    context &operator=(const context &) = delete;
    context(context &&o) noexcept : p_(std::exchange(o.p_, nullptr)) {}
    context &operator=(context &&o) noexcept
    {
        if (this != &o) { fc_context_free(p_); p_ = std::exchange(o.p_, nullptr); }
        return *this;
    }
    fc_context *get() const noexcept { return p_; }
    std::size_t nbytes() const
    {
        std::size_t n = 0;
        detail::check(fc_context_nbytes(p_, &n), "fc_context_nbytes");
        return n;
    }
    /* Threads of the batch calls given this context (fc_context_set_threads:
       the same bits for every count). */
    void set_threads(std::size_t threads)
    {
        detail::check(fc_context_set_threads(p_, threads), "fc_context_set_threads");
    }
    std::size_t threads() const
    {
        std::size_t n = 0;
        detail::check(fc_context_threads(p_, &n), "fc_context_threads");
        return n;
    }
private:
    fc_context *p_ = nullptr;
};

/* ------------------------------------------------------------- batch */

/* nsig signals of n samples each, row-major (x.size == nsig*n). ctx may be
   nullptr. */
inline void lagged_sum(cview x, std::size_t nsig, cview kernel, view y,
                       int engine = FC_ENGINE_AUTO, context *ctx = nullptr)
{
    if (nsig == 0 || x.size % nsig) throw error(FC_ERR_ARG, "fc_lagged_sum (x.size not a multiple of nsig)");
    detail::need(y.size, x.size, "fc_lagged_sum");
    detail::check(fc_lagged_sum(ctx ? ctx->get() : nullptr, x.data, nsig, x.size / nsig,
                                kernel.data, kernel.size, engine, y.data),
                  "fc_lagged_sum");
}
inline std::vector<double> lagged_sum(cview x, cview kernel, std::size_t nsig = 1,
                                      int engine = FC_ENGINE_AUTO, context *ctx = nullptr)
{
    std::vector<double> y(x.size);
    lagged_sum(x, nsig, kernel, view(y), engine, ctx);
    return y;
}

inline void apply(int rule, double order, double step, cview x, std::size_t nsig, view y,
                  int engine = FC_ENGINE_AUTO, context *ctx = nullptr)
{
    if (nsig == 0 || x.size % nsig) throw error(FC_ERR_ARG, "fc_apply (x.size not a multiple of nsig)");
    detail::need(y.size, x.size, "fc_apply");
    detail::check(fc_apply(ctx ? ctx->get() : nullptr, rule, order, step, x.data, nsig,
                           x.size / nsig, engine, y.data),
                  "fc_apply");
}
inline std::vector<double> apply(int rule, double order, double step, cview x,
                                 std::size_t nsig = 1, int engine = FC_ENGINE_AUTO,
                                 context *ctx = nullptr)
{
    std::vector<double> y(x.size);
    apply(rule, order, step, x, nsig, view(y), engine, ctx);
    return y;
}

/* ------------------------------------------------------------- stream */

class stream {
public:
    /* Exact stream (FC_MODE_EXACT) or, with tol and horizon, compressed. */
    stream(int rule, double order, double step, std::size_t channels = 1,
           int mode = FC_MODE_EXACT, double tol = 0.0, double horizon = 0.0)
    {
        detail::check(fc_stream_create(rule, order, step, channels, mode, tol, horizon, &p_),
                      "fc_stream_create");
    }
    static stream compressed(int rule, double order, double step, double tol,
                             double horizon, std::size_t channels = 1)
    {
        return stream(rule, order, step, channels, FC_MODE_COMPRESSED, tol, horizon);
    }
    static stream from_kernel(cview kernel, std::size_t channels = 1)
    {
        fc_stream *p = nullptr;
        detail::check(fc_stream_create_kernel(kernel.data, kernel.size, channels, &p),
                      "fc_stream_create_kernel");
        return stream(p);
    }
    /* Rebuild from bytes written by save(). */
    static stream load(const std::vector<unsigned char> &blob)
    {
        fc_stream *p = nullptr;
        detail::check(fc_stream_load(blob.data(), blob.size(), &p), "fc_stream_load");
        return stream(p);
    }
    /* Take ownership of a C stream (freed by this object). */
    explicit stream(fc_stream *owned) noexcept : p_(owned) {}

    ~stream() { fc_stream_free(p_); }
    stream(const stream &) = delete;
    stream &operator=(const stream &) = delete;
    stream(stream &&o) noexcept : p_(std::exchange(o.p_, nullptr)) {}
    stream &operator=(stream &&o) noexcept
    {
        if (this != &o) { fc_stream_free(p_); p_ = std::exchange(o.p_, nullptr); }
        return *this;
    }
    fc_stream *get() const noexcept { return p_; }
    /* Give up ownership; the caller frees with fc_stream_free. */
    fc_stream *release() noexcept { return std::exchange(p_, nullptr); }

    /* One time step: x and y hold channels() values. */
    void push(cview x, view y)
    {
        std::size_t C = channels();
        detail::need(x.size, C, "fc_stream_push");
        detail::need(y.size, C, "fc_stream_push");
        detail::check(fc_stream_push(live(), x.data, y.data), "fc_stream_push");
    }
    /* One channel: the next output for sample x. */
    double push(double x)
    {
        double y = 0.0;
        detail::check(fc_stream_push1(live(), x, &y), "fc_stream_push1");
        return y;
    }
    /* x.size / channels() time steps, channel-fastest. */
    void push_block(cview x, view y)
    {
        std::size_t C = channels();
        if (x.size % C) throw error(FC_ERR_ARG, "fc_stream_push_block (x.size not a multiple of channels)");
        detail::need(y.size, x.size, "fc_stream_push_block");
        detail::check(fc_stream_push_block(live(), x.data, x.size / C, y.data),
                      "fc_stream_push_block");
    }
    std::vector<double> push_block(cview x)
    {
        std::vector<double> y(x.size);
        push_block(x, view(y));
        return y;
    }
    void preview(cview x, view y)
    {
        std::size_t C = channels();
        detail::need(x.size, C, "fc_stream_preview");
        detail::need(y.size, C, "fc_stream_preview");
        detail::check(fc_stream_preview(live(), x.data, y.data), "fc_stream_preview");
    }
    std::vector<double> history()
    {
        std::vector<double> h(channels());
        detail::check(fc_stream_history(live(), h.data()), "fc_stream_history");
        return h;
    }
    void reset() { detail::check(fc_stream_reset(live()), "fc_stream_reset"); }
    void reserve(std::uint64_t n) { detail::check(fc_stream_reserve(live(), n), "fc_stream_reserve"); }
    std::vector<unsigned char> save()
    {
        std::size_t size = 0, written = 0;
        detail::check(fc_stream_save_size(live(), &size), "fc_stream_save_size");
        std::vector<unsigned char> buf(size);
        detail::check(fc_stream_save(live(), buf.data(), buf.size(), &written), "fc_stream_save");
        buf.resize(written);
        return buf;
    }
    void set_horizon_policy(int policy)
    {
        detail::check(fc_stream_set_horizon_policy(live(), policy), "fc_stream_set_horizon_policy");
    }

    std::uint64_t count() const { return get_<std::uint64_t>(fc_stream_count, "fc_stream_count"); }
    std::size_t channels() const { return get_<std::size_t>(fc_stream_channels, "fc_stream_channels"); }
    int mode() const { return get_<int>(fc_stream_mode, "fc_stream_mode"); }
    std::size_t nbytes() const { return get_<std::size_t>(fc_stream_nbytes, "fc_stream_nbytes"); }
    std::size_t terms() const { return get_<std::size_t>(fc_stream_terms, "fc_stream_terms"); }
    int horizon_policy() const { return get_<int>(fc_stream_horizon_policy, "fc_stream_horizon_policy"); }
    bool past_horizon() const { return get_<int>(fc_stream_past_horizon, "fc_stream_past_horizon") != 0; }
    std::uint64_t remaining() const { return get_<std::uint64_t>(fc_stream_remaining, "fc_stream_remaining"); }
    int rule() const { return get_<int>(fc_stream_rule, "fc_stream_rule"); }
    double order() const { return get_<double>(fc_stream_order, "fc_stream_order"); }
    double step() const { return get_<double>(fc_stream_step, "fc_stream_step"); }
    double tol() const { return get_<double>(fc_stream_tol, "fc_stream_tol"); }
    double horizon() const { return get_<double>(fc_stream_horizon, "fc_stream_horizon"); }

private:
    fc_stream *live() const
    {
        if (!p_) throw error(FC_ERR_NULL, "pyfracconv::stream (moved from)");
        return p_;
    }
    template <class T>
    T get_(int (*fn)(const fc_stream *, T *), const char *where) const
    {
        T v{};
        detail::check(fn(live(), &v), where);
        return v;
    }
    fc_stream *p_ = nullptr;
};

}  // namespace pyfracconv

#endif /* FRACCONV_HPP */
