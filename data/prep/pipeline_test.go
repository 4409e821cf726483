package prep_test

import (
	"encoding/csv"
	"encoding/json"
	"errors"
	"math"
	"os"
	"reflect"
	"slices"
	"strconv"
	"strings"
	"testing"

	"github.com/rhomb/rhomb/data/prep"
	"github.com/rhomb/rhomb/internal/opendata"
)

// ulpTol is for results a handful of float64 operations (a subtraction, a
// square root, a division; fewer than ten) away from a value worked out by
// hand to 20 digits with bc: each rounds by at most 2⁻⁵³ ≈ 1.1e-16 relative,
// so 1e-15 relative leaves a margin while any wrong term (n for n − 1, a
// missing centring) is off by far more.
const ulpTol = 1e-15

func near(got, want, tol float64) bool {
	return math.Abs(got-want) <= tol*max(1, math.Abs(want))
}

func num(name string, v ...float64) prep.Column {
	c := prep.Column{Name: name, Kind: prep.Numeric, Num: v, Missing: make([]bool, len(v))}
	for i, x := range v {
		c.Missing[i] = math.IsNaN(x)
	}
	return c
}

func cat(name string, v ...string) prep.Column {
	c := prep.Column{Name: name, Kind: prep.Categorical, Cat: v, Missing: make([]bool, len(v))}
	for i, s := range v {
		c.Missing[i] = s == ""
	}
	return c
}

func mustFit(t *testing.T, cols []prep.Column, rows []int, o prep.Options) *prep.Pipeline {
	t.Helper()
	p, err := prep.Fit(cols, rows, o)
	if err != nil {
		t.Fatal(err)
	}
	return p
}

func apply(t *testing.T, p *prep.Pipeline, cols []prep.Column, row int) []float64 {
	t.Helper()
	dst := make([]float64, p.Width())
	if err := p.ApplyColumns(cols, row, dst); err != nil {
		t.Fatal(err)
	}
	return dst
}

// TestFitByHand checks the fitted statistics and the feature layout on a
// table small enough to work by hand.
func TestFitByHand(t *testing.T) {
	cols := []prep.Column{
		num("x", 1, 3, 5),
		num("k", 10, 10, 10),
		cat("site", "north-yard", "east", "north-yard"),
	}
	p := mustFit(t, cols, nil, prep.Options{})
	// x: mean 3, Σ(x − 3)² = 4 + 0 + 4 = 8, sample variance 8/2 = 4, sd 2:
	// every number here is exact in float64, so the comparisons are exact.
	// k is constant: mean 10, and no spread, so scale 1 (documented).
	// site: categories in sorted order, east before north-yard.
	want := []prep.Encoding{
		{Name: "x", Kind: prep.Numeric, Mean: 3, Scale: 2},
		{Name: "k", Kind: prep.Numeric, Mean: 10, Scale: 1},
		{Name: "site", Kind: prep.Categorical, Scale: 1, Categories: []string{"east", "north-yard"}},
	}
	if !reflect.DeepEqual(p.Encodings, want) {
		t.Errorf("steps\n%+v\nwant\n%+v", p.Encodings, want)
	}
	if p.Width() != 4 {
		t.Errorf("Width %d, want 1 + 1 + 2", p.Width())
	}
	if got, w := p.FeatureNames(), []string{"x", "k", "site=east", "site=north-yard"}; !slices.Equal(got, w) {
		t.Errorf("FeatureNames %q, want %q", got, w)
	}
	if got, w := p.Inputs(), []string{"x", "k", "site"}; !slices.Equal(got, w) {
		t.Errorf("Inputs %q, want %q", got, w)
	}
	// Rows by hand: ((x − 3)/2, (10 − 10)/1, one-hot of site).
	for r, w := range [][]float64{{-1, 0, 0, 1}, {0, 0, 1, 0}, {1, 0, 0, 1}} {
		if got := apply(t, p, cols, r); !slices.Equal(got, w) {
			t.Errorf("row %d: %v, want %v", r, got, w)
		}
	}

	// A spread that is not exact: 1, 2, 3, 6 has mean 3, Σ(x − 3)² = 14,
	// sd = √(14/3) = 2.16024689946928674365 (bc, 20 digits), and row 3
	// encodes to 3/√(14/3) = 1.38873014965882719235.
	cols = []prep.Column{num("y", 1, 2, 3, 6)}
	p = mustFit(t, cols, nil, prep.Options{})
	if s := p.Encodings[0]; s.Mean != 3 || !near(s.Scale, 2.16024689946928674365, ulpTol) {
		t.Errorf("mean %v, scale %.17g; want 3 and 2.160246899469286744", s.Mean, s.Scale)
	}
	if got := apply(t, p, cols, 3)[0]; !near(got, 1.38873014965882719235, ulpTol) {
		t.Errorf("row 3: %.17g, want 1.388730149658827192", got)
	}

	// NoStandardize: values pass through, mean 0 and scale 1.
	p = mustFit(t, cols, nil, prep.Options{NoStandardize: true})
	if s := p.Encodings[0]; s.Mean != 0 || s.Scale != 1 || apply(t, p, cols, 3)[0] != 6 {
		t.Errorf("NoStandardize: step %+v, row 3 %v; want mean 0, scale 1, value 6", s, apply(t, p, cols, 3))
	}

	// One training row: no spread, scale 1 (documented), feature 0 on it.
	p = mustFit(t, cols, []int{2}, prep.Options{})
	if s := p.Encodings[0]; s.Mean != 3 || s.Scale != 1 {
		t.Errorf("one training row: step %+v, want mean 3 scale 1", s)
	}
}

