/*
 * fracconv.hpp -- header-only C++17 wrapper over the public C API in
 * fracconv.h (link the same libfracconv; nothing here is compiled into the
 * library).
 *
 *   - errors: every failing C status becomes a pyfracconv::error (derived
 *     from std::runtime_error) whose what() is "<function>: <fc_strerror>"
 *     and whose status() is the FC_ERR_* code; a refused call changes
 *     nothing, as in C;
 *   - ownership: pyfracconv::stream, timed_stream (a time per sample),
 *     context, solver and controller own their C object (RAII), are
 *     move-only, and free it in the destructor;
 *   - callbacks: pyfracconv::solver takes the right-hand side (and the
 *     Jacobian) as any callable, f(t, y, f) returning void, or int/bool
 *     (non-zero stops the run); it is kept in a heap cell whose address is
 *     the C user pointer, so moving the solver keeps it valid. An
 *     exception thrown by a callback stops the run (FC_ERR_CALLBACK in C)
 *     and is rethrown from advance() unchanged;
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
#include <exception>
#include <functional>
#include <memory>
#include <type_traits>
#include <cstdint>
#include <stdexcept>
#include <string>
#include <utility>
#include <vector>

#include "fracconv.h"

namespace pyfracconv {

/* A failed call of the C library: status() is its FC_ERR_* code; what()
   carries fc_solver_strerror's message (fc_strerror's for every code but
   the solver's own). */
