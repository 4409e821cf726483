package prep_test

import (
	"bytes"
	"encoding/json"
	"errors"
	"fmt"
	"math"
	"reflect"
	"runtime"
	"slices"
	"strings"
	"testing"

	"github.com/rhomb/rhomb/data/prep"
)

// cityCounts is the hand-worked column of TestLevelCapByHand, 13 training
// rows:
//
//	oslo ×4, bergen ×3, alta ×2, bodø ×2, moss ×1, narvik ×1
//
// With the cap at 3 the ranking is oslo (4), bergen (3), then alta and
// bodø tie at 2 and the byte-wise smaller, "alta", takes the last place
// ("a" 0x61 < "b" 0x62). Kept, in byte-wise order: alta, bergen, oslo;
// bodø, moss and narvik (3 levels) go to the other feature. Features:
//
//	city=alta  city=bergen  city=oslo  city= (other)
//	alta   →  1 0 0 0
//	bergen →  0 1 0 0
//	oslo   →  0 0 1 0
//	bodø, moss, narvik (training, beyond the cap) → 0 0 0 1
//	tromsø (never in training)                    → 0 0 0 1
//	missing, imputed with the most frequent, oslo → 0 0 1 0
var cityCounts = []string{
	"oslo", "bergen", "alta", "oslo", "bodø", "bergen", "moss",
	"oslo", "alta", "narvik", "bergen", "bodø", "oslo",
}

func TestLevelCapByHand(t *testing.T) {
	cols := []prep.Column{cat("city", append(slices.Clone(cityCounts), "")...)}
	p := mustFit(t, cols, nil, prep.Options{LevelCap: 3, Impute: true})
	want := prep.Encoding{Name: "city", Kind: prep.Categorical, Scale: 1,
		Categories: []string{"alta", "bergen", "oslo"}, OtherLevels: 3, FillCategory: "oslo"}
	if !reflect.DeepEqual(p.Encodings, []prep.Encoding{want}) {
		t.Fatalf("step %+v\nwant %+v", p.Encodings[0], want)
	}
	if got, w := p.FeatureNames(), []string{"city=alta", "city=bergen", "city=oslo", "city= (other)"}; !slices.Equal(got, w) {
		t.Errorf("FeatureNames %q, want %q", got, w)
	}
	if p.Width() != 4 || p.Encodings[0].Width() != 4 {
		t.Errorf("Width %d, step width %d; want 3 kept + 1 other", p.Width(), p.Encodings[0].Width())
	}
	for _, c := range []struct {
		cell string
		want []float64
	}{
		{"alta", []float64{1, 0, 0, 0}},
		{"bergen", []float64{0, 1, 0, 0}},
		{" oslo ", []float64{0, 0, 1, 0}}, // spaces ignored, as everywhere
		{"bodø", []float64{0, 0, 0, 1}},
		{"moss", []float64{0, 0, 0, 1}},
		{"narvik", []float64{0, 0, 0, 1}},
		{"tromsø", []float64{0, 0, 0, 1}},
		{"NA", []float64{0, 0, 1, 0}},
	} {
		dst := []float64{9, 9, 9, 9} // stale values must be cleared
		if err := p.ApplyStrings([]string{c.cell}, dst); err != nil || !slices.Equal(dst, c.want) {
			t.Errorf("%q: %v %v, want %v", c.cell, dst, err, c.want)
		}
	}
	// Every training row through the training path, the last one missing.
	for r, cell := range cols[0].Cat {
		got := apply(t, p, cols, r)
		switch cell {
		case "alta", "bergen", "oslo", "":
			if got[3] != 0 {
				t.Errorf("row %d (%q): %v, a kept category (or the fill) in the other feature", r, cell, got)
			}
		default:
			if !slices.Equal(got, []float64{0, 0, 0, 1}) {
				t.Errorf("row %d (%q): %v, want the other feature", r, cell, got)
			}
		}
	}
}

