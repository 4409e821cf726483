//go:build !noasm

package kern

import "golang.org/x/sys/cpu"

//go:generate go run asmgen.go

// The assembly micro-kernels (kernels_amd64.s, written by asmgen.go). Each
// computes exactly what the pure-Go kernel of kernel.go computes for its
// block shape (see kernelFunc), with vector fused multiply-adds.
//
//go:noescape
func kernAVX2F64(kc int, a, b, c *float64, ldc int, alpha, beta float64, flags uintptr)

//go:noescape
func kernAVX2F32(kc int, a, b, c *float32, ldc int, alpha, beta float32, flags uintptr)

//go:noescape
func kernAVX512F64(kc int, a, b, c *float64, ldc int, alpha, beta float64, flags uintptr)

//go:noescape
func kernAVX512F32(kc int, a, b, c *float32, ldc int, alpha, beta float32, flags uintptr)

//go:noescape
func kernAVX512F64x12(kc int, a, b, c *float64, ldc int, alpha, beta float64, flags uintptr)

//go:noescape
func kernAVX512F32x12(kc int, a, b, c *float32, ldc int, alpha, beta float32, flags uintptr)

//go:noescape
func kernAVX512F32x16(kc int, a, b, c *float32, ldc int, alpha, beta float32, flags uintptr)

//go:noescape
func kernAVX2F64x4(kc int, a, b, c *float64, ldc int, alpha, beta float64, flags uintptr)

//go:noescape
func kernAVX2F32x4(kc int, a, b, c *float32, ldc int, alpha, beta float32, flags uintptr)

// The small blocks (8×16, 4×32 and 8×4 in float64; 8×32, 4×32 and 8×8 in
// float32), which choose takes for small products that they tile with
// less padding.
//
//go:noescape
func kernAVX512F64m8n16(kc int, a, b, c *float64, ldc int, alpha, beta float64, flags uintptr)

//go:noescape
func kernAVX512F64m4n32(kc int, a, b, c *float64, ldc int, alpha, beta float64, flags uintptr)

//go:noescape
func kernAVX2F64m8n4(kc int, a, b, c *float64, ldc int, alpha, beta float64, flags uintptr)

//go:noescape
func kernAVX512F32m8n32(kc int, a, b, c *float32, ldc int, alpha, beta float32, flags uintptr)

//go:noescape
func kernAVX512F32m4n32(kc int, a, b, c *float32, ldc int, alpha, beta float32, flags uintptr)

//go:noescape
func kernAVX2F32m8n8(kc int, a, b, c *float32, ldc int, alpha, beta float32, flags uintptr)

// The strided variants (name + "S") of the kernels above: the same
// arithmetic, reading op(A) and op(B) in place with row strides lda and
// ldb (elements from one step l to the next) instead of from packed
// panels.
//
//go:noescape
func kernAVX2F64S(kc int, a, b, c *float64, ldc int, alpha, beta float64, flags uintptr, lda, ldb int)

//go:noescape
func kernAVX2F32S(kc int, a, b, c *float32, ldc int, alpha, beta float32, flags uintptr, lda, ldb int)

//go:noescape
func kernAVX512F64S(kc int, a, b, c *float64, ldc int, alpha, beta float64, flags uintptr, lda, ldb int)

//go:noescape
func kernAVX512F32S(kc int, a, b, c *float32, ldc int, alpha, beta float32, flags uintptr, lda, ldb int)

//go:noescape
func kernAVX512F64x12S(kc int, a, b, c *float64, ldc int, alpha, beta float64, flags uintptr, lda, ldb int)

//go:noescape
func kernAVX512F32x12S(kc int, a, b, c *float32, ldc int, alpha, beta float32, flags uintptr, lda, ldb int)

//go:noescape
func kernAVX512F32x16S(kc int, a, b, c *float32, ldc int, alpha, beta float32, flags uintptr, lda, ldb int)

//go:noescape
func kernAVX2F64x4S(kc int, a, b, c *float64, ldc int, alpha, beta float64, flags uintptr, lda, ldb int)

//go:noescape
func kernAVX2F32x4S(kc int, a, b, c *float32, ldc int, alpha, beta float32, flags uintptr, lda, ldb int)

//go:noescape
func kernAVX512F64m8n16S(kc int, a, b, c *float64, ldc int, alpha, beta float64, flags uintptr, lda, ldb int)

//go:noescape
func kernAVX512F64m4n32S(kc int, a, b, c *float64, ldc int, alpha, beta float64, flags uintptr, lda, ldb int)

//go:noescape
func kernAVX2F64m8n4S(kc int, a, b, c *float64, ldc int, alpha, beta float64, flags uintptr, lda, ldb int)

//go:noescape
func kernAVX512F32m8n32S(kc int, a, b, c *float32, ldc int, alpha, beta float32, flags uintptr, lda, ldb int)

//go:noescape
func kernAVX512F32m4n32S(kc int, a, b, c *float32, ldc int, alpha, beta float32, flags uintptr, lda, ldb int)

//go:noescape
func kernAVX2F32m8n8S(kc int, a, b, c *float32, ldc int, alpha, beta float32, flags uintptr, lda, ldb int)

// transpose8x8F32, transpose4x4F32 and transpose4x4F64 write the
// transposes of nb square blocks side by side, in one call: block q's
// dst[(q·tb + l)·ldd + r] = src[r·lds + q·tb + l]. They need AVX (implied
// by AVX2).
//
//go:noescape
func transpose8x8F32(src *float32, lds int, dst *float32, ldd, nb int)

