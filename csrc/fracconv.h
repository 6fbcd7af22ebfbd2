/*
 * fracconv.h -- the public C interface of pyfracconv.
 *
 * Quadrature weights of fractional integrals and derivatives on a uniform
 * grid t_n = n*h, and fast lagged sums y_n = sum_{k<=n} c_{n-k} x_k over whole
 * histories: batch (the full record known) and streaming (one sample at a
 * time).
 *
 * Conventions for every function below:
 *   - every function returns an int status: FC_OK (0) or one of FC_ERR_*;
 *     fc_strerror() gives a static message for each;
 *   - results go through out-parameters; on error, out-parameters and every
 *     object passed in are left exactly as they were (the library checks all
 *     arguments and all samples before it writes anything);
 *   - the library never prints, aborts or exits and keeps no global state;
 *     every allocation is checked and unwound on failure;
 *   - sizes are size_t and every size computation is checked for overflow
 *     (FC_ERR_SIZE);
 *   - objects (fc_context, fc_stream, fc_fft_plan) are opaque; the free
 *     functions accept NULL;
 *   - threads: the functions without an object argument are thread-safe;
 *     different objects may be used from different threads freely; one
 *     object must not be used by two threads at once. A stream, a solver
 *     and a controller detect it: a call that finds its object busy
 *     returns FC_ERR_BUSY and changes nothing (except the free functions,
 *     fc_stream_channels, fc_stream_mode, the stream parameter getters,
 *     fc_solver_dim and fc_controller_get_params, which read immutable
 *     fields and take no guard; freeing an object in use is undefined).
 *     A solver is busy for the whole of fc_solver_advance, its callbacks
 *     included: a callback that calls a function of its own solver gets
 *     FC_ERR_BUSY. A context and an FFT plan have NO busy detection:
 *     concurrent use of one is undefined; a call starts threads of its
 *     own only when asked to (fc_context_set_threads,
 *     fc_stream_push_block_threads), and joins them before it returns;
 *   - const: a function taking a const object does not change its state;
 *     on a stream, solver or controller it still sets and clears the
 *     object's busy flag (an
 *     atomic flag, the one field written through a const pointer, by
 *     design: streams are always allocated by the library, never const
 *     objects);
 *   - statuses: the comment "Statuses:" beside each prototype lists every
 *     status the function can return.
 *
 * Rules (u = h^a / Gamma(a+1) unless said otherwise):
 *   FC_RULE_RECTANGLE  I^a, product rectangle rule (left end points), a > 0:
 *                      y_n = u * sum_{k<n} b_{n-1-k} x_k, b_m = (m+1)^a - m^a
 *   FC_RULE_TRAPEZOID  I^a, product trapezoidal rule, a > 0:
 *                      y_n = h^a/Gamma(a+2) (A_n x_0 + sum_{1<=k<=n} a_{n-k} x_k)
 *                      a_0 = 1, a_m = (m+1)^(a+1) - 2 m^(a+1) + (m-1)^(a+1),
 *                      A_n = (n-1)^(a+1) - (n-1-a) n^a, y_0 = 0
 *   FC_RULE_GRUNWALD   Riemann-Liouville derivative, Grunwald-Letnikov, a > 0:
 *                      y_n = h^-a sum_{k<=n} g_{n-k} x_k, g_0 = 1,
 *                      g_m = g_{m-1} (1 - (a+1)/m)
 *   FC_RULE_L1         Caputo derivative, L1 scheme, 0 < a < 1:
 *                      y_n = h^-a/Gamma(2-a) sum_{k<n} d_k (x_{n-k} - x_{n-k-1}),
 *                      d_k = (k+1)^(1-a) - k^(1-a), y_0 = 0
 *
 * The block between FC_CDEF_BEGIN and FC_CDEF_END is read verbatim by the
 * cffi builder (setup_build.py): keep it to plain declarations and integer
 * #defines.
 */
#ifndef FRACCONV_H
#define FRACCONV_H

#include <stddef.h>
#include <stdint.h>

