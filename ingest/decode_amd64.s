//go:build !purego

#include "textflag.h"

DATA ci16max<>+0(SB)/8, $0x7fff7fff7fff7fff
DATA ci16max<>+8(SB)/8, $0x7fff7fff7fff7fff
DATA ci16max<>+16(SB)/8, $0x7fff7fff7fff7fff
DATA ci16max<>+24(SB)/8, $0x7fff7fff7fff7fff
GLOBL ci16max<>(SB), RODATA|NOPTR, $32

DATA ci16min<>+0(SB)/8, $0x8000800080008000
DATA ci16min<>+8(SB)/8, $0x8000800080008000
DATA ci16min<>+16(SB)/8, $0x8000800080008000
DATA ci16min<>+24(SB)/8, $0x8000800080008000
GLOBL ci16min<>(SB), RODATA|NOPTR, $32

// 1/32768 as float32.
DATA ci16scale<>+0(SB)/4, $0x38000000
GLOBL ci16scale<>(SB), RODATA|NOPTR, $4

// func decodeCI16LEAVX2(dst *complex64, src *byte, n int) (clipped int)
//
// Decodes n samples (n a multiple of 8) of little-endian ci16 into dst,
// 8 per iteration: float32(code)·(1/32768), both exact, as Decode does;
// clipped counts the samples with a component at −32768 or 32767.
TEXT ·decodeCI16LEAVX2(SB), NOSPLIT, $0-32
	MOVQ dst+0(FP), DI
	MOVQ src+8(FP), SI
	MOVQ n+16(FP), CX
	VMOVDQU ci16max<>(SB), Y14
	VMOVDQU ci16min<>(SB), Y13
	VPXOR Y12, Y12, Y12
	VBROADCASTSS ci16scale<>(SB), Y15
	XORQ R8, R8          // samples not clipped
	SHLQ $2, CX
	LEAQ (SI)(CX*1), R9  // end of src

loop:
	CMPQ SI, R9
	JAE  done
	VMOVDQU (SI), Y0
	VPCMPEQW Y14, Y0, Y1
	VPCMPEQW Y13, Y0, Y2
	VPOR Y2, Y1, Y1
	VPCMPEQD Y12, Y1, Y1  // all ones where neither component is extreme
	VMOVMSKPS Y1, AX
	POPCNTL AX, AX
	ADDQ AX, R8
	VPMOVSXWD X0, Y3
	VEXTRACTI128 $1, Y0, X4
	VPMOVSXWD X4, Y4
	VCVTDQ2PS Y3, Y3
	VCVTDQ2PS Y4, Y4
	VMULPS Y15, Y3, Y3
	VMULPS Y15, Y4, Y4
	VMOVUPS Y3, (DI)
	VMOVUPS Y4, 32(DI)
	ADDQ $32, SI
	ADDQ $64, DI
	JMP  loop

done:
	MOVQ n+16(FP), CX
	SUBQ R8, CX
	MOVQ CX, clipped+24(FP)
	VZEROUPPER
	RET