//go:noescape
func transpose4x4F32(src *float32, lds int, dst *float32, ldd, nb int)

//go:noescape
func transpose4x4F64(src *float64, lds int, dst *float64, ldd, nb int)

// useTranspose reports whether pack may use the transposes above, and
// useVector whether ReLU and ReLUMask may use their vector loops.
var (
	useTranspose = hasAVX2()
	useVector    = hasAVX2()
	// useNormal says whether NormalFast may use normalAVX512.
	useNormal = hasAVX512()
)

// The vector loops of elementwise.go, over n elements, n a multiple of
// the vector width.
//
//go:noescape
func reluF32(x, y *float32, n int)

//go:noescape
func reluF64(x, y *float64, n int)

//go:noescape
func maskF32(x, dy, dx *float32, n int)

//go:noescape
func maskF64(x, dy, dx *float64, n int)

// peakAVX2 and peakAVX512 run n·12 independent vector FMAs on registers
// only (float64 lanes; the float32 rate is twice the float64 rate): the
// processor's peak, for the benchmarks.
//
//go:noescape
func peakAVX2(n int)

//go:noescape
func peakAVX512(n int)

// available lists the kernels this CPU can run, best first; the generic
// kernel is always last. The operating system must also save the wide
// registers; x/sys/cpu folds that check (XGETBV) into the flags.
func available64() []microKernel[float64] {
	var ks []microKernel[float64]
	if hasAVX512() {
		ks = append(ks, microKernel[float64]{name: "avx512", mr: 12, nr: 16, fn: kernAVX512F64x12, fs: kernAVX512F64x12S},
			microKernel[float64]{name: "avx512", mr: 8, nr: 24, fn: kernAVX512F64, fs: kernAVX512F64S},
			microKernel[float64]{name: "avx512", mr: 8, nr: 16, fn: kernAVX512F64m8n16, fs: kernAVX512F64m8n16S},
			microKernel[float64]{name: "avx512", mr: 4, nr: 32, fn: kernAVX512F64m4n32, fs: kernAVX512F64m4n32S})
	}
	if hasAVX2() {
		ks = append(ks, microKernel[float64]{name: "avx2", mr: 6, nr: 8, fn: kernAVX2F64, fs: kernAVX2F64S},
			microKernel[float64]{name: "avx2", mr: 4, nr: 12, fn: kernAVX2F64x4, fs: kernAVX2F64x4S},
			microKernel[float64]{name: "avx2", mr: 8, nr: 4, fn: kernAVX2F64m8n4, fs: kernAVX2F64m8n4S})
	}
	return append(ks, generic[float64](4, 8))
}

func available32() []microKernel[float32] {
	var ks []microKernel[float32]
	if hasAVX512() {
		ks = append(ks, microKernel[float32]{name: "avx512", mr: 12, nr: 32, fn: kernAVX512F32x12, fs: kernAVX512F32x12S},
			microKernel[float32]{name: "avx512", mr: 8, nr: 48, fn: kernAVX512F32, fs: kernAVX512F32S},
			microKernel[float32]{name: "avx512", mr: 16, nr: 16, fn: kernAVX512F32x16, fs: kernAVX512F32x16S},
			microKernel[float32]{name: "avx512", mr: 8, nr: 32, fn: kernAVX512F32m8n32, fs: kernAVX512F32m8n32S},
			microKernel[float32]{name: "avx512", mr: 4, nr: 32, fn: kernAVX512F32m4n32, fs: kernAVX512F32m4n32S})
	}
	if hasAVX2() {
		ks = append(ks, microKernel[float32]{name: "avx2", mr: 6, nr: 16, fn: kernAVX2F32, fs: kernAVX2F32S},
			microKernel[float32]{name: "avx2", mr: 4, nr: 24, fn: kernAVX2F32x4, fs: kernAVX2F32x4S},
			microKernel[float32]{name: "avx2", mr: 8, nr: 8, fn: kernAVX2F32m8n8, fs: kernAVX2F32m8n8S})
	}
	return append(ks, generic[float32](4, 8))
}

func hasAVX2() bool { return cpu.X86.HasAVX2 && cpu.X86.HasFMA }

// hasAVX512 asks for the foundation and DQ (VXORPD on 512-bit registers).
func hasAVX512() bool { return cpu.X86.HasAVX512F && cpu.X86.HasAVX512DQ && hasAVX2() }

// peakLoop is the widest register-only FMA loop this CPU runs, with its
// float64 lanes and name.
func peakLoop() (loop func(int), lanes int, isa string) {
	switch {
	case hasAVX512():
		return peakAVX512, 8, "avx512"
	case hasAVX2():
		return peakAVX2, 4, "avx2"
	}
	return nil, 0, ""
}

// sgdF32 and sgdF64 are the vector loops of SGDStep (update_amd64.s).
//
//go:noescape
func sgdF32(val, grad, vel *float32, n int, lr, d, mu float64, mode int) (nonFinite bool)

//go:noescape
func sgdF64(val, grad, vel *float64, n int, lr, d, mu float64, mode int) (nonFinite bool)

// The vector loops of NormalFast and AddNoise (normal_amd64.s).
//
//go:noescape
func normalAVX512(dst *float64, n int, seed uint64, w *[1024]float64, k *[1024]int64, miss *uint8)

//go:noescape
func addNoiseF64(val, xi *float64, n int, sigma float64) (nonFinite bool)

//go:noescape
func addNoiseF32(val *float32, xi *float64, n int, sigma float64) (nonFinite bool)
