package net_test

import (
	"fmt"

	"github.com/rhomb/rhomb/net"
)

// A smoothed rectifier of sharpness 4: away from 0 it is within
// log(1 + e^{−4})/4 ≈ 0.0045 of ReLU, and at 0 the gap is log(2)/4.
func ExampleSmoothReLU() {
	s := net.NewSmoothReLU[float64]("soft", 4)
	if _, err := s.Connect(3); err != nil {
		fmt.Println(err)
		return
	}
	x := []float64{-1, 0, 1}
	y := make([]float64, 3)
	s.Forward(x, y, 1)
	fmt.Printf("y     = %.4f\n", y)
	dy, dx := []float64{1, 1, 1}, make([]float64, 3)
	s.Backward(x, y, dy, dx, 1)
	fmt.Printf("dy/dx = %.4f\n", dx)
	// Output:
	// y     = [0.0045 0.1733 1.0045]
	// dy/dx = [0.0180 0.5000 0.9820]
}

// In a network, the node goes where a ReLU would; Build checks the
// sharpness and names the node when it is wrong.
func ExampleSmoothReLU_network() {
	_, err := net.NewBuilder[float64](2).
		Dense("hidden", 8).
		Node(net.NewSmoothReLU[float64]("soft", 0)).
		Readout("out", 1).
		Build()
	fmt.Println(err)

	nw, err := net.NewBuilder[float64](2).
		Dense("hidden", 8).
		Node(net.NewSmoothReLU[float64]("soft", 10)).
		Readout("out", 1).
		Build()
	if err != nil {
		fmt.Println(err)
		return
	}
	fmt.Println(nw.In(), "→", nw.Out(), nw.Node("soft").Kind())
	// Output:
	// net: node 1 "soft": smooth ReLU sharpness β = 0: want a finite β > 0 (larger is closer to ReLU; the largest gap is log(2)/β, at 0)
	// 2 → 1 smooth-relu
}

// The quadratic that interpolates ReLU at the three Chebyshev nodes of
// [−1, 1] (0 and ±√3/2) is t²/√3 + t/2. Outside the interval it keeps
// growing like x², which is why inputs should be standardized.
func ExamplePolyReLU() {
	p := net.NewPolyReLU[float64]("poly", 2, -1, 1, net.FitInterpolation)
	if _, err := p.Connect(1); err != nil {
		fmt.Println(err)
		return
	}
	fmt.Printf("Chebyshev %.4f\n", p.Coefficients())
	m := p.Monomial() // m[0] = 0 up to rounding
	fmt.Printf("x, x²     %.4f\n", m[1:])
	x := []float64{-1, 0, 0.5, 1, 3}
	y := make([]float64, len(x))
	p.Forward(x, y, len(x))
	fmt.Printf("p(%g) = %.4f\n", x, y)
	// Output:
	// Chebyshev [0.2887 0.5000 0.2887]
	// x, x²     [0.5000 0.5774]
	// p([-1 0 0.5 1 3]) = [0.0774 0.0000 0.3943 1.0774 6.6962]
}

// Least squares and interpolation compared by their worst error on the
// interval, for a few degrees: both fall like 1/d (least squares is near
// 1/(π(d+1)), the tail of ReLU's Chebyshev series).
func ExampleFit() {
	for _, fit := range []net.Fit{net.FitLeastSquares, net.FitInterpolation} {
		fmt.Printf("%-13v", fit)
		for _, d := range []int{2, 8, 32} {
			p := net.NewPolyReLU[float64]("poly", d, -1, 1, fit)
			if _, err := p.Connect(1); err != nil {
				fmt.Println(err)
				return
			}
			const n = 2001
			x, y := make([]float64, n), make([]float64, n)
			for i := range x {
				x[i] = -1 + 2*float64(i)/(n-1)
			}
			p.Forward(x, y, n)
			worst := 0.0
			for i := range x {
				worst = max(worst, abs(y[i]-max(x[i], 0)))
			}
			fmt.Printf("  d=%-2d %.4f", d, worst)
		}
		fmt.Println()
	}
	// Output:
	// least-squares  d=2  0.1061  d=8  0.0354  d=32 0.0096
	// interpolation  d=2  0.1083  d=8  0.0335  d=32 0.0091
}

func abs(v float64) float64 {
	if v < 0 {
		return -v
	}
	return v
}
