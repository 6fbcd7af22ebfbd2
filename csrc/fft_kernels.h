/*
 * fft_kernels.h -- the vectorised body of the private real FFT (fft.c).
 *
 * Not a normal header: fft.c includes it once per instruction set, after
 * defining
 *   FFT_FN(name)  the suffixed name of every function defined here,
 *   V             a vector of two complex doubles [re0, im0, re1, im1],
 *   VLD VST VADD VSUB VMUL VSET1 VSWAP VCONJ VMUL_MI VMUL_PI VCMUL VCMULC
 *   VREV VLO2 VHI2 VDUPRE VDUPIM  (see fft.c for their meaning),
 *   FFT_TARGET    the attribute every function here carries: empty for the
 *                 portable instance, __attribute__((target("avx2,fma"))) for
 *                 the AVX2 one (a function attribute, which GCC and clang
 *                 both understand; no pragma, no target_clones),
 *   FFT_ALWAYS_INLINE.
 * It defines the complex Stockham stages, the real-to-complex pre/post
 * passes, the two real transform drivers and the spectrum products.
 *
 * Complex transform of size M (interleaved): radix-4 Stockham autosort,
 * decimation in frequency (no bit reversal). Stage with span ncur = 4m and
 * stride s (s * ncur = M) maps
 *     y[q + s(4p + r)] = w_ncur^(p r) * sum_k x[q + s(p + k m)] W4^(r k),
 * p < m, q < s, r < 4 (W4 = -i forward, +i inverse, twiddles conjugated for
 * the inverse). The last stage has m = 1 (no twiddles); it is radix 8 when
 * log2 M is odd. Large M: see cfft_big.
 */

/* ---- radix-4 butterfly on four vectors, result in place order 0..3 ---- */
#define FFT_BFLY4(a0, a1, a2, a3, y0, y1, y2, y3, inv)                      \
    do {                                                                    \
        V t0_ = VADD(a0, a2), t1_ = VSUB(a0, a2);                           \
        V t2_ = VADD(a1, a3), t3_ = VSUB(a1, a3);                           \
        V u_ = (inv) ? VMUL_PI(t3_) : VMUL_MI(t3_);                         \
        y0 = VADD(t0_, t2_);                                                \
        y2 = VSUB(t0_, t2_);                                                \
        y1 = VADD(t1_, u_);                                                 \
        y3 = VSUB(t1_, u_);                                                 \
    } while (0)

#define FFT_TWMUL(y, wr, wi, inv) ((inv) ? VCMULC(y, wr, wi) : VCMUL(y, wr, wi))

/* radix-8 butterfly: y_r = sum_k a_k W8^(r k), as two 4-point DFTs of the
   even and odd inputs, o_r *= W8^r, then y_r = e_r + o_r, y_{r+4} = e_r - o_r
   (W8 = (1 -/+ i)/sqrt2, W8^2 = -/+ i, W8^3 = (-1 -/+ i)/sqrt2, upper sign
   forward). */
#define FFT_BFLY8(a0, a1, a2, a3, a4, a5, a6, a7,                           \
                  y0, y1, y2, y3, y4, y5, y6, y7, inv)                      \
    do {                                                                    \
        const V c8_ = VSET1(0.70710678118654752440084436210484904);         \
        const V mc8_ = VSET1(-0.70710678118654752440084436210484904);       \
        V e0_, e1_, e2_, e3_, o0_, o1_, o2_, o3_;                           \
        FFT_BFLY4(a0, a2, a4, a6, e0_, e1_, e2_, e3_, inv);                 \
        FFT_BFLY4(a1, a3, a5, a7, o0_, o1_, o2_, o3_, inv);                 \
        o1_ = FFT_TWMUL(o1_, c8_, mc8_, inv);                               \
        o2_ = (inv) ? VMUL_PI(o2_) : VMUL_MI(o2_);                          \
        o3_ = FFT_TWMUL(o3_, mc8_, mc8_, inv);                              \
        y0 = VADD(e0_, o0_);                                                \
        y4 = VSUB(e0_, o0_);                                                \
        y1 = VADD(e1_, o1_);                                                \
        y5 = VSUB(e1_, o1_);                                                \
        y2 = VADD(e2_, o2_);                                                \
        y6 = VSUB(e2_, o2_);                                                \
        y3 = VADD(e3_, o3_);                                                \
        y7 = VSUB(e3_, o3_);                                                \
    } while (0)

/* First radix-8 stage (s = 1), vectorised over p (m even). Twiddle layout
   per pair of p: for k = 1..7, [w_k(p), w_k(p+1)] (4 doubles). */
