package sweep

import (
	"bytes"
	"context"
	"errors"
	"image/png"
	"math"
	"os"
	"path/filepath"
	"strings"
	"testing"
)

// TestCells checks the averaging by hand: on a 2 × 2 grid of (ρ0, λ) with
// two seeds, each cell is the mean of its two runs' accuracies, a failed
// run is left out, and a cell with no successful run is NaN.
func TestCells(t *testing.T) {
	axes := Axes{Rho0: []float64{0.1, 1}, WeightDecay: []float64{0, 0.01}, LearningRate: []float64{0.05}, Temperature: []float64{0}, Seeds: []uint64{1, 2}}
	pts := axes.Points() // order: (ρ0, λ, seed) = (0.1,0,1) (0.1,0,2) (0.1,0.01,1) (0.1,0.01,2) (1,0,1) …
	acc := []float64{0.5, 0.75, 1, 0, 0.25, 0.25, 0.9, 0.1}
	rs := make([]Result, len(pts))
	for k, p := range pts {
		rs[k] = NaNResult(p)
		rs[k].ValAccuracy, rs[k].ValScore = acc[k], acc[k]
	}
	rs[5].Err = "failed"                  // cell (1, 0) keeps only run 4
	rs[6].Err, rs[7].Err = "fail", "fail" // cell (1, 0.01) has none
	c := Cells(axes, rs, nil)
	want := [][]float64{{(0.5 + 0.75) / 2, (1 + 0) / 2.0}, {0.25, math.NaN()}}
	for i := range want {
		for j := range want[i] {
			if g, w := c[i][j], want[i][j]; g != w && !(math.IsNaN(g) && math.IsNaN(w)) {
				t.Errorf("cell (ρ0=%v, λ=%v) = %v, want %v", axes.Rho0[i], axes.WeightDecay[j], g, w)
			}
		}
	}
}

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

// TestSaveHeatMap writes the figure as PNG and SVG and checks that the
// PNG decodes to the documented size (1.1 inch per ρ0 cell + 1.5 inch,
// 0.6 per λ cell + 1.2, at least 5 × 3.5 inches; gonum's PNG canvas draws
// at vgimg.DefaultDPI = 96 dots per inch — so 3 × 2 cells give 5 × 3.5
// inches, 480 × 336 pixels).
func TestSaveHeatMap(t *testing.T) {
	gr := &Grid{Rho0: []float64{0.01, 0.1, 1}, WeightDecay: []float64{0, 1e-3}, Seeds: []uint64{1, 2}}
	rs, _ := Run(context.Background(), gr.Points(), fake, 1)
	dir := t.TempDir()
	for _, ext := range []string{".png", ".svg"} {
		path := filepath.Join(dir, "heat"+ext)
		if err := SaveHeatMap(path, gr.Axes(), rs, HeatMapOptions{}); err != nil {
			t.Fatal(err)
		}
		b, err := os.ReadFile(path)
		if err != nil {
			t.Fatal(err)
		}
		if ext == ".svg" {
			if !bytes.Contains(b, []byte("<svg")) || !bytes.Contains(b, []byte("weight decay")) {
				t.Errorf("the SVG lacks its root element or the λ axis label")
			}
			continue
		}
		cfg, err := png.DecodeConfig(bytes.NewReader(b))
		if err != nil {
			t.Fatal(err)
		}
		if cfg.Width != 480 || cfg.Height != 336 {
			t.Errorf("PNG is %d × %d pixels, want 480 × 336", cfg.Width, cfg.Height)
		}
	}
	// Every run failed: the figure is still drawn (grey cells).
	for i := range rs {
		rs[i].Err = "failed"
	}
	if err := SaveHeatMap(filepath.Join(dir, "failed.png"), gr.Axes(), rs, HeatMapOptions{}); err != nil {
		t.Errorf("all failed: %v", err)
	}
}
