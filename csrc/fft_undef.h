/* fft_undef.h -- ends one instance of fft_kernels.h (see fft.c): removes
   the vector macros it was compiled with. No include guard on purpose. */
#undef FFT_FN
#undef FFT_TARGET
#undef V
#undef VLD
#undef VST
#undef VADD
#undef VSUB
#undef VMUL
#undef VSET1
#undef VCONJ
#undef VMUL_MI
#undef VMUL_PI
#undef VCMUL
#undef VCMULC
#undef VREV
#undef VLO2
#undef VHI2
#undef VDUPRE
#undef VDUPIM