static FFT_TARGET FFT_ALWAYS_INLINE void
FFT_FN(st_first8_body)(const double *restrict x, double *restrict y, size_t m,
                       const double *restrict tw, int inv)
{
    size_t p;
    for (p = 0; p < m; p += 2) {
        V a0 = VLD(x + 2 * p), a1 = VLD(x + 2 * (p + m));
        V a2 = VLD(x + 2 * (p + 2 * m)), a3 = VLD(x + 2 * (p + 3 * m));
        V a4 = VLD(x + 2 * (p + 4 * m)), a5 = VLD(x + 2 * (p + 5 * m));
        V a6 = VLD(x + 2 * (p + 6 * m)), a7 = VLD(x + 2 * (p + 7 * m));
        V y0, y1, y2, y3, y4, y5, y6, y7, w;
        const double *t = tw + 14 * p;
        FFT_BFLY8(a0, a1, a2, a3, a4, a5, a6, a7,
                  y0, y1, y2, y3, y4, y5, y6, y7, inv);
#define FFT_TW8(yy, j) (w = VLD(t + 4 * ((j) - 1)),                         \
                        yy = FFT_TWMUL(yy, VDUPRE(w), VDUPIM(w), inv))
        FFT_TW8(y1, 1); FFT_TW8(y2, 2); FFT_TW8(y3, 3); FFT_TW8(y4, 4);
        FFT_TW8(y5, 5); FFT_TW8(y6, 6); FFT_TW8(y7, 7);
#undef FFT_TW8
        VST(y + 16 * p, VLO2(y0, y1));
        VST(y + 16 * p + 4, VLO2(y2, y3));
        VST(y + 16 * p + 8, VLO2(y4, y5));
        VST(y + 16 * p + 12, VLO2(y6, y7));
        VST(y + 16 * p + 16, VHI2(y0, y1));
        VST(y + 16 * p + 20, VHI2(y2, y3));
        VST(y + 16 * p + 24, VHI2(y4, y5));
        VST(y + 16 * p + 28, VHI2(y6, y7));
    }
}

/* Twiddled radix-8 stage, s >= 2, columns q0 .. q0+qn-1 (qn even).
   Twiddle layout: tw[14p + 2(k-1)] = w_ncur^(p k), k = 1..7. */
static FFT_TARGET FFT_ALWAYS_INLINE void
FFT_FN(st_r8_body)(const double *restrict x, double *restrict y, size_t s,
                   size_t m, const double *restrict tw, size_t q0, size_t qn,
                   int inv)
{
    size_t p, q;
    const size_t sm = s * m;
    for (p = 0; p < m; p++) {
        const double *t = tw + 14 * p;
        const double *x0 = x + 2 * (s * p + q0);
        double *y0p = y + 2 * (8 * s * p + q0);
        for (q = 0; q < qn; q += 2) {
            V a0 = VLD(x0 + 2 * q), a1 = VLD(x0 + 2 * (q + sm));
            V a2 = VLD(x0 + 2 * (q + 2 * sm)), a3 = VLD(x0 + 2 * (q + 3 * sm));
            V a4 = VLD(x0 + 2 * (q + 4 * sm)), a5 = VLD(x0 + 2 * (q + 5 * sm));
            V a6 = VLD(x0 + 2 * (q + 6 * sm)), a7 = VLD(x0 + 2 * (q + 7 * sm));
            V y0, y1, y2, y3, y4, y5, y6, y7;
            FFT_BFLY8(a0, a1, a2, a3, a4, a5, a6, a7,
                      y0, y1, y2, y3, y4, y5, y6, y7, inv);
            VST(y0p + 2 * q, y0);
#define FFT_ST8(yy, j)                                                      \
            VST(y0p + 2 * (q + (j) * s),                                    \
                FFT_TWMUL(yy, VSET1(t[2 * (j) - 2]), VSET1(t[2 * (j) - 1]), inv))
            FFT_ST8(y1, 1); FFT_ST8(y2, 2); FFT_ST8(y3, 3); FFT_ST8(y4, 4);
            FFT_ST8(y5, 5); FFT_ST8(y6, 6); FFT_ST8(y7, 7);
#undef FFT_ST8
        }
    }
}

/* First stage (s = 1), vectorised over p (m even). Twiddle layout per pair
   of p: for k = 1..3, [w_k(p), w_k(p+1)] (4 doubles). */
static FFT_TARGET FFT_ALWAYS_INLINE void
FFT_FN(st_first_body)(const double *restrict x, double *restrict y, size_t m,
                      const double *restrict tw, int inv)
{
    size_t p;
    for (p = 0; p < m; p += 2) {
        V a0 = VLD(x + 2 * p), a1 = VLD(x + 2 * (p + m));
        V a2 = VLD(x + 2 * (p + 2 * m)), a3 = VLD(x + 2 * (p + 3 * m));
        V y0, y1, y2, y3, w;
        const double *t = tw + 6 * p;
        FFT_BFLY4(a0, a1, a2, a3, y0, y1, y2, y3, inv);
        w = VLD(t);
        y1 = FFT_TWMUL(y1, VDUPRE(w), VDUPIM(w), inv);
        w = VLD(t + 4);
        y2 = FFT_TWMUL(y2, VDUPRE(w), VDUPIM(w), inv);
        w = VLD(t + 8);
        y3 = FFT_TWMUL(y3, VDUPRE(w), VDUPIM(w), inv);
        VST(y + 8 * p, VLO2(y0, y1));
        VST(y + 8 * p + 4, VLO2(y2, y3));
        VST(y + 8 * p + 8, VHI2(y0, y1));
        VST(y + 8 * p + 12, VHI2(y2, y3));
    }
}

