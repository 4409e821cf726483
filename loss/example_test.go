package loss_test

import (
	"fmt"

	"github.com/rhomb/rhomb/loss"
)

// A binary problem: one output per row, targets ±1. The loss is the mean
// over the rows, and the gradient carries the factor 1/rows.
func ExampleSquare() {
	out := []float64{0.5, -2, 1}
	target := []float64{1, 1, -1}
	grad := make([]float64, 3)
	l := loss.Square[float64]{}.Eval(out, target, 3, 1, grad)
	fmt.Printf("loss %.4f\n", l)
	fmt.Printf("grad %.4f\n", grad)
	// Output:
	// loss 4.4167
	// grad [-0.3333 -2.0000 1.3333]
}

// The scale ρ* at which weight decay balances the pull of the data, for a
// network whose normalized outputs are f: mean_n (y_n − ρ f_n)² + λρ² is
// smallest there.
func ExampleSquare_RhoStar() {
	f := []float64{1, 2}
	target := []float64{1, 1}
	fmt.Println(loss.Square[float64]{}.RhoStar(f, target, 2, 1, 0.5))
	// Output:
	// 0.5
}

// Three classes, one-hot targets, in float32: the loss is still
// accumulated in float64. (Row 0: softmax_0 = e²/(e² + 2) ≈ 0.7870, loss
// −log 0.7870 ≈ 0.2395; row 1: uniform, loss log 3 ≈ 1.0986; mean 0.6691.)
func ExampleCrossEntropy() {
	logits := []float32{
		2, 0, 0,
		0, 0, 0,
	}
	target := []float32{
		1, 0, 0,
		0, 0, 1,
	}
	grad := make([]float32, 6)
	l := loss.CrossEntropy[float32]{}.Eval(logits, target, 2, 3, grad)
	fmt.Printf("loss %.4f\n", l)
	fmt.Printf("grad %.4f\n", grad)
	// Output:
	// loss 0.6691
	// grad [-0.1065 0.0533 0.0533 0.1667 0.1667 -0.3333]
}

// The rescaled square loss for many classes: weight K on the true class's
// output, which is asked to reach M.
func ExampleRescaled() {
	out := []float64{2, 1, 0, -1}
	target := []float64{1, 0, 0, 1}
	l := loss.Rescaled[float64]{K: 2, M: 3}.Eval(out, target, 2, 2, nil)
	fmt.Println(l)
	// Output:
	// 8.75
}

// A binary logistic loss stays finite on outputs far past where exp
// overflows.
func ExampleLogistic() {
	out := []float64{1e4, -1e4}
	target := []float64{1, 1}
	fmt.Println(loss.Logistic[float64]{}.Eval(out, target, 2, 1, nil))
	// Output:
	// 5000
}
