package arith

import (
	"math"
	"testing"
)

func TestSoftmax(t *testing.T) {
	// softmax(a, b) = (1/(1 + e^{b−a}), 1/(1 + e^{a−b})) (closed form), with
	// b − a = log 3, also shifted by 1000, where a naive exp would
	// overflow, and at T = 2 with b − a = log 9: all (1/4, 3/4) up to the
	// rounding of the inputs. The expected values use the difference d as
	// stored (the subtraction is exact, Sterbenz), and differ from the
	// computed ones only by a few roundings in exp, the sum and the
	// division: 8ε relative.
	dst := make([]float64, 2)
	for _, c := range []struct {
		s []float64
		t float64
	}{
		{[]float64{0, math.Log(3)}, 1},
		{[]float64{1000, 1000 + math.Log(3)}, 1},
		{[]float64{0, math.Log(9)}, 2},
	} {
		Softmax(c.s, c.t, dst)
		d := (c.s[1] - c.s[0]) / c.t
		w0, w1 := 1/(1+math.Exp(d)), 1/(1+math.Exp(-d))
		if math.Abs(dst[0]-w0) > 8*0x1p-52*w0 || math.Abs(dst[1]-w1) > 8*0x1p-52*w1 {
			t.Errorf("Softmax(%v, %v) = %v, want (%v, %v)", c.s, c.t, dst, w0, w1)
		}
		// And (1/4, 3/4) to the input's rounding: |d − log 3| ≤ ulp(1000)/2
		// (storing 1000 + log 3) moves p by at most p(1−p)·ulp(1000)/2 =
		// (3/16)·ulp(1000)/2, plus the 8ε above.
		if bound := 3.0/16*(math.Nextafter(1000, 2000)-1000)/2 + 8*0x1p-52; math.Abs(dst[0]-0.25) > bound {
			t.Errorf("Softmax(%v, %v) = %v, want about (1/4, 3/4)", c.s, c.t, dst)
		}
	}
}
