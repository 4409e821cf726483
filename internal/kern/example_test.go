package kern

import "fmt"

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