// A constant column whose mean does not come out exact by summing: 0.1
// three times sums to 0.30000000000000004, and a naive mean of it is not
// 0.1. The column must still get scale 1 and features exactly 0, not
// rounding noise blown up by a tiny standard deviation.
func TestConstantColumn(t *testing.T) {
	cols := []prep.Column{num("c", 0.1, 0.1, 0.1)}
	if s := 0.1 + 0.1 + 0.1; s/3 == 0.1 {
		t.Fatal("test premise: the naive mean of three 0.1s should not be 0.1")
	}
	p := mustFit(t, cols, nil, prep.Options{})
	if s := p.Encodings[0]; s.Mean != 0.1 || s.Scale != 1 {
		t.Errorf("step %+v, want mean 0.1 exactly and scale 1", s)
	}
	for r := range 3 {
		if v := apply(t, p, cols, r)[0]; v != 0 {
			t.Errorf("row %d: %v, want 0", r, v)
		}
	}
}

// TestSpreadFloor: a column that is 0 in 999 training rows and 1 in one
// has sample standard deviation √(0.999·0.001·1000/999) = √(1/1000) ≈
// 0.0316 (closed form of a 0/1 column with one 1), so standardizing
// would put its rare value at (1 − 0.001)/0.0316 ≈ 31.6; the floor makes
// the scale a twentieth of the range, 0.05, and the feature (1 −
// 0.001)/0.05 = 19.98, within 20. The penguins' measurements
// (TestPenguinsStatistics) keep their published standard deviations: the
// floor leaves ordinary columns alone.
func TestSpreadFloor(t *testing.T) {
	v := make([]float64, 1000)
	v[0] = 1
	cols := []prep.Column{num("rare", v...)}
	p := mustFit(t, cols, nil, prep.Options{})
	if sd := math.Sqrt(1.0 / 1000); !(sd < prep.SpreadFloor) {
		t.Fatalf("test premise: sd %v should be below the floor %v", sd, prep.SpreadFloor)
	}
	// The mean is summed relative to the first value, 1: 1 + (−999/1000),
	// two roundings of at most 2⁻⁵³ each on values below 1, so within
	// 2.3e-16 of 0.001.
	if s := p.Encodings[0]; s.Scale != prep.SpreadFloor || math.Abs(s.Mean-0.001) > 2.3e-16 {
		t.Errorf("step %+v, want mean 0.001 and scale %v (the range 1 over 20)", s, prep.SpreadFloor)
	}
	// (1 − 0.001)/0.05 in float64: two roundings of relative size 2⁻⁵³.
	if f := apply(t, p, cols, 0)[0]; math.Abs(f-19.98) > 1e-13 {
		t.Errorf("the rare value's feature is %v, want 19.98", f)
	}
}

