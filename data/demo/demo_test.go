package demo

import (
	"bytes"
	"flag"
	"os"
	"testing"

	"github.com/rhomb/rhomb/data"
)

var update = flag.Bool("update", false, "rewrite pumps.csv from the generator")

// TestEmbeddedFileIsGenerated keeps pumps.csv equal to the generator's
// output, so the documented model is the data's true description.
func TestEmbeddedFileIsGenerated(t *testing.T) {
	var b bytes.Buffer
	if err := Generate(&b, DefaultSeed, DefaultRows); err != nil {
		t.Fatal(err)
	}
	if *update {
		if err := os.WriteFile("pumps.csv", b.Bytes(), 0o644); err != nil {
			t.Fatal(err)
		}
	}
	if !bytes.Equal(b.Bytes(), CSV) {
		t.Fatal("pumps.csv differs from Generate(DefaultSeed, DefaultRows); run go generate ./data/demo")
	}
}

func TestPumps(t *testing.T) {
	s, err := Pumps[float32](900)
	if err != nil {
		t.Fatal(err)
	}
	// 3 sites one-hot, 8 numeric columns.
	if s.Train.Rows != 900 || s.Test.Rows != DefaultRows-900 || s.Train.Features != 11 || s.Train.Outputs != 4 {
		t.Fatalf("split %d/%d rows, %d features, %d outputs", s.Train.Rows, s.Test.Rows, s.Train.Features, s.Train.Outputs)
	}
	if err := s.Train.Validate(); err != nil {
		t.Fatal(err)
	}
	missing := 0
	for _, c := range s.Table.Columns {
		for _, m := range c.Missing {
			if m {
				missing++
			}
		}
	}
	// 3% and 1% of 1,200 rows are expected to be missing: 48 cells, with a
	// binomial standard deviation of about 7; the embedded file has 36
	// (29 temperatures, 7 suction pressures).
	if missing < 20 || missing > 80 {
		t.Errorf("%d missing cells, want about 48", missing)
	}
	// Standardized with the training rows' own statistics: over the
	// observed training values each numeric feature has mean 0 and sample
	// deviation 1 (to float32 rounding: 900 values of size ~1 sum to within
	// ~1e-5), and imputed cells sit exactly at 0, the mean.
	names := s.Pipeline.FeatureNames()
	for j, name := range names {
		c := s.Table.Column(name)
		if c == nil || c.Kind != data.Numeric {
			continue
		}
		var sum, ssq float64
		n := 0
		for r := range 900 {
			v := float64(s.Train.X[r*11+j])
			if c.Missing[r] {
				if v != 0 {
					t.Errorf("%s row %d: imputed feature %v, want 0", name, r, v)
				}
				continue
			}
			sum += v
			ssq += v * v
			n++
		}
		mean := sum / float64(n)
		sd := (ssq - float64(n)*mean*mean) / float64(n-1)
		if mean > 1e-5 || mean < -1e-5 || sd < 1-1e-4 || sd > 1+1e-4 {
			t.Errorf("column %s: mean %v, variance %v after standardizing", name, mean, sd)
		}
	}
	if _, err := Pumps[float64](0); err == nil {
		t.Error("trainRows 0 accepted")
	}
}