/* Twiddled radix-4 stage, s >= 2, columns q0 .. q0+qn-1 (qn even).
   Twiddle layout: tw[6p + 2(k-1)] = w_ncur^(p k), k = 1..3. */
static FFT_TARGET FFT_ALWAYS_INLINE void
FFT_FN(st_r4_body)(const double *restrict x, double *restrict y, size_t s,
                   size_t m, const double *restrict tw, size_t q0, size_t qn,
                   int inv)
{
    size_t p, q;
    const size_t sm = s * m;
    for (p = 0; p < m; p++) {
        const V w1r = VSET1(tw[6 * p]), w1i = VSET1(tw[6 * p + 1]);
        const V w2r = VSET1(tw[6 * p + 2]), w2i = VSET1(tw[6 * p + 3]);
        const V w3r = VSET1(tw[6 * p + 4]), w3i = VSET1(tw[6 * p + 5]);
        const double *x0 = x + 2 * (s * p + q0);
        double *y0p = y + 2 * (4 * s * p + q0);
        for (q = 0; q < qn; q += 2) {
            V a0 = VLD(x0 + 2 * q), a1 = VLD(x0 + 2 * (q + sm));
            V a2 = VLD(x0 + 2 * (q + 2 * sm)), a3 = VLD(x0 + 2 * (q + 3 * sm));
            V y0, y1, y2, y3;
            FFT_BFLY4(a0, a1, a2, a3, y0, y1, y2, y3, inv);
            VST(y0p + 2 * q, y0);
            VST(y0p + 2 * (q + s), FFT_TWMUL(y1, w1r, w1i, inv));
            VST(y0p + 2 * (q + 2 * s), FFT_TWMUL(y2, w2r, w2i, inv));
            VST(y0p + 2 * (q + 3 * s), FFT_TWMUL(y3, w3r, w3i, inv));
        }
    }
}

/* Last radix-4 stage (m = 1, no twiddles), columns q0 .. q0+qn-1. */
static FFT_TARGET FFT_ALWAYS_INLINE void
FFT_FN(st_r4l_body)(const double *restrict x, double *restrict y, size_t s,
                    size_t q0, size_t qn, int inv)
{
    size_t q;
    for (q = q0; q < q0 + qn; q += 2) {
        V a0 = VLD(x + 2 * q), a1 = VLD(x + 2 * (q + s));
        V a2 = VLD(x + 2 * (q + 2 * s)), a3 = VLD(x + 2 * (q + 3 * s));
        V y0, y1, y2, y3;
        FFT_BFLY4(a0, a1, a2, a3, y0, y1, y2, y3, inv);
        VST(y + 2 * q, y0);
        VST(y + 2 * (q + s), y1);
        VST(y + 2 * (q + 2 * s), y2);
        VST(y + 2 * (q + 3 * s), y3);
    }
}

/* Last radix-8 stage (m = 1), columns q0 .. q0+qn-1. */
static FFT_TARGET FFT_ALWAYS_INLINE void
FFT_FN(st_r8l_body)(const double *restrict x, double *restrict y, size_t s,
                    size_t q0, size_t qn, int inv)
{
    size_t q;
    for (q = q0; q < q0 + qn; q += 2) {
        V a0 = VLD(x + 2 * q), a1 = VLD(x + 2 * (q + s));
        V a2 = VLD(x + 2 * (q + 2 * s)), a3 = VLD(x + 2 * (q + 3 * s));
        V a4 = VLD(x + 2 * (q + 4 * s)), a5 = VLD(x + 2 * (q + 5 * s));
        V a6 = VLD(x + 2 * (q + 6 * s)), a7 = VLD(x + 2 * (q + 7 * s));
        V y0, y1, y2, y3, y4, y5, y6, y7;
        FFT_BFLY8(a0, a1, a2, a3, a4, a5, a6, a7,
                  y0, y1, y2, y3, y4, y5, y6, y7, inv);
        VST(y + 2 * q, y0);
        VST(y + 2 * (q + s), y1);
        VST(y + 2 * (q + 2 * s), y2);
        VST(y + 2 * (q + 3 * s), y3);
        VST(y + 2 * (q + 4 * s), y4);
        VST(y + 2 * (q + 5 * s), y5);
        VST(y + 2 * (q + 6 * s), y6);
        VST(y + 2 * (q + 7 * s), y7);
    }
}