// TestPenguinsStatistics fits the numeric columns on the 342 penguins
// that have all four measurements and compares means and standard
// deviations with the figures in REFERENCES.md (Palmer penguins): means
// 43.92 / 17.15 / 200.9 / 4202, SDs 5.46 / 1.97 / 14.06 / 801.95. The
// figures are rounded, so the tolerance is half a unit of the last digit
// given. The SD of body mass tells the divisor apart: with n − 1 it is
// 801.95, with n it would be 801.95·√(341/342) ≈ 800.78.
func TestPenguinsStatistics(t *testing.T) {
	tab := readCSV(t, opendata.File(t, opendata.Penguins), "species")
	measures := []string{"bill_length_mm", "bill_depth_mm", "flipper_length_mm", "body_mass_g"}
	var rows []int
	for r := range tab.labels {
		ok := true
		for _, m := range measures {
			ok = ok && !tab.col(m).Missing[r]
		}
		if ok {
			rows = append(rows, r)
		}
	}
	if len(tab.labels) != 344 || len(rows) != 342 {
		t.Fatalf("%d rows, %d with all measurements; want 344 and 342 (REFERENCES.md)", len(tab.labels), len(rows))
	}
	var cols []prep.Column
	for _, m := range measures {
		cols = append(cols, *tab.col(m))
	}
	p := mustFit(t, cols, rows, prep.Options{})
	for i, w := range []struct{ mean, mtol, sd, stol float64 }{
		{43.92, 0.005, 5.46, 0.005},
		{17.15, 0.005, 1.97, 0.005},
		{200.9, 0.05, 14.06, 0.005},
		{4202, 0.5, 801.95, 0.005},
	} {
		s := p.Encodings[i]
		if math.Abs(s.Mean-w.mean) > w.mtol || math.Abs(s.Scale-w.sd) > w.stol {
			t.Errorf("%s: mean %.4f, sd %.4f; want %v ± %v and %v ± %v", s.Name, s.Mean, s.Scale, w.mean, w.mtol, w.sd, w.stol)
		}
	}
}

// TestImputeTrainingRowsOnly fits on rows 0–3 and checks that the
// held-out rows 4–6, with a very different mean and a different most
// frequent category, change nothing.
func TestImputeTrainingRowsOnly(t *testing.T) {
	nan := math.NaN()
	cols := []prep.Column{
		// Training 1, 2, 3, 6 (mean 3, sd √(14/3)); held out 1000, 2000, missing.
		num("x", 1, 2, 3, 6, 1000, 2000, nan),
		// Training b, a, b, a: a tie, broken by sorted order → "a". Held
		// out z, z, missing: "z" is most frequent overall but unseen in training.
		cat("c", "b", "a", "b", "a", "z", "z", ""),
	}
	train := []int{0, 1, 2, 3}
	p := mustFit(t, cols, train, prep.Options{Impute: true})
	x, c := p.Encodings[0], p.Encodings[1]
	if x.Mean != 3 || x.Fill != 3 || !near(x.Scale, 2.16024689946928674365, ulpTol) {
		t.Errorf("numeric step %+v: want mean and fill 3 from the training rows, scale √(14/3)", x)
	}
	if c.FillCategory != "a" || !slices.Equal(c.Categories, []string{"a", "b"}) {
		t.Errorf("categorical step %+v: want fill \"a\" (tie, sorted order) and categories [a b]", c)
	}
	// Row 6 is missing in both columns: imputed to the training mean,
	// which encodes to exactly 0, and to category "a".
	if got := apply(t, p, cols, 6); !slices.Equal(got, []float64{0, 1, 0}) {
		t.Errorf("imputed row: %v, want [0 1 0]", got)
	}
	// Row 4: "z" was never in a training row.
	err := p.ApplyColumns(cols, 4, make([]float64, 3))
	var fe *prep.FieldError
	if !errors.Is(err, prep.ErrUnknownCategory) || !errors.As(err, &fe) || fe.Row != 4 || fe.Field != "c" || fe.Value != "z" {
		t.Errorf("unseen category: %v", err)
	}
	if err != nil && !strings.Contains(err.Error(), "unseen categories encoded as zeros") {
		t.Errorf("message %q does not say what to do", err)
	}

	// Ties with three counts: c ×2, a ×2, b ×1 → "a".
	p = mustFit(t, []prep.Column{cat("c", "c", "a", "b", "c", "a", "")}, nil, prep.Options{Impute: true})
	if f := p.Encodings[0].FillCategory; f != "a" {
		t.Errorf("fill %q, want \"a\"", f)
	}
}