// TestLevelCapTies: equal counts are ranked byte-wise, which puts upper
// case before lower case and multi-byte UTF-8 after ASCII (UTF-8 encodes
// é as 0xC3 0xA9; Unicode/RFC 3629), so of "b", "a", "C", "é", "z", one
// row each, a cap of 2 keeps "C" (0x43) and "a" (0x61). The map the
// counts are in is visited in a different order on every run, so the fit
// is repeated to see that the choice does not depend on it.
func TestLevelCapTies(t *testing.T) {
	cols := []prep.Column{cat("c", "b", "a", "C", "é", "z")}
	for range 20 {
		p := mustFit(t, cols, nil, prep.Options{LevelCap: 2})
		if s := p.Encodings[0]; !slices.Equal(s.Categories, []string{"C", "a"}) || s.OtherLevels != 3 {
			t.Fatalf("kept %q, %d other; want [C a] and 3", s.Categories, s.OtherLevels)
		}
	}
	// The fill with a cap of 1 and a tie at the top: c ×2, a ×2, b ×1
	// keeps "a" alone, which is also the fill (as without the cap,
	// TestImputeTrainingRowsOnly).
	p := mustFit(t, []prep.Column{cat("c", "c", "a", "b", "c", "a", "")}, nil, prep.Options{LevelCap: 1, Impute: true})
	if s := p.Encodings[0]; !slices.Equal(s.Categories, []string{"a"}) || s.FillCategory != "a" || s.OtherLevels != 2 {
		t.Errorf("step %+v: want kept [a], fill a, 2 other levels", s)
	}
	// A larger cap than the heap's first fill: counts 1..9 for levels
	// "l1".."l9" (li appears i times), cap 4 keeps l6..l9.
	var v []string
	for i := 1; i <= 9; i++ {
		for range i {
			v = append(v, fmt.Sprintf("l%d", i))
		}
	}
	for range 20 {
		p = mustFit(t, []prep.Column{cat("c", v...)}, nil, prep.Options{LevelCap: 4})
		if s := p.Encodings[0]; !slices.Equal(s.Categories, []string{"l6", "l7", "l8", "l9"}) || s.OtherLevels != 5 {
			t.Fatalf("kept %q, %d other; want [l6 l7 l8 l9] and 5", s.Categories, s.OtherLevels)
		}
	}
}

// TestLevelCapOnlyWide: a cap at or above a column's level count changes
// nothing for that column, bit for bit and in the JSON; only the wider
// column gets the other feature, and an unseen value of the narrow one is
// still an error.
func TestLevelCapOnlyWide(t *testing.T) {
	cols := []prep.Column{num("x", 1, 2, 3, 4), cat("shift", "day", "night", "day", "night"), cat("batch", "b1", "b2", "b3", "b1")}
	plain := mustFit(t, cols, nil, prep.Options{})
	capped := mustFit(t, cols, nil, prep.Options{LevelCap: 2})
	if !reflect.DeepEqual(plain.Encodings[:2], capped.Encodings[:2]) {
		t.Errorf("columns within the cap changed:\n%+v\n%+v", plain.Encodings[:2], capped.Encodings[:2])
	}
	if s := capped.Encodings[2]; !slices.Equal(s.Categories, []string{"b1", "b2"}) || s.OtherLevels != 1 {
		t.Errorf("batch: %+v, want kept [b1 b2] (b1 ×2, then b2 before b3), 1 other", s)
	}
	if capped.Width() != 1+2+3 {
		t.Errorf("Width %d, want 1 + 2 + (2 + 1)", capped.Width())
	}
	exact := mustFit(t, cols, nil, prep.Options{LevelCap: 3}) // 3 levels: not more than the cap
	if !reflect.DeepEqual(plain, exact) {
		t.Errorf("a cap equal to the level count changed the pipeline:\n%+v\n%+v", plain, exact)
	}
	a, _ := json.Marshal(plain)
	b, _ := json.Marshal(exact)
	if !bytes.Equal(a, b) || bytes.Contains(a, []byte("other_levels")) {
		t.Errorf("JSON without a capped column differs or names the new field:\n%s\n%s", a, b)
	}
	dst := make([]float64, capped.Width())
	for _, o := range []bool{false, true} {
		capped.ZeroUnseen = o
		if err := capped.ApplyStrings([]string{"1", "dusk", "b9"}, dst); o == (err != nil) || (err != nil && !errors.Is(err, prep.ErrUnknownCategory)) {
			t.Errorf("unknown-as-zeros %v: unseen shift: %v", o, err)
		}
		if err := capped.ApplyStrings([]string{"1", "day", "b9"}, dst); err != nil || !slices.Equal(dst[1:], []float64{1, 0, 0, 0, 1}) {
			t.Errorf("unknown-as-zeros %v: unseen batch: %v %v, want the other feature", o, dst[1:], err)
		}
	}
	// A missing value is still missing, not "other", without imputation.
	if err := capped.ApplyStrings([]string{"1", "day", "NA"}, dst); !errors.Is(err, prep.ErrMissing) {
		t.Errorf("missing batch without imputation: %v", err)
	}
	if _, err := prep.Fit(cols, nil, prep.Options{LevelCap: -1}); err == nil || strings.Contains(err.Error(), "LevelCap") {
		t.Errorf("negative cap: %v (want an error that does not name Go fields)", err)
	}
}