/* Non-inlined forward / inverse instances. */
static FFT_TARGET void FFT_FN(st_first_f)(const double *restrict x, double *restrict y,
                               size_t m, const double *restrict tw)
{ FFT_FN(st_first_body)(x, y, m, tw, 0); }
static FFT_TARGET void FFT_FN(st_first_b)(const double *restrict x, double *restrict y,
                               size_t m, const double *restrict tw)
{ FFT_FN(st_first_body)(x, y, m, tw, 1); }
static FFT_TARGET void FFT_FN(st_r4_f)(const double *restrict x, double *restrict y,
                            size_t s, size_t m, const double *restrict tw,
                            size_t q0, size_t qn)
{ FFT_FN(st_r4_body)(x, y, s, m, tw, q0, qn, 0); }
static FFT_TARGET void FFT_FN(st_r4_b)(const double *restrict x, double *restrict y,
                            size_t s, size_t m, const double *restrict tw,
                            size_t q0, size_t qn)
{ FFT_FN(st_r4_body)(x, y, s, m, tw, q0, qn, 1); }
static FFT_TARGET void FFT_FN(st_first8_f)(const double *restrict x, double *restrict y,
                                size_t m, const double *restrict tw)
{ FFT_FN(st_first8_body)(x, y, m, tw, 0); }
static FFT_TARGET void FFT_FN(st_first8_b)(const double *restrict x, double *restrict y,
                                size_t m, const double *restrict tw)
{ FFT_FN(st_first8_body)(x, y, m, tw, 1); }
static FFT_TARGET void FFT_FN(st_r8_f)(const double *restrict x, double *restrict y,
                            size_t s, size_t m, const double *restrict tw,
                            size_t q0, size_t qn)
{ FFT_FN(st_r8_body)(x, y, s, m, tw, q0, qn, 0); }
static FFT_TARGET void FFT_FN(st_r8_b)(const double *restrict x, double *restrict y,
                            size_t s, size_t m, const double *restrict tw,
                            size_t q0, size_t qn)
{ FFT_FN(st_r8_body)(x, y, s, m, tw, q0, qn, 1); }
static FFT_TARGET void FFT_FN(st_r4l_f)(const double *restrict x, double *restrict y,
                             size_t s, size_t q0, size_t qn)
{ FFT_FN(st_r4l_body)(x, y, s, q0, qn, 0); }
static FFT_TARGET void FFT_FN(st_r4l_b)(const double *restrict x, double *restrict y,
                             size_t s, size_t q0, size_t qn)
{ FFT_FN(st_r4l_body)(x, y, s, q0, qn, 1); }
static FFT_TARGET void FFT_FN(st_r8l_f)(const double *restrict x, double *restrict y,
                             size_t s, size_t q0, size_t qn)
{ FFT_FN(st_r8l_body)(x, y, s, q0, qn, 0); }
static FFT_TARGET void FFT_FN(st_r8l_b)(const double *restrict x, double *restrict y,
                             size_t s, size_t q0, size_t qn)
{ FFT_FN(st_r8l_body)(x, y, s, q0, qn, 1); }

static FFT_TARGET void FFT_FN(run_stage)(const struct fc__fft_stage *st,
                              const double *x, double *y, size_t q0,
                              size_t qn, int inv)
{
    switch (st->kind) {
    case FC__ST_FIRST:
        if (inv) FFT_FN(st_first_b)(x, y, st->m, st->tw);
        else FFT_FN(st_first_f)(x, y, st->m, st->tw);
        break;
    case FC__ST_R4:
        if (inv) FFT_FN(st_r4_b)(x, y, st->s, st->m, st->tw, q0, qn);
        else FFT_FN(st_r4_f)(x, y, st->s, st->m, st->tw, q0, qn);
        break;
    case FC__ST_FIRST8:
        if (inv) FFT_FN(st_first8_b)(x, y, st->m, st->tw);
        else FFT_FN(st_first8_f)(x, y, st->m, st->tw);
        break;
    case FC__ST_R8:
        if (inv) FFT_FN(st_r8_b)(x, y, st->s, st->m, st->tw, q0, qn);
        else FFT_FN(st_r8_f)(x, y, st->s, st->m, st->tw, q0, qn);
        break;
    case FC__ST_R4L:
        if (inv) FFT_FN(st_r4l_b)(x, y, st->s, q0, qn);
        else FFT_FN(st_r4l_f)(x, y, st->s, q0, qn);
        break;
    default: /* FC__ST_R8L */
        if (inv) FFT_FN(st_r8l_b)(x, y, st->s, q0, qn);
        else FFT_FN(st_r8l_f)(x, y, st->s, q0, qn);
        break;
    }
}

/* Stages st[0..ns) on a local buffer: input src, ping-pong between a and b
   (neither is src); returns the buffer holding the result. */
static FFT_TARGET const double *FFT_FN(run_local)(const struct fc__fft_stage *st, int ns,
                                       const double *src, double *a,
                                       double *b, int inv)
{
    const double *x = src;
    int i;
    for (i = 0; i < ns; i++) {
        double *y = (i & 1) ? b : a;
        FFT_FN(run_stage)(&st[i], x, y, 0, st[i].s, inv);
        x = y;
    }
    return x;
}

/*
 * Large sizes, m = n1 n2 (decimation in frequency, "four-step" order):
 * front: for each column j2 < n2, the n1-point transform of
 * x[j1 n2 + j2] (j1 < n1), times exp(-/+ 2 pi i j2 k1 / m), stored tiled:
 * T[(k1/B) B n2 + B j2 + k1 % B]; back: for each k1, the n2-point transform
 * over j2 gives X[k1 + n1 k2]. Columns go B at a time through local
 * contiguous buffers, so every stage works in cache and memory is read and
 * written twice in all.
 */
