//go:build amd64 && !purego

#include "textflag.h"

// AVX-512 kernels of MinHasher.minima (see minhash.go): for each of 32 (or
// 8) permutations, the minimum over xs of a_i*x + b_i (mod 2^64), stored
// as its high 32 bits. Same results as the scalar loop, bit for bit.

// func minima32AVX512(a, b, xs *uint64, n int, out *uint32)
TEXT ·minima32AVX512(SB), NOSPLIT, $0-40
	MOVQ a+0(FP), AX
	MOVQ b+8(FP), BX
	MOVQ xs+16(FP), SI
	MOVQ n+24(FP), CX
	MOVQ out+32(FP), DI
	VMOVDQU64 (AX), Z0
	VMOVDQU64 64(AX), Z1
	VMOVDQU64 128(AX), Z2
	VMOVDQU64 192(AX), Z3
	VMOVDQU64 (BX), Z4
	VMOVDQU64 64(BX), Z5
	VMOVDQU64 128(BX), Z6
	VMOVDQU64 192(BX), Z7
	VPTERNLOGQ $0xff, Z8, Z8, Z8
	VMOVDQA64 Z8, Z9
	VMOVDQA64 Z8, Z10
	VMOVDQA64 Z8, Z11
	TESTQ CX, CX
	JZ done32

loop32:
	VPBROADCASTQ (SI), Z16
	VPMULLQ Z0, Z16, Z17
	VPMULLQ Z1, Z16, Z18
	VPMULLQ Z2, Z16, Z19
	VPMULLQ Z3, Z16, Z20
	VPADDQ Z4, Z17, Z17
	VPADDQ Z5, Z18, Z18
	VPADDQ Z6, Z19, Z19
	VPADDQ Z7, Z20, Z20
	VPMINUQ Z17, Z8, Z8
	VPMINUQ Z18, Z9, Z9
	VPMINUQ Z19, Z10, Z10
	VPMINUQ Z20, Z11, Z11
	ADDQ $8, SI
	DECQ CX
	JNZ loop32

done32:
	VPSRLQ $32, Z8, Z8
	VPSRLQ $32, Z9, Z9
	VPSRLQ $32, Z10, Z10
	VPSRLQ $32, Z11, Z11
	VPMOVQD Z8, (DI)
	VPMOVQD Z9, 32(DI)
	VPMOVQD Z10, 64(DI)
	VPMOVQD Z11, 96(DI)
	VZEROUPPER
	RET

// func minima8AVX512(a, b, xs *uint64, n int, out *uint32)
TEXT ·minima8AVX512(SB), NOSPLIT, $0-40
	MOVQ a+0(FP), AX
	MOVQ b+8(FP), BX
	MOVQ xs+16(FP), SI
	MOVQ n+24(FP), CX
	MOVQ out+32(FP), DI
	VMOVDQU64 (AX), Z0
	VMOVDQU64 (BX), Z4
	VPTERNLOGQ $0xff, Z8, Z8, Z8
	TESTQ CX, CX
	JZ done8

loop8:
	VPBROADCASTQ (SI), Z16
	VPMULLQ Z0, Z16, Z17
	VPADDQ Z4, Z17, Z17
	VPMINUQ Z17, Z8, Z8
	ADDQ $8, SI
	DECQ CX
	JNZ loop8

done8:
	VPSRLQ $32, Z8, Z8
	VPMOVQD Z8, (DI)
	VZEROUPPER
	RET
