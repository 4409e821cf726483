//go:build noasm || !amd64

package arith

// Without assembly (the noasm build tag, or another architecture) every
// float32 sum runs FMA32 in Go.
const hasFMA = false

func fmaChain32(x, w *float32, n int, acc float32) float32 { panic("arith: no assembly") }

func fmaChain32x4(x, w *float32, n, stride int, acc *[4]float32) { panic("arith: no assembly") }