class error : public std::runtime_error {
public:
    error(int status, const std::string &where)
        : std::runtime_error(where + ": " + fc_solver_strerror(status)), status_(status) {}
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
    /* Rebuild from a file written by save_file (at most max_size bytes
       are read; the bytes are untrusted input, as for load). */
    static stream load_file(const std::string &path,
                            std::size_t max_size = std::size_t(1) << 30)
    {
        fc_stream *p = nullptr;
        detail::check(fc_stream_load_file(path.c_str(), max_size, &p), "fc_stream_load_file");
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
    /* save() written to the file path atomically (fc_stream_save_file:
       temporary file, fsync, rename, directory sync); error status
       FC_ERR_IO (errno says why) leaves the old file and the stream as
       they were. */
    void save_file(const std::string &path)
    {
        detail::check(fc_stream_save_file(live(), path.c_str()), "fc_stream_save_file");
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

/* ------------------------------------------------------------- grid */

/* A rule on a strictly increasing grid of times t (fc_grid_apply, sums of
   exponentials): nsig signals of t.size samples each, row-major
   (x.size == nsig * t.size), y at least x.size; tol in [1e-15, 1e-2].
   Returns the number of exponential terms used. A refusal writes nothing
   to y. */
inline std::size_t grid_apply(int rule, double order, cview t, cview x, std::size_t nsig,
                              view y, double tol)
{
    if (nsig == 0 || x.size != detail::mul(nsig, t.size, "fc_grid_apply"))
        throw error(FC_ERR_ARG, "fc_grid_apply (x.size = " + std::to_string(x.size) +
                                    ", nsig = " + std::to_string(nsig) + ", t.size = " +
                                    std::to_string(t.size) + ": x.size must be nsig * t.size, nsig >= 1)");
    detail::need(y.size, x.size, "fc_grid_apply");
    std::size_t terms = 0;
    detail::check(fc_grid_apply(rule, order, t.data, x.data, nsig, t.size, tol, y.data, &terms),
                  "fc_grid_apply");
    return terms;
}
/* The same into a new vector; tol 1e-12 by default (the default of
   integral/derivative(..., t=) in Python). */
inline std::vector<double> grid_apply(int rule, double order, cview t, cview x,
                                      double tol = 1e-12, std::size_t nsig = 1)
{
    std::vector<double> y(x.size);
    grid_apply(rule, order, t, x, nsig, view(y), tol);
    return y;
}

/* ------------------------------------------------------------- timed stream */

/* A compressed stream with a time per sample (fc_stream_create_timed,
   fc_stream_push_timed): pushes take (time, sample) pairs; min_step is the
   smallest step a push may make and horizon the time span the promise of
   fracconv.h covers. Owns its C stream (RAII, move-only). A refused push
   (time not after the previous one by min_step, not finite, past the
   horizon under FC_HORIZON_REFUSE) throws and changes nothing. */
class timed_stream {
public:
    timed_stream(int rule, double order, double min_step, double tol, double horizon,
                 std::size_t channels = 1)
    {
        detail::check(fc_stream_create_timed(rule, order, min_step, channels, tol, horizon, &p_),
                      "fc_stream_create_timed");
    }
    /* Rebuild from bytes written by save(); bytes of a stream without
       times are refused (FC_ERR_ARG). */
    static timed_stream load(const std::vector<unsigned char> &blob)
    {
        fc_stream *p = nullptr;
        detail::check(fc_stream_load(blob.data(), blob.size(), &p), "fc_stream_load");
        return adopt(p, "fc_stream_load");
    }
    /* Rebuild from a file written by save_file (at most max_size bytes are
       read; untrusted input, as for load). */
    static timed_stream load_file(const std::string &path,
                                  std::size_t max_size = std::size_t(1) << 30)
    {
        fc_stream *p = nullptr;
        detail::check(fc_stream_load_file(path.c_str(), max_size, &p), "fc_stream_load_file");
        return adopt(p, "fc_stream_load_file");
    }
    ~timed_stream() { fc_stream_free(p_); }
    timed_stream(const timed_stream &) = delete;
    timed_stream &operator=(const timed_stream &) = delete;
    timed_stream(timed_stream &&o) noexcept : p_(std::exchange(o.p_, nullptr)) {}
    timed_stream &operator=(timed_stream &&o) noexcept
    {
        if (this != &o) { fc_stream_free(p_); p_ = std::exchange(o.p_, nullptr); }
        return *this;
    }
    fc_stream *get() const noexcept { return p_; }
    /* Give up ownership; the caller frees with fc_stream_free. */
    fc_stream *release() noexcept { return std::exchange(p_, nullptr); }

    /* One channel: the output at time t for sample x. */
    double push(double t, double x)
    {
        fc_stream *s = live();
        std::size_t C = channels();
        if (C != 1)
            throw error(FC_ERR_ARG, "fc_stream_push_timed (channels = " + std::to_string(C) +
                                        ": the scalar push needs 1; give views)");
        double y = 0.0;
        detail::check(fc_stream_push_timed(s, &t, &x, 1, &y), "fc_stream_push_timed");
        return y;
    }
    /* One time: x and y hold channels() values. */
    void push(double t, cview x, view y)
    {
        fc_stream *s = live();
        std::size_t C = channels();
        detail::need(x.size, C, "fc_stream_push_timed");
        detail::need(y.size, C, "fc_stream_push_timed");
        detail::check(fc_stream_push_timed(s, &t, x.data, 1, y.data), "fc_stream_push_timed");
    }
    /* What push(t, x) would return, bit for bit; nothing changes (with
       x = 0: the part of the output the samples pushed already make). */
    double preview(double t, double x)
    {
        fc_stream *s = live();
        std::size_t C = channels();
        if (C != 1)
            throw error(FC_ERR_ARG, "fc_stream_preview_timed (channels = " + std::to_string(C) +
                                        ": the scalar preview needs 1; give views)");
        double y = 0.0;
        detail::check(fc_stream_preview_timed(s, t, &x, &y), "fc_stream_preview_timed");
        return y;
    }
    void preview(double t, cview x, view y)
    {
        fc_stream *s = live();
        std::size_t C = channels();
        detail::need(x.size, C, "fc_stream_preview_timed");
        detail::need(y.size, C, "fc_stream_preview_timed");
        detail::check(fc_stream_preview_timed(s, t, x.data, y.data), "fc_stream_preview_timed");
    }
    /* t.size times, x channel-fastest (x.size == t.size * channels()). */
    void push_block(cview t, cview x, view y)
    {
        fc_stream *s = live();
        std::size_t C = channels();
        if (x.size != detail::mul(t.size, C, "fc_stream_push_timed"))
            throw error(FC_ERR_ARG, "fc_stream_push_timed (x.size = " + std::to_string(x.size) +
                                        ", t.size = " + std::to_string(t.size) + ", channels = " +
                                        std::to_string(C) + ": x.size must be t.size * channels)");
        detail::need(y.size, x.size, "fc_stream_push_timed");
        detail::check(fc_stream_push_timed(s, t.data, x.data, t.size, y.data),
                      "fc_stream_push_timed");
    }
    std::vector<double> push_block(cview t, cview x)
    {
        std::vector<double> y(x.size);
        push_block(t, x, view(y));
        return y;
    }
    void reset() { detail::check(fc_stream_reset(live()), "fc_stream_reset"); }
    std::vector<unsigned char> save()
    {
        std::size_t size = 0, written = 0;
        detail::check(fc_stream_save_size(live(), &size), "fc_stream_save_size");
        std::vector<unsigned char> buf(size);
        detail::check(fc_stream_save(live(), buf.data(), buf.size(), &written), "fc_stream_save");
        buf.resize(written);
        return buf;
    }
    /* save() written to the file path atomically (fc_stream_save_file). */
    void save_file(const std::string &path)
    {
        detail::check(fc_stream_save_file(live(), path.c_str()), "fc_stream_save_file");
    }
    void set_horizon_policy(int policy)
    {
        detail::check(fc_stream_set_horizon_policy(live(), policy), "fc_stream_set_horizon_policy");
    }

    std::uint64_t count() const { return get_<std::uint64_t>(fc_stream_count, "fc_stream_count"); }
    std::size_t channels() const { return get_<std::size_t>(fc_stream_channels, "fc_stream_channels"); }
    std::size_t nbytes() const { return get_<std::size_t>(fc_stream_nbytes, "fc_stream_nbytes"); }
    std::size_t terms() const { return get_<std::size_t>(fc_stream_terms, "fc_stream_terms"); }
    int horizon_policy() const { return get_<int>(fc_stream_horizon_policy, "fc_stream_horizon_policy"); }
    bool past_horizon() const { return get_<int>(fc_stream_past_horizon, "fc_stream_past_horizon") != 0; }
    std::uint64_t remaining() const { return get_<std::uint64_t>(fc_stream_remaining, "fc_stream_remaining"); }
    int rule() const { return get_<int>(fc_stream_rule, "fc_stream_rule"); }
    double order() const { return get_<double>(fc_stream_order, "fc_stream_order"); }
    /* The smallest step a push may make (fc_stream_step of a timed stream). */
    double min_step() const { return get_<double>(fc_stream_step, "fc_stream_step"); }
    double tol() const { return get_<double>(fc_stream_tol, "fc_stream_tol"); }
    /* The time span the promise covers (fc_stream_horizon). */
    double horizon() const { return get_<double>(fc_stream_horizon, "fc_stream_horizon"); }

private:
    explicit timed_stream(fc_stream *owned) noexcept : p_(owned) {}
    static timed_stream adopt(fc_stream *p, const char *where)
    {
        int timed = 0;
        int st = fc_stream_is_timed(p, &timed);
        if (st != FC_OK || !timed) {
            fc_stream_free(p);
            throw error(st != FC_OK ? st : FC_ERR_ARG,
                        std::string(where) + " (not a stream with a time per sample)");
        }
        return timed_stream(p);
    }
    fc_stream *live() const
    {
        if (!p_) throw error(FC_ERR_NULL, "pyfracconv::timed_stream (moved from)");
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

/* ------------------------------------------------------------- solver */

/* The solver of D^a y = f(t, y) (fc_solver_* in fracconv.h). The
   right-hand side is any callable fn(double t, const double *y, double *f)
   returning void, or int/bool (non-zero stops the run); the Jacobian
   jac(double t, const double *y, double *J) likewise (J row-major). */
class solver {
public:
    /* orders.size() = m components; init: K*m values, K = ceil(max order)
       (fc_solver_create); memory FC_MODE_EXACT, or FC_MODE_COMPRESSED
       with tol and horizon (in steps). */
    solver(cview orders, double step, double t0, cview init, int method = FC_METHOD_PC,
           int memory = FC_MODE_EXACT, double tol = 0.0, double horizon = 0.0)
        : cb_(new callbacks())
    {
        std::size_t k = 1;
        for (std::size_t i = 0; i < orders.size; i++)
            if (orders.data[i] > 1.0) k = 2;
        if (init.size < detail::mul(k, orders.size, "fc_solver_create"))
            throw error(FC_ERR_ARG, "fc_solver_create (init.size < ceil(max order) * orders.size)");
        detail::check(fc_solver_create(orders.size, orders.data, step, t0, init.data, method,
                                       memory, tol, horizon, &p_),
                      "fc_solver_create");
    }
    /* Rebuild from bytes written by save() (no callbacks: set them again). */
    static solver load(const std::vector<unsigned char> &blob)
    {
        fc_solver *p = nullptr;
        detail::check(fc_solver_load(blob.data(), blob.size(), &p), "fc_solver_load");
        return solver(p);
    }
    /* Rebuild from a file written by save_file (at most max_size bytes are
       read, untrusted input as for load; no callbacks: set them again). */
    static solver load_file(const std::string &path,
                            std::size_t max_size = std::size_t(1) << 30)
    {
        fc_solver *p = nullptr;
        detail::check(fc_solver_load_file(path.c_str(), max_size, &p), "fc_solver_load_file");
        return solver(p);
    }
    ~solver() { fc_solver_free(p_); }
    solver(const solver &) = delete;
    solver &operator=(const solver &) = delete;
    solver(solver &&o) noexcept : p_(std::exchange(o.p_, nullptr)), cb_(std::move(o.cb_)) {}
    solver &operator=(solver &&o) noexcept
    {
        if (this != &o) {
            fc_solver_free(p_);
            p_ = std::exchange(o.p_, nullptr);
            cb_ = std::move(o.cb_);
        }
        return *this;
    }
    fc_solver *get() const noexcept { return p_; }

    template <class F>
    void set_rhs(F fn)
    {
        fc_solver *s = live();
        callbacks *c = cells();
        std::function<int(double, const double *, double *)> f = wrap(std::move(fn));
        detail::check(fc_solver_set_rhs(s, &rhs_tramp, c), "fc_solver_set_rhs");
        c->rhs = std::move(f);
    }
    template <class F>
    void set_jacobian(F fn)
    {
        fc_solver *s = live();
        callbacks *c = cells();
        std::function<int(double, const double *, double *)> f = wrap(std::move(fn));
        detail::check(fc_solver_set_jacobian(s, &jac_tramp, c), "fc_solver_set_jacobian");
        c->jac = std::move(f);
    }
    /* Back to the forward-difference Jacobian. */
    void clear_jacobian()
    {
        detail::check(fc_solver_set_jacobian(live(), nullptr, nullptr), "fc_solver_set_jacobian");
        if (cb_) cb_->jac = nullptr;
    }
    void set_newton(double tol, unsigned maxiter)
    {
        detail::check(fc_solver_set_newton(live(), tol, maxiter), "fc_solver_set_newton");
    }
    void set_corrections(unsigned passes)
    {
        detail::check(fc_solver_set_corrections(live(), passes), "fc_solver_set_corrections");
    }

    /* nsteps steps; t_out (nsteps values) and y_out (nsteps*dim(),
       y_out[j*m + i] = y_i at the j-th new step) may be empty views (not written). Returns
       the steps done (nsteps). A stopped run throws: the completed steps
       are kept, as in C (steps() counts them); an exception of a callback
       is rethrown as it was thrown. */
    std::size_t advance(std::size_t nsteps, view t_out = view(), view y_out = view())
    {
        fc_solver *s = live();
        if (t_out.data) detail::need(t_out.size, nsteps, "fc_solver_advance");
        if (y_out.data) detail::need(y_out.size, detail::mul(nsteps, dim(), "fc_solver_advance"),
                                     "fc_solver_advance");
        std::size_t done = 0;
        callbacks *c = cells();
        c->thrown = nullptr;
        int st = fc_solver_advance(s, nsteps, t_out.data, y_out.data, &done);
        if (c->thrown) std::rethrow_exception(std::exchange(c->thrown, nullptr));
        detail::check(st, "fc_solver_advance");
        return done;
    }
    /* nsteps steps: the states, y[j*m + i] at the j-th new step. */
    std::vector<double> advance_states(std::size_t nsteps)
    {
        std::vector<double> y(detail::mul(nsteps, dim(), "fc_solver_advance"));
        advance(nsteps, view(), view(y));
        return y;
    }

    double time() const { return get_<double>(fc_solver_time, "fc_solver_time"); }
    std::vector<double> state() const
    {
        std::vector<double> y(dim());
        detail::check(fc_solver_state(live(), y.data()), "fc_solver_state");
        return y;
    }
    std::uint64_t steps() const { return get_<std::uint64_t>(fc_solver_steps, "fc_solver_steps"); }
    std::size_t dim() const { return get_<std::size_t>(fc_solver_dim, "fc_solver_dim"); }
    std::size_t nbytes() const { return get_<std::size_t>(fc_solver_nbytes, "fc_solver_nbytes"); }
    /* {rhs calls, Jacobian calls} */
    std::array<std::uint64_t, 2> counts() const
    {
        std::array<std::uint64_t, 2> n{};
        detail::check(fc_solver_counts(live(), &n[0], &n[1]), "fc_solver_counts");
        return n;
    }
    std::vector<unsigned char> save() const
    {
        std::size_t size = 0, written = 0;
        detail::check(fc_solver_save_size(live(), &size), "fc_solver_save_size");
        std::vector<unsigned char> buf(size);
        detail::check(fc_solver_save(live(), buf.data(), buf.size(), &written), "fc_solver_save");
        buf.resize(written);
        return buf;
    }
    /* save() written to the file path atomically (fc_solver_save_file). */
    void save_file(const std::string &path) const
    {
        detail::check(fc_solver_save_file(live(), path.c_str()), "fc_solver_save_file");
    }

private:
    struct callbacks {
        std::function<int(double, const double *, double *)> rhs, jac;
        std::exception_ptr thrown;
    };
    explicit solver(fc_solver *owned) : p_(owned), cb_(new callbacks()) {}
    template <class F>
    static std::function<int(double, const double *, double *)> wrap(F fn)
    {
        using R = std::invoke_result_t<F &, double, const double *, double *>;
        if constexpr (std::is_void_v<R>) {
            return [f = std::move(fn)](double t, const double *y, double *o) mutable {
                f(t, y, o);
                return 0;
            };
        } else {
            return [f = std::move(fn)](double t, const double *y, double *o) mutable {
                return f(t, y, o) ? 1 : 0;
            };
        }
    }
    static int call(std::function<int(double, const double *, double *)> &f, callbacks *c,
                    double t, const double *y, double *o) noexcept
    {
        if (!f) return 1;
        try {
            return f(t, y, o);
        } catch (...) {
            c->thrown = std::current_exception();
            return 1;
        }
    }
    static int rhs_tramp(double t, const double *y, double *f, void *user)
    {
        callbacks *c = static_cast<callbacks *>(user);
        return call(c->rhs, c, t, y, f);
    }
    static int jac_tramp(double t, const double *y, double *J, void *user)
    {
        callbacks *c = static_cast<callbacks *>(user);
        return call(c->jac, c, t, y, J);
    }
    fc_solver *live() const
    {
        if (!p_) throw error(FC_ERR_NULL, "pyfracconv::solver (moved from)");
        return p_;
    }
    callbacks *cells()
    {
        if (!cb_) throw error(FC_ERR_NULL, "pyfracconv::solver (moved from)");
        return cb_.get();
    }
    template <class T>
    T get_(int (*fn)(const fc_solver *, T *), const char *where) const
    {
        T v{};
        detail::check(fn(live(), &v), where);
        return v;
    }
    fc_solver *p_ = nullptr;
    std::unique_ptr<callbacks> cb_;
};

/* ------------------------------------------------------------- controller */

/* The controller's parameters with the library's defaults
   (fc_controller_default_params); set the fields, then construct. */
inline fc_controller_params controller_defaults()
{
    fc_controller_params p;
    detail::check(fc_controller_default_params(&p), "fc_controller_default_params");
    return p;
}

/* The fractional PID controller (fc_controller_* in fracconv.h). It
   moves machinery: validate it on the plant, keep actuator and rate limits
   in the hardware and an independent safe stop (fracconv.h). */
class controller {
public:
    explicit controller(const fc_controller_params &p)
    {
        detail::check(fc_controller_create(&p, &p_), "fc_controller_create");
    }
    static controller load(const std::vector<unsigned char> &blob)
    {
        fc_controller *p = nullptr;
        detail::check(fc_controller_load(blob.data(), blob.size(), &p), "fc_controller_load");
        return controller(p);
    }
    /* Rebuild from a file written by save_file (at most max_size bytes are
       read, untrusted input as for load). */
    static controller load_file(const std::string &path,
                                std::size_t max_size = std::size_t(1) << 30)
    {
        fc_controller *p = nullptr;
        detail::check(fc_controller_load_file(path.c_str(), max_size, &p),
                      "fc_controller_load_file");
        return controller(p);
    }
    /* Take ownership of a C controller. */
    explicit controller(fc_controller *owned) noexcept : p_(owned) {}
    ~controller() { fc_controller_free(p_); }
    controller(const controller &) = delete;
    controller &operator=(const controller &) = delete;
    controller(controller &&o) noexcept : p_(std::exchange(o.p_, nullptr)) {}
    controller &operator=(controller &&o) noexcept
    {
        if (this != &o) { fc_controller_free(p_); p_ = std::exchange(o.p_, nullptr); }
        return *this;
    }
    fc_controller *get() const noexcept { return p_; }
    fc_controller *release() noexcept { return std::exchange(p_, nullptr); }

    /* One sample: the output for setpoint r and measurement y. */
    double update(double r, double y)
    {
        double u = 0.0;
        detail::check(fc_controller_update(live(), r, y, &u), "fc_controller_update");
        return u;
    }
    /* A block (r.size == y.size samples); a refusal in the middle keeps
       the samples before it, as in C. */
    void update_block(cview r, cview y, view u)
    {
        if (r.size != y.size) throw error(FC_ERR_ARG, "fc_controller_update_block (r.size != y.size)");
        detail::need(u.size, r.size, "fc_controller_update_block");
        detail::check(fc_controller_update_block(live(), r.data, y.data, r.size, u.data, nullptr),
                      "fc_controller_update_block");
    }
    std::vector<double> update_block(cview r, cview y)
    {
        std::vector<double> u(r.size);
        update_block(r, y, view(u));
        return u;
    }
    void set_manual(double u) { detail::check(fc_controller_set_manual(live(), u), "fc_controller_set_manual"); }
    void set_auto() { detail::check(fc_controller_set_auto(live()), "fc_controller_set_auto"); }
    void reset() { detail::check(fc_controller_reset(live()), "fc_controller_reset"); }
    fc_controller_params params() const
    {
        fc_controller_params p;
        detail::check(fc_controller_get_params(live(), &p), "fc_controller_get_params");
        return p;
    }
    int status() const
    {
        int s = 0;
        detail::check(fc_controller_status(live(), &s), "fc_controller_status");
        return s;
    }
    bool limited() const { return (status() & FC_CTRL_LIMITED) != 0; }
    bool past_horizon() const { return (status() & FC_CTRL_PAST_HORIZON) != 0; }
    bool manual() const { return (status() & FC_CTRL_MANUAL) != 0; }
    /* P, I, filtered D, bias, unlimited sum, output of the last update. */
    std::array<double, 6> terms() const
    {
        std::array<double, 6> t{};
        detail::check(fc_controller_terms(live(), t.data()), "fc_controller_terms");
        return t;
    }
    std::uint64_t count() const
    {
        std::uint64_t n = 0;
        detail::check(fc_controller_count(live(), &n), "fc_controller_count");
        return n;
    }
    std::size_t nbytes() const
    {
        std::size_t n = 0;
        detail::check(fc_controller_nbytes(live(), &n), "fc_controller_nbytes");
        return n;
    }
    std::vector<unsigned char> save() const
    {
        std::size_t size = 0, written = 0;
        detail::check(fc_controller_save_size(live(), &size), "fc_controller_save_size");
        std::vector<unsigned char> buf(size);
        detail::check(fc_controller_save(live(), buf.data(), buf.size(), &written),
                      "fc_controller_save");
        buf.resize(written);
        return buf;
    }
    /* save() written to the file path atomically (fc_controller_save_file). */
    void save_file(const std::string &path) const
    {
        detail::check(fc_controller_save_file(live(), path.c_str()), "fc_controller_save_file");
    }

private:
    fc_controller *live() const
    {
        if (!p_) throw error(FC_ERR_NULL, "pyfracconv::controller (moved from)");
        return p_;
    }
    fc_controller *p_ = nullptr;
};

}  // namespace pyfracconv

#endif /* FRACCONV_HPP */