func TestUnitNorm(t *testing.T) {
	cols := []prep.Column{num("a", 3, 0, 1e200), num("b", 4, 0, 1e200), cat("s", "u", "u", "v")}
	p := mustFit(t, cols, nil, prep.Options{NoStandardize: true, UnitNorm: true})
	// Row 0 is (3, 4, 1, 0), norm √26: by bc, 3/√26 = 0.58834840541455209577,
	// 4/√26 = 0.78446454055273612769, 1/√26 = 0.19611613513818403192.
	got := apply(t, p, cols, 0)
	for i, w := range []float64{0.58834840541455209577, 0.78446454055273612769, 0.19611613513818403192, 0} {
		if !near(got[i], w, ulpTol) {
			t.Errorf("row 0 feature %d: %.17g, want %.17g", i, got[i], w)
		}
	}
	var ss float64
	for _, v := range got {
		ss += v * v
	}
	if !near(ss, 1, 4*ulpTol) { // four squares and sums of values < 1
		t.Errorf("row 0: squared norm %.17g, want 1", ss)
	}
	// Row 2 is (1e200, 1e200, 0, 1): squaring 1e200 overflows float64, so a
	// naive norm would give 0 features; the result is (1/√2, 1/√2, 0,
	// 1e-200/√2), the last within a few roundings (relative 1e-15, as ulpTol).
	got = apply(t, p, cols, 2)
	if w := 1e-200 / math.Sqrt2; !near(got[0], math.Sqrt2/2, ulpTol) || got[0] != got[1] || got[2] != 0 || !(math.Abs(got[3]-w) <= ulpTol*w) {
		t.Errorf("row 2: %v, want [1/√2 1/√2 0 1e-200/√2]", got)
	}

	// A row of zeros stays zero: a numeric column centred at its only value
	// and a category unseen in training, encoded as zeros.
	cols = []prep.Column{num("a", 5), cat("s", "u")}
	p = mustFit(t, cols, nil, prep.Options{UnitNorm: true, ZeroUnseen: true})
	dst := make([]float64, p.Width())
	if err := p.ApplyStrings([]string{"5", "w"}, dst); err != nil || dst[0] != 0 || dst[1] != 0 || math.Signbit(dst[0]) {
		t.Errorf("zero row: %v, %v; want [0 0]", dst, err)
	}
}

// rowCells formats row r of cols as the cells a serving request would
// carry: numbers with strconv 'g' −1 (the shortest text that parses back to
// the same bits), missing cells as "NA".
func rowCells(cols []prep.Column, r int) []string {
	cells := make([]string, len(cols))
	for i, c := range cols {
		switch {
		case c.Missing[r]:
			cells[i] = "NA"
		case c.Kind == prep.Numeric:
			cells[i] = strconv.FormatFloat(c.Num[r], 'g', -1, 64)
		default:
			cells[i] = c.Cat[r]
		}
	}
	return cells
}

// checkServeEqualsTrain encodes every row of cols through ApplyColumns,
// ApplyStrings and ApplyMap and fails unless all three give the same bits.
func checkServeEqualsTrain(t *testing.T, p *prep.Pipeline, cols []prep.Column) {
	t.Helper()
	n := len(cols[0].Missing)
	w := p.Width()
	a, b, c := make([]float64, w), make([]float64, w), make([]float64, w)
	m := map[string]string{}
	for r := range n {
		cells := rowCells(cols, r)
		errA := p.ApplyColumns(cols, r, a)
		errB := p.ApplyStrings(cells, b)
		clear(m)
		for i, name := range p.Inputs() {
			m[name] = cells[i]
		}
		errC := p.ApplyMap(m, c)
		if (errA == nil) != (errB == nil) || (errA == nil) != (errC == nil) {
			t.Fatalf("row %d: errors differ: columns %v, strings %v, map %v", r, errA, errB, errC)
		}
		if errA != nil {
			continue
		}
		for j := range a {
			if math.Float64bits(a[j]) != math.Float64bits(b[j]) || math.Float64bits(a[j]) != math.Float64bits(c[j]) {
				t.Fatalf("row %d feature %d: columns %v, strings %v, map %v", r, j, a[j], b[j], c[j])
			}
			if !finite(a[j]) {
				t.Fatalf("row %d feature %d: %v", r, j, a[j])
			}
		}
	}
}

func finite(x float64) bool { return !math.IsNaN(x) && !math.IsInf(x, 0) }

func irisColumns(t *testing.T) []prep.Column {
	x, _, err := opendata.Iris()
	if err != nil {
		t.Fatal(err)
	}
	names := []string{"sepal_length", "sepal_width", "petal_length", "petal_width"}
	cols := make([]prep.Column, 4)
	for j := range cols {
		cols[j] = prep.Column{Name: names[j], Kind: prep.Numeric, Missing: make([]bool, len(x))}
		for _, row := range x {
			cols[j].Num = append(cols[j].Num, row[j])
		}
	}
	return cols
}

