//go:build !purego

#include "textflag.h"

// signodd flips the sign of the imaginary (odd) lanes of four complex64.
DATA signodd<>+0(SB)/4, $0x00000000
DATA signodd<>+4(SB)/4, $0x80000000
DATA signodd<>+8(SB)/4, $0x00000000
DATA signodd<>+12(SB)/4, $0x80000000
DATA signodd<>+16(SB)/4, $0x00000000
DATA signodd<>+20(SB)/4, $0x80000000
DATA signodd<>+24(SB)/4, $0x00000000
DATA signodd<>+28(SB)/4, $0x80000000
GLOBL signodd<>(SB), RODATA|NOPTR, $32

// CMUL sets dst = u·w for four complex64 lanes, as the scalar kernel does
// it: (ur·wr − ui·wi, ui·wr + ur·wi), each product rounded, then the sum.
// It uses t1, t2 as scratch; u is overwritten with u·wr.
#define CMUL(u, w, t1, t2, dst) \
	VMOVSLDUP w, t1 \
	VMOVSHDUP w, t2 \
	VPERMILPS $0xb1, u, dst \
	VMULPS t1, u, u \
	VMULPS t2, dst, dst \
	VADDSUBPS dst, u, dst

// func radix4AVX(x *complex64, n int, tw *complex64, q int, inv bool)
//
// One radix-4 decimation-in-time stage of size s = 4q over x[0:n], four
// butterflies (k, k+1, k+2, k+3) per iteration; see radix4 in kernels.go,
// which it matches operation for operation. tw holds, for each group of
// four k, W^k (4 values), W^{2k} (4), W^{3k} (4): 96 bytes per group.
// q must be a multiple of 4 and n a multiple of 4q.
TEXT ·radix4AVX(SB), NOSPLIT, $0-33
	MOVQ x+0(FP), DI
	MOVQ n+8(FP), CX
	MOVQ tw+16(FP), SI
	MOVQ q+24(FP), DX
	MOVBLZX inv+32(FP), AX
	VMOVUPS signodd<>(SB), Y15

	SHLQ $3, DX            // DX = quarter length in bytes
	LEAQ (DX)(DX*2), R15   // R15 = three quarters
	MOVQ DX, R9            // R9 = offset of the m = 1 output row
	MOVQ R15, R10          // R10 = offset of the m = 3 output row
	TESTQ AX, AX
	JZ   start
	XCHGQ R9, R10

start:
	SHLQ $3, CX
	LEAQ (DI)(CX*1), R11   // end of x
	MOVQ DX, R12
	SHLQ $2, R12           // block length in bytes

block:
	CMPQ DI, R11
	JAE  done
	MOVQ SI, BX
	MOVQ DI, R14
	LEAQ (DI)(DX*1), R13   // end of the first quarter

inner:
	VMOVUPS (R14), Y0          // a = Y0[k]
	VMOVUPS (R14)(DX*2), Y1    // Y1[k] (third quarter)
	VMOVUPS (R14)(DX*1), Y2    // Y2[k] (second quarter)
	VMOVUPS (R14)(R15*1), Y3   // Y3[k] (fourth quarter)
	VMOVUPS (BX), Y4
	VMOVUPS 32(BX), Y5
	VMOVUPS 64(BX), Y6

	CMUL(Y1, Y4, Y7, Y8, Y9)   // Y9 = b
	CMUL(Y2, Y5, Y7, Y8, Y10)  // Y10 = c
	CMUL(Y3, Y6, Y7, Y8, Y11)  // Y11 = d

	VADDPS Y10, Y0, Y12        // t0 = a + c
	VSUBPS Y10, Y0, Y13        // t1 = a − c
	VADDPS Y11, Y9, Y1         // t2 = b + d
	VSUBPS Y11, Y9, Y2         // t3 = b − d

	VADDPS Y1, Y12, Y3         // t0 + t2
	VSUBPS Y1, Y12, Y4         // t0 − t2
	VPERMILPS $0xb1, Y2, Y5
	VXORPS Y15, Y5, Y5         // (t3i, −t3r) = −j·t3
	VADDPS Y5, Y13, Y6         // t1 − j·t3
	VSUBPS Y5, Y13, Y7         // t1 + j·t3

	VMOVUPS Y3, (R14)
	VMOVUPS Y4, (R14)(DX*2)
	VMOVUPS Y6, (R14)(R9*1)
	VMOVUPS Y7, (R14)(R10*1)

	ADDQ $96, BX
	ADDQ $32, R14
	CMPQ R14, R13
	JB   inner

	ADDQ R12, DI
	JMP  block

