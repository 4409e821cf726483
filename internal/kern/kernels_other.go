//go:build noasm || !amd64

package kern

// Without assembly (the noasm build tag, or another architecture) the only
// kernels are the pure-Go ones of kernel.go.

func available64() []microKernel[float64] { return []microKernel[float64]{generic[float64](4, 8)} }

func available32() []microKernel[float32] { return []microKernel[float32]{generic[float32](4, 8)} }

// Without assembly, pack transposes element by element; these stand-ins
// are never called (useTranspose is false) but keep pack one function.
var (
	useTranspose = false
	useVector    = false
	useNormal    = false
)

func reluF32(x, y *float32, n int)      { panic("kern: no assembly") }
func reluF64(x, y *float64, n int)      { panic("kern: no assembly") }
func maskF32(x, dy, dx *float32, n int) { panic("kern: no assembly") }
func maskF64(x, dy, dx *float64, n int) { panic("kern: no assembly") }

func transpose8x8F32(src *float32, lds int, dst *float32, ldd, nb int) { panic("kern: no assembly") }

func transpose4x4F32(src *float32, lds int, dst *float32, ldd, nb int) { panic("kern: no assembly") }

func transpose4x4F64(src *float64, lds int, dst *float64, ldd, nb int) { panic("kern: no assembly") }

// Without assembly there is no register-only loop to measure a peak with.
func peakLoop() (loop func(int), lanes int, isa string) { return nil, 0, "" }

func sgdF32(val, grad, vel *float32, n int, lr, d, mu float64, mode int) bool {
	panic("kern: no assembly")
}

func sgdF64(val, grad, vel *float64, n int, lr, d, mu float64, mode int) bool {
	panic("kern: no assembly")
}

func normalAVX512(dst *float64, n int, seed uint64, w *[1024]float64, k *[1024]int64, miss *uint8) {
	panic("kern: no assembly")
}

func addNoiseF64(val, xi *float64, n int, sigma float64) bool { panic("kern: no assembly") }

func addNoiseF32(val *float32, xi *float64, n int, sigma float64) bool { panic("kern: no assembly") }