// TestServeEqualsTrain: for every row, the training path and both serving
// paths give bit-identical features (the promise of the package doc).
func TestServeEqualsTrain(t *testing.T) {
	for _, o := range []prep.Options{{}, {UnitNorm: true}, {NoStandardize: true}} {
		checkServeEqualsTrain(t, mustFit(t, irisColumns(t), nil, o), irisColumns(t))
	}
	t.Run("penguins", func(t *testing.T) {
		tab := readCSV(t, opendata.File(t, opendata.Penguins), "species")
		// Every row, with missing measurements and sexes imputed; fitted
		// on the even rows only, so the odd ones are held out.
		var even []int
		for r := 0; r < len(tab.labels); r += 2 {
			even = append(even, r)
		}
		for _, o := range []prep.Options{{Impute: true}, {Impute: true, UnitNorm: true}, {Impute: true, ZeroUnseen: true}} {
			checkServeEqualsTrain(t, mustFit(t, tab.cols, even, o), tab.cols)
		}
	})
}

// TestJSONRoundTrip: a pipeline decoded from its JSON equals the original
// bit for bit, including float64 values whose shortest decimal text is
// long, subnormals and negative zero.
func TestJSONRoundTrip(t *testing.T) {
	p := mustFit(t, irisColumns(t), []int{0, 7, 51, 52, 100, 149}, prep.Options{Impute: true, UnitNorm: true})
	p.Encodings = append(p.Encodings,
		prep.Encoding{Name: "odd", Kind: prep.Numeric, Mean: 0.1 + 0.2, Scale: 1.0 / 3, Fill: 5e-324},
		prep.Encoding{Name: "negzero", Kind: prep.Numeric, Mean: math.Copysign(0, -1), Scale: math.Nextafter(1, 2), Fill: -math.MaxFloat64},
		prep.Encoding{Name: "site", Kind: prep.Categorical, Scale: 1, Categories: []string{"", "a=b", "ünï\"code\""}, FillCategory: "a=b"},
	)
	p.Missing = []string{"?", " - "}
	b, err := json.Marshal(p)
	if err != nil {
		t.Fatal(err)
	}
	var q prep.Pipeline
	if err := json.Unmarshal(b, &q); err != nil {
		t.Fatal(err)
	}
	if !reflect.DeepEqual(p, &q) {
		t.Fatalf("round trip differs:\n%+v\n%+v", p, &q)
	}
	for i := range p.Encodings {
		for _, f := range []struct{ a, b float64 }{{p.Encodings[i].Mean, q.Encodings[i].Mean}, {p.Encodings[i].Scale, q.Encodings[i].Scale}, {p.Encodings[i].Fill, q.Encodings[i].Fill}} {
			if math.Float64bits(f.a) != math.Float64bits(f.b) {
				t.Errorf("step %d: %v (%#x) decoded as %v (%#x)", i, f.a, math.Float64bits(f.a), f.b, math.Float64bits(f.b))
			}
		}
	}
	if err := q.Validate(); err != nil {
		t.Error(err)
	}
	// The kind is written by name, as model files expect.
	if !strings.Contains(string(b), `"kind":"numeric"`) || !strings.Contains(string(b), `"kind":"categorical"`) {
		t.Errorf("kinds not written by name: %s", b)
	}
}

func TestValidate(t *testing.T) {
	good := func() *prep.Pipeline {
		return mustFit(t, []prep.Column{num("x", 1, 2), cat("c", "a", "b")}, nil, prep.Options{})
	}
	if err := good().Validate(); err != nil {
		t.Fatal(err)
	}
	for what, damage := range map[string]func(p *prep.Pipeline){
		"zero scale":     func(p *prep.Pipeline) { p.Encodings[0].Scale = 0 },
		"NaN mean":       func(p *prep.Pipeline) { p.Encodings[0].Mean = math.NaN() },
		"unsorted":       func(p *prep.Pipeline) { p.Encodings[1].Categories = []string{"b", "a"} },
		"no categories":  func(p *prep.Pipeline) { p.Encodings[1].Categories = nil },
		"duplicate name": func(p *prep.Pipeline) { p.Encodings[1].Name = "x" },
		"auto kind":      func(p *prep.Pipeline) { p.Encodings[0].Kind = prep.Auto },
		"no steps":       func(p *prep.Pipeline) { p.Encodings = nil },
	} {
		p := good()
		damage(p)
		if p.Validate() == nil {
			t.Errorf("%s: Validate accepted it", what)
		}
	}
}

