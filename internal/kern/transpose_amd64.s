//go:build !noasm

#include "textflag.h"

// func transpose8x8F32(src *float32, lds int, dst *float32, ldd int, nb int)
// dst[l*ldd + r] = src[r*lds + l] for r, l in [0, 8): the standard AVX
// 8×8 transpose (unpack pairs, shuffle quads, exchange 128-bit halves).
// Repeated for nb blocks side by side: block q reads src[r*lds + q*8 + l] and
// writes dst[(q*8 + l)*ldd + r].
TEXT ·transpose8x8F32(SB), NOSPLIT, $0-40
	MOVQ src+0(FP), SI
	MOVQ lds+8(FP), AX
	SHLQ $2, AX
	MOVQ dst+16(FP), DI
	MOVQ ldd+24(FP), BX
	SHLQ $2, BX
	MOVQ nb+32(FP), CX
	MOVQ BX, R8
	SHLQ $3, R8
	TESTQ CX, CX
	JZ transpose8x8F32_done
transpose8x8F32_loop:
	MOVQ SI, R9
	MOVQ DI, R10
	VMOVUPS (R9), Y0
	ADDQ AX, R9
	VMOVUPS (R9), Y1
	ADDQ AX, R9
	VMOVUPS (R9), Y2
	ADDQ AX, R9
	VMOVUPS (R9), Y3
	ADDQ AX, R9
	VMOVUPS (R9), Y4
	ADDQ AX, R9
	VMOVUPS (R9), Y5
	ADDQ AX, R9
	VMOVUPS (R9), Y6
	ADDQ AX, R9
	VMOVUPS (R9), Y7
	// t0..t7
	VUNPCKLPS Y1, Y0, Y8
	VUNPCKHPS Y1, Y0, Y9
	VUNPCKLPS Y3, Y2, Y10
	VUNPCKHPS Y3, Y2, Y11
	VUNPCKLPS Y5, Y4, Y12
	VUNPCKHPS Y5, Y4, Y13
	VUNPCKLPS Y7, Y6, Y14
	VUNPCKHPS Y7, Y6, Y15
	// tt0..tt7
	VSHUFPS $0x44, Y10, Y8, Y0
	VSHUFPS $0xEE, Y10, Y8, Y1
	VSHUFPS $0x44, Y11, Y9, Y2
	VSHUFPS $0xEE, Y11, Y9, Y3
	VSHUFPS $0x44, Y14, Y12, Y4
	VSHUFPS $0xEE, Y14, Y12, Y5
	VSHUFPS $0x44, Y15, Y13, Y6
	VSHUFPS $0xEE, Y15, Y13, Y7
	// columns
	VPERM2F128 $0x20, Y4, Y0, Y8
	VPERM2F128 $0x20, Y5, Y1, Y9
	VPERM2F128 $0x20, Y6, Y2, Y10
	VPERM2F128 $0x20, Y7, Y3, Y11
	VPERM2F128 $0x31, Y4, Y0, Y12
	VPERM2F128 $0x31, Y5, Y1, Y13
	VPERM2F128 $0x31, Y6, Y2, Y14
	VPERM2F128 $0x31, Y7, Y3, Y15
	VMOVUPS Y8, (R10)
	ADDQ BX, R10
	VMOVUPS Y9, (R10)
	ADDQ BX, R10
	VMOVUPS Y10, (R10)
	ADDQ BX, R10
	VMOVUPS Y11, (R10)
	ADDQ BX, R10
	VMOVUPS Y12, (R10)
	ADDQ BX, R10
	VMOVUPS Y13, (R10)
	ADDQ BX, R10
	VMOVUPS Y14, (R10)
	ADDQ BX, R10
	VMOVUPS Y15, (R10)
	ADDQ $32, SI
	ADDQ R8, DI
	DECQ CX
	JNZ transpose8x8F32_loop
transpose8x8F32_done:
	VZEROUPPER
	RET