static FFT_TARGET void FFT_FN(cfft_big)(const fc_fft_plan *p, const double *src,
                             double *out, int inv)
{
    const size_t n1 = p->n1, n2 = p->n2, bw = p->bw;
    double *T = p->scratch;
    size_t c, l, j, k1, b;
    for (c = 0; c < n2; c += bw) {
        const double *r, *t1 = p->tw1 + 2 * n1 * (c / bw);
        for (l = 0; l < n1; l++) {
            const double *sp = src + 2 * (c + l * n2);
            double *gp = p->loc1 + 2 * bw * l;
            if (c + bw < n2)
                for (j = 0; j < 2 * bw; j += 8) FFT_PREFETCH(sp + 2 * bw + j);
            for (j = 0; j < 2 * bw; j += 4) VST(gp + j, VLD(sp + j));
        }
        r = FFT_FN(run_local)(p->front, p->nfront, p->loc1, p->loc2,
                              p->loc1, inv);
        for (k1 = 0; k1 < n1; k1 += 2) {
            const V ar = VSET1(t1[2 * k1]), ai = VSET1(t1[2 * k1 + 1]);
            const V br = VSET1(t1[2 * k1 + 2]), bi = VSET1(t1[2 * k1 + 3]);
            double *dst = T + 2 * ((k1 / bw) * bw * n2 + bw * c + k1 % bw);
            const double *w2 = p->tw2 + 2 * k1 * bw;
            for (b = 0; b < bw; b += 2) {
                V u = VLD(r + 2 * (b + bw * k1));
                V v = VLD(r + 2 * (b + bw * (k1 + 1)));
                V wu = VCMUL(VLD(w2 + 2 * b), ar, ai);
                V wv = VCMUL(VLD(w2 + 2 * (bw + b)), br, bi);
                u = FFT_TWMUL(u, VDUPRE(wu), VDUPIM(wu), inv);
                v = FFT_TWMUL(v, VDUPRE(wv), VDUPIM(wv), inv);
                VST(dst + 2 * bw * b, VLO2(u, v));
                VST(dst + 2 * bw * (b + 1), VHI2(u, v));
            }
        }
    }
    for (c = 0; c < n1; c += bw) {
        const double *r = FFT_FN(run_local)(p->back, p->nback, T + 2 * c * n2,
                                            p->loc1, p->loc2, inv);
        for (l = 0; l < n2; l++) {
            const double *sp = r + 2 * bw * l;
            double *op = out + 2 * (c + n1 * l);
            for (j = 0; j < 2 * bw; j += 4) VST(op + j, VLD(sp + j));
        }
    }
}

/* Complex transform of size p->m (>= 16) from src into out (both m complex),
   using p->scratch; src is only read. Stage i writes out when nstages-1-i
   is even, so the last stage lands in out. */
static FFT_TARGET void FFT_FN(cfft)(const fc_fft_plan *p, const double *src, double *out,
                         int inv)
{
    const int ns = p->nstages;
    double *scr = p->scratch;
    const double *x = src;
    int i;
    if (p->big) {
        FFT_FN(cfft_big)(p, src, out, inv);
        return;
    }
    for (i = 0; i < ns; i++) {
        double *y = (((ns - 1 - i) & 1) == 0) ? out : scr;
        FFT_FN(run_stage)(&p->stages[i], x, y, 0, p->stages[i].s, inv);
        x = y;
    }
}

/*
 * The pass between the half-size complex transform and the real spectrum.
 * For k = 1 .. M/2-1, with A = Z_k, B = conj(Z_{M-k}):
 *     E = sc (A + B),  T = sc * e_k^(*) (A - B),
 *     out_k = E + T,   out_{M-k} = conj(E - T),
 * where e_k = -i w_n^k (conjugated for the inverse). Forward: Z the complex
 * spectrum, sc = 1/2, out the real spectrum. Inverse: Z the half spectrum,
 * sc = 1 (or 1/n), out the complex input of the inverse transform. z and out
 * may be the same array (each pair is read before it is written).
 * k = 0 and k = M/2 are done by the caller.
 */
static FFT_TARGET void FFT_FN(pair_pass)(const double *z, double *out, size_t M,
                              const double *e, double sc, int inv)
{
    size_t k = 1;
    const V vs = VSET1(sc);
    for (; k + 2 <= M / 2; k += 2) {
        V a = VLD(z + 2 * k);
        V b = VCONJ(VREV(VLD(z + 2 * (M - k - 1))));
        V w = VLD(e + 2 * k);
        V ee = VMUL(vs, VADD(a, b));
        V d = VMUL(vs, VSUB(a, b));
        V t = inv ? VCMULC(d, VDUPRE(w), VDUPIM(w))
                  : VCMUL(d, VDUPRE(w), VDUPIM(w));
        VST(out + 2 * k, VADD(ee, t));
        VST(out + 2 * (M - k - 1), VREV(VCONJ(VSUB(ee, t))));
    }
    for (; k < M / 2; k++) {
        const double ar = z[2 * k], ai = z[2 * k + 1];
        const double br = z[2 * (M - k)], bi = -z[2 * (M - k) + 1];
        const double wr = e[2 * k], wi = inv ? -e[2 * k + 1] : e[2 * k + 1];
        const double er = sc * (ar + br), ei = sc * (ai + bi);
        const double dr = sc * (ar - br), di = sc * (ai - bi);
        const double tr = dr * wr - di * wi, ti = dr * wi + di * wr;
        out[2 * k] = er + tr;
        out[2 * k + 1] = ei + ti;
        out[2 * (M - k)] = er - tr;
        out[2 * (M - k) + 1] = -(ei - ti);
    }
}