func TestFitErrors(t *testing.T) {
	nan := math.NaN()
	var fe *prep.FieldError
	_, err := prep.Fit([]prep.Column{num("x", 1, nan, 3)}, nil, prep.Options{})
	if !errors.Is(err, prep.ErrMissing) || !errors.As(err, &fe) || fe.Row != 1 || fe.Field != "x" || !strings.Contains(err.Error(), "fill in missing values") {
		t.Errorf("missing training value without imputation: %v", err)
	}
	// The missing row is not a training row: fine.
	if _, err := prep.Fit([]prep.Column{num("x", 1, nan, 3)}, []int{0, 2}, prep.Options{}); err != nil {
		t.Errorf("missing value outside the training rows: %v", err)
	}
	_, err = prep.Fit([]prep.Column{cat("c", "a", "", "b")}, nil, prep.Options{})
	if !errors.Is(err, prep.ErrMissing) || !errors.As(err, &fe) || fe.Row != 1 {
		t.Errorf("missing category without imputation: %v", err)
	}
	// A cell that is a missing marker counts as missing even when the
	// reader did not flag it, as it would when served.
	_, err = prep.Fit([]prep.Column{{Name: "c", Kind: prep.Categorical, Cat: []string{"a", "NA"}}}, nil, prep.Options{})
	if !errors.Is(err, prep.ErrMissing) {
		t.Errorf("unflagged marker: %v", err)
	}
	if _, err = prep.Fit([]prep.Column{num("x", nan, nan)}, nil, prep.Options{Impute: true}); !errors.Is(err, prep.ErrMissing) {
		t.Errorf("all missing: %v", err)
	}
	if _, err = prep.Fit([]prep.Column{num("x", 1, math.Inf(1))}, nil, prep.Options{}); !errors.Is(err, prep.ErrInfinite) {
		t.Errorf("infinite value: %v", err)
	}
	// Values whose spread overflows float64.
	if _, err = prep.Fit([]prep.Column{num("x", -math.MaxFloat64, math.MaxFloat64)}, nil, prep.Options{}); !errors.Is(err, prep.ErrInfinite) {
		t.Errorf("overflowing spread: %v", err)
	}
	if _, err = prep.Fit([]prep.Column{num("x", 1), num("x", 2)}, nil, prep.Options{}); !errors.Is(err, prep.ErrDuplicateHeader) {
		t.Errorf("duplicate names: %v", err)
	}
	for what, f := range map[string]func() error{
		"no columns": func() error { _, err := prep.Fit(nil, nil, prep.Options{}); return err },
		"auto kind": func() error {
			_, err := prep.Fit([]prep.Column{{Name: "a", Num: []float64{1}}}, nil, prep.Options{})
			return err
		},
		"unequal lengths": func() error {
			_, err := prep.Fit([]prep.Column{num("a", 1, 2), num("b", 1)}, nil, prep.Options{})
			return err
		},
		"no name":    func() error { _, err := prep.Fit([]prep.Column{num("", 1)}, nil, prep.Options{}); return err },
		"empty rows": func() error { _, err := prep.Fit([]prep.Column{num("a", 1)}, []int{}, prep.Options{}); return err },
		"row out of range": func() error {
			_, err := prep.Fit([]prep.Column{num("a", 1)}, []int{1}, prep.Options{})
			return err
		},
		"short missing flags": func() error {
			_, err := prep.Fit([]prep.Column{{Name: "a", Kind: prep.Numeric, Num: []float64{1, 2}, Missing: []bool{false}}}, nil, prep.Options{})
			return err
		},
	} {
		if f() == nil {
			t.Errorf("%s: Fit accepted it", what)
		}
	}
}