// TestLevelCapServeEqualsTrain: the three encode paths give the same bits
// for kept, pooled, unseen and missing values, fitted on the even rows so
// that the odd rows hold values never seen in training.
func TestLevelCapServeEqualsTrain(t *testing.T) {
	n := 200
	var num0 []float64
	var wide, narrow []string
	for r := range n {
		num0 = append(num0, float64(r%17)-3.5)
		switch {
		case r%23 == 5:
			wide = append(wide, "")
		case r%2 == 1 && r%3 == 0:
			wide = append(wide, fmt.Sprintf("new-%d", r)) // odd rows only: never in training
		default:
			wide = append(wide, fmt.Sprintf("w%d", (r*r)%31))
		}
		narrow = append(narrow, []string{"a", "b", "c"}[r%3])
	}
	cols := []prep.Column{cat("wide", wide...), num("x", num0...), cat("narrow", narrow...)}
	var even []int
	for r := 0; r < n; r += 2 {
		even = append(even, r)
	}
	for _, o := range []prep.Options{
		{LevelCap: 5, Impute: true},
		{LevelCap: 5, Impute: true, UnitNorm: true},
		{LevelCap: 1, Impute: true, ZeroUnseen: true},
	} {
		p := mustFit(t, cols, even, o)
		if p.Encodings[0].OtherLevels == 0 {
			t.Fatalf("test premise: the wide column should exceed the cap: %+v", p.Encodings[0])
		}
		checkServeEqualsTrain(t, p, cols)
		// And the kinds of value are all there: kept, pooled, unseen.
		var kept, pooled, unseen int
		train := map[string]bool{}
		for _, r := range even {
			train[wide[r]] = true
		}
		for _, v := range wide {
			_, in := slices.BinarySearch(p.Encodings[0].Categories, v)
			switch {
			case v == "":
			case in:
				kept++
			case train[v]:
				pooled++
			default:
				unseen++
			}
		}
		if kept == 0 || pooled == 0 || unseen == 0 {
			t.Fatalf("test premise: %d kept, %d pooled, %d unseen rows", kept, pooled, unseen)
		}
	}
}

// TestLevelCapJSON: a capped pipeline survives its JSON form bit for bit
// and names the new field; a pipeline in the format written before the
// cap existed decodes, validates, encodes and writes back exactly as
// before.
func TestLevelCapJSON(t *testing.T) {
	cols := []prep.Column{num("x", 1, 3, 5, 7), cat("city", "oslo", "alta", "oslo", "moss")}
	p := mustFit(t, cols, nil, prep.Options{LevelCap: 1, Impute: true})
	b, err := json.Marshal(p)
	if err != nil {
		t.Fatal(err)
	}
	if !bytes.Contains(b, []byte(`"categories":["oslo"],"other_levels":2`)) {
		t.Errorf("JSON %s: want the kept category and other_levels 2", b)
	}
	q := strictDecode(t, b)
	if !reflect.DeepEqual(p, q) || q.Validate() != nil {
		t.Fatalf("round trip: %+v\n%+v (%v)", p, q, q.Validate())
	}
	a, c := make([]float64, p.Width()), make([]float64, p.Width())
	for _, cell := range []string{"oslo", "alta", "tromsø", "NA"} {
		_ = p.ApplyStrings([]string{"2", cell}, a)
		_ = q.ApplyStrings([]string{"2", cell}, c)
		if !slices.Equal(a, c) {
			t.Errorf("%q: %v before the round trip, %v after", cell, a, c)
		}
	}

	// A pipeline in the earlier format, as a model file holds it.
	const old = `{"steps":[{"name":"x","kind":"numeric","mean":3,"scale":2,"fill":0},` +
		`{"name":"site","kind":"categorical","mean":0,"scale":1,"fill":0,"categories":["east","north-yard"]}],` +
		`"impute":false,"unit_norm":false,"unknown_as_zeros":false,"missing":["","NA","NaN","null"]}`
	o := strictDecode(t, []byte(old))
	if err := o.Validate(); err != nil {
		t.Fatal(err)
	}
	if o.Width() != 3 || !slices.Equal(o.FeatureNames(), []string{"x", "site=east", "site=north-yard"}) {
		t.Errorf("old pipeline: width %d, features %q", o.Width(), o.FeatureNames())
	}
	dst := make([]float64, 3)
	// By hand: (5 − 3)/2 = 1, then the one-hot of north-yard.
	if err := o.ApplyStrings([]string{"5", "north-yard"}, dst); err != nil || !slices.Equal(dst, []float64{1, 0, 1}) {
		t.Errorf("old pipeline: %v %v, want [1 0 1]", dst, err)
	}
	if err := o.ApplyStrings([]string{"5", "west"}, dst); !errors.Is(err, prep.ErrUnknownCategory) {
		t.Errorf("old pipeline, unseen category: %v, want the unknown-category error", err)
	}
	// Written back, it takes the current names ("encodings",
	// "zero_unseen") and nothing else changes.
	renamed := strings.NewReplacer(`"steps"`, `"encodings"`, `"unknown_as_zeros"`, `"zero_unseen"`).Replace(old)
	if again, _ := json.Marshal(o); string(again) != renamed {
		t.Errorf("old pipeline written back as\n%s\nwant\n%s", again, renamed)
	}
	if _, err := json.Marshal(strictDecode(t, []byte(renamed))); err != nil {
		t.Error(err)
	}
	var both prep.Pipeline
	if err := json.Unmarshal([]byte(strings.Replace(renamed, `"impute"`, `"steps":[],"impute"`, 1)), &both); err == nil {
		t.Error(`a pipeline with both "encodings" and "steps" was accepted`)
	}
}

