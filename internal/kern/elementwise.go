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
