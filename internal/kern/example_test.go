package kern

import "fmt"

// GemmReLU is a dense layer's forward product and its rectifier in one
// pass over C. Worked by hand: row (1, −2) of A against rows (1, 1) and
// (−1, 0) of B gives −1 and −1, rectified to 0 and 0; row (3, 1) gives 4
// and −3, rectified to 4 and 0.
func ExampleGemmReLU() {
	a := []float32{
		1, -2,
		3, 1,
	}
	b := []float32{
		1, 1,
		-1, 0,
	}
	c := make([]float32, 4)
	GemmReLU(false, true, 2, 2, 2, 1, a, 2, b, 2, 0, c, 2)
	fmt.Println(c)
	// Output: [0 0 4 0]
}

// ReLUMask is the rectifier's backward pass: the gradient passes where the
// input was positive.
func ExampleReLUMask() {
	x := []float64{-1, 2, 0, 3}
	dy := []float64{10, 20, 30, 40}
	dx := make([]float64, 4)
	ReLUMask(x, dy, dx)
	fmt.Println(dx)
	// Output: [0 20 0 40]
}