done:
	VZEROUPPER
	RET

// func first4AVX(dst, src *complex64, perm *int32, q int, inv bool)
//
// The first pass of first4 (kernels.go) for four consecutive c at a time:
// the four 4-point DFTs are computed lane by lane, then transposed (a 4×4
// transpose of complex64) so that each c's four outputs are stored
// together at dst[4·perm[c]]. q = n/4 must be a multiple of 4.
TEXT ·first4AVX(SB), NOSPLIT, $0-33
	MOVQ dst+0(FP), DI
	MOVQ src+8(FP), SI
	MOVQ perm+16(FP), BX
	MOVQ q+24(FP), CX
	MOVBLZX inv+32(FP), AX
	VMOVUPS signodd<>(SB), Y15

	MOVQ CX, R8
	SHLQ $3, R8            // R8 = q in bytes
	LEAQ (R8)(R8*2), R9    // R9 = 3q in bytes
	LEAQ (SI)(R8*1), R11   // end of s0

loop4:
	CMPQ SI, R11
	JAE  done4
	VMOVUPS (SI), Y0          // x0
	VMOVUPS (SI)(R8*1), Y1    // x1
	VMOVUPS (SI)(R8*2), Y2    // x2
	VMOVUPS (SI)(R9*1), Y3    // x3
	VADDPS Y2, Y0, Y4         // t0 = x0 + x2
	VSUBPS Y2, Y0, Y5         // t1 = x0 − x2
	VADDPS Y3, Y1, Y6         // t2 = x1 + x3
	VSUBPS Y3, Y1, Y7         // t3 = x1 − x3
	VADDPS Y6, Y4, Y0         // out 0 = t0 + t2
	VSUBPS Y6, Y4, Y2         // out 2 = t0 − t2
	VPERMILPS $0xb1, Y7, Y7
	VXORPS Y15, Y7, Y7        // −j·t3
	VADDPS Y7, Y5, Y1         // out 1 = t1 − j·t3
	VSUBPS Y7, Y5, Y3         // out 3 = t1 + j·t3
	TESTQ AX, AX
	JZ   tr4
	VMOVAPS Y1, Y8            // inverse: outputs 1 and 3 swap
	VMOVAPS Y3, Y1
	VMOVAPS Y8, Y3

tr4:
	VUNPCKLPD Y1, Y0, Y4      // [o0c0 o1c0 | o0c2 o1c2]
	VUNPCKHPD Y1, Y0, Y5      // [o0c1 o1c1 | o0c3 o1c3]
	VUNPCKLPD Y3, Y2, Y6      // [o2c0 o3c0 | o2c2 o3c2]
	VUNPCKHPD Y3, Y2, Y7      // [o2c1 o3c1 | o2c3 o3c3]
	VPERM2F128 $0x20, Y6, Y4, Y0 // c0
	VPERM2F128 $0x20, Y7, Y5, Y1 // c1
	VPERM2F128 $0x31, Y6, Y4, Y2 // c2
	VPERM2F128 $0x31, Y7, Y5, Y3 // c3

	MOVLQSX (BX), R12
	SHLQ $5, R12
	VMOVUPS Y0, (DI)(R12*1)
	MOVLQSX 4(BX), R12
	SHLQ $5, R12
	VMOVUPS Y1, (DI)(R12*1)
	MOVLQSX 8(BX), R12
	SHLQ $5, R12
	VMOVUPS Y2, (DI)(R12*1)
	MOVLQSX 12(BX), R12
	SHLQ $5, R12
	VMOVUPS Y3, (DI)(R12*1)

	ADDQ $32, SI
	ADDQ $16, BX
	JMP  loop4

