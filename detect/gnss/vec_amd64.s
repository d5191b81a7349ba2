//go:build !purego

#include "textflag.h"

// func mulToAVX(dst, x, y *complex64, n int)
//
// dst[i] = x[i]·y[i] for i < n, n a multiple of 4, with the float32
// operations of mulTo: (xr·yr − xi·yi, xi·yr + xr·yi).
TEXT ·mulToAVX(SB), NOSPLIT, $0-32
	MOVQ dst+0(FP), DI
	MOVQ x+8(FP), SI
	MOVQ y+16(FP), DX
	MOVQ n+24(FP), CX
	SHLQ $3, CX
	XORQ AX, AX

mulloop:
	CMPQ AX, CX
	JAE  muldone
	VMOVUPS (SI)(AX*1), Y0
	VMOVUPS (DX)(AX*1), Y1
	VMOVSLDUP Y1, Y2          // yr yr
	VMOVSHDUP Y1, Y3          // yi yi
	VPERMILPS $0xb1, Y0, Y4   // xi xr
	VMULPS Y2, Y0, Y0         // xr·yr, xi·yr
	VMULPS Y3, Y4, Y4         // xi·yi, xr·yi
	VADDSUBPS Y4, Y0, Y0      // xr·yr − xi·yi, xi·yr + xr·yi
	VMOVUPS Y0, (DI)(AX*1)
	ADDQ $32, AX
	JMP  mulloop

muldone:
	VZEROUPPER
	RET

// POWER4 leaves in X5 the four float32 |v|² = vr·vr + vi·vi of the four
// complex64 in Y0 (scratch Y1–Y4).
#define POWER4 \
	VMULPS Y0, Y0, Y1 \
	VPERMILPS $0xb1, Y1, Y2 \
	VADDPS Y2, Y1, Y1 \
	VSHUFPS $0x88, Y1, Y1, Y3 \
	VEXTRACTF128 $1, Y3, X4 \
	VUNPCKLPD X4, X3, X5

// func addPowerAVX(dst *float64, w *complex64, n int)
//
// dst[i] += float64(|w[i]|²) for i < n, n a multiple of 4, |w|² formed in
// float32 as in addPower.
TEXT ·addPowerAVX(SB), NOSPLIT, $0-24
	MOVQ dst+0(FP), DI
	MOVQ w+8(FP), SI
	MOVQ n+16(FP), CX
	XORQ AX, AX

powloop:
	CMPQ AX, CX
	JAE  powdone
	VMOVUPS (SI)(AX*8), Y0
	POWER4
	VCVTPS2PD X5, Y6
	VADDPD (DI)(AX*8), Y6, Y6
	VMOVUPD Y6, (DI)(AX*8)
	ADDQ $4, AX
	JMP  powloop

powdone:
	VZEROUPPER
	RET

// func addDiffPowerAVX(dst *float64, u, v *complex64, n int)
//
// dst[i] += float64(|u[i] − v[i]|²) for i < n, n a multiple of 4.
TEXT ·addDiffPowerAVX(SB), NOSPLIT, $0-32
	MOVQ dst+0(FP), DI
	MOVQ u+8(FP), SI
	MOVQ v+16(FP), DX
	MOVQ n+24(FP), CX
	XORQ AX, AX

difloop:
	CMPQ AX, CX
	JAE  difdone
	VMOVUPS (SI)(AX*8), Y0
	VSUBPS (DX)(AX*8), Y0, Y0
	POWER4
	VCVTPS2PD X5, Y6
	VADDPD (DI)(AX*8), Y6, Y6
	VMOVUPD Y6, (DI)(AX*8)
	ADDQ $4, AX
	JMP  difloop

difdone:
	VZEROUPPER
	RET
