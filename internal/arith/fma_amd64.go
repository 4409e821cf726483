//go:build amd64 && !noasm

package arith

// hasFMA reports whether this processor runs VFMADD231SS and the
// operating system saves the vector registers (fmaSupported asks CPUID
// and XGETBV itself, so that this package still imports only the
// standard library).
var hasFMA = fmaSupported()

// fmaSupported reports CPUID's FMA, AVX and OSXSAVE bits and XCR0's
// SSE and AVX state bits all set.
//
//go:noescape
func fmaSupported() bool

// fmaChain32 returns acc after acc = fma(x[l], w[l], acc) for l = 0 … n−1
// in order, each rounded once in float32 by the processor's
// multiply-add: FMA32's result, step for step.
//
//go:noescape
func fmaChain32(x, w *float32, n int, acc float32) float32

// fmaChain32x4 runs fmaChain32's recurrence for four rows of weights at
// once, row r starting at w + r·stride elements, from acc[r] = 0, and
// stores the four results in acc.
//
//go:noescape
func fmaChain32x4(x, w *float32, n, stride int, acc *[4]float32)
