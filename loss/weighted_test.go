package loss_test

import (
	"fmt"
	"math"
	"math/rand/v2"
	"testing"

	"github.com/rhomb/rhomb/internal/conform"
	"github.com/rhomb/rhomb/loss"
)

// TestWeightedWorked: worked by hand.
func TestWeightedWorked(t *testing.T) {
	sq := loss.Square[float64]{}
	// ±1, weights (class 0: 3, class 1: 1):
	//   row 0: f = 0.5, y = +1 (class 1): ℓ = 0.25, weight 1
	//   row 1: f = 0,   y = −1 (class 0): ℓ = 1,    weight 3
	//   loss = (0.25 + 3)/2 = 1.625
	//   grad = w·2(f − y)/2 = (−0.5, 3)
	checkEval(t, loss.Weighted[float64]{Inner: sq, Weights: []float64{3, 1}},
		[]float64{0.5, 0}, []float64{1, -1}, 2, 1, 1.625, []float64{-0.5, 3})

	// One-hot, 3 classes, weights (2, 5, 0.5):
	//   row 0: f = (0.5, −1, 0), y = e_0: ℓ = 0.25 + 1 + 0 = 1.25, weight 2
	//   row 1: f = (2, 0, 1),    y = e_2: ℓ = 4 + 0 + 0 = 4,       weight 0.5
	//   loss = (2·1.25 + 0.5·4)/2 = 2.25
	//   grad row 0 = 2·2(f − y)/2 = (−1, −2, 0); row 1 = 0.5·2(f − y)/2 = (1, 0, 0)
	checkEval(t, loss.Weighted[float64]{Inner: sq, Weights: []float64{2, 5, 0.5}},
		[]float64{0.5, -1, 0, 2, 0, 1}, []float64{1, 0, 0, 0, 0, 1}, 2, 3,
		2.25, []float64{-1, -2, 0, 1, 0, 0})

	// Logistic on margins 0 and 0 with weights (1, 3): ℓ = log 2 per row
	// (log(1 + e⁰)), loss = (3 log 2 + log 2)/2 = 2 log 2; gradient
	// −y·σ(0)·w/2 = −y·w/4: row 0 (y = −1, class 0, w 1) 0.25, row 1
	// (y = +1, w 3) −0.75.
	checkEval(t, loss.Weighted[float64]{Inner: loss.Logistic[float64]{}, Weights: []float64{1, 3}},
		[]float64{0, 0}, []float64{-1, 1}, 2, 1, 2*math.Ln2, []float64{0.25, -0.75})

	if n := (loss.Weighted[float32]{Inner: loss.CrossEntropy[float32]{}}).Name(); n != "weighted-cross-entropy" {
		t.Errorf("Name %q", n)
	}
}

// innerCases are every loss of the package with a target of the form it
// takes, for width cols.
func innerCases(cols int) []struct {
	f      loss.Func[float64]
	target func(int) []float64
} {
	type c = struct {
		f      loss.Func[float64]
		target func(int) []float64
	}
	if cols == 1 {
		return []c{{loss.Square[float64]{}, pm1}, {loss.Logistic[float64]{}, pm1}, {loss.Exponential[float64]{}, pm1}}
	}
	return []c{
		{loss.Square[float64]{}, oneHot(cols)},
		{loss.Rescaled[float64]{K: 2, M: 3}, oneHot(cols)},
		{loss.CrossEntropy[float64]{}, oneHot(cols)},
	}
}

func batch(rng *rand.Rand, rows, cols int, target func(int) []float64, draw func() float64) (out, y []float64) {
	out, y = make([]float64, rows*cols), make([]float64, 0, rows*cols)
	for i := range out {
		out[i] = draw()
	}
	for r := range rows {
		y = append(y, target(r)...)
	}
	return out, y
}