static FFT_TARGET void FFT_FN(rfft_forward)(fc_fft_plan *p, const double *in,
                                 double *out)
{
    const size_t M = p->m;
    if (M < FC__FFT_MIN_VEC) fc__small_cdft(p, in, out, 0);
    else FFT_FN(cfft)(p, in, out, 0);
    {
        const double r = out[0], i = out[1];
        out[0] = r + i;
        out[1] = 0.0;
        out[2 * M] = r - i;
        out[2 * M + 1] = 0.0;
    }
    if (M >= 2) out[M + 1] = -out[M + 1]; /* bin M/2: conj(Z_{M/2}) */
    FFT_FN(pair_pass)(out, out, M, p->twpost, 0.5, 0);
}

/* out = sc * (unnormalised inverse); sc = 1 or 1/n. */
static FFT_TARGET void FFT_FN(rfft_inverse)(fc_fft_plan *p, const double *in,
                                 double *out, double sc)
{
    const size_t M = p->m, ns = (size_t)p->nstages;
    /* the buffer that the first stage reads (see cfft, cfft_big) */
    double *z;
    if (M < FC__FFT_MIN_VEC) z = p->scratch;
    else if (p->big) z = out;
    else z = ((ns & 1) == 0) ? out : p->scratch;
    {
        const double x0 = in[0], xm = in[2 * M];
        z[0] = sc * (x0 + xm);
        z[1] = sc * (x0 - xm);
    }
    if (M >= 2) {
        z[M] = 2.0 * sc * in[M];
        z[M + 1] = -2.0 * sc * in[M + 1];
    }
    FFT_FN(pair_pass)(in, z, M, p->twpost, sc, 1);
    if (M < FC__FFT_MIN_VEC) fc__small_cdft(p, z, out, 1);
    else FFT_FN(cfft)(p, z, out, 1);
}

/* out = sum_{j<cnt} a[j] * b[j] over nb bins, the sum kept in registers
   (every spectrum read once, out written once); cnt >= 1. */
static FFT_TARGET void FFT_FN(spec_dot)(size_t nb, const double *const *a,
                             const double *const *b, size_t cnt, double *out)
{
    size_t k = 0;
    for (; k + 4 <= nb; k += 4) {
        V w = VLD(b[0] + 2 * k), w2 = VLD(b[0] + 2 * k + 4);
        V s = VCMUL(VLD(a[0] + 2 * k), VDUPRE(w), VDUPIM(w));
        V s2 = VCMUL(VLD(a[0] + 2 * k + 4), VDUPRE(w2), VDUPIM(w2));
        for (size_t j = 1; j < cnt; j++) {
            w = VLD(b[j] + 2 * k);
            w2 = VLD(b[j] + 2 * k + 4);
            s = VADD(s, VCMUL(VLD(a[j] + 2 * k), VDUPRE(w), VDUPIM(w)));
            s2 = VADD(s2, VCMUL(VLD(a[j] + 2 * k + 4), VDUPRE(w2), VDUPIM(w2)));
        }
        VST(out + 2 * k, s);
        VST(out + 2 * k + 4, s2);
    }
    for (; k + 2 <= nb; k += 2) { /* a last pair of bins, as in spec_mul */
        V w = VLD(b[0] + 2 * k);
        V s = VCMUL(VLD(a[0] + 2 * k), VDUPRE(w), VDUPIM(w));
        for (size_t j = 1; j < cnt; j++) {
            w = VLD(b[j] + 2 * k);
            s = VADD(s, VCMUL(VLD(a[j] + 2 * k), VDUPRE(w), VDUPIM(w)));
        }
        VST(out + 2 * k, s);
    }
    for (; k < nb; k++) {
        double re = 0.0, im = 0.0;
        for (size_t j = 0; j < cnt; j++) {
            const double ar = a[j][2 * k], ai = a[j][2 * k + 1];
            const double br = b[j][2 * k], bi = b[j][2 * k + 1];
            re += ar * br - ai * bi;
            im += ar * bi + ai * br;
        }
        out[2 * k] = re;
        out[2 * k + 1] = im;
    }
}

/* Several frames of one uniformly partitioned convolution at once:
   out[g] = sum_{j<cnt} x[cnt-1+g-j] * b[j] for g < ng (2 <= ng <= 8), the
   sum of each frame in the order of spec_dot and with its operations, so
   that every out[g] equals spec_dot of its own operands bit for bit. Each
   b[j] is read once for all ng frames, its real and imaginary parts
   duplicated once per pair of bins. out[g] may be x[g-1] (every bin is read
   for all frames before it is written), and nothing else of x. */
