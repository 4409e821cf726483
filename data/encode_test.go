package data_test

import (
	"errors"
	"fmt"
	"math"
	"slices"
	"strings"
	"testing"

	"github.com/rhomb/rhomb/data"
	"github.com/rhomb/rhomb/data/prep"
	"github.com/rhomb/rhomb/internal/opendata"
)

func TestClassIndex(t *testing.T) {
	got, err := data.ClassIndex([]string{"b", "a", "c", "a"}, []string{"a", "b", "c"})
	if err != nil || !slices.Equal(got, []int{1, 0, 2, 0}) {
		t.Errorf("ClassIndex = %v, %v; want [1 0 2 0]", got, err)
	}
	_, err = data.ClassIndex([]string{"a", "b", "d"}, []string{"a", "b", "c"})
	if !errors.Is(err, data.ErrUnknownCategory) || !strings.Contains(err.Error(), `"d"`) || !strings.Contains(err.Error(), "row 2") {
		t.Errorf("unknown label: %v; want ErrUnknownCategory naming \"d\" and row 2", err)
	}
	if _, err := data.ClassIndex([]string{"a"}, []string{"a", "a"}); err == nil {
		t.Error("duplicate class accepted")
	}
	if _, err := data.ClassIndex([]string{"a"}, nil); err == nil {
		t.Error("no classes accepted")
	}
}

// handTable is a table small enough to encode by hand (invented values).
func handTable() *data.Table {
	return &data.Table{
		Source: "pumps.csv",
		Columns: []data.Column{
			{Name: "temp", Kind: data.Numeric, Num: []float64{1, 3, 5, 100}, Missing: make([]bool, 4)},
			{Name: "site", Kind: data.Categorical, Cat: []string{"east", "north-yard", "east", "west"}, Missing: make([]bool, 4)},
		},
		Label:  "state",
		Labels: []string{"ok", "fault", "ok", "ok"},
		Lines:  []int{2, 3, 4, 5},
		Rows:   4,
	}
}

func TestEncodeByHand(t *testing.T) {
	tab := handTable()
	train := []int{0, 1, 2}
	p, err := prep.Fit(tab.Columns, train, prep.Options{})
	if err != nil {
		t.Fatal(err)
	}
	// temp over rows 0–2: mean 3, sample sd √((4 + 0 + 4)/2) = 2; site:
	// east, north-yard. Features ((temp − 3)/2, site=east, site=north-yard).
	wantX := []float64{-1, 1, 0, 0, 0, 1, 1, 1, 0}

	// Two classes: one column, classes[0] = "fault" → −1, "ok" → +1.
	s, err := data.Encode[float64](tab, train, p, []string{"fault", "ok"})
	if err != nil {
		t.Fatal(err)
	}
	if s.Rows != 3 || s.Features != 3 || s.Outputs != 1 || !slices.Equal(s.X, wantX) || !slices.Equal(s.Y, []float64{1, -1, 1}) {
		t.Errorf("binary set %+v\nwant X %v, Y [1 -1 1]", s, wantX)
	}
	if !slices.Equal(s.Classes, []string{"fault", "ok"}) || s.Validate() != nil {
		t.Errorf("classes %q, Validate %v", s.Classes, s.Validate())
	}

	// Three classes: one-hot rows in the order given, here ok first.
	s3, err := data.Encode[float32](tab, train, p, []string{"ok", "fault", "spare"})
	if err != nil {
		t.Fatal(err)
	}
	want32 := make([]float32, len(wantX))
	for i, v := range wantX {
		want32[i] = float32(v)
	}
	if s3.Outputs != 3 || !slices.Equal(s3.X, want32) || !slices.Equal(s3.Y, []float32{1, 0, 0, 0, 1, 0, 1, 0, 0}) {
		t.Errorf("one-hot set %+v", s3)
	}

	// Rows in the order asked for.
	s, err = data.Encode[float64](tab, []int{2, 0}, p, []string{"fault", "ok"})
	if err != nil || !slices.Equal(s.X, []float64{1, 1, 0, -1, 1, 0}) {
		t.Errorf("rows 2, 0: %v, %v", s, err)
	}
}

