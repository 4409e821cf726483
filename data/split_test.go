package data_test

import (
	"math"
	"math/rand/v2"
	"slices"
	"testing"

	"github.com/rhomb/rhomb/data"
	"github.com/rhomb/rhomb/internal/opendata"
)

// invented labels for properties that hold for any data: n rows over
// classes of very different sizes (class c about twice as common as c+1),
// drawn from a fixed seed.
func skewedLabels(n int) []int {
	rng := rand.New(rand.NewPCG(7, 7))
	l := make([]int, n)
	for i := range l {
		c := 0
		for c < 4 && rng.IntN(2) == 0 {
			c++
		}
		l[i] = c
	}
	return l
}

// checkPartition fails unless sets are disjoint and together hold 0 … n−1.
func checkPartition(t *testing.T, what string, n int, sets ...[]int) {
	t.Helper()
	seen := make([]int, n)
	for _, s := range sets {
		for _, r := range s {
			if r < 0 || r >= n {
				t.Fatalf("%s: row %d out of range [0, %d)", what, r, n)
			}
			seen[r]++
		}
	}
	for r, k := range seen {
		if k != 1 {
			t.Fatalf("%s: row %d is in %d sets, want exactly 1", what, r, k)
		}
	}
}

func classCounts(labels, rows []int) map[int]int {
	m := map[int]int{}
	for _, r := range rows {
		m[labels[r]]++
	}
	return m
}

func TestStratifiedBounds(t *testing.T) {
	for _, n := range []int{50, 100, 1001} {
		labels := skewedLabels(n)
		all := map[int]int{}
		for r := range labels {
			all[labels[r]]++
		}
		for _, fr := range [][]float64{{0.8, 0.2}, {0.7, 0.15, 0.15}, {0.5, 0.5}, {0.25, 0.25, 0.25, 0.25}} {
			sets, err := data.Stratified(labels, fr, 1)
			if err != nil {
				t.Fatalf("n=%d %v: %v", n, fr, err)
			}
			checkPartition(t, "Stratified", n, sets...)
			// Largest-remainder rounding: each class count within one
			// row of n_c·f_i (the documented bound; strict, since the
			// remainders are < 1).
			for i, s := range sets {
				got := classCounts(labels, s)
				for c, nc := range all {
					if d := math.Abs(float64(got[c]) - float64(nc)*fr[i]); !(d < 1) {
						t.Errorf("n=%d %v set %d class %d: %d rows, want within one of %v", n, fr, i, c, got[c], float64(nc)*fr[i])
					}
				}
			}
		}
	}
}

// TestStratifiedByHand checks counts worked out by hand.
func TestStratifiedByHand(t *testing.T) {
	// 10 rows of class 0 and 5 of class 1, split 0.8/0.2: 8 + 2 and 4 + 1.
	labels := []int{0, 1, 0, 0, 1, 0, 0, 1, 0, 0, 1, 0, 0, 1, 0}
	sets, err := data.Stratified(labels, []float64{0.8, 0.2}, 3)
	if err != nil {
		t.Fatal(err)
	}
	if a, b := classCounts(labels, sets[0]), classCounts(labels, sets[1]); a[0] != 8 || a[1] != 4 || b[0] != 2 || b[1] != 1 {
		t.Errorf("class counts %v and %v, want 8/4 and 2/1", a, b)
	}
	// 7 rows of one class over 0.5/0.3/0.2: quotas 3.5, 2.1, 1.4, floors
	// 3, 2, 1, and the one row left goes to the largest remainder (0.5):
	// 4, 2, 1.
	sets, err = data.Stratified([]int{0, 0, 0, 0, 0, 0, 0}, []float64{0.5, 0.3, 0.2}, 3)
	if err != nil {
		t.Fatal(err)
	}
	if len(sets[0]) != 4 || len(sets[1]) != 2 || len(sets[2]) != 1 {
		t.Errorf("set sizes %d %d %d, want 4 2 1", len(sets[0]), len(sets[1]), len(sets[2]))
	}
	// Equal remainders: three classes of 3 rows split in half, quotas 1.5
	// each. Ties rotate by class, so set sizes are 5 and 4 (never 6 and 3,
	// which always favouring set 0 would give).
	labels = []int{0, 0, 0, 1, 1, 1, 2, 2, 2}
	sets, err = data.Stratified(labels, []float64{0.5, 0.5}, 3)
	if err != nil {
		t.Fatal(err)
	}
	if d := len(sets[0]) - len(sets[1]); d != 1 && d != -1 {
		t.Errorf("set sizes %d and %d, want 5 and 4 in some order", len(sets[0]), len(sets[1]))
	}
}

