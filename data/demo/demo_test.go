package demo

import (
	"bytes"
	"flag"
	"os"
	"testing"
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
	if s.Train.Rows != 900 || s.Test.Rows != DefaultRows-900 || s.Train.Features != 8 || s.Train.Outputs != 4 {
		t.Fatalf("split %d/%d rows, %d features, %d outputs", s.Train.Rows, s.Test.Rows, s.Train.Features, s.Train.Outputs)
	}
	if err := s.Train.Validate(); err != nil {
		t.Fatal(err)
	}
	// Standardized with the training rows' own statistics: each training
	// column has mean 0 and sample deviation 1, to float32 rounding
	// (900 values of size ~1: sums good to ~1e-5).
	for j := range s.Train.Features {
		var sum, ssq float64
		for r := range s.Train.Rows {
			v := float64(s.Train.X[r*8+j])
			sum += v
			ssq += v * v
		}
		mean := sum / 900
		sd := (ssq - 900*mean*mean) / 899
		if mean > 1e-5 || mean < -1e-5 || sd < 1-1e-4 || sd > 1+1e-4 {
			t.Errorf("column %s: mean %v, variance %v after standardizing", s.Features[j], mean, sd)
		}
	}
	if _, err := Pumps[float64](0); err == nil {
		t.Error("trainRows 0 accepted")
	}
}