func TestApplyErrors(t *testing.T) {
	cols := []prep.Column{num("temp", 1, 3), cat("site", "east", "west")}
	p := mustFit(t, cols, nil, prep.Options{})
	dst := make([]float64, p.Width())
	var fe *prep.FieldError
	for _, c := range []struct {
		fields []string
		want   error
		field  string
	}{
		{[]string{"2", "east"}, nil, ""},
		{[]string{" 2 ", " east "}, nil, ""}, // spaces are ignored
		{[]string{"NA", "east"}, prep.ErrMissing, "temp"},
		{[]string{"2", ""}, prep.ErrMissing, "site"},
		{[]string{"warm", "east"}, prep.ErrNotNumber, "temp"},
		{[]string{"Inf", "east"}, prep.ErrInfinite, "temp"},
		{[]string{"1e999", "east"}, prep.ErrInfinite, "temp"},
		{[]string{"2", "north"}, prep.ErrUnknownCategory, "site"},
		{[]string{"2"}, prep.ErrRagged, ""},
		{[]string{"2", "east", "x"}, prep.ErrRagged, ""},
	} {
		err := p.ApplyStrings(c.fields, dst)
		if !errors.Is(err, c.want) || (c.want == nil) != (err == nil) {
			t.Errorf("%q: %v, want %v", c.fields, err, c.want)
			continue
		}
		if err == nil {
			continue
		}
		if !errors.As(err, &fe) || fe.Field != c.field || fe.Row != -1 {
			t.Errorf("%q: %#v, want a FieldError for %q at row -1", c.fields, err, c.field)
		}
		if !strings.Contains(err.Error(), "; ") {
			t.Errorf("%q: message %q gives no advice", c.fields, err)
		}
	}

	// By name: a missing key, a misspelt one (reported as unknown, not as
	// missing), and imputation of an absent key.
	if err := p.ApplyMap(map[string]string{"temp": "2"}, dst); !errors.Is(err, prep.ErrMissing) || !errors.As(err, &fe) || fe.Field != "site" {
		t.Errorf("missing key: %v", err)
	}
	if err := p.ApplyMap(map[string]string{"temp": "2", "sitee": "east", "zz": "1"}, dst); !errors.Is(err, prep.ErrUnknownField) || !errors.As(err, &fe) || fe.Field != "sitee" {
		t.Errorf("misspelt key: %v", err)
	}
	if err := p.ApplyMap(map[string]string{"temp": "2", "site": "east", "zz": "1"}, dst); !errors.Is(err, prep.ErrUnknownField) || !errors.As(err, &fe) || fe.Field != "zz" {
		t.Errorf("extra key: %v", err)
	}
	pi := mustFit(t, cols, nil, prep.Options{Impute: true})
	if err := pi.ApplyMap(map[string]string{"site": "west"}, dst); err != nil || !slices.Equal(dst, []float64{0, 0, 1}) {
		t.Errorf("imputed absent key: %v %v, want [0 0 1] (mean 2 → 0)", dst, err)
	}

	// Columns that are not the pipeline's.
	if err := p.ApplyColumns(cols[:1], 0, dst); !errors.Is(err, prep.ErrRagged) {
		t.Errorf("too few columns: %v", err)
	}
	if err := p.ApplyColumns([]prep.Column{cols[1], cols[0]}, 0, dst); !errors.Is(err, prep.ErrUnknownField) {
		t.Errorf("columns swapped: %v", err)
	}
	if err := p.ApplyColumns([]prep.Column{num("temp", 1, math.Inf(-1)), cols[1]}, 1, dst); !errors.Is(err, prep.ErrInfinite) {
		t.Errorf("infinite training value: %v", err)
	}
	mustPanic(t, "short dst", func() { _ = p.ApplyStrings([]string{"2", "east"}, dst[:2]) })
	mustPanic(t, "row out of range", func() { _ = p.ApplyColumns(cols, 2, dst) })

	// Custom markers: "?" is missing, and "NA" is then an ordinary string.
	pm := mustFit(t, []prep.Column{num("temp", 1, 3)}, nil, prep.Options{Missing: []string{"?"}})
	if err := pm.ApplyStrings([]string{"?"}, dst); !errors.Is(err, prep.ErrMissing) {
		t.Errorf("custom marker: %v", err)
	}
	if err := pm.ApplyStrings([]string{"NA"}, dst); !errors.Is(err, prep.ErrNotNumber) {
		t.Errorf("NA without the default markers: %v", err)
	}
	if !slices.Equal(mustFit(t, []prep.Column{num("t", 1)}, nil, prep.Options{}).Missing, prep.DefaultMissing) {
		t.Error("nil Options.Missing does not give DefaultMissing")
	}
}

func mustPanic(t *testing.T, what string, f func()) {
	t.Helper()
	defer func() {
		if recover() == nil {
			t.Errorf("%s: did not panic", what)
		}
	}()
	f()
}

// A value finite on input but far outside the training range overflows
// once divided by a small spread: an error, never an infinite feature.
func TestNoInfiniteFeature(t *testing.T) {
	p := mustFit(t, []prep.Column{num("x", 0, 1e-300)}, nil, prep.Options{})
	dst := make([]float64, 1)
	if err := p.ApplyStrings([]string{"1e300"}, dst); !errors.Is(err, prep.ErrInfinite) {
		t.Errorf("overflow after scaling: %v, features %v", err, dst)
	}
}