done4:
	VZEROUPPER
	RET

// sqrthalf is float32(1/√2), the sqrtHalf of kernels.go.
DATA sqrthalf<>+0(SB)/4, $0x3f3504f3
GLOBL sqrthalf<>(SB), RODATA|NOPTR, $4

// NEGJ sets r = −j·r, (ri, −rr) in each lane (exact).
#define NEGJ(r) \
	VPERMILPS $0xb1, r, r \
	VXORPS Y15, r, r

// TR4 transposes four rows of four complex64, r0…r3, in place, with the
// scratch t0…t3: afterwards r_j holds element j of each row.
#define TR4(r0, r1, r2, r3, t0, t1, t2, t3) \
	VUNPCKLPD r1, r0, t0 \
	VUNPCKHPD r1, r0, t1 \
	VUNPCKLPD r3, r2, t2 \
	VUNPCKHPD r3, r2, t3 \
	VPERM2F128 $0x20, t2, t0, r0 \
	VPERM2F128 $0x20, t3, t1, r1 \
	VPERM2F128 $0x31, t2, t0, r2 \
	VPERM2F128 $0x31, t3, t1, r3

// func first8AVX(dst, src *complex64, perm *int32, q int, inv bool)
//
// The first pass of first8 (kernels.go) for four consecutive c at a time,
// with the same float32 operations in the same order; the eight outputs of
// each c are stored together at dst[8·perm[c]]. q = n/8 must be a multiple
// of 4.
TEXT ·first8AVX(SB), NOSPLIT, $0-33
	MOVQ dst+0(FP), DI
	MOVQ src+8(FP), SI
	MOVQ perm+16(FP), BX
	MOVQ q+24(FP), CX
	MOVBLZX inv+32(FP), AX
	VMOVUPS signodd<>(SB), Y15
	VBROADCASTSS sqrthalf<>(SB), Y14

	MOVQ CX, R8
	SHLQ $3, R8            // q in bytes
	LEAQ (R8)(R8*2), R9    // 3q
	LEAQ (R8)(R8*4), R10   // 5q
	LEAQ (R9)(R8*4), R13   // 7q
	LEAQ (SI)(R8*1), R11   // end of s0

