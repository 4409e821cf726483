//go:build !noasm

#include "textflag.h"

// The vector loops of optim's Langevin noise (the rule is stated and
// tested there, at normalAt and addNoise).

// Lane l of the counters starts at seed + l·γ, γ = 0x9e3779b97f4a7c15
// (the SplitMix64 increment), and every lane moves on by 8γ.
DATA normalLanes<>+0(SB)/8, $0x0000000000000000
DATA normalLanes<>+8(SB)/8, $0x9e3779b97f4a7c15
DATA normalLanes<>+16(SB)/8, $0x3c6ef372fe94f82a
DATA normalLanes<>+24(SB)/8, $0xdaa66d2c7ddf743f
DATA normalLanes<>+32(SB)/8, $0x78dde6e5fd29f054
DATA normalLanes<>+40(SB)/8, $0x1715609f7c746c69
DATA normalLanes<>+48(SB)/8, $0xb54cda58fbbee87e
DATA normalLanes<>+56(SB)/8, $0x538454127b096493
GLOBL normalLanes<>(SB), RODATA|NOPTR, $64

// func normalAVX512(dst *float64, n int, seed uint64, w *[1024]float64, k *[1024]int64, miss *uint8)
//
// For j < n (a multiple of 8): u = SplitMix64(seed + j·γ), i = u & 1023,
// J = the high 32 bits of u as a signed integer; dst[j] = float64(J)·w[i]
// (exact conversion, one rounded product), and bit j%8 of miss[j/8] is
// set where |J| ≥ k[i], the draws the ziggurat's fast path does not
// take.
TEXT ·normalAVX512(SB), NOSPLIT, $0-48
	MOVQ dst+0(FP), DI
	MOVQ n+8(FP), CX
	MOVQ w+24(FP), R8
	MOVQ k+32(FP), R9
	MOVQ miss+40(FP), R10
	VPBROADCASTQ seed+16(FP), Z0
	VPADDQ normalLanes<>(SB), Z0, Z0
	MOVQ $0x9e3779b97f4a7c15, AX
	VPBROADCASTQ AX, Z1
	MOVQ $0xf1bbcdcbfa53e0a8, AX
	VPBROADCASTQ AX, Z2
	MOVQ $0xbf58476d1ce4e5b9, AX
	VPBROADCASTQ AX, Z5
	MOVQ $0x94d049bb133111eb, AX
	VPBROADCASTQ AX, Z6
	MOVQ $1023, AX
	VPBROADCASTQ AX, Z7
	SHRQ $3, CX
	JZ normal_done

normal_loop:
	// u = SplitMix64(counter): x += γ; x = (x ^ x>>30)·c1;
	// x = (x ^ x>>27)·c2; u = x ^ x>>31.
	VPADDQ Z1, Z0, Z3
	VPSRLQ $30, Z3, Z4
	VPXORQ Z4, Z3, Z3
	VPMULLQ Z5, Z3, Z3
	VPSRLQ $27, Z3, Z4
	VPXORQ Z4, Z3, Z3
	VPMULLQ Z6, Z3, Z3
	VPSRLQ $31, Z3, Z4
	VPXORQ Z4, Z3, Z3
	VPANDQ Z7, Z3, Z8
	VPSRAQ $32, Z3, Z9
	VCVTQQ2PD Z9, Z10
	VPABSQ Z9, Z9
	KXNORB K1, K1, K1
	VGATHERQPD (R8)(Z8*8), K1, Z11
	KXNORB K2, K2, K2
	VPGATHERQQ (R9)(Z8*8), K2, Z12
	VMULPD Z11, Z10, Z10
	VMOVUPD Z10, (DI)
	VPCMPQ $5, Z12, Z9, K3
	KMOVB K3, (R10)
	VPADDQ Z2, Z0, Z0
	ADDQ $64, DI
	INCQ R10
	DECQ CX
	JNZ normal_loop

normal_done:
	VZEROUPPER
	RET

// func addNoiseF64(val, xi *float64, n int, sigma float64) (nonFinite bool)
//
// val[j] = val[j] + σ·xi[j] for j < n (a multiple of 4), the product and
// the sum each rounded (no fused multiply-add); returns whether any new
// value is not finite.
TEXT ·addNoiseF64(SB), NOSPLIT, $0-33
	MOVQ val+0(FP), SI
	MOVQ xi+8(FP), BX
	MOVQ n+16(FP), CX
	VBROADCASTSD sigma+24(FP), Y10
	VXORPD Y15, Y15, Y15
	SHRQ $2, CX
	JZ addNoiseF64_done

addNoiseF64_loop:
	VMULPD (BX), Y10, Y1
	VADDPD (SI), Y1, Y0
	VSUBPD Y0, Y0, Y5
	VORPD Y5, Y15, Y15
	VMOVUPD Y0, (SI)
	ADDQ $32, SI
	ADDQ $32, BX
	DECQ CX
	JNZ addNoiseF64_loop

addNoiseF64_done:
	VPTEST Y15, Y15
	SETNE nonFinite+32(FP)
	VZEROUPPER
	RET

// func addNoiseF32(val *float32, xi *float64, n int, sigma float64) (nonFinite bool)
//
// The same in float64 lanes, the sum rounded to float32 as Go's
// conversion does.
TEXT ·addNoiseF32(SB), NOSPLIT, $0-33
	MOVQ val+0(FP), SI
	MOVQ xi+8(FP), BX
	MOVQ n+16(FP), CX
	VBROADCASTSD sigma+24(FP), Y10
	VXORPD Y15, Y15, Y15
	SHRQ $2, CX
	JZ addNoiseF32_done

addNoiseF32_loop:
	VMULPD (BX), Y10, Y1
	VCVTPS2PD (SI), Y0
	VADDPD Y1, Y0, Y0
	VCVTPD2PSY Y0, X0
	VSUBPS X0, X0, X5
	VORPS X5, X15, X15
	VMOVUPS X0, (SI)
	ADDQ $16, SI
	ADDQ $32, BX
	DECQ CX
	JNZ addNoiseF32_loop

addNoiseF32_done:
	VPTEST Y15, Y15
	SETNE nonFinite+32(FP)
	VZEROUPPER
	RET