#ifdef __cplusplus
extern "C" {
#endif

/*
 * FC_API marks the public functions: with GCC and clang the library is
 * built with -fvisibility=hidden (Makefile), so that only the functions
 * declared FC_API are exported from the shared object. setup_build.py
 * removes the word from the declarations it gives cffi.
 */
#if defined(__GNUC__) || defined(__clang__)
#define FC_API __attribute__((visibility("default")))
#else
#define FC_API
#endif

/* The version is defined once, as the three numbers in the block below;
   the string is made from them ("0.1.0"). pyproject.toml and
   pyfracconv.__version__ state the same version (tests/test_version.py). */
#define FC__STR2(x) #x
#define FC__STR(x) FC__STR2(x)
#define FC_VERSION_STRING \
    FC__STR(FC_VERSION_MAJOR) "." FC__STR(FC_VERSION_MINOR) "." FC__STR(FC_VERSION_PATCH)

/* FC_CDEF_BEGIN */
#define FC_VERSION_MAJOR 0
#define FC_VERSION_MINOR 1
#define FC_VERSION_PATCH 0
/* FC_VERSION_MAJOR*10000 + FC_VERSION_MINOR*100 + FC_VERSION_PATCH */
#define FC_VERSION_NUMBER 100

/* Status codes. */
#define FC_OK 0
#define FC_ERR_NULL 1        /* a required pointer argument is NULL */
#define FC_ERR_RULE 2        /* unknown rule, or rule not valid here */
#define FC_ERR_ORDER 3       /* order not finite, <= 0, or outside the rule's range */
#define FC_ERR_STEP 4        /* step not finite or <= 0 */
#define FC_ERR_SIZE 5        /* a size is zero where it must not be, or overflows */
#define FC_ERR_NONFINITE 6   /* a sample is NaN or infinite */
#define FC_ERR_NOMEM 7       /* an allocation failed */
#define FC_ERR_MODE 8        /* unknown or unsupported stream mode */
#define FC_ERR_TOL 9         /* tolerance or horizon out of range */
#define FC_ERR_FORMAT 10     /* saved state truncated, corrupted, foreign or unknown version */
#define FC_ERR_BUSY 11       /* the object is being used by another call */
#define FC_ERR_KERNEL 12     /* kernel empty or not finite */
#define FC_ERR_ARG 13        /* other invalid argument (engine, channels, buffer size) */
#define FC_ERR_INDEX 14      /* index range beyond what the weights support (start+count > 2^53) */
#define FC_ERR_RANGE 15      /* a result (or a value it needs) is beyond the double range */
#define FC_ERR_HORIZON 16    /* compressed stream: the push would pass the horizon */
#define FC_ERR_IO 17         /* a file could not be opened, read, written, synced or renamed (errno says why) */

/* Rules. */
#define FC_RULE_RECTANGLE 0
#define FC_RULE_TRAPEZOID 1
#define FC_RULE_GRUNWALD 2
#define FC_RULE_L1 3

/*
 * The rule table. Rule numbers are part of the save format: they never
 * change, and a new rule takes the next number.
 *
 * fc_rule_count: *count = the number of rules (they are 0 .. count-1).
 *   Statuses: FC_OK, FC_ERR_NULL (count NULL).
 * fc_rule_info: *name = the rule's static NUL-terminated name (the one the
 *   Python package uses), *is_derivative = 0 for an integral, 1 for a
 *   derivative. Statuses: FC_OK, FC_ERR_RULE (not a rule; nothing
 *   written), FC_ERR_NULL (name or is_derivative NULL).
 * fc_rule_order_range: the orders a rule accepts in a mode. mode
 *   FC_MODE_EXACT: fc_weights, fc_apply and exact streams (one range);
 *   FC_MODE_COMPRESSED: compressed streams (fc_stream_create). An order a
 *   is accepted when it is finite and lo < a (lo <= a if *lo_inclusive),
 *   a < hi (a <= hi if *hi_inclusive). Statuses: FC_OK, FC_ERR_RULE,
 *   FC_ERR_MODE (unknown mode), FC_ERR_NULL (an out-pointer NULL);
 *   nothing written on error.
 */
/* Statuses: FC_OK, FC_ERR_NULL. */
FC_API int fc_rule_count(int *count);
/* Statuses: FC_OK, FC_ERR_RULE, FC_ERR_NULL. */
FC_API int fc_rule_info(int rule, const char **name, int *is_derivative);
/* Statuses: FC_OK, FC_ERR_RULE, FC_ERR_MODE, FC_ERR_NULL. */
FC_API int fc_rule_order_range(int rule, int mode, double *lo, int *lo_inclusive,
                        double *hi, int *hi_inclusive);

/* Batch engines. */
#define FC_ENGINE_AUTO 0     /* chosen by size */
#define FC_ENGINE_DIRECT 1   /* O(N*K) direct summation */
#define FC_ENGINE_BLOCKED 2  /* partitioned FFT convolution, O(N log N), componentwise accurate */
#define FC_ENGINE_FFT 3      /* one full-length FFT, O(N log N), normwise accurate only */

/* Stream modes. */
#define FC_MODE_EXACT 0
#define FC_MODE_COMPRESSED 1

/* What a compressed stream does with a push that would take it past its
   horizon (fc_stream_set_horizon_policy). */
#define FC_HORIZON_REFUSE 0    /* default: FC_ERR_HORIZON, nothing changes */
#define FC_HORIZON_CONTINUE 1  /* go on; fc_stream_past_horizon then reports 1 */

/* Version of the library actually linked (FC_VERSION_NUMBER at build time). */
/* Statuses: none (returns FC_VERSION_NUMBER of the build, not a status). */
FC_API int fc_version(void);
/* Static NUL-terminated version string, e.g. "0.1.0". */
/* Statuses: none (returns a static string). */
FC_API const char *fc_version_string(void);
/* Static message for a status code; "unknown status" for codes not listed. */
/* Statuses: none (returns a static string). */
FC_API const char *fc_strerror(int status);

/*
 * Weights of a rule, scaled by the step as in the table above, for the
 * indices m = start .. start+count-1:
 *   RECTANGLE: h^a/Gamma(a+1) * b_m      TRAPEZOID: h^a/Gamma(a+2) * a_m
 *   GRUNWALD:  h^-a * g_m                L1:        h^-a/Gamma(2-a) * d_m
 * order: finite, 0 < order <= 10 (L1: 0 < order < 1); step: finite, > 0;
 * start + count <= 2^53; out: count doubles (may be NULL when count == 0).
 * Relative accuracy about 1e-14 for every index (no cancelling formulas),
 * whatever the size of the step factor itself (h^a may be far outside the
 * double range: the factor is kept as a mantissa and a power of two).
 * A weight beyond the double range makes the call return FC_ERR_RANGE
 * (nothing written); weights below DBL_MIN underflow gradually to
 * subnormal numbers or 0, with an absolute error up to 2^-1075 (a relative
 * bound cannot hold there).
 */
/* Statuses: FC_OK, FC_ERR_RULE, FC_ERR_ORDER, FC_ERR_STEP, FC_ERR_INDEX, FC_ERR_NULL (out NULL with count > 0), FC_ERR_RANGE. */
FC_API int fc_weights(int rule, double order, double step, uint64_t start,
               size_t count, double *out);

/*
 * The starting weights of the trapezoid rule, h^a/Gamma(a+2) * A_n for
 * n = start .. start+count-1 (A_0 is defined as 0). Same constraints, same
 * accuracy, FC_ERR_RANGE and underflow as fc_weights.
 */
/* Statuses: FC_OK, FC_ERR_ORDER, FC_ERR_STEP, FC_ERR_INDEX, FC_ERR_NULL, FC_ERR_RANGE. */
FC_API int fc_trapezoid_start(double order, double step, uint64_t start,
                       size_t count, double *out);

/*
 * Reusable batch context: caches FFT plans and work space between calls so
 * that repeated calls of the same size do no planning. Not thread-safe: one
 * context per thread.
 *
 * Threads: fc_context_set_threads(ctx, t) lets the batch calls given this
 * context (fc_lagged_sum, fc_apply) use up to t threads (POSIX threads
 * started by the call; the call returns when its work is done, and a
 * thread the system started too late to take any of it exits by itself
 * right after and is joined by a later call or when the library is
 * unloaded or the process exits: no thread waits for work between calls).
 * The work is split over the signals and,
 * for fewer signals than threads, over the independent segment products
 * of the partitioned engine (and the output ranges of the direct
 * engine); every output is computed by the same operations in the same
 * order whatever t, so the results are the same bit for bit for every
 * thread count. Small calls (fewer than about 2^15 samples in all; 2^17
 * when signals are split) run on the calling thread. A thread, a mutex or a helper's work space that
 * cannot be made is not an error: the call uses fewer threads (down to
 * the calling thread alone), with the same result. Each extra thread
 * keeps its own FFT plans and work space in the context (see
 * fc_context_nbytes), reused by later calls. A new context, and the
 * temporary one of a call given ctx == NULL, use 1 thread. Built with
 * -DFC_NO_THREADS, or where POSIX threads are missing, every call runs on
 * the calling thread. Programs linking the static library add -pthread.
 */
typedef struct fc_context fc_context;
/* Most threads a context may be given. */
#define FC_THREADS_MAX 256
/* Statuses: FC_OK, FC_ERR_NULL (out NULL), FC_ERR_NOMEM. */
FC_API int fc_context_create(fc_context **out);
/* Statuses: none (void; NULL is a no-op). */
FC_API void fc_context_free(fc_context *ctx);
/* Bytes currently held by the context (its helpers' plans and work space
   included). */
/* Statuses: FC_OK, FC_ERR_NULL. */
FC_API int fc_context_nbytes(const fc_context *ctx, size_t *nbytes);
/* Threads the batch calls given ctx may use: 1 <= threads <= FC_THREADS_MAX
   (FC_ERR_ARG otherwise, ctx unchanged). Lowering it keeps the helpers'
   plans and work space for later calls (fc_context_free releases them). */
/* Statuses: FC_OK, FC_ERR_NULL, FC_ERR_ARG (threads 0 or above FC_THREADS_MAX). */
FC_API int fc_context_set_threads(fc_context *ctx, size_t threads);
/* Statuses: FC_OK, FC_ERR_NULL. */
FC_API int fc_context_threads(const fc_context *ctx, size_t *threads);

/*
 * Lagged sums of nsig signals sharing one kernel:
 *   y[s*n + i] = sum_{k=0}^{i} kernel[i-k] * x[s*n + k],  i < n, s < nsig,
 * with kernel[m] = 0 for m >= klen. x and y: nsig*n doubles, row-major;
 * kernel: klen >= 1 finite doubles; engine: FC_ENGINE_*. y must not overlap
 * x or kernel (FC_ERR_ARG; in-place use is not supported). ctx may be NULL
 * (a temporary context is used). Samples must be finite (FC_ERR_NONFINITE;
 * y untouched). n == 0 or nsig == 0 is allowed (nothing is written).
 *
 * Accuracy: with FC_ENGINE_DIRECT every output is within
 * 1e-13 * sum_k |kernel[i-k] x[s*n+k]| of its exact value (componentwise)
 * for any kernel of any length; FC_ENGINE_BLOCKED and FC_ENGINE_AUTO give
 * the same for the rules' kernels and kernels whose size changes like a
 * power of the lag (not for kernels with zeros or sign changes inside
 * their range); FC_ENGINE_FFT is accurate only normwise.
 *
 * Range: any finite samples and kernel may be given. Signals and kernels
 * of extreme magnitude are scaled by powers of two (each signal by its
 * own), so nothing overflows on the way, and the call returns FC_ERR_RANGE
 * (y untouched) exactly when an output is beyond the double range (up to
 * rounding at the boundary). Outputs in or near the subnormal range (error
 * scale below about 1e-290 times the largest |x| of their signal times the
 * largest |kernel|) underflow gradually: their error is absolute, about
 * n 2^-1074 times that product, and the relative bound does not hold
 * there.
 */
/* Statuses: FC_OK, FC_ERR_NULL, FC_ERR_KERNEL, FC_ERR_ARG (engine, overlap), FC_ERR_SIZE, FC_ERR_NONFINITE, FC_ERR_NOMEM, FC_ERR_RANGE. */
FC_API int fc_lagged_sum(fc_context *ctx, const double *x, size_t nsig, size_t n,
                  const double *kernel, size_t klen, int engine, double *y);

/*
 * A rule applied to nsig signals of n samples each (x, y as above; y must
 * not overlap x, FC_ERR_ARG): y[s*n + i] approximates the operator at
 * t_i = i*step. Integrals: RECTANGLE, TRAPEZOID; derivatives: GRUNWALD, L1.
 * The weights are computed inside (count n); order and step as for
 * fc_weights. Accuracy as for fc_lagged_sum, with the terms of the rule's
 * formula (the step factor included; for L1 the terms
 * d_k (x_{n-k} - x_{n-k-1})). Any finite samples and any step are
 * accepted: signals of extreme magnitude are scaled by a power of two each
 * (L1 differences taken after scaling), the weights are used without the
 * step factor, and the factor h^a/Gamma(a+1) etc. is applied last as
 * a mantissa and a power of two, so h^a itself may be far outside the
 * double range; FC_ERR_RANGE (y untouched) exactly when an output is beyond
 * it. Outputs whose terms are in or near the subnormal range underflow
 * gradually (absolute error, as for fc_lagged_sum).
 */
/* Statuses: FC_OK, FC_ERR_RULE, FC_ERR_ORDER, FC_ERR_STEP, FC_ERR_ARG (engine, overlap), FC_ERR_SIZE, FC_ERR_NULL, FC_ERR_NONFINITE, FC_ERR_NOMEM, FC_ERR_RANGE. */
FC_API int fc_apply(fc_context *ctx, int rule, double order, double step,
             const double *x, size_t nsig, size_t n, int engine, double *y);

/*
 * A rule on any strictly increasing grid of times, by sums of exponentials
 * (the fast engine of integral/derivative(..., t=) in Python; the direct
 * O(n^2) engine is pyfracconv.grid): y[s*n + i] approximates the operator
 * at t[i], from t[0], for nsig signals of n samples (x, y as for fc_apply).
 * Rules and orders: RECTANGLE and TRAPEZOID (I^a, 0 < order < 2; at
 * 1 < order < 2 through the running integral X = I^1 x~ carried in
 * double-double and the kernel of order a - 1, same promise), L1
 * (Caputo, 0 < order < 1); the weights on the grid are those of
 * pyfracconv.grid.grid_weights (product rules of Diethelm, Ford and Freed
 * 2002; L1 of Stynes, O'Riordan and Gracia 2017). t: n finite times,
 * strictly increasing (else FC_ERR_NONFINITE / FC_ERR_ARG); the span
 * t[n-1] - t[0] at most 2^100 times the smallest step (else FC_ERR_TOL;
 * the terms grow with the logarithm of that ratio). tol in [1e-15, 1e-2]
 * (FC_ERR_TOL). y must not overlap x or t (FC_ERR_ARG). *terms (may be
 * NULL) gets the number L of exponential terms used.
 * Promise, for every output (componentwise):
 *   |y_n - y_n(exact)| <= (tol + (L + 64) eps) S_n,  eps = 2^-52,
 * y_n(exact) the rule in exact arithmetic with the exact weights on the
 * grid, S_n the sum of the absolute values of its terms (L1: of the weights
 * times the increments x_{k+1} - x_k). Work O(n L) plus the construction
 * of the sum (about 100 L kernel values per decade of span / smallest
 * step); L is 28-64 for tol 1e-6 .. 1e-13 and a span of 1e6 smallest
 * steps (csrc/grid_soe.c). Any
 * finite samples: FC_ERR_RANGE (y untouched) exactly when an output is
 * beyond the double range; outputs near the subnormal range get an
 * absolute error (exponential states below DBL_MIN are set to zero, as in
 * compressed streams, so that runs of zeros cost no more than data).
 */
/* Statuses: FC_OK, FC_ERR_NULL, FC_ERR_RULE, FC_ERR_ORDER, FC_ERR_TOL, FC_ERR_SIZE, FC_ERR_ARG (t not increasing, overlap), FC_ERR_NONFINITE (t or x), FC_ERR_RANGE, FC_ERR_NOMEM. */
FC_API int fc_grid_apply(int rule, double order, const double *t, const double *x,
                         size_t nsig, size_t n, double tol, double *y, size_t *terms);

/*
 * Streams: samples arrive one at a time (per channel); the n-th output
 * equals element n of fc_apply / fc_lagged_sum on the same samples, to
 * rounding (exact mode) or to a stated tolerance (compressed mode).
 *
 * Samples and outputs of a push are laid out channel-fastest: for a block of
 * count time steps, x[t*channels + c].
 *
 * Every function leaves the stream exactly as it was when it returns an
 * error (a rejected block with one bad sample anywhere pushes nothing).
 * One stream must not be used by two threads at once (FC_ERR_BUSY).
 */
typedef struct fc_stream fc_stream;

/*
 * A stream for a rule. channels >= 1. mode: FC_MODE_EXACT (tol and horizon
 * ignored) or FC_MODE_COMPRESSED, which takes
 *   tol in [1e-15, 1e-2] and 1 <= horizon <= 2^53 - 2, finite (else
 *   FC_ERR_TOL); 1e-280 <= order < 1 for every rule, and also
 *   1 <= order < 2 for FC_RULE_RECTANGLE and FC_RULE_TRAPEZOID (else
 *   FC_ERR_ORDER).
 * Compressed-mode promise: for every output n <= floor(horizon),
 *   |y_n - y_n(exact)| <= (tol + 64 eps) (sum_k |c_{n-k} u_k| + |corr_n x_0|)
 * with eps = 2^-52, y_n(exact) element n of fc_apply in exact arithmetic
 * with the library's weights (fc_weights), and c, u, corr its lagged-sum
 * form (u = x; L1: u_k = x_k - x_{k-1}, u_0 = 0; corr_n x_0 only for the
 * trapezoid rule). 64 eps is the rounding allowance (16 eps in the check
 * made at creation, the rest the arithmetic of a push; measured: below
 * 11 eps); at tol = 1e-15 it dominates. Nothing is promised past the
 * horizon (fc_stream_set_horizon_policy). Outputs whose terms are in or
 * near the subnormal range have an absolute error besides, below
 * Lp DBL_MIN max_l |beta_l| (Lp: terms rounded up to 8): an exponential
 * state or its compensation below DBL_MIN is set to zero, so that a
 * stream fed zeros keeps the same work per sample (subnormal arithmetic
 * is many times slower on common CPUs). Creation returns FC_ERR_TOL if
 * no construction passes its check: seen only for FC_RULE_GRUNWALD with
 * tol < 2e-15 and horizon > 1e14.
 * Range: finite samples never give NaN or inf. A compressed push or preview
 * is refused with FC_ERR_RANGE (nothing changes) if an engine input |u|
 * (x; L1: x_n - x_{n-1}; RECTANGLE and TRAPEZOID with order >= 1: the
 * running sum x_0 + ... + x_n) would exceed the stream's bound U = DBL_MAX / (4 G),
 * where G = max(sum_l 2 |beta_l| m_l + sum_{j<64} |c_j| + max_n |corr_n|
 * (TRAPEZOID at order >= 1: the larger of n = 64 and n = 2^53 - 1),
 * 2 max_l m_l, 4), m_l = min(1/q_l, 2^53), from the stream's exponential
 * terms beta_l (1 - q_l)^m (csrc/stream_compressed.c, RANGE). With step = 1,
 * U >= 1e290 for every accepted rule, order, tol and horizon (about
 * 2.5e291 at worst; larger for short horizons). A compressed stream also
 * refuses (FC_ERR_SIZE) a push that would bring its count to 2^53.
 * fc_stream_load of a compressed stream rebuilds it from its parameters
 * (the cost of one creation) and returns FC_ERR_FORMAT unless the stored
 * weights equal the rebuilt ones bit for bit, the two headers agree, and
 * the running state is one that pushes could have produced; a loaded
 * stream then behaves exactly like the one that saved it.
 */
/* Statuses: FC_OK, FC_ERR_NULL (out), FC_ERR_RULE, FC_ERR_ORDER, FC_ERR_STEP, FC_ERR_ARG (channels 0), FC_ERR_SIZE (channels too many), FC_ERR_MODE, FC_ERR_TOL, FC_ERR_RANGE (compressed: the step factor or a weight beyond the double range; exact, rules other than L1: also orders below about 1e-297, measured, whose kernel the stream cannot hold in its scaled form, although fc_apply takes them), FC_ERR_NOMEM. */
FC_API int fc_stream_create(int rule, double order, double step, size_t channels,
                     int mode, double tol, double horizon, fc_stream **out);
/* An exact stream for a user kernel: y_n = sum_{k<=n} kernel[n-k] x_k,
   kernel[m] = 0 for m >= klen; klen >= 1, finite values (copied). */
/* Statuses: FC_OK, FC_ERR_NULL, FC_ERR_KERNEL (klen 0 or a value not finite), FC_ERR_SIZE (klen beyond the lags an exact stream covers, or channels too many), FC_ERR_ARG (channels 0), FC_ERR_NOMEM. */
FC_API int fc_stream_create_kernel(const double *kernel, size_t klen,
                            size_t channels, fc_stream **out);
/* Statuses: none (void; NULL is a no-op). */
FC_API void fc_stream_free(fc_stream *s);

/* Push one time step: x[channels] in, y[channels] out. y may be x itself
   (in place: every sample is read before its output is written); any other
   overlap of x and y is refused with FC_ERR_ARG. An output beyond the
   double range refuses the push with FC_ERR_RANGE, nothing changed; for a
   block, the whole block, y untouched (exact mode: possible only when the
   sum of the magnitudes of an output's terms nearly overflows; compressed
   mode: see the range bound of fc_stream_create). Exact mode also returns
   FC_ERR_RANGE when the weights a push needs are themselves beyond the
   normal double range (far lags of extreme orders and steps; the batch
   functions scale them instead). Compressed mode: FC_ERR_HORIZON under
   FC_HORIZON_REFUSE when an output would lie beyond floor(horizon).
   Allocation: none after fc_stream_reserve covers the count, except that
   an exact-mode block whose outputs might leave the double range (samples
   within about 2^1000 / (count * max weight)) is computed in a temporary
   copy first. */
/* Statuses: FC_OK, FC_ERR_NULL, FC_ERR_BUSY, FC_ERR_ARG (overlap), FC_ERR_NONFINITE, FC_ERR_RANGE, FC_ERR_HORIZON, FC_ERR_SIZE, FC_ERR_NOMEM. */
FC_API int fc_stream_push(fc_stream *s, const double *x, double *y);
/* Push count time steps: x[count*channels] in, y[count*channels] out; in
   place as for fc_stream_push (y == x, or no overlap: FC_ERR_ARG). */
/* Statuses: FC_OK, FC_ERR_NULL, FC_ERR_BUSY, FC_ERR_ARG (overlap), FC_ERR_NONFINITE, FC_ERR_RANGE, FC_ERR_HORIZON, FC_ERR_SIZE, FC_ERR_NOMEM. */
FC_API int fc_stream_push_block(fc_stream *s, const double *x, size_t count,
                         double *y);
/* fc_stream_push_block with up to threads threads (1 .. FC_THREADS_MAX,
   FC_ERR_ARG otherwise, nothing pushed) sharing the channels: the
   outputs and the state are the same bit for bit for every count. A
   compressed stream of several channels splits them over the threads
   (blocks of about 2^12 values or more); an exact stream of several
   channels shares the channels of each large frame (FFT blocks of 512
   samples or more, block size times channels at least 2^14) over the
   threads, the leaf band and the small frames staying on the calling
   thread (its time steps depend on each other). Each extra thread of an
   exact stream keeps its own FFT plans and work buffer in the stream
   (fc_stream_nbytes counts them; not saved). A thread or its scratch that
   cannot be made leaves the work to fewer threads, with the same result;
   threads are started and joined inside the call. */
/* Statuses: FC_OK, FC_ERR_NULL, FC_ERR_BUSY, FC_ERR_ARG (overlap, threads), FC_ERR_NONFINITE, FC_ERR_RANGE, FC_ERR_HORIZON, FC_ERR_SIZE, FC_ERR_NOMEM. */
FC_API int fc_stream_push_block_threads(fc_stream *s, const double *x, size_t count,
                                        double *y, size_t threads);
/* What fc_stream_push(s, x, y) would write to y, bit for bit, without
   changing the stream; y == x or no overlap, as for fc_stream_push; the
   same refusals (FC_ERR_RANGE, FC_ERR_HORIZON). */
/* Statuses: FC_OK, FC_ERR_NULL, FC_ERR_BUSY, FC_ERR_ARG (overlap), FC_ERR_NONFINITE, FC_ERR_RANGE, FC_ERR_HORIZON. */
FC_API int fc_stream_preview(fc_stream *s, const double *x, double *y);
/* The history term of the next output: the part that does not depend on
   the next sample, so that y = history + w0 * x for GRUNWALD and user
   kernels (w0 = kernel[0]), y = history for RECTANGLE (w0 = 0),
   y = history + w0 * (x - previous x) for L1, y = history + w0 * x for
   TRAPEZOID past the first sample; the first output of TRAPEZOID and L1
   is 0 whatever x (and so is their history). h[channels]. Exact mode:
   FC_ERR_RANGE (h untouched) if the history is beyond the double range;
   compressed mode: FC_ERR_HORIZON under FC_HORIZON_REFUSE when the next
   output would lie beyond floor(horizon). */
/* Statuses: FC_OK, FC_ERR_NULL, FC_ERR_BUSY, FC_ERR_RANGE, FC_ERR_HORIZON. */
FC_API int fc_stream_history(fc_stream *s, double *h);
/* Forget all samples (keeps the kernel, the reserved capacity). */
/* Statuses: FC_OK, FC_ERR_NULL, FC_ERR_BUSY. */
FC_API int fc_stream_reset(fc_stream *s);
/* Samples pushed per channel since creation or the last reset. */
/* Statuses: FC_OK, FC_ERR_NULL, FC_ERR_BUSY. */
FC_API int fc_stream_count(const fc_stream *s, uint64_t *count);
/* Statuses: FC_OK, FC_ERR_NULL (immutable field: no busy check). */
FC_API int fc_stream_channels(const fc_stream *s, size_t *channels);
/* Statuses: FC_OK, FC_ERR_NULL (immutable field: no busy check). */
FC_API int fc_stream_mode(const fc_stream *s, int *mode);
/* Bytes of memory the stream holds now. */
/* Statuses: FC_OK, FC_ERR_NULL, FC_ERR_BUSY. */
FC_API int fc_stream_nbytes(const fc_stream *s, size_t *nbytes);
/* Compressed mode: number of exponential terms; exact mode: 0. */
/* Statuses: FC_OK, FC_ERR_NULL, FC_ERR_BUSY. */
FC_API int fc_stream_terms(const fc_stream *s, size_t *terms);
/* Make room so that no push up to n samples in all allocates. */
/* Statuses: FC_OK, FC_ERR_NULL, FC_ERR_BUSY, FC_ERR_SIZE, FC_ERR_NOMEM. */
FC_API int fc_stream_reserve(fc_stream *s, uint64_t n);
/* Size in bytes of the saved state right now. */
/* Statuses: FC_OK, FC_ERR_NULL, FC_ERR_BUSY, FC_ERR_SIZE. */
FC_API int fc_stream_save_size(fc_stream *s, size_t *size);
/* Write the state to buf (size bytes available; FC_ERR_ARG if too small);
   *written gets the bytes used. Versioned, checksummed, little-endian. */
/* Statuses: FC_OK, FC_ERR_NULL, FC_ERR_BUSY, FC_ERR_SIZE, FC_ERR_ARG (size too small). */
FC_API int fc_stream_save(fc_stream *s, unsigned char *buf, size_t size,
                   size_t *written);
/* Rebuild a stream from saved bytes; FC_ERR_FORMAT for truncated,
   corrupted, foreign or unknown-version data, and for state that is not
   what the stored samples imply: an exact stream's accumulator is
   recomputed from its stored history and must match bit for bit, and its
   first/previous-sample and geometry fields are checked. */
/* Statuses: FC_OK, FC_ERR_NULL, FC_ERR_FORMAT, FC_ERR_NOMEM. */
FC_API int fc_stream_load(const unsigned char *buf, size_t size, fc_stream **out);
/*
 * The horizon of a compressed stream: outputs 0 .. floor(horizon) are within
 * the stated tolerance; nothing is promised after. By default
 * (FC_HORIZON_REFUSE) a push or block that would produce an output beyond
 * floor(horizon) returns FC_ERR_HORIZON and changes nothing; with
 * FC_HORIZON_CONTINUE it proceeds and fc_stream_past_horizon reports 1.
 * The policy is a setting of the object, not part of its saved state (a
 * loaded stream starts with FC_HORIZON_REFUSE). Exact streams have no
 * horizon: the policy is accepted and ignored, the flag is always 0.
 * policy: FC_HORIZON_REFUSE or FC_HORIZON_CONTINUE (FC_ERR_ARG otherwise).
 */
/* Statuses: FC_OK, FC_ERR_ARG (policy), FC_ERR_NULL, FC_ERR_BUSY. */
FC_API int fc_stream_set_horizon_policy(fc_stream *s, int policy);
/* Statuses: FC_OK, FC_ERR_NULL, FC_ERR_BUSY. */
FC_API int fc_stream_horizon_policy(const fc_stream *s, int *policy);
/* 1 once an output beyond the horizon has been produced, else 0. */
/* Statuses: FC_OK, FC_ERR_NULL, FC_ERR_BUSY. */
FC_API int fc_stream_past_horizon(const fc_stream *s, int *flag);
/* Samples (per channel) that can still be pushed under the promise:
   compressed: floor(horizon) + 1 - count (0 once past); exact: the samples
   the stream can still take (UINT64_MAX - count for kernel streams). */
/* Statuses: FC_OK, FC_ERR_NULL, FC_ERR_BUSY. */
FC_API int fc_stream_remaining(const fc_stream *s, uint64_t *remaining);
/* The defining parameters: rule (-1 for a kernel stream), order and step
   (0 for a kernel stream), tolerance and horizon (0 for exact streams). */
/* Statuses: FC_OK, FC_ERR_NULL (immutable field: no busy check). */
FC_API int fc_stream_rule(const fc_stream *s, int *rule);
/* Statuses: FC_OK, FC_ERR_NULL (immutable field: no busy check). */
FC_API int fc_stream_order(const fc_stream *s, double *order);
/* Statuses: FC_OK, FC_ERR_NULL (immutable field: no busy check). */
FC_API int fc_stream_step(const fc_stream *s, double *step);
/* Statuses: FC_OK, FC_ERR_NULL (immutable field: no busy check). */
FC_API int fc_stream_tol(const fc_stream *s, double *tol);
/* Statuses: FC_OK, FC_ERR_NULL (immutable field: no busy check). */
FC_API int fc_stream_horizon(const fc_stream *s, double *horizon);


/*
 * A compressed stream with a time per sample: created without a fixed
 * step, it takes (time, sample) pairs (fc_stream_push_timed). Rules:
 * RECTANGLE, TRAPEZOID (I^a, 0 < order < 2; at 1 < order < 2 the
 * recursion of fc_grid_apply on the running integral, whose outputs it
 * gives bit for bit on the same times with min_step in the binade of the
 * smallest step and horizon = t[n-1] - t[0]), L1 (Caputo, 0 < order < 1),
 * from the first time pushed, with the weights of fc_grid_apply on the
 * times pushed. min_step: finite, > 0, the smallest step any push may make
 * (FC_ERR_STEP); horizon: a time span, finite, min_step <= horizon and
 * horizon/2^floor(log2 min_step) at most 2^99 (FC_ERR_TOL; any horizon up
 * to 2^98 min_step passes); tol in [1e-15, 1e-2]
 * (FC_ERR_TOL). Promise, for every output n with t_n - t_0 <= horizon:
 *   |y_n - y_n(exact)| <= (tol + (L + 64) eps) S_n
 * as for fc_grid_apply (L = fc_stream_terms). fc_stream_push_timed: t[count]
 * finite (FC_ERR_NONFINITE), each step t - (previous time) >= min_step
 * (FC_ERR_ARG; a time not after the previous one included), an output past
 * the horizon FC_ERR_HORIZON under FC_HORIZON_REFUSE (FC_HORIZON_CONTINUE:
 * it proceeds, fc_stream_past_horizon reports 1); samples (L1: their
 * increments) of magnitude above the stream's bound U (csrc/stream_timed.c,
 * RANGE; about 1e290 for a horizon of 1e6 smallest steps) FC_ERR_RANGE; a
 * count reaching 2^53 FC_ERR_SIZE. x, y: count*channels doubles, y == x or
 * no overlap, y must not overlap t (FC_ERR_ARG). Any refusal pushes
 * nothing of the block and changes nothing. The untimed fc_stream_push,
 * fc_stream_push_block, fc_stream_push1, fc_stream_preview and
 * fc_stream_history refuse such a stream with FC_ERR_ARG, and
 * fc_stream_push_timed and fc_stream_preview_timed refuse every other
 * stream with FC_ERR_ARG.
 * fc_stream_step gives min_step, fc_stream_horizon the time horizon,
 * fc_stream_mode FC_MODE_COMPRESSED, fc_stream_remaining the samples the
 * count still allows (the horizon is a time). Save/load: fc_stream_save,
 * fc_stream_load (kind 2 of the common header; the loader rebuilds the
 * terms and compares them bit for bit, and checks the times, the count and
 * the state).
 */
/* Statuses: FC_OK, FC_ERR_NULL, FC_ERR_RULE, FC_ERR_ORDER, FC_ERR_STEP, FC_ERR_ARG (channels 0), FC_ERR_SIZE (channels too many), FC_ERR_TOL, FC_ERR_RANGE, FC_ERR_NOMEM. */
FC_API int fc_stream_create_timed(int rule, double order, double min_step,
                                  size_t channels, double tol, double horizon,
                                  fc_stream **out);
/* Statuses: FC_OK, FC_ERR_NULL, FC_ERR_BUSY, FC_ERR_ARG (not a timed stream, step below min_step, overlap), FC_ERR_NONFINITE, FC_ERR_RANGE, FC_ERR_HORIZON, FC_ERR_SIZE. */
FC_API int fc_stream_push_timed(fc_stream *s, const double *t, const double *x,
                                size_t count, double *y);
/* What fc_stream_push_timed of the one step (t, x[channels]) would
   return, into y[channels], bit for bit; nothing changes. The same checks
   and statuses as that push (y == x allowed). With a sample of 0 it gives
   the part of the output at t that the samples already pushed make: for
   RECTANGLE the whole output (the rule does not use the sample at t), for
   TRAPEZOID all but (t - t_prev)^a / Gamma(a+2) x (the newest sample's
   weight) -- what a time stepper needs before the sample exists. */
/* Statuses: FC_OK, FC_ERR_NULL, FC_ERR_BUSY, FC_ERR_ARG (not a timed stream, step below min_step, overlap), FC_ERR_NONFINITE, FC_ERR_RANGE, FC_ERR_HORIZON, FC_ERR_SIZE. */
FC_API int fc_stream_preview_timed(fc_stream *s, double t, const double *x,
                                   double *y);
/* *timed = 1 for a stream with a time per sample, else 0. */
/* Statuses: FC_OK, FC_ERR_NULL (immutable field: no busy check). */
FC_API int fc_stream_is_timed(const fc_stream *s, int *timed);

/*
 * Solver: Caputo initial value problems
 *     D^a_i y_i = f_i(t, y),   y_i^(k)(t0) = y0_{k,i},  k < ceil(a_i),
 * for y of m components, 0 < a_i <= 2 (one order per component; equal
 * orders share streams), written as the Volterra equation
 *     y(t) = T(t) + I^a [f(., y(.))](t),
 * T the Taylor polynomial of the initial values (Diethelm 2010). Every
 * method is one of the library's integral rules applied to f along the
 * solution on the grid t_n = t0 + n*step; the history sums of the f values
 * are kept by streams (exact or compressed).
 *
 * Methods:
 *   FC_METHOD_RECTANGLE  explicit product rectangle rule (order 1):
 *                        y_{n+1} = T_{n+1} + rectangle history
 *   FC_METHOD_PC         predictor-corrector of Diethelm, Ford and Freed
 *                        2002: rectangle predictor, product trapezoidal
 *                        corrector, `corrections` corrector passes
 *                        (default 1); order min(2, 1+a) for smooth y
 *   FC_METHOD_TRAPEZOID  implicit product trapezoidal rule (Garrappa
 *                        2015): y = T + trapezoid history + w0 f(t, y)
 *                        solved by Newton's method with the user Jacobian
 *                        or a forward-difference one
 *   FC_METHOD_IMPLICIT_RECTANGLE  implicit product rectangle rule (right
 *                        end points, order 1): y = T + history + u f(t, y),
 *                        u = h^a/Gamma(a+1), solved like FC_METHOD_TRAPEZOID;
 *                        strongly damped, for stiff problems with
 *                        non-smooth solutions; with FC_MODE_EXACT its
 *                        history, like every method's, grows with the
 *                        steps (no horizon)
 * Memory: FC_MODE_EXACT (streams keep every f value) or FC_MODE_COMPRESSED
 * (bounded memory, tol and horizon as for fc_stream_create, horizon counted
 * in steps; every method, orders < 2, as the rule table's compressed
 * ranges for the rules a method uses give them (fc_rule_order_range; else
 * FC_ERR_ORDER): rectangle and trapezoid; for FC_METHOD_IMPLICIT_RECTANGLE
 * rectangle and, for its weight differences, L1 of order 1 - a (a < 1:
 * refused when 1 - a rounds to 1, a <= 2^-54) or trapezoid of order a - 1
 * (a > 1), see csrc/solver.c). Compressed deviation of the history sums:
 * every stream is within its fc_stream_create bound; for the implicit
 * rectangle rule the history H_n = u sum_{1<=k<=n} b_{n+1-k} f_k
 * (u = h^a/Gamma(a+1), b_j = (j+1)^a - j^a) is then within
 * (tol + 67 eps) u S_n of its value in exact arithmetic with the library's
 * weights (3 eps: the sum of the two streams), S_n =
 * sum_k b_{n+1-k} |f_k| for 1 <= a < 2 and S_n = sum_k (b_{n-k} |f_k| +
 * b_{n+1-k} |f_k - f_{k-1}|) + |f_n| (f_0 = 0) for a < 1; for a < 1/2 the
 * L1 stream's order 1 - a is a rounded double, which changes the weight
 * differences by a relative amount of about 2^-54 (1/a + ln n) besides.
 *
 * Callbacks: rhs(t, y[m], f[m], user) writes f(t, y); jac(t, y[m],
 * J[m*m], user) writes J[i*m + j] = df_i/dy_j (row-major). A callback
 * returning non-zero stops the advance (FC_ERR_CALLBACK); a non-finite f or
 * J stops it with FC_ERR_NONFINITE. y and f point into buffers the solver
 * owns for its whole life (the same addresses on every call).
 */
#define FC_METHOD_RECTANGLE 0
#define FC_METHOD_PC 1
#define FC_METHOD_TRAPEZOID 2
#define FC_METHOD_IMPLICIT_RECTANGLE 3
/* Solver status codes (fc_solver_strerror knows them and all others). */
#define FC_ERR_CALLBACK 64   /* a callback returned non-zero */
#define FC_ERR_NEWTON 65     /* Newton's method did not converge */
#define FC_ERR_NORHS 66      /* no right-hand side set */

typedef struct fc_solver fc_solver;
typedef int (*fc_rhs_fn)(double t, const double *y, double *f, void *user);
typedef int (*fc_jac_fn)(double t, const double *y, double *jac, void *user);

/*
 * m >= 1 components; orders[m]: finite, 0 < a <= 2; step: finite, > 0;
 * t0 finite; init: K*m finite doubles, K = ceil(max order) (1 or 2),
 * init[k*m + i] = y_i^(k)(t0) (row k = 1 is ignored for components of
 * order <= 1 but must be finite); method FC_METHOD_*; memory FC_MODE_*;
 * tol, horizon: as for fc_stream_create (ignored for FC_MODE_EXACT).
 */
/* Statuses: FC_OK, FC_ERR_NULL, FC_ERR_SIZE (m == 0 or too large), FC_ERR_ORDER, FC_ERR_STEP, FC_ERR_NONFINITE (init), FC_ERR_ARG (t0 not finite), FC_ERR_RULE (method unknown), FC_ERR_MODE, FC_ERR_TOL (tol, horizon: FC_MODE_COMPRESSED), FC_ERR_RANGE, FC_ERR_NOMEM. */
FC_API int fc_solver_create(size_t m, const double *orders, double step, double t0,
                            const double *init, int method, int memory, double tol,
                            double horizon, fc_solver **out);
/* Statuses: none (void; NULL is a no-op). */
FC_API void fc_solver_free(fc_solver *s);
/* The right-hand side (required before advancing; fn != NULL) and the
   Jacobian (fn == NULL: forward differences, m extra rhs calls each). */
/* Statuses: FC_OK, FC_ERR_NULL, FC_ERR_BUSY. */
FC_API int fc_solver_set_rhs(fc_solver *s, fc_rhs_fn fn, void *user);
/* Statuses: FC_OK, FC_ERR_NULL, FC_ERR_BUSY. */
FC_API int fc_solver_set_jacobian(fc_solver *s, fc_jac_fn fn, void *user);
/* Newton's method of the implicit methods: stop when every residual
   component |r_i| <= tol * (|y_i| + |c_i| + |w0_i f_i|), c the known part;
   tol in [1e-15, 1e-2] (default 1e-12), 1 <= maxiter <= 1000 (default 50). */
/* Statuses: FC_OK, FC_ERR_NULL, FC_ERR_BUSY, FC_ERR_TOL (tol out of range), FC_ERR_ARG (maxiter out of range). */
FC_API int fc_solver_set_newton(fc_solver *s, double tol, unsigned maxiter);
/* Corrector passes of FC_METHOD_PC, 1 <= passes <= 100 (default 1). */
/* Statuses: FC_OK, FC_ERR_NULL, FC_ERR_BUSY, FC_ERR_ARG (passes out of range; for a method other than FC_METHOD_PC the setting is accepted and has no effect). */
FC_API int fc_solver_set_corrections(fc_solver *s, unsigned passes);
/*
 * Advance by nsteps steps. t_out: nsteps doubles or NULL; y_out:
 * nsteps*m doubles (y_out[j*m + i] = y_i at the j-th new step) or NULL.
 * *done gets the steps completed (always written when s and done are
 * valid). FC_ERR_CALLBACK, FC_ERR_NONFINITE, FC_ERR_NEWTON stop the run:
 * the *done completed steps are kept (and written to the buffers), the
 * failing step is not; fc_solver_failure tells which step and time.
 * Refused before any work (nothing changes, *done = 0): FC_ERR_NORHS,
 * FC_ERR_HORIZON (compressed: step count would pass the horizon),
 * FC_ERR_NOMEM (the streams' room for nsteps more samples).
 */
/* Statuses: FC_OK, FC_ERR_NULL, FC_ERR_BUSY, FC_ERR_NORHS, FC_ERR_HORIZON, FC_ERR_SIZE, FC_ERR_NOMEM (refused before any work); FC_ERR_CALLBACK, FC_ERR_NONFINITE, FC_ERR_NEWTON, FC_ERR_RANGE (stop the run, *done steps kept). */
FC_API int fc_solver_advance(fc_solver *s, size_t nsteps, double *t_out,
                             double *y_out, size_t *done);
/* Current time t0 + n*step, state y[m], steps done, dimension m. */
/* Statuses: FC_OK, FC_ERR_NULL, FC_ERR_BUSY. */
FC_API int fc_solver_time(const fc_solver *s, double *t);
/* Statuses: FC_OK, FC_ERR_NULL, FC_ERR_BUSY. */
FC_API int fc_solver_state(const fc_solver *s, double *y);
/* Statuses: FC_OK, FC_ERR_NULL, FC_ERR_BUSY. */
FC_API int fc_solver_steps(const fc_solver *s, uint64_t *n);
/* Statuses: FC_OK, FC_ERR_NULL. */
FC_API int fc_solver_dim(const fc_solver *s, size_t *m);
/* Calls of rhs (including those of difference Jacobians) and of jac. */
/* Statuses: FC_OK, FC_ERR_NULL, FC_ERR_BUSY. */
FC_API int fc_solver_counts(const fc_solver *s, uint64_t *rhs_calls,
                            uint64_t *jac_calls);
/* The step index (n+1 for the step from t_n; 0 for f(t0, y0)) and time of
   the last failed evaluation; *step = UINT64_MAX if none. */
/* Statuses: FC_OK, FC_ERR_NULL, FC_ERR_BUSY. */
FC_API int fc_solver_failure(const fc_solver *s, uint64_t *step, double *t);
/* Bytes of memory held (streams included). */
/* Statuses: FC_OK, FC_ERR_NULL, FC_ERR_BUSY. */
FC_API int fc_solver_nbytes(const fc_solver *s, size_t *nbytes);
/* Save / load: little-endian, versioned, FNV-1a 64 checksummed; streams
   embedded as fc_stream_save blobs (FC_METHOD_IMPLICIT_RECTANGLE with
   FC_MODE_EXACT: the f values of the steps instead, from which the loader
   rebuilds its stream; the loader's memory and work are in proportion to
   the blob). A loaded solver has no callbacks. */
/* Statuses: FC_OK, FC_ERR_NULL, FC_ERR_BUSY, FC_ERR_SIZE. */
FC_API int fc_solver_save_size(const fc_solver *s, size_t *size);
/* Statuses: FC_OK, FC_ERR_NULL, FC_ERR_BUSY, FC_ERR_ARG (buffer too small), FC_ERR_SIZE. */
FC_API int fc_solver_save(const fc_solver *s, unsigned char *buf, size_t size,
                          size_t *written);
/* Statuses: FC_OK, FC_ERR_NULL, FC_ERR_FORMAT, FC_ERR_NOMEM. */
FC_API int fc_solver_load(const unsigned char *buf, size_t size, fc_solver **out);
/* Static message for any status code (the solver's and fc_strerror's). */
/* Statuses: none (returns a static message). */
FC_API const char *fc_solver_strerror(int status);


/*
 * Controller: the fractional PID law of Podlubny (IEEE Trans. Automatic
 * Control 44, 1999) on sampled signals, t_n = n*step:
 *     u = Kp e_p + Ki I^lambda e + D_f + bias,
 *     e = r - y,  e_p = b r - y,  e_d = c r - y,
 *     D_f: Kd D^mu e_d through the first-order filter
 *          D_f[n] = (Tf D_f[n-1] + h Kd D^mu e_d[n]) / (Tf + h)  (Tf = 0: none),
 * r the setpoint, y the measurement, b and c the setpoint weights of the
 * proportional and derivative actions (c = 0: derivative on the measurement),
 * the output limited to [out_min, out_max] and its change per sample to
 * rate_limit*step (Astrom and Hagglund, Advanced PID Control, ISA 2006, for
 * setpoint weighting, derivative filtering, anti-windup and bumpless
 * transfer). I^lambda and D^mu are streams (fc_stream_create) of the rules
 * integral_rule (RECTANGLE or TRAPEZOID) and derivative_rule (GRUNWALD or
 * L1); an action whose gain is 0 keeps no stream.
 *
 * Anti-windup (FC_AW_CONDITIONAL, the default): conditional integration.
 * When the output is limited (by the limits or the rate limit) and Ki*e
 * would drive the unlimited output further in the direction of the limit,
 * only the part of e that brings the unlimited output to the limit is
 * pushed into the integral's history (0 if it is beyond the limit without
 * e; the integral is affine in the new sample). The history keeps
 * every earlier sample: for lambda < 1 the integral action then relaxes
 * (I^lambda of past samples changes with time) rather than holding still.
 * FC_AW_NONE pushes e always (for comparison).
 *
 * Manual mode (fc_controller_set_manual): the output is the manual value
 * (clamped to the limits); the streams still receive the signals (the
 * integral receives 0, so it does not wind up while the loop is open) and
 * the bias tracks u_manual - (P + I + D), so that switching back to
 * automatic gives no jump; the bias is then held.
 *
 * Memory: FC_MODE_COMPRESSED (bounded memory and work per update; the
 * orders the compressed streams accept: 0 < order < 1, also 1 <= order < 2
 * for RECTANGLE and TRAPEZOID) or FC_MODE_EXACT. Compressed streams are created with
 * FC_HORIZON_CONTINUE: past the horizon the controller keeps running
 * (stopping a controller mid-run is the greater hazard) and
 * fc_controller_status reports FC_CTRL_PAST_HORIZON.
 *
 * This software does not make a control system safe: validate in
 * simulation and on the plant, keep actuator and rate limits in the
 * hardware, and keep an independent safe stop that does not depend on it.
 */
#define FC_AW_NONE 0
#define FC_AW_CONDITIONAL 1
/* Bits of fc_controller_status. */
#define FC_CTRL_LIMITED 1        /* the last output was limited (limits or rate) */
#define FC_CTRL_PAST_HORIZON 2   /* a compressed stream is past its horizon */
#define FC_CTRL_MANUAL 4         /* manual mode */

typedef struct fc_controller_params {
    double kp, ki, kd;               /* finite */
    double integral_order;           /* as fc_stream_create for integral_rule */
    double derivative_order;         /* as fc_stream_create for derivative_rule */
    double step;                     /* finite, > 0 */
    int integral_rule;               /* FC_RULE_RECTANGLE or FC_RULE_TRAPEZOID */
    int derivative_rule;             /* FC_RULE_GRUNWALD or FC_RULE_L1 */
    double out_min, out_max;         /* out_min < out_max; +-inf allowed, not NaN */
    double rate_limit;               /* > 0 per unit time, +inf: none */
    double setpoint_weight_p;        /* b, finite */
    double setpoint_weight_d;        /* c, finite */
    double filter_time;              /* Tf >= 0, finite; 0: no filter */
    int anti_windup;                 /* FC_AW_* */
    int memory;                      /* FC_MODE_EXACT or FC_MODE_COMPRESSED */
    double tol, horizon;             /* compressed mode, as fc_stream_create */
} fc_controller_params;

typedef struct fc_controller fc_controller;

/* Defaults: kp = 1, ki = kd = 0, orders 0.5, step 1, TRAPEZOID, GRUNWALD,
   no limits, no rate limit, b = c = 1, Tf = 0, FC_AW_CONDITIONAL,
   FC_MODE_COMPRESSED, tol 1e-10, horizon 1e9. */
/* Statuses: FC_OK, FC_ERR_NULL. */
FC_API int fc_controller_default_params(fc_controller_params *p);
/* Statuses: FC_OK, FC_ERR_NULL, FC_ERR_ARG (gains, limits, weights, filter, anti-windup scheme), FC_ERR_RULE, FC_ERR_ORDER, FC_ERR_STEP, FC_ERR_MODE, FC_ERR_TOL, FC_ERR_RANGE, FC_ERR_NOMEM. */
FC_API int fc_controller_create(const fc_controller_params *p, fc_controller **out);
/* Statuses: none (void; NULL is a no-op). */
FC_API void fc_controller_free(fc_controller *c);
/* One sample: setpoint r, measurement y (finite), output *u. Refused
   (nothing changes) for non-finite input or a stream refusal. */
/* Statuses: FC_OK, FC_ERR_NULL, FC_ERR_BUSY, FC_ERR_NONFINITE, FC_ERR_RANGE, FC_ERR_SIZE (nothing changes on any of them). */
FC_API int fc_controller_update(fc_controller *c, double r, double y, double *u);
/* n samples; u may not overlap r or y (FC_ERR_ARG). All inputs are
   checked first (FC_ERR_NONFINITE: nothing changes). A stream refusal in
   the middle (FC_ERR_RANGE) leaves the controller as after *done samples
   (done may be NULL). */
/* Statuses: FC_OK, FC_ERR_NULL, FC_ERR_BUSY, FC_ERR_ARG (overlap), FC_ERR_NONFINITE, FC_ERR_RANGE, FC_ERR_SIZE, FC_ERR_NOMEM. */
FC_API int fc_controller_update_block(fc_controller *c, const double *r,
                                      const double *y, size_t n, double *u,
                                      size_t *done);
/* Manual mode with output u_manual (finite); automatic mode. */
/* Statuses: FC_OK, FC_ERR_NULL, FC_ERR_BUSY, FC_ERR_NONFINITE. */
FC_API int fc_controller_set_manual(fc_controller *c, double u_manual);
/* Statuses: FC_OK, FC_ERR_NULL, FC_ERR_BUSY. */
FC_API int fc_controller_set_auto(fc_controller *c);
/* Forget all samples, bias 0, automatic mode. */
/* Statuses: FC_OK, FC_ERR_NULL, FC_ERR_BUSY. */
FC_API int fc_controller_reset(fc_controller *c);
/* Statuses: FC_OK, FC_ERR_NULL. */
FC_API int fc_controller_get_params(const fc_controller *c, fc_controller_params *p);
/* FC_CTRL_* bits. */
/* Statuses: FC_OK, FC_ERR_NULL, FC_ERR_BUSY. */
FC_API int fc_controller_status(const fc_controller *c, int *status);
/* The last update's terms: t[0] P, t[1] I (Ki times the integral), t[2]
   filtered D, t[3] bias, t[4] unlimited sum, t[5] output. */
/* Statuses: FC_OK, FC_ERR_NULL, FC_ERR_BUSY. */
FC_API int fc_controller_terms(const fc_controller *c, double *t);
/* Statuses: FC_OK, FC_ERR_NULL, FC_ERR_BUSY. */
FC_API int fc_controller_count(const fc_controller *c, uint64_t *count);
/* Statuses: FC_OK, FC_ERR_NULL, FC_ERR_BUSY. */
FC_API int fc_controller_nbytes(const fc_controller *c, size_t *nbytes);
/* Save / load: little-endian, versioned, FNV-1a 64 checksummed; the
   streams embedded as fc_stream_save blobs; every field bounded and
   cross-checked on load (FC_ERR_FORMAT). */
/* Statuses: FC_OK, FC_ERR_NULL, FC_ERR_BUSY, FC_ERR_SIZE. */
FC_API int fc_controller_save_size(const fc_controller *c, size_t *size);
/* Statuses: FC_OK, FC_ERR_NULL, FC_ERR_BUSY, FC_ERR_ARG (buffer too small), FC_ERR_SIZE, FC_ERR_NOMEM. */
FC_API int fc_controller_save(const fc_controller *c, unsigned char *buf,
                              size_t size, size_t *written);
/* Statuses: FC_OK, FC_ERR_NULL, FC_ERR_FORMAT, FC_ERR_NOMEM. */
FC_API int fc_controller_load(const unsigned char *buf, size_t size,
                              fc_controller **out);

/*
 * Checkpoint files (POSIX). Every object with state has a pair
 *     fc_<object>_save_file(obj, path)
 *     fc_<object>_load_file(path, max_size, &obj)
 * that are its fc_<object>_save / fc_<object>_load around the two generic
 * functions fc_file_write and fc_file_read (the same bytes as the
 * buffer functions: a file saved here loads with fc_<object>_load and
 * the other way round).
 *
 * fc_file_write(path, data, size) replaces the file at path atomically:
 * it writes data to a new temporary file in the same directory, named
 * path + ".tmp-XXXXXX" (mkstemp: mode 0600, so a new checkpoint file is
 * readable by its owner only; a file that is replaced keeps its
 * permission bits), fsyncs it, renames it over path and fsyncs the
 * directory. At every moment path holds either the complete old file
 * or the complete new one, also when the process is killed or the machine
 * loses power (given a file system that honours fsync). On any failure
 * before the rename the temporary file is removed and path is untouched;
 * if only the final directory sync fails, path already holds the complete
 * new file but the rename may not survive a power loss (FC_ERR_IO all the
 * same). A process killed during the write leaves its temporary file
 * behind (never under the name path); such path.tmp-* files may be
 * deleted when no writer is running. One writer per path at a time.
 *
 * fc_file_read(path, max_size, &data, &size) reads a whole regular file
 * of at most max_size bytes into a new buffer (*data, free it with
 * fc_file_data_free; *size bytes); a longer file is refused with
 * FC_ERR_SIZE (before any read when its size says so, else once the
 * (max_size + 1)-th byte is read: the file may grow), so max_size bounds
 * the memory an untrusted file can make the library allocate.
 * The loaders treat the bytes as untrusted input (FC_ERR_FORMAT).
 *
 * Errors: FC_ERR_IO when a system call fails (missing directory or file,
 * permission denied, disk full, not a regular file, ...): errno then
 * holds the cause of the first failure (EISDIR for a directory, EINVAL
 * for another non-regular file); FC_ERR_ARG for an empty path or (write)
 * one ending in '/'. On every error *out, *data and *size are untouched
 * and no object changes. Paths are passed to the system as they are
 * (relative paths against the current directory).
 */
/* Statuses: FC_OK, FC_ERR_NULL (path, or data with size > 0), FC_ERR_ARG (path empty or ending in '/'), FC_ERR_SIZE (path too long), FC_ERR_IO, FC_ERR_NOMEM. */
FC_API int fc_file_write(const char *path, const unsigned char *data, size_t size);
/* Statuses: FC_OK, FC_ERR_NULL, FC_ERR_ARG (path empty), FC_ERR_IO, FC_ERR_SIZE (file longer than max_size), FC_ERR_NOMEM. */
FC_API int fc_file_read(const char *path, size_t max_size, unsigned char **data,
                        size_t *size);
/* Statuses: none (void; NULL is a no-op). */
FC_API void fc_file_data_free(unsigned char *data);
/* Statuses: FC_OK, FC_ERR_NULL, FC_ERR_BUSY, FC_ERR_SIZE, FC_ERR_ARG (path empty or ending in '/'), FC_ERR_IO, FC_ERR_NOMEM. */
FC_API int fc_stream_save_file(fc_stream *s, const char *path);
/* Statuses: FC_OK, FC_ERR_NULL, FC_ERR_ARG (path empty), FC_ERR_IO, FC_ERR_SIZE (file longer than max_size), FC_ERR_FORMAT, FC_ERR_NOMEM. */
FC_API int fc_stream_load_file(const char *path, size_t max_size, fc_stream **out);
/* Statuses: FC_OK, FC_ERR_NULL, FC_ERR_SIZE, FC_ERR_ARG (path empty or ending in '/'), FC_ERR_IO, FC_ERR_NOMEM. */
FC_API int fc_solver_save_file(const fc_solver *s, const char *path);
/* Statuses: FC_OK, FC_ERR_NULL, FC_ERR_ARG (path empty), FC_ERR_IO, FC_ERR_SIZE (file longer than max_size), FC_ERR_FORMAT, FC_ERR_NOMEM. */
FC_API int fc_solver_load_file(const char *path, size_t max_size, fc_solver **out);
/* Statuses: FC_OK, FC_ERR_NULL, FC_ERR_BUSY, FC_ERR_SIZE, FC_ERR_ARG (path empty or ending in '/'), FC_ERR_IO, FC_ERR_NOMEM. */
FC_API int fc_controller_save_file(const fc_controller *c, const char *path);
/* Statuses: FC_OK, FC_ERR_NULL, FC_ERR_ARG (path empty), FC_ERR_IO, FC_ERR_SIZE (file longer than max_size), FC_ERR_FORMAT, FC_ERR_NOMEM. */
FC_API int fc_controller_load_file(const char *path, size_t max_size,
                                   fc_controller **out);

/* ------------------------------------------------------------------
 * EXPERIMENTAL: the functions below may change or go in any version
 * (they are not part of the stable interface a C caller should depend
 * on; the Python package's own scalar push uses fc_stream_push1 and moves
 * with it).
 * ------------------------------------------------------------------ */
/*
 * The library's own real FFT (power-of-two sizes 2 .. 2^30), exposed for
 * callers who want it and for benchmarks. A plan keeps twiddles and scratch
 * space: one plan per thread. Spectrum layout: n/2+1 complex values
 * interleaved (re, im) in natural order, X_k = sum_j x_j exp(-2 pi i jk/n).
 */
typedef struct fc_fft_plan fc_fft_plan;
/* Statuses: FC_OK, FC_ERR_NULL, FC_ERR_SIZE (n not a power of two in 2 .. 2^30), FC_ERR_NOMEM. */
FC_API int fc_rfft_create(size_t n, fc_fft_plan **out);
/* Statuses: none (void; NULL is a no-op). */
FC_API void fc_rfft_free(fc_fft_plan *p);
/* in: n reals; out: n+2 doubles; in and out must not overlap (FC_ERR_ARG). */
/* Statuses: FC_OK, FC_ERR_NULL, FC_ERR_ARG (overlap). */
FC_API int fc_rfft_forward(fc_fft_plan *p, const double *in, double *out);
/* in: n+2 doubles; out: n reals, scaled by 1/n (the true inverse); the
   imaginary parts of bins 0 and n/2 are ignored; no overlap (FC_ERR_ARG). */
/* Statuses: FC_OK, FC_ERR_NULL, FC_ERR_ARG (overlap). */
FC_API int fc_rfft_inverse(fc_fft_plan *p, const double *in, double *out);

/* Scalar fast path of fc_stream_push for a stream of exactly one channel
   (FC_ERR_ARG otherwise): the same result, bit for bit, as
   fc_stream_push(s, &x, y); x must be finite (FC_ERR_NONFINITE); y: one
   double. */
/* Statuses: FC_OK, FC_ERR_NULL, FC_ERR_BUSY, FC_ERR_ARG (channels != 1), FC_ERR_NONFINITE, FC_ERR_RANGE, FC_ERR_HORIZON, FC_ERR_SIZE, FC_ERR_NOMEM. */
FC_API int fc_stream_push1(fc_stream *s, double x, double *y);

/* fc_stream_push1 returning the output: the same push, bit for bit, for
   callers whose every read of an output buffer costs (the Python package's
   scalar push). On success returns the output (always finite: an output
   beyond the double range refuses the push) and leaves *status untouched;
   on refusal changes nothing, returns NaN and writes the status to
   *status, one of those of fc_stream_push1 (FC_ERR_NULL when s or status
   is NULL; status NULL: nothing is written). */
/* Statuses: none (returns the output, NaN on refusal with *status one of FC_ERR_NULL, FC_ERR_BUSY, FC_ERR_ARG, FC_ERR_NONFINITE, FC_ERR_RANGE, FC_ERR_HORIZON, FC_ERR_SIZE, FC_ERR_NOMEM). */
FC_API double fc_stream_push1_value(fc_stream *s, double x, int *status);

/* FC_CDEF_END */

#ifdef __cplusplus
}
#endif

#endif /* FRACCONV_H */