#ifndef FC__SDF_B
#define FC__SDF_B 16              /* cnt at most */
#define FC__SDF_X (FC__SDF_B + 7) /* cnt + ng - 1 at most */
#endif
static FFT_TARGET FFT_ALWAYS_INLINE void
FFT_FN(spec_dot_frames_body)(size_t nb, const double *const *x,
                             const double *const *b, size_t cnt,
                             size_t ng, double *const *out)
{
    /* the pointers in locals: the stores below cannot change them */
    const double *xl[FC__SDF_X], *bl[FC__SDF_B];
    double *ol[8];
    size_t k = 0;
    for (size_t i = 0; i < cnt + ng - 1; i++) xl[i] = x[i];
    for (size_t j = 0; j < cnt; j++) bl[j] = b[j];
    for (size_t g = 0; g < ng; g++) ol[g] = out[g];
    x = xl;
    b = bl;
    out = ol;
    for (; k + 2 <= nb; k += 2) {
        V s[8];
        V w = VLD(b[0] + 2 * k), wr = VDUPRE(w), wi = VDUPIM(w);
        for (size_t g = 0; g < ng; g++)
            s[g] = VCMUL(VLD(x[cnt - 1 + g] + 2 * k), wr, wi);
        for (size_t j = 1; j < cnt; j++) {
            w = VLD(b[j] + 2 * k);
            wr = VDUPRE(w);
            wi = VDUPIM(w);
            for (size_t g = 0; g < ng; g++)
                s[g] = VADD(s[g], VCMUL(VLD(x[cnt - 1 + g - j] + 2 * k), wr, wi));
        }
        for (size_t g = 0; g < ng; g++) VST(out[g] + 2 * k, s[g]);
    }
    for (; k < nb; k++) {
        double re[8], im[8];
        for (size_t g = 0; g < ng; g++) {
            re[g] = 0.0;
            im[g] = 0.0;
            for (size_t j = 0; j < cnt; j++) {
                const double *a = x[cnt - 1 + g - j];
                const double ar = a[2 * k], ai = a[2 * k + 1];
                const double br = b[j][2 * k], bi = b[j][2 * k + 1];
                re[g] += ar * br - ai * bi;
                im[g] += ar * bi + ai * br;
            }
        }
        for (size_t g = 0; g < ng; g++) {
            out[g][2 * k] = re[g];
            out[g][2 * k + 1] = im[g];
        }
    }
}

/* ng a constant in each case, so that the frame loops unroll and the
   sums stay in registers. */
static FFT_TARGET void FFT_FN(spec_dot_frames)(size_t nb, const double *const *x,
                                    const double *const *b, size_t cnt,
                                    size_t ng, double *const *out)
{
    switch (ng) {
    case 2: FFT_FN(spec_dot_frames_body)(nb, x, b, cnt, 2, out); break;
    case 3: FFT_FN(spec_dot_frames_body)(nb, x, b, cnt, 3, out); break;
    case 4: FFT_FN(spec_dot_frames_body)(nb, x, b, cnt, 4, out); break;
    case 5: FFT_FN(spec_dot_frames_body)(nb, x, b, cnt, 5, out); break;
    case 6: FFT_FN(spec_dot_frames_body)(nb, x, b, cnt, 6, out); break;
    case 7: FFT_FN(spec_dot_frames_body)(nb, x, b, cnt, 7, out); break;
    default: FFT_FN(spec_dot_frames_body)(nb, x, b, cnt, 8, out); break;
    }
}

/* The same with fewer segments in the first frames: out[g] = sum_{j <
   lim[g]} x[cnt-1+g-j] * b[j], 1 <= lim[g] <= cnt (the frames at the start
   of a stream, before every segment has a block); x[i] is not read where
   no lim reaches it. */
static FFT_TARGET FFT_ALWAYS_INLINE void
FFT_FN(spec_dot_frames_lim_body)(size_t nb, const double *const *x,
                                 const double *const *b, size_t cnt,
                                 const size_t *lim, size_t ng,
                                 double *const *out)
{
    const double *xl[FC__SDF_X], *bl[FC__SDF_B];
    double *ol[8];
    size_t k = 0;
    for (size_t i = 0; i < cnt + ng - 1; i++) xl[i] = x[i];
    for (size_t j = 0; j < cnt; j++) bl[j] = b[j];
    for (size_t g = 0; g < ng; g++) ol[g] = out[g];
    x = xl;
    b = bl;
    out = ol;
    for (; k + 2 <= nb; k += 2) {
        V s[8];
        V w = VLD(b[0] + 2 * k), wr = VDUPRE(w), wi = VDUPIM(w);
        for (size_t g = 0; g < ng; g++)
            s[g] = VCMUL(VLD(x[cnt - 1 + g] + 2 * k), wr, wi);
        for (size_t j = 1; j < cnt; j++) {
            w = VLD(b[j] + 2 * k);
            wr = VDUPRE(w);
            wi = VDUPIM(w);
            for (size_t g = 0; g < ng; g++)
                if (j < lim[g])
                    s[g] = VADD(s[g], VCMUL(VLD(x[cnt - 1 + g - j] + 2 * k), wr, wi));
        }
        for (size_t g = 0; g < ng; g++) VST(out[g] + 2 * k, s[g]);
    }
    for (; k < nb; k++) {
        double re[8], im[8];
        for (size_t g = 0; g < ng; g++) {
            re[g] = 0.0;
            im[g] = 0.0;
            for (size_t j = 0; j < lim[g]; j++) {
                const double *a = x[cnt - 1 + g - j];
                const double ar = a[2 * k], ai = a[2 * k + 1];
                const double br = b[j][2 * k], bi = b[j][2 * k + 1];
                re[g] += ar * br - ai * bi;
                im[g] += ar * bi + ai * br;
            }
        }
        for (size_t g = 0; g < ng; g++) {
            out[g][2 * k] = re[g];
            out[g][2 * k + 1] = im[g];
        }
    }
}