// TestWeightedOnes: with every weight 1, Weighted gives Inner's value and
// gradient. On outputs that are multiples of 1/8 in [−2, 2] and batches of
// 8 rows and 1, 2 or 4 columns, every step of the square losses (squares,
// sums, the factors 2/rows, 1/C, K, M) is exact in float64, and the
// logistic, exponential and cross-entropy losses do the same operations on
// each row in both forms, so the results must agree bit for bit.
func TestWeightedOnes(t *testing.T) {
	rng := rand.New(rand.NewPCG(3, 3))
	ones := []float64{1, 1, 1, 1}
	for _, cols := range []int{1, 2, 4} {
		for _, c := range innerCases(cols) {
			const rows = 8
			out, y := batch(rng, rows, cols, c.target, func() float64 { return float64(rng.IntN(33)-16) / 8 })
			w := loss.Weighted[float64]{Inner: c.f, Weights: ones}
			g1, g2 := make([]float64, rows*cols), make([]float64, rows*cols)
			v1, v2 := c.f.Eval(out, y, rows, cols, g1), w.Eval(out, y, rows, cols, g2)
			if v1 != v2 {
				t.Errorf("%s cols=%d: weighted %.17g, inner %.17g", c.f.Name(), cols, v2, v1)
			}
			for i := range g1 {
				if g1[i] != g2[i] {
					t.Errorf("%s cols=%d: grad[%d] weighted %.17g, inner %.17g", c.f.Name(), cols, i, g2[i], g1[i])
					break
				}
			}
		}
	}
}

// TestWeightedReplicated checks Weighted against Inner on a batch in which
// every row is repeated as many times as its (integer) weight: with W the
// total weight of the R rows, (1/R)·Σ_r w_r ℓ_r = (W/R)·(1/W)·Σ over the
// W rows of the replicated batch, and the gradient of row r is the sum of
// its copies' gradients times W/R. Outputs are N(0, 1) draws here, so the
// sums are rounded: both sides sum at most W = 40 non-negative terms in a
// different order, each side off by at most 40·2⁻⁵³ relative (≈ 5e-15),
// and the copies' gradients, all equal, add up in at most 4 roundings:
// 1e-13 relative leaves a margin while a weight applied to the wrong class
// is off by order 1.
func TestWeightedReplicated(t *testing.T) {
	rng := rand.New(rand.NewPCG(5, 5))
	const tol = 1e-13
	for _, cols := range []int{1, 3} {
		weights := []float64{1, 2, 4}
		for _, c := range innerCases(cols) {
			const rows = 13
			out, y := batch(rng, rows, cols, c.target, rng.NormFloat64)
			w := loss.Weighted[float64]{Inner: c.f, Weights: weights}
			grad := make([]float64, rows*cols)
			got := w.Eval(out, y, rows, cols, grad)

			var rep, repY []float64
			var copies []int
			for r := range rows {
				yr := y[r*cols : (r+1)*cols]
				cl := argmaxOf(yr)
				if cols == 1 && yr[0] <= 0 {
					cl = 0
				} else if cols == 1 {
					cl = 1
				}
				k := int(weights[cl])
				copies = append(copies, k)
				for range k {
					rep = append(rep, out[r*cols:(r+1)*cols]...)
					repY = append(repY, yr...)
				}
			}
			n := len(rep) / cols
			repGrad := make([]float64, len(rep))
			scale := float64(n) / rows
			want := scale * c.f.Eval(rep, repY, n, cols, repGrad)
			if math.Abs(got-want) > tol*math.Abs(want) {
				t.Errorf("%s cols=%d: weighted %.17g, replicated %.17g", c.f.Name(), cols, got, want)
			}
			at := 0
			for r, k := range copies {
				for j := range cols {
					var g float64
					for i := range k {
						g += repGrad[(at+i)*cols+j]
					}
					g *= scale
					if math.Abs(grad[r*cols+j]-g) > tol*max(math.Abs(g), 1e-300) {
						t.Errorf("%s cols=%d: grad row %d col %d weighted %.17g, replicated %.17g", c.f.Name(), cols, r, j, grad[r*cols+j], g)
					}
				}
				at += k
			}
		}
	}
}

func argmaxOf(y []float64) int {
	c := 0
	for j, v := range y {
		if v > y[c] {
			c = j
		}
	}
	return c
}

