package kern

import (
	"github.com/rhomb/rhomb/internal/arith"
	"math"
	"unsafe"
)

// Flags of a micro-kernel call.
const (
	// flagNoBeta: beta is zero; C is written, never read (it may hold NaN).
	flagNoBeta uintptr = 1
)

// kernelFunc is a micro-kernel. It computes an mr×nr block of C from a
// packed panel of op(A) (kc steps of mr values) and a packed panel of op(B)
// (kc steps of nr values): for every element,
//
//	acc = 0; for l in 0..kc−1: acc = fma(a[l·mr+i], b[l·nr+j], acc)
//	t = T(alpha·acc)
//	c = t                 if flags has flagNoBeta
//	c = fma(beta, c, t)   otherwise
//
// where fma rounds once. Every implementation, in Go or in assembly, must
// give exactly these bits; TestKernelsBitExact checks it.
type kernelFunc[T Float] func(kc int, a, b, c *T, ldc int, alpha, beta T, flags uintptr)

// stridedFunc is a kernelFunc that reads op(A) and op(B) in place: step l
// of the A panel starts lda elements after step l−1, and of the B panel
// ldb elements after (a packed panel is the case lda = mr, ldb = nr). The
// arithmetic, and so every bit of C, is that of kernelFunc.
type stridedFunc[T Float] func(kc int, a, b, c *T, ldc int, alpha, beta T, flags uintptr, lda, ldb int)

// microKernel is a kernel with its block shape, and its strided variant
// (nil for the pure-Go kernel).
type microKernel[T Float] struct {
	name   string
	mr, nr int
	fn     kernelFunc[T]
	fs     stridedFunc[T]
}

// generic returns the pure-Go kernel for an mr×nr block. It is the
// fallback, and the definition the assembly is checked against.
func generic[T Float](mr, nr int) microKernel[T] {
	var fn kernelFunc[T]
	switch any(T(0)).(type) {
	case float64:
		f := func(kc int, a, b, c *float64, ldc int, alpha, beta float64, flags uintptr) {
			genericBody64(mr, nr, kc, a, b, c, ldc, alpha, beta, flags)
		}
		fn = any(kernelFunc[float64](f)).(kernelFunc[T])
	case float32:
		f := func(kc int, a, b, c *float32, ldc int, alpha, beta float32, flags uintptr) {
			genericBody32(mr, nr, kc, a, b, c, ldc, alpha, beta, flags)
		}
		fn = any(kernelFunc[float32](f)).(kernelFunc[T])
	}
	return microKernel[T]{name: "go", mr: mr, nr: nr, fn: fn}
}

// genericMax is the largest block the pure-Go kernel accumulates in its
// fixed-size array.
const genericMax = 8 * 48

// genericBody64 and genericBody32 are the pure-Go kernel; they differ only
// in the fused multiply-add, written out in each so that it is inlined.
func genericBody64(mr, nr, kc int, a, b, c *float64, ldc int, alpha, beta float64, flags uintptr) {
	var acc [genericMax]float64
	as := unsafe.Slice(a, kc*mr)
	bs := unsafe.Slice(b, kc*nr)
	for l := range kc {
		al, bl := as[l*mr:l*mr+mr], bs[l*nr:l*nr+nr]
		for i, x := range al {
			row := acc[i*nr : i*nr+nr]
			for j, y := range bl {
				row[j] = math.FMA(x, y, row[j])
			}
		}
	}
	epilogue(mr, nr, acc[:mr*nr], c, ldc, alpha, beta, flags, math.FMA)
}

func genericBody32(mr, nr, kc int, a, b, c *float32, ldc int, alpha, beta float32, flags uintptr) {
	var acc [genericMax]float32
	as := unsafe.Slice(a, kc*mr)
	bs := unsafe.Slice(b, kc*nr)
	for l := range kc {
		al, bl := as[l*mr:l*mr+mr], bs[l*nr:l*nr+nr]
		for i, x := range al {
			row := acc[i*nr : i*nr+nr]
			for j, y := range bl {
				row[j] = arith.FMA32(x, y, row[j])
			}
		}
	}
	epilogue(mr, nr, acc[:mr*nr], c, ldc, alpha, beta, flags, arith.FMA32)
}

func epilogue[T Float](mr, nr int, acc []T, c *T, ldc int, alpha, beta T, flags uintptr, fma func(x, y, z T) T) {
	cs := unsafe.Slice(c, (mr-1)*ldc+nr)
	for i := range mr {
		row := cs[i*ldc : i*ldc+nr]
		for j := range row {
			t := T(alpha * acc[i*nr+j])
			if flags&flagNoBeta == 0 {
				t = fma(beta, row[j], t)
			}
			row[j] = t
		}
	}
}