// strictDecode decodes a pipeline refusing unknown fields, as the model
// file reader does.
func strictDecode(t *testing.T, b []byte) *prep.Pipeline {
	t.Helper()
	d := json.NewDecoder(bytes.NewReader(b))
	d.DisallowUnknownFields()
	var p prep.Pipeline
	if err := d.Decode(&p); err != nil {
		t.Fatal(err)
	}
	return &p
}

func TestLevelCapValidate(t *testing.T) {
	good := func() *prep.Pipeline {
		return mustFit(t, []prep.Column{num("x", 1, 2, 3), cat("c", "a", "b", "a")}, nil, prep.Options{LevelCap: 1, Impute: true})
	}
	if err := good().Validate(); err != nil {
		t.Fatal(err)
	}
	for what, damage := range map[string]func(p *prep.Pipeline){
		"negative count":   func(p *prep.Pipeline) { p.Encodings[1].OtherLevels = -1 },
		"count on numeric": func(p *prep.Pipeline) { p.Encodings[0].OtherLevels = 1 },
		// The fill moves along, so that only the spaces are wrong.
		"spaced category": func(p *prep.Pipeline) {
			p.Encodings[1].Categories, p.Encodings[1].FillCategory = []string{" (other)"}, " (other)"
		},
		"trailing space":        func(p *prep.Pipeline) { p.Encodings[1].Categories, p.Encodings[1].FillCategory = []string{"a "}, "a " },
		"fill not kept":         func(p *prep.Pipeline) { p.Encodings[1].FillCategory = "b" },
		"no categories, capped": func(p *prep.Pipeline) { p.Encodings[1].Categories = nil },
	} {
		p := good()
		damage(p)
		if err := p.Validate(); err == nil {
			t.Errorf("%s: Validate accepted it", what)
		} else if strings.Contains(err.Error(), "OtherLevels") || strings.Contains(err.Error(), "FillCategory") {
			t.Errorf("%s: message names a Go field: %v", what, err)
		}
	}
	// Without the cap, Validate is as before: a spaced category, which Fit
	// never writes, is not refused (it is merely never matched), nor a fill
	// outside the categories.
	p := mustFit(t, []prep.Column{cat("c", "a", "b")}, nil, prep.Options{Impute: true})
	p.Encodings[0].Categories = []string{" a", "b"}
	p.Encodings[0].FillCategory = "z"
	if err := p.Validate(); err != nil {
		t.Errorf("an uncapped step is checked more strictly than before: %v", err)
	}
	// Not imputing, the fill of a capped step is not looked at.
	p = mustFit(t, []prep.Column{cat("c", "a", "b", "a")}, nil, prep.Options{LevelCap: 1})
	if err := p.Validate(); err != nil || p.Encodings[0].FillCategory != "" {
		t.Errorf("capped without imputation: %v, fill %q", err, p.Encodings[0].FillCategory)
	}
}