loop8:
	CMPQ SI, R11
	JAE  done8
	// Even samples: e = DFT4(x0, x2, x4, x6).
	VMOVUPS (SI), Y0
	VMOVUPS (SI)(R8*2), Y1
	VMOVUPS (SI)(R8*4), Y2
	VMOVUPS (SI)(R9*2), Y3
	VADDPS Y2, Y0, Y4      // a0 = x0 + x4
	VSUBPS Y2, Y0, Y5      // a1 = x0 − x4
	VADDPS Y3, Y1, Y6      // a2 = x2 + x6
	VSUBPS Y3, Y1, Y7      // a3 = x2 − x6
	VADDPS Y6, Y4, Y0      // e0
	VSUBPS Y6, Y4, Y1      // e2
	NEGJ(Y7)
	VADDPS Y7, Y5, Y2      // e1 = a1 − j·a3
	VSUBPS Y7, Y5, Y3      // e3 = a1 + j·a3
	// Odd samples: f = DFT4(x1, x3, x5, x7).
	VMOVUPS (SI)(R8*1), Y4
	VMOVUPS (SI)(R9*1), Y5
	VMOVUPS (SI)(R10*1), Y6
	VMOVUPS (SI)(R13*1), Y7
	VADDPS Y6, Y4, Y8      // b0 = x1 + x5
	VSUBPS Y6, Y4, Y9      // b1 = x1 − x5
	VADDPS Y7, Y5, Y10     // b2 = x3 + x7
	VSUBPS Y7, Y5, Y11     // b3 = x3 − x7
	VADDPS Y10, Y8, Y4     // f0
	VSUBPS Y10, Y8, Y5     // f2
	NEGJ(Y11)
	VADDPS Y11, Y9, Y6     // f1 = b1 − j·b3
	VSUBPS Y11, Y9, Y7     // f3 = b1 + j·b3
	// Twiddles: g1 = ((f1r+f1i)·h, (f1i−f1r)·h), g2 = (f2i, −f2r),
	// g3 = ((f3i−f3r)·h, −(f3r+f3i)·h).
	VMOVAPS Y6, Y8
	NEGJ(Y8)
	VADDPS Y8, Y6, Y8
	VMULPS Y14, Y8, Y8     // g1
	VMOVAPS Y5, Y9
	NEGJ(Y9)               // g2
	VPERMILPS $0xb1, Y7, Y10
	VSUBPS Y7, Y10, Y11    // even: f3i − f3r
	VADDPS Y7, Y10, Y10    // odd: f3r + f3i
	VXORPS Y15, Y10, Y10
	VBLENDPS $0xaa, Y10, Y11, Y11
	VMULPS Y14, Y11, Y11   // g3
	// Sums and differences.
	VADDPS Y4, Y0, Y12     // P0 = e0 + f0
	VSUBPS Y4, Y0, Y0      // M0 = e0 − f0
	VADDPS Y8, Y2, Y4      // P1 = e1 + g1
	VSUBPS Y8, Y2, Y2      // M1
	VADDPS Y9, Y1, Y8      // P2 = e2 + g2
	VSUBPS Y9, Y1, Y1      // M2
	VADDPS Y11, Y3, Y9     // P3 = e3 + g3
	VSUBPS Y11, Y3, Y3     // M3
	// Forward outputs 0…3 are P0 P1 P2 P3 (Y12 Y4 Y8 Y9), 4…7 are
	// M0 M1 M2 M3 (Y0 Y2 Y1 Y3). Inverse: k ↔ 8−k, so 0…3 are
	// P0 M3 M2 M1 and 4…7 are M0 P3 P2 P1.
	TESTQ AX, AX
	JZ   tr8
	VMOVAPS Y4, Y5
	VMOVAPS Y3, Y4
	VMOVAPS Y5, Y3
	VMOVAPS Y8, Y5
	VMOVAPS Y1, Y8
	VMOVAPS Y5, Y1
	VMOVAPS Y9, Y5
	VMOVAPS Y2, Y9
	VMOVAPS Y5, Y2

tr8:
	TR4(Y12, Y4, Y8, Y9, Y5, Y6, Y7, Y10)
	TR4(Y0, Y2, Y1, Y3, Y5, Y6, Y7, Y10)

	MOVLQSX (BX), R12
	SHLQ $6, R12
	VMOVUPS Y12, (DI)(R12*1)
	VMOVUPS Y0, 32(DI)(R12*1)
	MOVLQSX 4(BX), R12
	SHLQ $6, R12
	VMOVUPS Y4, (DI)(R12*1)
	VMOVUPS Y2, 32(DI)(R12*1)
	MOVLQSX 8(BX), R12
	SHLQ $6, R12
	VMOVUPS Y8, (DI)(R12*1)
	VMOVUPS Y1, 32(DI)(R12*1)
	MOVLQSX 12(BX), R12
	SHLQ $6, R12
	VMOVUPS Y9, (DI)(R12*1)
	VMOVUPS Y3, 32(DI)(R12*1)

	ADDQ $32, SI
	ADDQ $16, BX
	JMP  loop8

done8:
	VZEROUPPER
	RET
