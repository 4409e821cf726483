//go:build !noasm

#include "textflag.h"

// The noise-free SGD update of optim (the rule and its order are stated
// at optim's stepExact), four elements at a time in float64 lanes of
// 256-bit registers, n a multiple of 4: mode 0 plain, 1 heavy ball, 2
// Nesterov. Every operation is a separate IEEE operation in the same
// order as the scalar loop (no fused multiply-add), and float32 values
// are widened and rounded back exactly as Go's conversions do, so the
// bits are those of the scalar loop. Returns whether any new value is not
// finite (the OR of x − x over the new values, which is +0 only when all
// are finite).

// func sgdF32(val, grad, vel *float32, n int, lr, d, mu float64, mode int) (nonFinite bool)
TEXT ·sgdF32(SB), NOSPLIT, $0-65
	MOVQ val+0(FP), SI
	MOVQ grad+8(FP), BX
	MOVQ vel+16(FP), DI
	MOVQ n+24(FP), CX
	VBROADCASTSD lr+32(FP), Y10
	VBROADCASTSD d+40(FP), Y11
	VBROADCASTSD mu+48(FP), Y12
	MOVQ mode+56(FP), DX
	VXORPD Y15, Y15, Y15
	SHRQ $2, CX
	JZ sgdF32_done
	CMPQ DX, $1
	JEQ sgdF32_heavy
	CMPQ DX, $2
	JEQ sgdF32_nesterov
sgdF32_plain:
	VCVTPS2PD (SI), Y0
	VCVTPS2PD (BX), Y1
	VMULPD Y11, Y0, Y2
	VADDPD Y2, Y1, Y1
	VMULPD Y1, Y10, Y1
	VSUBPD Y1, Y0, Y0
	VCVTPD2PSY Y0, X0
	VSUBPS X0, X0, X5
	VORPS X5, X15, X15
	VMOVUPS X0, (SI)
	ADDQ $16, SI
	ADDQ $16, BX
	DECQ CX
	JNZ sgdF32_plain
	JMP sgdF32_done
sgdF32_heavy:
	VCVTPS2PD (SI), Y0
	VCVTPS2PD (BX), Y1
	VMULPD Y11, Y0, Y2
	VADDPD Y2, Y1, Y1
	VCVTPS2PD (DI), Y3
	VMULPD Y12, Y3, Y3
	VADDPD Y1, Y3, Y3
	VCVTPD2PSY Y3, X4
	VMOVUPS X4, (DI)
	VMOVAPD Y3, Y1
	VMULPD Y1, Y10, Y1
	VSUBPD Y1, Y0, Y0
	VCVTPD2PSY Y0, X0
	VSUBPS X0, X0, X5
	VORPS X5, X15, X15
	VMOVUPS X0, (SI)
	ADDQ $16, SI
	ADDQ $16, BX
	ADDQ $16, DI
	DECQ CX
	JNZ sgdF32_heavy
	JMP sgdF32_done
sgdF32_nesterov:
	VCVTPS2PD (SI), Y0
	VCVTPS2PD (BX), Y1
	VMULPD Y11, Y0, Y2
	VADDPD Y2, Y1, Y1
	VCVTPS2PD (DI), Y3
	VMULPD Y12, Y3, Y3
	VADDPD Y1, Y3, Y3
	VCVTPD2PSY Y3, X4
	VMOVUPS X4, (DI)
	VMULPD Y12, Y3, Y6
	VADDPD Y6, Y1, Y1
	VMULPD Y1, Y10, Y1
	VSUBPD Y1, Y0, Y0
	VCVTPD2PSY Y0, X0
	VSUBPS X0, X0, X5
	VORPS X5, X15, X15
	VMOVUPS X0, (SI)
	ADDQ $16, SI
	ADDQ $16, BX
	ADDQ $16, DI
	DECQ CX
	JNZ sgdF32_nesterov
sgdF32_done:
	VPTEST Y15, Y15
	SETNE nonFinite+64(FP)
	VZEROUPPER
	RET

// func sgdF64(val, grad, vel *float64, n int, lr, d, mu float64, mode int) (nonFinite bool)
TEXT ·sgdF64(SB), NOSPLIT, $0-65
	MOVQ val+0(FP), SI
	MOVQ grad+8(FP), BX
	MOVQ vel+16(FP), DI
	MOVQ n+24(FP), CX
	VBROADCASTSD lr+32(FP), Y10
	VBROADCASTSD d+40(FP), Y11
	VBROADCASTSD mu+48(FP), Y12
	MOVQ mode+56(FP), DX
	VXORPD Y15, Y15, Y15
	SHRQ $2, CX
	JZ sgdF64_done
	CMPQ DX, $1
	JEQ sgdF64_heavy
	CMPQ DX, $2
	JEQ sgdF64_nesterov
sgdF64_plain:
	VMOVUPD (SI), Y0
	VMOVUPD (BX), Y1
	VMULPD Y11, Y0, Y2
	VADDPD Y2, Y1, Y1
	VMULPD Y1, Y10, Y1
	VSUBPD Y1, Y0, Y0
	VSUBPD Y0, Y0, Y5
	VORPD Y5, Y15, Y15
	VMOVUPD Y0, (SI)
	ADDQ $32, SI
	ADDQ $32, BX
	DECQ CX
	JNZ sgdF64_plain
	JMP sgdF64_done
sgdF64_heavy:
	VMOVUPD (SI), Y0
	VMOVUPD (BX), Y1
	VMULPD Y11, Y0, Y2
	VADDPD Y2, Y1, Y1
	VMOVUPD (DI), Y3
	VMULPD Y12, Y3, Y3
	VADDPD Y1, Y3, Y3
	VMOVUPD Y3, (DI)
	VMOVAPD Y3, Y1
	VMULPD Y1, Y10, Y1
	VSUBPD Y1, Y0, Y0
	VSUBPD Y0, Y0, Y5
	VORPD Y5, Y15, Y15
	VMOVUPD Y0, (SI)
	ADDQ $32, SI
	ADDQ $32, BX
	ADDQ $32, DI
	DECQ CX
	JNZ sgdF64_heavy
	JMP sgdF64_done
sgdF64_nesterov:
	VMOVUPD (SI), Y0
	VMOVUPD (BX), Y1
	VMULPD Y11, Y0, Y2
	VADDPD Y2, Y1, Y1
	VMOVUPD (DI), Y3
	VMULPD Y12, Y3, Y3
	VADDPD Y1, Y3, Y3
	VMOVUPD Y3, (DI)
	VMULPD Y12, Y3, Y6
	VADDPD Y6, Y1, Y1
	VMULPD Y1, Y10, Y1
	VSUBPD Y1, Y0, Y0
	VSUBPD Y0, Y0, Y5
	VORPD Y5, Y15, Y15
	VMOVUPD Y0, (SI)
	ADDQ $32, SI
	ADDQ $32, BX
	ADDQ $32, DI
	DECQ CX
	JNZ sgdF64_nesterov
sgdF64_done:
	VPTEST Y15, Y15
	SETNE nonFinite+64(FP)
	VZEROUPPER
	RET