func TestStratifiedSeed(t *testing.T) {
	labels := skewedLabels(200)
	a, _ := data.Stratified(labels, []float64{0.8, 0.2}, 11)
	b, _ := data.Stratified(labels, []float64{0.8, 0.2}, 11)
	c, _ := data.Stratified(labels, []float64{0.8, 0.2}, 12)
	if !slices.Equal(a[0], b[0]) || !slices.Equal(a[1], b[1]) {
		t.Error("same seed, different split")
	}
	// Two seeds giving the same 40-row test set, in the same order, by chance
	// is far less likely than 1e-40: this fails only if the seed is ignored.
	if slices.Equal(a[1], c[1]) {
		t.Error("seeds 11 and 12 give the same split")
	}
	// The sets are shuffled, not in row order (again a chance below 1e-40).
	if slices.IsSorted(a[1]) {
		t.Error("test set in row order: not shuffled")
	}
}

func TestStratifiedErrors(t *testing.T) {
	for what, c := range map[string]struct {
		labels []int
		fr     []float64
	}{
		"no rows":         {nil, []float64{1}},
		"no fractions":    {[]int{0, 1}, nil},
		"zero fraction":   {[]int{0, 1}, []float64{1, 0}},
		"NaN fraction":    {[]int{0, 1}, []float64{math.NaN(), 1}},
		"sum below 1":     {[]int{0, 1}, []float64{0.5, 0.4}},
		"sum above 1":     {[]int{0, 1}, []float64{0.7, 0.4}},
		"negative label":  {[]int{0, -1}, []float64{1}},
		"empty set":       {[]int{0, 0, 0}, []float64{0.9, 0.1}},
		"too many splits": {[]int{0, 1}, []float64{0.25, 0.25, 0.5}},
	} {
		if _, err := data.Stratified(c.labels, c.fr, 1); err == nil {
			t.Errorf("%s: no error", what)
		}
	}
}

// TestKFoldIris: Iris has 50 rows of each of its 3 species (UCI
// description; REFERENCES.md), so 5 stratified folds hold exactly 10 of
// each species in every test set.
func TestKFoldIris(t *testing.T) {
	_, species, err := opendata.Iris()
	if err != nil {
		t.Fatal(err)
	}
	folds, err := data.Folds(species, 5, 1)
	if err != nil {
		t.Fatal(err)
	}
	var tests [][]int
	for i, f := range folds {
		checkPartition(t, "fold train+test", len(species), f.Train, f.Test)
		if got := classCounts(species, f.Test); got[0] != 10 || got[1] != 10 || got[2] != 10 {
			t.Errorf("fold %d: test species counts %v, want 10 each", i, got)
		}
		tests = append(tests, f.Test)
	}
	checkPartition(t, "test folds", len(species), tests...)
}

func TestKFoldProperties(t *testing.T) {
	labels := skewedLabels(103)
	all := map[int]int{}
	for _, l := range labels {
		all[l]++
	}
	for _, k := range []int{2, 3, 10, 103} {
		folds, err := data.Folds(labels, k, 5)
		if err != nil {
			t.Fatal(err)
		}
		var tests [][]int
		lo, hi := len(labels), 0
		for _, f := range folds {
			checkPartition(t, "fold train+test", len(labels), f.Train, f.Test)
			tests = append(tests, f.Test)
			lo, hi = min(lo, len(f.Test)), max(hi, len(f.Test))
			got := classCounts(labels, f.Test)
			for c, nc := range all {
				if got[c] < nc/k || got[c] > (nc+k-1)/k {
					t.Errorf("k=%d: class %d has %d test rows, want ⌊%d/%d⌋ or ⌈%d/%d⌉", k, c, got[c], nc, k, nc, k)
				}
			}
		}
		checkPartition(t, "test folds", len(labels), tests...)
		if hi-lo > 1 {
			t.Errorf("k=%d: test fold sizes from %d to %d, want within one row", k, lo, hi)
		}
	}

	a, _ := data.Folds(labels, 4, 9)
	b, _ := data.Folds(labels, 4, 9)
	c, _ := data.Folds(labels, 4, 10)
	for i := range a {
		if !slices.Equal(a[i].Test, b[i].Test) || !slices.Equal(a[i].Train, b[i].Train) {
			t.Errorf("fold %d: same seed, different folds", i)
		}
	}
	// Equal 25-row test folds from two seeds by chance: far below 1e-20.
	if slices.Equal(a[0].Test, c[0].Test) {
		t.Error("seeds 9 and 10 give the same folds")
	}

	for what, f := range map[string]func() error{
		"k = 1":          func() error { _, err := data.Folds(labels, 1, 1); return err },
		"k > rows":       func() error { _, err := data.Folds([]int{0, 1}, 3, 1); return err },
		"negative label": func() error { _, err := data.Folds([]int{0, -2, 1}, 2, 1); return err },
	} {
		if f() == nil {
			t.Errorf("%s: no error", what)
		}
	}
}
