//go:build amd64 && !noasm

#include "textflag.h"

// func fmaSupported() bool
TEXT ·fmaSupported(SB), NOSPLIT, $0-1
	MOVL $1, AX
	XORL CX, CX
	CPUID
	// ECX bit 12 FMA, bit 27 OSXSAVE, bit 28 AVX.
	ANDL $0x18001000, CX
	CMPL CX, $0x18001000
	JNE fma_no
	XORL CX, CX
	XGETBV
	// XCR0 bit 1 SSE state, bit 2 AVX state.
	ANDL $6, AX
	CMPL AX, $6
	JNE fma_no
	MOVB $1, ret+0(FP)
	RET

fma_no:
	MOVB $0, ret+0(FP)
	RET

// func fmaChain32(x, w *float32, n int, acc float32) float32
TEXT ·fmaChain32(SB), NOSPLIT, $0-36
	MOVQ x+0(FP), SI
	MOVQ w+8(FP), DI
	MOVQ n+16(FP), CX
	VMOVSS acc+24(FP), X0
	TESTQ CX, CX
	JLE chain_done

chain_loop:
	VMOVSS (SI), X1
	VFMADD231SS (DI), X1, X0
	ADDQ $4, SI
	ADDQ $4, DI
	DECQ CX
	JNZ chain_loop

chain_done:
	VMOVSS X0, ret+32(FP)
	RET

// func fmaChain32x4(x, w *float32, n, stride int, acc *[4]float32)
TEXT ·fmaChain32x4(SB), NOSPLIT, $0-40
	MOVQ x+0(FP), SI
	MOVQ w+8(FP), DI
	MOVQ n+16(FP), CX
	MOVQ stride+24(FP), R8
	MOVQ acc+32(FP), DX
	SHLQ $2, R8
	LEAQ (R8)(R8*2), R9
	VXORPS X0, X0, X0
	VXORPS X1, X1, X1
	VXORPS X2, X2, X2
	VXORPS X3, X3, X3
	TESTQ CX, CX
	JLE chain4_done

chain4_loop:
	VMOVSS (SI), X4
	VFMADD231SS (DI), X4, X0
	VFMADD231SS (DI)(R8*1), X4, X1
	VFMADD231SS (DI)(R8*2), X4, X2
	VFMADD231SS (DI)(R9*1), X4, X3
	ADDQ $4, SI
	ADDQ $4, DI
	DECQ CX
	JNZ chain4_loop

chain4_done:
	VMOVSS X0, 0(DX)
	VMOVSS X1, 4(DX)
	VMOVSS X2, 8(DX)
	VMOVSS X3, 12(DX)
	RET
