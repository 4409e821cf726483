package kern

// ReLU sets y[i] = max(x[i], 0) for i < len(x), with Go's max: a NaN stays
// NaN, −0 becomes +0. y must be at least as long as x; it may be x.
func ReLU[T Float](x, y []T) {
	y = y[:len(x)]
	done := 0
	if useVector {
		switch xs := any(x).(type) {
		case []float32:
			done = len(xs) &^ 7
			if done > 0 {
				reluF32(&xs[0], &any(y).([]float32)[0], done)
			}
		case []float64:
			done = len(xs) &^ 3
			if done > 0 {
				reluF64(&xs[0], &any(y).([]float64)[0], done)
			}
		}
	}
	for i := done; i < len(x); i++ {
		y[i] = max(x[i], 0)
	}
}

// ReLUMask sets dx[i] = dy[i] where x[i] > 0 and 0 elsewhere (NaN
// included): the rectifier's backward pass, with the derivative at 0 taken
// as 0. dy and dx must be at least as long as x; dx may be dy.
func ReLUMask[T Float](x, dy, dx []T) {
	dy, dx = dy[:len(x)], dx[:len(x)]
	done := 0
	if useVector {
		switch xs := any(x).(type) {
		case []float32:
			done = len(xs) &^ 7
			if done > 0 {
				maskF32(&xs[0], &any(dy).([]float32)[0], &any(dx).([]float32)[0], done)
			}
		case []float64:
			done = len(xs) &^ 3
			if done > 0 {
				maskF64(&xs[0], &any(dy).([]float64)[0], &any(dx).([]float64)[0], done)
			}
		}
	}
	for i := done; i < len(x); i++ {
		if x[i] > 0 {
			dx[i] = dy[i]
		} else {
			dx[i] = 0
		}
	}
}

// SGDStep runs the vector part of optim's noise-free update (the rule is
// stated and tested there, at stepExact) over the longest prefix of val
// whose length is a multiple of 4, where the processor has the vector
// unit (AVX2) and the assembly is built: θ ← θ − lr·g with g = grad +
// d·θ, and with momentum (vel not nil) v ← μv + g, g ← v (heavy ball) or
// g + μv (Nesterov), each operation rounded in float64, values rounded to
// T. It returns how many leading elements it updated (0 without the
// vector unit) and whether any of their new values is not finite; the
// caller runs the scalar loop on the rest.
func SGDStep[T Float](val, grad, vel []T, lr, d, mu float64, nesterov bool) (done int, nonFinite bool) {
	if !useVector {
		return 0, false
	}
	done = len(val) &^ 3
	if done == 0 {
		return 0, false
	}
	mode := 0
	if vel != nil {
		mode = 1
		if nesterov {
			mode = 2
		}
		vel = vel[:done]
	}
	grad = grad[:done]
	switch v := any(val).(type) {
	case []float32:
		var vp *float32
		if vel != nil {
			vp = &any(vel).([]float32)[0]
		}
		return done, sgdF32(&v[0], &any(grad).([]float32)[0], vp, done, lr, d, mu, mode)
	case []float64:
		var vp *float64
		if vel != nil {
			vp = &any(vel).([]float64)[0]
		}
		return done, sgdF64(&v[0], &any(grad).([]float64)[0], vp, done, lr, d, mu, mode)
	}
	return 0, false
}

// NormalFast runs the vector part of optim's Gaussian draws for the
// Langevin step (the rule is stated and tested there, at normalAt) over
// the longest prefix of dst whose length is a multiple of 8, where the
// processor has AVX-512: for element j, u = SplitMix64(seed + j·γ) with γ
// the SplitMix64 increment, strip i = u & 1023, J = the high 32 bits of u
// as a signed integer, dst[j] = float64(J)·w[i], and bit j%8 of
// miss[j/8] is set where |J| ≥ k[i] (the ziggurat's slow cases, which the
// caller redraws; their bits are otherwise 0). It returns how many
// leading elements it drew: 0 without the vector unit. miss must hold at
// least len(dst)/8 bytes.
func NormalFast(dst []float64, seed uint64, w *[1024]float64, k *[1024]int64, miss []uint8) int {
	if !useNormal {
		return 0
	}
	n := len(dst) &^ 7
	if n == 0 {
		return 0
	}
	_ = miss[n/8-1]
	normalAVX512(&dst[0], n, seed, w, k, &miss[0])
	return n
}

// AddNoise runs the vector part of optim's noise step: val[j] = T(val[j]
// + σ·xi[j]), the product and the sum each rounded in float64, over the
// longest prefix of val whose length is a multiple of 4, where the
// processor has the vector unit. It returns how many leading elements it
// updated (0 without it) and whether any of their new values is not
// finite. xi must be at least as long as val.
func AddNoise[T Float](val []T, xi []float64, sigma float64) (done int, nonFinite bool) {
	if !useVector {
		return 0, false
	}
	done = len(val) &^ 3
	if done == 0 {
		return 0, false
	}
	xi = xi[:done]
	switch v := any(val).(type) {
	case []float32:
		return done, addNoiseF32(&v[0], &xi[0], done, sigma)
	case []float64:
		return done, addNoiseF64(&v[0], &xi[0], done, sigma)
	}
	return 0, false
}