func TestEncodeErrors(t *testing.T) {
	tab := handTable()
	p, err := prep.Fit(tab.Columns, []int{0, 1, 2}, prep.Options{})
	if err != nil {
		t.Fatal(err)
	}
	// Row 3 (line 5) holds "west", which the training rows never did.
	_, err = data.Encode[float64](tab, nil, p, []string{"fault", "ok"})
	var fe *prep.FieldError
	if !errors.Is(err, data.ErrUnknownCategory) || !errors.As(err, &fe) || fe.Row != 3 || !strings.Contains(err.Error(), "pumps.csv:5") {
		t.Errorf("unseen category: %v; want a FieldError for row 3 naming pumps.csv:5", err)
	}
	_, err = data.Encode[float64](tab, []int{0, 1}, p, []string{"fault", "good"})
	if !errors.Is(err, data.ErrUnknownCategory) || !strings.Contains(err.Error(), `"ok"`) || !strings.Contains(err.Error(), "pumps.csv:2") {
		t.Errorf("unknown label: %v", err)
	}
	if _, err = data.Encode[float64](tab, nil, p, []string{"ok"}); !errors.Is(err, data.ErrOneClass) {
		t.Errorf("one class: %v", err)
	}
	if _, err = data.Encode[float64](tab, []int{}, p, []string{"fault", "ok"}); err == nil {
		t.Error("no rows accepted")
	}
	if _, err = data.Encode[float64](tab, []int{4}, p, []string{"fault", "ok"}); err == nil {
		t.Error("row out of range accepted")
	}
	// 1e39 is finite in float64 but beyond float32's largest value,
	// 3.4028235e38 (IEEE 754 binary32).
	big := &data.Table{
		Columns: []data.Column{{Name: "x", Kind: data.Numeric, Num: []float64{1, 1e39}, Missing: make([]bool, 2)}},
		Labels:  []string{"a", "b"}, Lines: []int{2, 3}, Rows: 2,
	}
	pb, err := prep.Fit(big.Columns, nil, prep.Options{NoStandardize: true})
	if err != nil {
		t.Fatal(err)
	}
	if _, err := data.Encode[float32](big, nil, pb, []string{"a", "b"}); !errors.Is(err, data.ErrInfinite) {
		t.Errorf("float32 overflow: %v", err)
	}
	if _, err := data.Encode[float64](big, nil, pb, []string{"a", "b"}); err != nil {
		t.Errorf("float64 holds 1e39: %v", err)
	}
}

// TestEncodeIris: standardized over all rows, each feature column of the
// encoded set has mean 0 and sample standard deviation 1 (the definition of
// standardizing; the mean is over the very rows the statistics were fitted
// on); and the targets hold 50 one-hot rows per species (UCI description;
// REFERENCES.md).
func TestEncodeIris(t *testing.T) {
	x, species, err := opendata.Iris()
	if err != nil {
		t.Fatal(err)
	}
	tab := &data.Table{Source: "iris.json", Rows: len(x)}
	for j, name := range []string{"sepal_length", "sepal_width", "petal_length", "petal_width"} {
		c := data.Column{Name: name, Kind: data.Numeric, Missing: make([]bool, len(x))}
		for _, row := range x {
			c.Num = append(c.Num, row[j])
		}
		tab.Columns = append(tab.Columns, c)
	}
	for r, s := range species {
		tab.Labels = append(tab.Labels, opendata.IrisSpecies[s])
		tab.Lines = append(tab.Lines, r+1)
	}
	p, err := prep.Fit(tab.Columns, nil, prep.Options{})
	if err != nil {
		t.Fatal(err)
	}
	s, err := data.Encode[float64](tab, nil, p, opendata.IrisSpecies)
	if err != nil {
		t.Fatal(err)
	}
	if err := s.Validate(); err != nil {
		t.Fatal(err)
	}
	// Each standardized value is off by a few roundings of 2⁻⁵³ relative
	// and is below 4 in size; summing 150 of them adds at most 150 more
	// roundings of partial sums below 150·4. The mean is then within
	// about 150·4·2⁻⁵²/150 ≈ 1e-15 of 0 and the variance of 1 to a like
	// degree: 1e-12 leaves a wide margin, while a wrong divisor (n for
	// n − 1) moves the variance by 1/149 ≈ 7e-3.
	const tol = 1e-12
	for j := range s.Features {
		var sum, ss float64
		for r := range s.Rows {
			sum += s.X[r*s.Features+j]
		}
		mean := sum / float64(s.Rows)
		for r := range s.Rows {
			d := s.X[r*s.Features+j] - mean
			ss += d * d
		}
		if v := ss / float64(s.Rows-1); math.Abs(mean) > tol || math.Abs(v-1) > tol {
			t.Errorf("feature %d: mean %g, variance %.15g; want 0 and 1", j, mean, v)
		}
	}
	var count [3]int
	for r := range s.Rows {
		c := s.Class(r)
		if c != species[r] {
			t.Fatalf("row %d: class %d, want %d", r, c, species[r])
		}
		count[c]++
	}
	if s.Outputs != 3 || count != [3]int{50, 50, 50} {
		t.Errorf("outputs %d, rows per class %v; want 3 and 50 each", s.Outputs, count)
	}
}

