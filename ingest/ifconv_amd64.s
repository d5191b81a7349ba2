//go:build !purego

#include "textflag.h"

// func halfBandQuarterAVX(dst *complex64, even, odd *float32, n int, taps *[12][8]float32, signs *[2][8]float32)
//
// The fs/4 half-band conversion for n outputs (n a multiple of 8), eight
// at a time, one per lane, with exactly the float32 operations of
// halfBandQuarterGo in the same order (no fused multiply-adds):
//
//	d_i = g_i·(o[m−1−i] − o[m+i])      i = 0 … 11
//	S   = ((d0+d1)+(d2+d3) + (d4+d5)+(d6+d7)) + ((d8+d9)+(d10+d11))
//	      as ((a + b) + c) with a, b, c the three brackets of four
//	dst[m] = (e[m]·signs[0][m%8], S·signs[1][m%8])
//
// even and odd point at the centre pair of output 0; odd is read from
// 12 values before it to n+10 after it.
TEXT ·halfBandQuarterAVX(SB), NOSPLIT, $0-48
	MOVQ dst+0(FP), DI
	MOVQ even+8(FP), SI
	MOVQ odd+16(FP), DX
	MOVQ n+24(FP), CX
	MOVQ taps+32(FP), R8
	MOVQ signs+40(FP), R9
	VMOVUPS (R9), Y14   // signs of the real parts
	VMOVUPS 32(R9), Y15 // signs of the imaginary parts

loop:
	// a = (d0+d1) + (d2+d3)
	VMOVUPS -4(DX), Y0
	VSUBPS  (DX), Y0, Y0
	VMULPS  (R8), Y0, Y0     // d0 = g0·(o[m−1] − o[m])
	VMOVUPS -8(DX), Y1
	VSUBPS  4(DX), Y1, Y1
	VMULPS  32(R8), Y1, Y1   // d1 = g1·(o[m−2] − o[m+1])
	VADDPS  Y1, Y0, Y0
	VMOVUPS -12(DX), Y1
	VSUBPS  8(DX), Y1, Y1
	VMULPS  64(R8), Y1, Y1   // d2
	VMOVUPS -16(DX), Y2
	VSUBPS  12(DX), Y2, Y2
	VMULPS  96(R8), Y2, Y2   // d3
	VADDPS  Y2, Y1, Y1
	VADDPS  Y1, Y0, Y0       // a

	// b = (d4+d5) + (d6+d7)
	VMOVUPS -20(DX), Y3
	VSUBPS  16(DX), Y3, Y3
	VMULPS  128(R8), Y3, Y3  // d4
	VMOVUPS -24(DX), Y4
	VSUBPS  20(DX), Y4, Y4
	VMULPS  160(R8), Y4, Y4  // d5
	VADDPS  Y4, Y3, Y3
	VMOVUPS -28(DX), Y4
	VSUBPS  24(DX), Y4, Y4
	VMULPS  192(R8), Y4, Y4  // d6
	VMOVUPS -32(DX), Y5
	VSUBPS  28(DX), Y5, Y5
	VMULPS  224(R8), Y5, Y5  // d7
	VADDPS  Y5, Y4, Y4
	VADDPS  Y4, Y3, Y3       // b

	// c = (d8+d9) + (d10+d11)
	VMOVUPS -36(DX), Y6
	VSUBPS  32(DX), Y6, Y6
	VMULPS  256(R8), Y6, Y6  // d8
	VMOVUPS -40(DX), Y7
	VSUBPS  36(DX), Y7, Y7
	VMULPS  288(R8), Y7, Y7  // d9
	VADDPS  Y7, Y6, Y6
	VMOVUPS -44(DX), Y7
	VSUBPS  40(DX), Y7, Y7
	VMULPS  320(R8), Y7, Y7  // d10
	VMOVUPS -48(DX), Y8
	VSUBPS  44(DX), Y8, Y8
	VMULPS  352(R8), Y8, Y8  // d11
	VADDPS  Y8, Y7, Y7
	VADDPS  Y7, Y6, Y6       // c

	VADDPS  Y3, Y0, Y0       // a + b
	VADDPS  Y6, Y0, Y0       // S = (a + b) + c

	VMULPS  Y15, Y0, Y0      // imaginary parts
	VMOVUPS (SI), Y1
	VMULPS  Y14, Y1, Y1      // real parts
	VUNPCKLPS Y0, Y1, Y2     // re0 im0 re1 im1 | re4 im4 re5 im5
	VUNPCKHPS Y0, Y1, Y3     // re2 im2 re3 im3 | re6 im6 re7 im7
	VPERM2F128 $0x20, Y3, Y2, Y4
	VPERM2F128 $0x31, Y3, Y2, Y5
	VMOVUPS Y4, (DI)
	VMOVUPS Y5, 32(DI)

	ADDQ $32, SI
	ADDQ $32, DX
	ADDQ $64, DI
	SUBQ $8, CX
	JNZ  loop
	VZEROUPPER
	RET
