package classify_test

import (
	"errors"
	"math"
	"os/exec"
	"strings"
	"sync"
	"testing"

	"github.com/rhomb/rhomb/data/prep"
	"github.com/rhomb/rhomb/net/classify"
)

// pumpModel is a demo model with its pipeline (invented data; the tests
// that use it check properties that hold for any data).
func pumpModel(t *testing.T) *classify.Model {
	t.Helper()
	split := demoSplit(t)
	m := build(t, kindCase{"relu", "global", true, false}, split.Train)
	m.Pipeline = split.Pipeline
	return saveLoad(t, m)
}

var goodRow = map[string]string{
	"site": "river-intake", "vib_rms_mm_s": "1.576", "vib_kurtosis": "2.505", "crest_factor": "3.283",
	"band_1x_ratio": "0.4781", "band_hf_ratio": "0.0887", "temp_rise_c": "20.30",
	"current_imbalance_pct": "1.65", "suction_kpa": "127.0",
}

func with(k, v string) map[string]string {
	out := map[string]string{}
	for a, b := range goodRow {
		out[a] = b
	}
	if v == "\x00" {
		delete(out, k)
	} else {
		out[k] = v
	}
	return out
}

// TestRowErrors: every kind of bad row is a typed error naming the field,
// wrapping prep's sentinel; none is silently defaulted. The demo pipeline
// imputes missing values (demo.Pumps fits it with Impute), so a missing
// field is imputed there; TestMissingRefused checks refusal on a model
// that does not impute.
func TestRowErrors(t *testing.T) {
	c := pumpModel(t)
	w := c.NewWork()
	if _, err := c.ClassifyMap(w, goodRow); err != nil {
		t.Fatalf("good row: %v", err)
	}
	for _, tc := range []struct {
		name  string
		row   map[string]string
		field string
		want  error
	}{
		{"unknown category", with("site", "moon-base"), "site", prep.ErrUnknownCategory},
		{"not a number", with("crest_factor", "high"), "crest_factor", prep.ErrNotNumber},
		{"infinite", with("suction_kpa", "1e400"), "suction_kpa", prep.ErrInfinite},
		{"unknown field", with("colour", "red"), "colour", prep.ErrUnknownField},
	} {
		_, err := c.ClassifyMap(w, tc.row)
		var fe *prep.FieldError
		if !errors.As(err, &fe) || !errors.Is(err, tc.want) || fe.Field != tc.field {
			t.Errorf("%s: got %v; want a *prep.FieldError for %q wrapping %v", tc.name, err, tc.field, tc.want)
		}
	}
	// Feature vectors: width, NaN, infinity.
	x := make([]float64, c.Features())
	for _, tc := range []struct {
		name string
		x    []float64
		want error
	}{
		{"short", x[:3], prep.ErrRagged},
		{"NaN", append(append([]float64(nil), x[:c.Features()-1]...), math.NaN()), prep.ErrNotNumber},
		{"Inf", append([]float64{math.Inf(-1)}, x[1:]...), prep.ErrInfinite},
	} {
		_, err := c.ClassifyVector(w, tc.x)
		if !errors.Is(err, tc.want) {
			t.Errorf("%s: got %v; want %v", tc.name, err, tc.want)
		}
	}
	// A batch names the row.
	answers := make([]classify.Answer, 3)
	err := c.ClassifyMaps(w, []map[string]string{goodRow, goodRow, with("site", "moon-base")}, answers)
	var re *classify.RowError
	var fe *prep.FieldError
	if !errors.As(err, &re) || re.Row != 2 || !errors.As(err, &fe) || fe.Field != "site" {
		t.Fatalf("batch: got %v; want row 2, field site", err)
	}
	if _, err := c.ClassifyFields(w, []string{"a", "b"}); !errors.Is(err, prep.ErrRagged) {
		t.Errorf("two fields: got %v; want ErrRagged", err)
	}
}

// TestMissingRefused: a pipeline fitted without imputation refuses a
// missing field instead of inventing a value.
func TestMissingRefused(t *testing.T) {
	split := demoSplit(t)
	m := build(t, kindCase{"relu", "none", false, false}, split.Train)
	p := *split.Pipeline
	p.Impute = false
	m.Pipeline = &p
	c := saveLoad(t, m)
	for _, row := range []map[string]string{with("vib_kurtosis", "\x00"), with("vib_kurtosis", "NA"), with("site", "")} {
		_, err := c.ClassifyMap(nil, row)
		if !errors.Is(err, prep.ErrMissing) {
			t.Errorf("row %v: got %v; want ErrMissing", row, err)
		}
	}
	type partial struct {
		Site string `classify:"site"`
	}
	if _, err := classify.Bind[partial](c); !errors.Is(err, prep.ErrMissing) {
		t.Errorf("Bind of a struct lacking inputs: got %v; want ErrMissing", err)
	}
}