func TestClassWeights(t *testing.T) {
	// By hand: N = 4, C = 2, n = (3, 1): w = 4/(2·3) = 2/3 and 4/(2·1) = 2.
	w := data.ClassWeights([]int{0, 1, 0, 0}, 2)
	if len(w) != 2 || math.Abs(w[0]-2.0/3) > 1e-16 || w[1] != 2 {
		t.Errorf("weights %v, want [2/3 2]", w)
	}
	// Each class carries N/C = 2, and the weights average 1 over the rows.
	if tot := 3*w[0] + w[1]; math.Abs(tot-4) > 1e-15 {
		t.Errorf("total weight %v, want 4", tot)
	}
	// Class 2 absent: weight 0 (documented); the others 4/(3·2) = 2/3.
	w = data.ClassWeights([]int{0, 1, 0, 1}, 3)
	if w[2] != 0 || math.Abs(w[0]-2.0/3) > 1e-16 || w[0] != w[1] {
		t.Errorf("weights %v, want [2/3 2/3 0]", w)
	}
	// Balanced data: every weight 1.
	if w := data.ClassWeights([]int{2, 0, 1, 1, 0, 2}, 3); !slices.Equal(w, []float64{1, 1, 1}) {
		t.Errorf("balanced weights %v, want all 1", w)
	}
	for what, f := range map[string]func(){
		"label out of range": func() { data.ClassWeights([]int{0, 2}, 2) },
		"negative label":     func() { data.ClassWeights([]int{-1}, 2) },
		"no classes":         func() { data.ClassWeights(nil, 0) },
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

// Split a table's rows, fit the preprocessing on the training rows only, and
// encode both sets with it. The table is invented.
func ExampleEncode() {
	tab := &data.Table{
		Source: "pumps.csv",
		Columns: []data.Column{
			{Name: "temp_rise", Kind: data.Numeric, Num: []float64{2, 4, 6, 3, 9, 8, 1, 7}, Missing: make([]bool, 8)},
			{Name: "site", Kind: data.Categorical, Cat: []string{"east", "east", "west", "west", "east", "west", "east", "west"}, Missing: make([]bool, 8)},
		},
		Labels: []string{"ok", "ok", "hot", "ok", "hot", "hot", "ok", "hot"},
		Lines:  []int{2, 3, 4, 5, 6, 7, 8, 9},
		Rows:   8,
	}
	classes := tab.Classes() // sorted: hot, ok
	labels, _ := data.ClassIndex(tab.Labels, classes)
	sets, _ := data.Stratified(labels, []float64{0.75, 0.25}, 1)
	p, _ := prep.Fit(tab.Columns, sets[0], prep.Options{})
	train, _ := data.Encode[float32](tab, sets[0], p, classes)
	test, _ := data.Encode[float32](tab, sets[1], p, classes)
	fmt.Println(p.FeatureNames())
	fmt.Println(train.Rows, "training rows,", test.Rows, "test rows,", train.Outputs, "output")
	fmt.Println("class weights", data.ClassWeights(labels, len(classes)))
	// Output:
	// [temp_rise site=east site=west]
	// 6 training rows, 2 test rows, 1 output
	// class weights [1 1]
}