// TestWeightedConformance runs the shared suite: finite-difference
// gradients, buffers, allocations, float32 against float64.
func TestWeightedConformance(t *testing.T) {
	type tc struct {
		f64        loss.Func[float64]
		f32        loss.Func[float32]
		rows, cols int
		target     func(int) []float64
	}
	bin := []float64{0.25, 3}
	multi := func(cols int) []float64 {
		w := make([]float64, cols)
		for j := range w {
			w[j] = 0.5 + float64(j)
		}
		return w
	}
	var cases []tc
	for _, rows := range []int{1, 9} {
		cases = append(cases,
			tc{loss.Weighted[float64]{Inner: loss.Square[float64]{}, Weights: bin}, loss.Weighted[float32]{Inner: loss.Square[float32]{}, Weights: bin}, rows, 1, pm1},
			tc{loss.Weighted[float64]{Inner: loss.Logistic[float64]{}, Weights: bin}, loss.Weighted[float32]{Inner: loss.Logistic[float32]{}, Weights: bin}, rows, 1, pm1},
			tc{loss.Weighted[float64]{Inner: loss.Exponential[float64]{}, Weights: bin}, loss.Weighted[float32]{Inner: loss.Exponential[float32]{}, Weights: bin}, rows, 1, pm1},
		)
	}
	for _, s := range []struct{ rows, cols int }{{1, 2}, {7, 3}, {5, 10}} {
		w := multi(s.cols)
		cases = append(cases,
			tc{loss.Weighted[float64]{Inner: loss.Square[float64]{}, Weights: w}, loss.Weighted[float32]{Inner: loss.Square[float32]{}, Weights: w}, s.rows, s.cols, oneHot(s.cols)},
			tc{loss.Weighted[float64]{Inner: loss.Rescaled[float64]{K: 2, M: 3}, Weights: w}, loss.Weighted[float32]{Inner: loss.Rescaled[float32]{K: 2, M: 3}, Weights: w}, s.rows, s.cols, oneHot(s.cols)},
			tc{loss.Weighted[float64]{Inner: loss.CrossEntropy[float64]{}, Weights: w}, loss.Weighted[float32]{Inner: loss.CrossEntropy[float32]{}, Weights: w}, s.rows, s.cols, oneHot(s.cols)},
		)
	}
	for _, c := range cases {
		t.Run(fmt.Sprintf("%s/rows=%d/cols=%d", c.f64.Name(), c.rows, c.cols), func(t *testing.T) {
			conform.Loss(t, c.f64, c.f32, c.rows, c.cols, c.target)
		})
	}
}

func TestWeightedMisuse(t *testing.T) {
	out, y := []float64{0, 0, 0, 0, 0, 0}, []float64{1, 0, 0, 0, 0, 1}
	for what, f := range map[string]func(){
		"nil Inner": func() { loss.Weighted[float64]{Weights: []float64{1}}.Eval(out, y, 2, 3, nil) },
		"class past weights": func() {
			loss.Weighted[float64]{Inner: loss.Square[float64]{}, Weights: []float64{1, 1}}.Eval(out, y, 2, 3, nil)
		},
		"short target": func() {
			loss.Weighted[float64]{Inner: loss.Square[float64]{}, Weights: []float64{1, 1, 1}}.Eval(out, y[:5], 2, 3, nil)
		},
	} {
		func() {
			defer func() {
				if recover() == nil {
					t.Errorf("%s: no panic", what)
				}
			}()
			f()
		}()
	}
}

// Balanced class weights for a two-class problem with three times as many
// rows of class 0 as of class 1: w_c = N/(C·n_c) = 4/(2·3) and 4/(2·1).
// Every row is off by the same amount, yet the one row of class 1 now
// counts three times as much as each row of class 0.
func ExampleWeighted() {
	w := loss.Weighted[float64]{Inner: loss.Square[float64]{}, Weights: []float64{4.0 / 6, 2}}
	out := []float64{-0.5, -0.5, -0.5, 0.5}
	target := []float64{-1, -1, -1, 1}
	grad := make([]float64, 4)
	fmt.Println(w.Name())
	fmt.Printf("loss %.4f\n", w.Eval(out, target, 4, 1, grad))
	fmt.Printf("grad %.4f\n", grad)
	// Output:
	// weighted-square
	// loss 0.2500
	// grad [0.1667 0.1667 0.1667 -0.5000]
}