// TestZeroAllocs proves the claim of the package doc: with a Work, a
// prediction allocates nothing (testing.AllocsPerRun).
func TestZeroAllocs(t *testing.T) {
	c := pumpModel(t)
	w := c.NewWork()
	b, err := classify.Bind[reading](c)
	if err != nil {
		t.Fatal(err)
	}
	var rd reading
	s, v := "east-tank", 1.5
	rd.Site, rd.RMS, rd.Crest, rd.Band1x, rd.BandHF, rd.Temp, rd.Current, rd.Suction, rd.Kurt = &s, &v, &v, &v, &v, &v, &v, &v, 2
	fields := make([]string, len(c.Inputs()))
	for i, name := range c.Inputs() {
		fields[i] = goodRow[name]
	}
	x := make([]float64, 8*c.Features())
	answers := make([]classify.Answer, 8)
	for name, f := range map[string]func(){
		"vector":  func() { c.ClassifyVector(w, x[:c.Features()]) },
		"vectors": func() { c.ClassifyVectors(w, x, 8, answers) },
		"fields":  func() { c.ClassifyFields(w, fields) },
		"map":     func() { c.ClassifyMap(w, goodRow) },
		"struct":  func() { b.Classify(w, &rd) },
	} {
		f() // warm up: sizes the Work
		if n := testing.AllocsPerRun(100, f); n != 0 {
			t.Errorf("%s: %v allocations per prediction; want 0", name, n)
		}
	}
}

// TestConcurrent classifies from many goroutines with one Model (under
// -race this is the race test) and checks every answer against the serial
// one.
func TestConcurrent(t *testing.T) {
	split := demoSplit(t)
	c := pumpModel(t)
	rows := split.Train.Rows
	want := make([]classify.Answer, rows)
	if err := c.ClassifyVectors(nil, split.Train.X, rows, want); err != nil {
		t.Fatal(err)
	}
	var wg sync.WaitGroup
	for g := range 8 {
		wg.Add(1)
		go func() {
			defer wg.Done()
			w := c.NewWork()
			for r := g; r < rows; r += 3 {
				a, err := c.ClassifyVector(w, split.Train.X[r*c.Features():(r+1)*c.Features()])
				if err != nil {
					t.Error(err)
					return
				}
				for j := range a.Scores {
					if a.Scores[j] != want[r].Scores[j] {
						t.Errorf("goroutine %d row %d: %v, serially %v", g, r, a.Scores, want[r].Scores)
						return
					}
				}
			}
		}()
	}
	wg.Wait()
}

// TestStdlibOnly asserts the import graph the package doc promises: the
// standard library, data/prep, the model file schema and the shared
// arithmetic, nothing else (no gonum, no training code).
func TestStdlibOnly(t *testing.T) {
	gobin, err := exec.LookPath("go")
	if err != nil {
		t.Skip("go not on PATH: cannot list the import graph")
	}
	for _, self := range []string{"github.com/rhomb/rhomb/net/classify", "github.com/rhomb/rhomb/net/classify/endpoint", "github.com/rhomb/rhomb/examples/edge"} {
		out, err := exec.Command(gobin, "list", "-deps", "-f", "{{if not .Standard}}{{.ImportPath}}{{end}}", self).CombinedOutput()
		if err != nil {
			t.Fatalf("go list: %v\n%s", err, out)
		}
		// net/schema (with internal/container) is the model
		// file format and internal/arith the forward pass's arithmetic,
		// both shared with the training library; they are standard-library
		// only, which this list checks too, since -deps lists their
		// imports.
		allowed := map[string]bool{self: true, "github.com/rhomb/rhomb/data/prep": true, "github.com/rhomb/rhomb/internal/container": true,
			"github.com/rhomb/rhomb/net/classify": true, "github.com/rhomb/rhomb/net/schema": true, "github.com/rhomb/rhomb/internal/arith": true}
		deps := strings.Fields(string(out))
		for _, p := range deps {
			if !allowed[p] {
				t.Errorf("%s imports %s; it may import only the standard library, data/prep, the model file schema, internal/arith and classify", self, p)
			}
		}
		if len(deps) < 2 {
			t.Fatalf("go list printed too little for %s:\n%s", self, out)
		}
	}
}
