/*
 * fft.h -- private real FFT of power-of-two sizes (no outside dependency).
 *
 * A plan holds precomputed twiddles and its own scratch space, so one plan
 * must not be executed by two threads at once.
 *
 * Layout of a spectrum of size n: n/2+1 complex values, interleaved
 * (re, im), natural order: out[2k] = Re X_k, out[2k+1] = Im X_k, k = 0..n/2,
 * with X_k = sum_j x_j exp(-2 pi i j k / n) (out[1] = out[n+1] = 0).
 */
#ifndef FC_FFT_H
#define FC_FFT_H

#include <stddef.h>

typedef struct fc_fft_plan fc_fft_plan;

/* n a power of two, 2 <= n <= 2^30; FC_OK, FC_ERR_SIZE, FC_ERR_NOMEM. */
int fc__fft_create(size_t n, fc_fft_plan **out);
void fc__fft_free(fc_fft_plan *p);
size_t fc__fft_size(const fc_fft_plan *p);
size_t fc__fft_nbytes(const fc_fft_plan *p);

/* in: n reals; out: n+2 doubles. in and out must not overlap. */
void fc__fft_forward(fc_fft_plan *p, const double *in, double *out);
/* in: n+2 doubles (a half spectrum, read only); out: n reals, the
   UNNORMALISED inverse: out_j = sum_k X_k exp(+2 pi i j k / n) over the full
   Hermitian spectrum, i.e. n times the true inverse. in, out must not
   overlap. */
void fc__fft_inverse(fc_fft_plan *p, const double *in, double *out);
/* out[k] = sum_{j<cnt} a[j][k] * b[j][k] (complex), n/2+1 bins of the
   plan's size n, cnt >= 1; the AVX2 or portable version chosen when the
   plan was made. */
void fc__spec_dot(const fc_fft_plan *p, const double *const *a,
                  const double *const *b, size_t cnt, double *out);
/* ng frames of a uniformly partitioned convolution (2 <= ng <= 8): out[g]
   = sum_{j<cnt} x[cnt-1+g-j] * b[j], each bit for bit the fc__spec_dot of
   its own operands (x[cnt-1+g-j] with b[j], j = 0 .. cnt-1); out[g] may be
   the spectrum x[g-1] itself, and no other of x. */
void fc__spec_dot_frames(const fc_fft_plan *p, const double *const *x,
                         const double *const *b, size_t cnt, size_t ng,
                         double *const *out);
/* The same with frame g summing its first lim[g] terms only (1 <= lim[g]
   <= cnt): out[g] = sum_{j<lim[g]} x[cnt-1+g-j] * b[j]. */
void fc__spec_dot_frames_lim(const fc_fft_plan *p, const double *const *x,
                             const double *const *b, size_t cnt,
                             const size_t *lim, size_t ng, double *const *out);
/* out[k] = a[k] * b[k] (complex) for the n/2+1 bins of the plan's size. */
void fc__spec_mul(const fc_fft_plan *p, const double *a, const double *b,
                  double *out);

/* out[t] = sum_{i<len} k[i] u[t+i] for t < T (len a multiple of 8), each
   in a fixed order: eight partial sums of the terms i = r mod 8, in the
   order of i, combined ((0+4)+(2+6))+((1+5)+(3+7)), every product and sum
   rounded by itself; the kernel of the AVX2 or portable instance, chosen
   by fc__leaf_dots_kernel (call once, keep the pointer). */
typedef void (*fc__leaf_dots_fn)(const double *k, const double *u, size_t len,
                                 size_t T, double *out);
fc__leaf_dots_fn fc__leaf_dots_kernel(void);

#endif