/* ng a constant in each case (as for spec_dot_frames): the frame loops
   unroll and the sums stay in registers; the same operations. */
static FFT_TARGET void FFT_FN(spec_dot_frames_lim)(size_t nb, const double *const *x,
                                        const double *const *b, size_t cnt,
                                        const size_t *lim, size_t ng,
                                        double *const *out)
{
    switch (ng) {
    case 2: FFT_FN(spec_dot_frames_lim_body)(nb, x, b, cnt, lim, 2, out); break;
    case 3: FFT_FN(spec_dot_frames_lim_body)(nb, x, b, cnt, lim, 3, out); break;
    case 4: FFT_FN(spec_dot_frames_lim_body)(nb, x, b, cnt, lim, 4, out); break;
    case 5: FFT_FN(spec_dot_frames_lim_body)(nb, x, b, cnt, lim, 5, out); break;
    case 6: FFT_FN(spec_dot_frames_lim_body)(nb, x, b, cnt, lim, 6, out); break;
    case 7: FFT_FN(spec_dot_frames_lim_body)(nb, x, b, cnt, lim, 7, out); break;
    default: FFT_FN(spec_dot_frames_lim_body)(nb, x, b, cnt, lim, 8, out); break;
    }
}

/* out[t] = the fixed-order dot product of k[0 .. len) with u[t .. t+len)
   for t < T (len % 8 == 0): eight partial sums of the terms i = r mod 8 in
   the order of i, combined ((0+4)+(2+6))+((1+5)+(3+7)), each product and
   sum rounded by itself (no fused multiply-add); four outputs at a time in
   the lanes of a vector, so the partial sums of one output are the same
   operations as in a scalar loop. */
static FFT_TARGET void FFT_FN(leaf_dots)(const double *k, const double *u,
                              size_t len, size_t T, double *out)
{
    size_t t = 0;
    for (; t + 4 <= T; t += 4) {
        const double *v = u + t;
        V a0 = VSET1(0.0), a1 = a0, a2 = a0, a3 = a0;
        V a4 = a0, a5 = a0, a6 = a0, a7 = a0, q;
        for (size_t i = 0; i < len; i += 8) {
            /* one statement per product and per sum: nothing to contract */
            q = VMUL(VSET1(k[i]), VLD(v + i));
            a0 = VADD(a0, q);
            q = VMUL(VSET1(k[i + 1]), VLD(v + i + 1));
            a1 = VADD(a1, q);
            q = VMUL(VSET1(k[i + 2]), VLD(v + i + 2));
            a2 = VADD(a2, q);
            q = VMUL(VSET1(k[i + 3]), VLD(v + i + 3));
            a3 = VADD(a3, q);
            q = VMUL(VSET1(k[i + 4]), VLD(v + i + 4));
            a4 = VADD(a4, q);
            q = VMUL(VSET1(k[i + 5]), VLD(v + i + 5));
            a5 = VADD(a5, q);
            q = VMUL(VSET1(k[i + 6]), VLD(v + i + 6));
            a6 = VADD(a6, q);
            q = VMUL(VSET1(k[i + 7]), VLD(v + i + 7));
            a7 = VADD(a7, q);
        }
        V e = VADD(VADD(a0, a4), VADD(a2, a6));
        V o = VADD(VADD(a1, a5), VADD(a3, a7));
        VST(out + t, VADD(e, o));
    }
    for (; t < T; t++) {
        const double *v = u + t;
        double a0 = 0, a1 = 0, a2 = 0, a3 = 0, a4 = 0, a5 = 0, a6 = 0, a7 = 0;
        for (size_t i = 0; i < len; i += 8) {
            double p[8];
            for (int r = 0; r < 8; r++) p[r] = k[i + r] * v[i + r];
            a0 += p[0];
            a1 += p[1];
            a2 += p[2];
            a3 += p[3];
            a4 += p[4];
            a5 += p[5];
            a6 += p[6];
            a7 += p[7];
        }
        out[t] = ((a0 + a4) + (a2 + a6)) + ((a1 + a5) + (a3 + a7));
    }
}

static FFT_TARGET void FFT_FN(spec_mul)(size_t nb, const double *a, const double *b,
                             double *out)
{
    size_t k = 0;
    for (; k + 2 <= nb; k += 2) {
        V x = VLD(a + 2 * k), w = VLD(b + 2 * k);
        VST(out + 2 * k, VCMUL(x, VDUPRE(w), VDUPIM(w)));
    }
    for (; k < nb; k++) {
        const double ar = a[2 * k], ai = a[2 * k + 1];
        const double br = b[2 * k], bi = b[2 * k + 1];
        out[2 * k] = ar * br - ai * bi;
        out[2 * k + 1] = ar * bi + ai * br;
    }
}

#undef FFT_BFLY4
#undef FFT_BFLY8
#undef FFT_TWMUL