// TestLevelCapAllocs: the other feature costs Apply no allocation.
func TestLevelCapAllocs(t *testing.T) {
	cols := []prep.Column{cat("c", "a", "b", "a", "c", "")}
	p := mustFit(t, cols, nil, prep.Options{LevelCap: 1, Impute: true, UnitNorm: true})
	dst := make([]float64, p.Width())
	fields := []string{"never-seen"}
	m := map[string]string{"c": "b"}
	for what, f := range map[string]func() error{
		"ApplyColumns": func() error { return p.ApplyColumns(cols, 3, dst) },
		"ApplyStrings": func() error { return p.ApplyStrings(fields, dst) },
		"ApplyMap":     func() error { return p.ApplyMap(m, dst) },
	} {
		if err := f(); err != nil || dst[1] != 1 {
			t.Fatalf("%s: %v %v, want the other feature", what, dst, err)
		}
		if a := testing.AllocsPerRun(100, func() { _ = f() }); a != 0 {
			t.Errorf("%s allocates %v times per call, want 0", what, a)
		}
	}
}

// TestLevelCapMemory fits a column of 20,000 rows holding 20,000
// distinct values with the cap at 50 and bounds what Fit allocates in
// all (runtime.MemStats.TotalAlloc, which counts every byte allocated,
// freed or not).
//
// The bound: Fit must count the levels, which takes a map with one entry
// per distinct value; the test measures what that map alone costs to grow
// from empty to 20,000 keys (the same keys, inserted in the same order),
// about 1.75 MB with Go 1.26's maps, growth included. The map's layout
// depends on its random hash seed, which moves where its tables split; one
// table more is 1024 slots of a 16-byte key, an 8-byte count and a
// control byte, 25,600 bytes (the largest table of Go's maps is 1024
// slots: internal/runtime/maps, from memory), and the reference is taken
// as the largest of three builds. On top: the kept list, 50 × (24 bytes
// in the heap + 16 for the kept string header), and 2 KiB for the
// Pipeline, its one Encoding and the copy of the missing markers. Anything
// that held a slice per distinct value (320,000 bytes for 20,000 string
// headers) or per row, let alone rows × levels (3.2 GB of float64), is
// far beyond it. The training rows are passed in, allocated beforehand,
// since Fit makes the index 0..n−1 itself (8 bytes a row) when given nil.
func TestLevelCapMemory(t *testing.T) {
	const n, kept = 20000, 50
	v := make([]string, n)
	for i := range v {
		v[i] = fmt.Sprintf("v%05d", n-1-i) // descending, so the kept ones come last
	}
	cols := []prep.Column{{Name: "id", Kind: prep.Categorical, Cat: v}}
	rows := make([]int, n)
	for i := range rows {
		rows[i] = i
	}
	var ref uint64
	for range 3 {
		ref = max(ref, allocated(func() {
			m := map[string]int{}
			for _, s := range v {
				m[strings.TrimSpace(s)]++
			}
		}))
	}
	bound := ref + 1024*(16+8+1) + kept*(24+16) + 2048
	var p *prep.Pipeline
	var err error
	got := allocated(func() { p, err = prep.Fit(cols, rows, prep.Options{LevelCap: kept}) })
	if err != nil {
		t.Fatal(err)
	}
	t.Logf("Fit allocated %d bytes; the count map alone %d; bound %d", got, ref, bound)
	if got > bound {
		t.Errorf("Fit allocated %d bytes, more than the bound %d (map %d + one table + kept list + 2 KiB)", got, bound, ref)
	}
	// Every count is 1: a 20,000-way tie, kept byte-wise: v00000..v00049.
	s := p.Encodings[0]
	if p.Width() != kept+1 || s.OtherLevels != n-kept || len(s.Categories) != kept ||
		s.Categories[0] != "v00000" || s.Categories[kept-1] != "v00049" {
		t.Errorf("width %d, %d other levels, kept %q…; want 51, 19950, v00000…v00049", p.Width(), s.OtherLevels, s.Categories[:3])
	}
}

// allocated returns the bytes f allocates, by TotalAlloc.
func allocated(f func()) uint64 {
	var a, b runtime.MemStats
	runtime.ReadMemStats(&a)
	f()
	runtime.ReadMemStats(&b)
	return b.TotalAlloc - a.TotalAlloc
}

// TestLevelCapUnitNorm: the other feature takes part in unit-norm scaling
// like any other. A row holding only an unseen category is (0, 1), of
// norm 1, and stays (0, 1) exactly: 1/1/1 and 0/1/1 round to nothing.
func TestLevelCapUnitNorm(t *testing.T) {
	p := mustFit(t, []prep.Column{cat("c", "a", "a", "b")}, nil, prep.Options{LevelCap: 1, UnitNorm: true})
	dst := make([]float64, p.Width())
	if err := p.ApplyStrings([]string{"zz"}, dst); err != nil || !slices.Equal(dst, []float64{0, 1}) || math.Signbit(dst[0]) {
		t.Errorf("%v %v, want [0 1]", dst, err)
	}
}