// func transpose4x4F64(src *float64, lds int, dst *float64, ldd int, nb int)
// dst[l*ldd + r] = src[r*lds + l] for r, l in [0, 4).
// Repeated for nb blocks side by side: block q reads src[r*lds + q*4 + l] and
// writes dst[(q*4 + l)*ldd + r].
TEXT ·transpose4x4F64(SB), NOSPLIT, $0-40
	MOVQ src+0(FP), SI
	MOVQ lds+8(FP), AX
	SHLQ $3, AX
	MOVQ dst+16(FP), DI
	MOVQ ldd+24(FP), BX
	SHLQ $3, BX
	MOVQ nb+32(FP), CX
	MOVQ BX, R8
	SHLQ $2, R8
	TESTQ CX, CX
	JZ transpose4x4F64_done
transpose4x4F64_loop:
	MOVQ SI, R9
	MOVQ DI, R10
	VMOVUPD (R9), Y0
	ADDQ AX, R9
	VMOVUPD (R9), Y1
	ADDQ AX, R9
	VMOVUPD (R9), Y2
	ADDQ AX, R9
	VMOVUPD (R9), Y3
	VUNPCKLPD Y1, Y0, Y4
	VUNPCKHPD Y1, Y0, Y5
	VUNPCKLPD Y3, Y2, Y6
	VUNPCKHPD Y3, Y2, Y7
	VPERM2F128 $0x20, Y6, Y4, Y0
	VPERM2F128 $0x20, Y7, Y5, Y1
	VPERM2F128 $0x31, Y6, Y4, Y2
	VPERM2F128 $0x31, Y7, Y5, Y3
	VMOVUPD Y0, (R10)
	ADDQ BX, R10
	VMOVUPD Y1, (R10)
	ADDQ BX, R10
	VMOVUPD Y2, (R10)
	ADDQ BX, R10
	VMOVUPD Y3, (R10)
	ADDQ $32, SI
	ADDQ R8, DI
	DECQ CX
	JNZ transpose4x4F64_loop
transpose4x4F64_done:
	VZEROUPPER
	RET

// func transpose4x4F32(src *float32, lds int, dst *float32, ldd int, nb int)
// dst[l*ldd + r] = src[r*lds + l] for r, l in [0, 4), in 128-bit registers.
// Repeated for nb blocks side by side: block q reads src[r*lds + q*4 + l] and
// writes dst[(q*4 + l)*ldd + r].
TEXT ·transpose4x4F32(SB), NOSPLIT, $0-40
	MOVQ src+0(FP), SI
	MOVQ lds+8(FP), AX
	SHLQ $2, AX
	MOVQ dst+16(FP), DI
	MOVQ ldd+24(FP), BX
	SHLQ $2, BX
	MOVQ nb+32(FP), CX
	MOVQ BX, R8
	SHLQ $2, R8
	TESTQ CX, CX
	JZ transpose4x4F32_done
transpose4x4F32_loop:
	MOVQ SI, R9
	MOVQ DI, R10
	VMOVUPS (R9), X0
	ADDQ AX, R9
	VMOVUPS (R9), X1
	ADDQ AX, R9
	VMOVUPS (R9), X2
	ADDQ AX, R9
	VMOVUPS (R9), X3
	VUNPCKLPS X1, X0, X4
	VUNPCKHPS X1, X0, X5
	VUNPCKLPS X3, X2, X6
	VUNPCKHPS X3, X2, X7
	VSHUFPS $0x44, X6, X4, X0
	VSHUFPS $0xEE, X6, X4, X1
	VSHUFPS $0x44, X7, X5, X2
	VSHUFPS $0xEE, X7, X5, X3
	VMOVUPS X0, (R10)
	ADDQ BX, R10
	VMOVUPS X1, (R10)
	ADDQ BX, R10
	VMOVUPS X2, (R10)
	ADDQ BX, R10
	VMOVUPS X3, (R10)
	ADDQ $16, SI
	ADDQ R8, DI
	DECQ CX
	JNZ transpose4x4F32_loop
transpose4x4F32_done:
	VZEROUPPER
	RET