// FuzzApplyStrings: whatever the cells, serving either fails with a
// FieldError or writes only finite features.
func FuzzApplyStrings(f *testing.F) {
	for _, s := range [][2]string{{"1", "a"}, {"1e308", "b"}, {"-1e308", "c"}, {"NaN", "a"}, {"Inf", ""}, {"5e-324", " a "}, {"0x1p-1074", "NA"}} {
		f.Add(s[0], s[1])
	}
	cols := []prep.Column{num("x", -1e300, 1e-300, 1e300), cat("c", "a", "b", "b")}
	ps := []*prep.Pipeline{}
	for _, o := range []prep.Options{{}, {Impute: true, UnitNorm: true, ZeroUnseen: true}, {NoStandardize: true, UnitNorm: true, Missing: []string{}}, {Impute: true, LevelCap: 1}} {
		p, err := prep.Fit(cols, nil, o)
		if err != nil {
			f.Fatal(err)
		}
		ps = append(ps, p)
	}
	f.Fuzz(func(t *testing.T, x, c string) {
		for _, p := range ps {
			dst := make([]float64, p.Width())
			err := p.ApplyStrings([]string{x, c}, dst)
			var fe *prep.FieldError
			if err != nil && !errors.As(err, &fe) {
				t.Fatalf("%q %q: error %v is not a FieldError", x, c, err)
			}
			if err != nil {
				continue
			}
			for _, v := range dst {
				if !finite(v) {
					t.Fatalf("%q %q: features %v", x, c, dst)
				}
			}
		}
	})
}

// TestAllocs: the Apply methods allocate nothing on success, with every
// option that adds work switched on.
func TestAllocs(t *testing.T) {
	cols := []prep.Column{num("x", 1, math.NaN(), 4), cat("c", "a", "b", "")}
	p := mustFit(t, cols, nil, prep.Options{Impute: true, UnitNorm: true})
	dst := make([]float64, p.Width())
	fields := []string{"2.5", "b"}
	m := map[string]string{"x": "NA", "c": "a"}
	for what, f := range map[string]func() error{
		"ApplyColumns": func() error { return p.ApplyColumns(cols, 1, dst) },
		"ApplyStrings": func() error { return p.ApplyStrings(fields, dst) },
		"ApplyMap":     func() error { return p.ApplyMap(m, dst) },
	} {
		if err := f(); err != nil {
			t.Fatalf("%s: %v", what, err)
		}
		if a := testing.AllocsPerRun(100, func() { _ = f() }); a != 0 {
			t.Errorf("%s allocates %v times per call, want 0", what, a)
		}
	}
}

// table is a CSV file read into columns, for tests: a column is numeric
// when every non-missing cell parses as a number.
type table struct {
	cols   []prep.Column
	labels []string
}

func (tb *table) col(name string) *prep.Column {
	for i := range tb.cols {
		if tb.cols[i].Name == name {
			return &tb.cols[i]
		}
	}
	return nil
}

func readCSV(t *testing.T, path, label string) *table {
	t.Helper()
	fh, err := os.Open(path)
	if err != nil {
		t.Fatal(err)
	}
	defer fh.Close()
	recs, err := csv.NewReader(fh).ReadAll()
	if err != nil {
		t.Fatal(err)
	}
	head, body := recs[0], recs[1:]
	tb := &table{}
	for j, name := range head {
		if name == label {
			for _, r := range body {
				tb.labels = append(tb.labels, r[j])
			}
			continue
		}
		c := prep.Column{Name: name, Kind: prep.Numeric, Missing: make([]bool, len(body))}
		for i, r := range body {
			c.Missing[i] = prep.IsMissing(r[j], prep.DefaultMissing)
			if _, err := prep.ParseNumber(r[j]); err != nil && !c.Missing[i] {
				c.Kind = prep.Categorical
			}
		}
		for i, r := range body {
			if c.Kind == prep.Categorical {
				if c.Missing[i] {
					c.Cat = append(c.Cat, "")
				} else {
					c.Cat = append(c.Cat, r[j])
				}
				continue
			}
			v := math.NaN()
			if !c.Missing[i] {
				v, _ = prep.ParseNumber(r[j])
			}
			c.Num = append(c.Num, v)
		}
		tb.cols = append(tb.cols, c)
	}
	return tb
}
