package sweep

import (
	"bytes"
	"context"
	"errors"
	"strings"
	"testing"
)

func TestWriteTable(t *testing.T) {
	gr := &Grid{Rho0: []float64{0.1, 1}}
	rs, _ := Run(context.Background(), gr.Points(), func(_ context.Context, p Point) (Result, error) {
		r := NaNResult(p)
		if p.Rho0 == 1 {
			r.ValAccuracy, r.ValScore, r.TrainAccuracy, r.MarginMin, r.MarginMean, r.Bound, r.Rho, r.Status = 0.95, 0.95, 1, 0.0123456, 0.5, 12.345, 2.5, "finished"
			return r, nil
		}
		return r, errors.New("loss is NaN")
	}, 1)
	var b bytes.Buffer
	if err := WriteTable(&b, Rank(rs), 0); err != nil {
		t.Fatal(err)
	}
	lines := strings.Split(strings.TrimRight(b.String(), "\n"), "\n")
	if len(lines) != 3 {
		t.Fatalf("%d lines, want a header and 2 rows:\n%s", len(lines), b.String())
	}
	// Right-aligned columns: compare the fields.
	for i, want := range [][]string{
		{"rank", "point", "ρ0", "λ", "η", "T", "seed", "validation", "train", "min", "margin", "mean", "margin", "bound", "ρ", "status"},
		{"1", "1", "1", "0", "0", "0", "0", "0.9500", "1.0000", "0.01235", "0.5", "12.345", "2.5", "finished"},
		{"2", "0", "0.1", "0", "0", "0", "0", "-", "-", "-", "-", "-", "-", "failed:", "loss", "is", "NaN"},
	} {
		if got := strings.Fields(lines[i]); strings.Join(got, " ") != strings.Join(want, " ") {
			t.Errorf("line %d: %q, want fields %q", i, lines[i], want)
		}
	}
	b.Reset()
	WriteTable(&b, Rank(rs), 1)
	if !strings.Contains(b.String(), "(1 more runs not shown)") {
		t.Errorf("top 1 of 2 does not say one was left out:\n%s", b.String())
	}
}
