package optim_test

import (
	"math"
	"math/rand/v2"
	"testing"

	"github.com/rhomb/rhomb/data"
	"github.com/rhomb/rhomb/internal/opendata"
	"github.com/rhomb/rhomb/net"
)

// irisBinary returns Iris as setosa (+1) against the rest (−1), each
// measurement standardized. Setosa is linearly separable from the other two
// species (UCI dataset description; REFERENCES.md).
func irisBinary(t testing.TB) *data.Set[float64] {
	x, s, err := opendata.Iris()
	if err != nil {
		t.Fatal(err)
	}
	set := &data.Set[float64]{Rows: len(x), Features: 4, Outputs: 1, Classes: []string{"other", "setosa"}}
	var mean, sd [4]float64
	for _, r := range x {
		for j := range 4 {
			mean[j] += r[j] / float64(len(x))
		}
	}
	for _, r := range x {
		for j := range 4 {
			sd[j] += (r[j] - mean[j]) * (r[j] - mean[j]) / float64(len(x)-1)
		}
	}
	for i, r := range x {
		for j := range 4 {
			set.X = append(set.X, (r[j]-mean[j])/math.Sqrt(sd[j]))
		}
		y := -1.0
		if s[i] == 0 {
			y = 1
		}
		set.Y = append(set.Y, y)
	}
	return set
}

// randomSet is random data for properties that hold for any data
// (determinism, allocation, bookkeeping): no fact about the data is checked.
func randomSet(seed uint64, rows, features, classes int) *data.Set[float64] {
	rng := rand.New(rand.NewPCG(seed, seed))
	s := &data.Set[float64]{Rows: rows, Features: features, Outputs: classes, X: make([]float64, rows*features), Y: make([]float64, rows*classes)}
	for i := range s.X {
		s.X[i] = rng.NormFloat64()
	}
	for r := range rows {
		s.Y[r*classes+rng.IntN(classes)] = 1
	}
	return s
}

func mlp(t testing.TB, widths []int, seed uint64, rho0 float64) *net.Network[float64] {
	b := net.NewBuilder[float64](widths[0]).ConstantFeature("one")
	for i, w := range widths[1 : len(widths)-1] {
		id := string(rune('1' + i))
		b.Dense("h"+id, w).ReLU("r" + id)
	}
	n, err := b.Readout("out", widths[len(widths)-1]).Build()
	if err != nil {
		t.Fatal(err)
	}
	if err := n.Init(net.InitSettings{Seed: seed, Rho0: rho0}); err != nil {
		t.Fatal(err)
	}
	return n
}

func weights(ps []*net.Param[float64]) [][]float64 {
	var out [][]float64
	for _, p := range ps {
		out = append(out, append([]float64(nil), p.Value...))
	}
	return out
}

func sameBits(a, b [][]float64) bool {
	for i := range a {
		for j := range a[i] {
			if math.Float64bits(a[i][j]) != math.Float64bits(b[i][j]) {
				return false
			}
		}
	}
	return true
}
