package plot

import (
	"bytes"
	"context"
	"image/png"
	"math"
	"os"
	"path/filepath"
	"testing"

	"github.com/rhomb/rhomb/optim/sweep"
)

// fakeRun stands in for training in the heat map's tests: a result whose
// validation score depends on the point (invented figures; the tests check
// the drawing and the averaging, not the numbers).
func fakeRun(_ context.Context, p sweep.Point) (sweep.Result, error) {
	r := sweep.NaNResult(p)
	r.ValAccuracy = float64(p.Index%4) / 4
	r.ValScore, r.Metric = r.ValAccuracy, "accuracy"
	r.Status = "finished"
	return r, nil
}

// TestHeatMapCells checks the averaging by hand: on a 2 × 2 grid of (ρ0, λ) with
// two seeds, each cell is the mean of its two runs' accuracies, a failed
// run is left out, and a cell with no successful run is NaN.
func TestHeatMapCells(t *testing.T) {
	axes := sweep.Axes{Rho0: []float64{0.1, 1}, WeightDecay: []float64{0, 0.01}, LearningRate: []float64{0.05}, Temperature: []float64{0}, Seeds: []uint64{1, 2}}
	pts := axes.Points() // order: (ρ0, λ, seed) = (0.1,0,1) (0.1,0,2) (0.1,0.01,1) (0.1,0.01,2) (1,0,1) …
	acc := []float64{0.5, 0.75, 1, 0, 0.25, 0.25, 0.9, 0.1}
	rs := make([]sweep.Result, len(pts))
	for k, p := range pts {
		rs[k] = sweep.NaNResult(p)
		rs[k].ValAccuracy, rs[k].ValScore = acc[k], acc[k]
	}
	rs[5].Err = "failed"                  // cell (1, 0) keeps only run 4
	rs[6].Err, rs[7].Err = "fail", "fail" // cell (1, 0.01) has none
	c := cells(axes, rs, nil)
	want := [][]float64{{(0.5 + 0.75) / 2, (1 + 0) / 2.0}, {0.25, math.NaN()}}
	for i := range want {
		for j := range want[i] {
			if g, w := c[i][j], want[i][j]; g != w && !(math.IsNaN(g) && math.IsNaN(w)) {
				t.Errorf("cell (ρ0=%v, λ=%v) = %v, want %v", axes.Rho0[i], axes.WeightDecay[j], g, w)
			}
		}
	}
}

// TestSaveHeatMap writes the figure as PNG and SVG and checks that the
// PNG decodes to the documented size (1.1 inch per ρ0 cell + 1.5 inch,
// 0.6 per λ cell + 1.2, at least 5 × 3.5 inches; gonum's PNG canvas draws
// at vgimg.DefaultDPI = 96 dots per inch — so 3 × 2 cells give 5 × 3.5
// inches, 480 × 336 pixels).
func TestSaveHeatMap(t *testing.T) {
	gr := &sweep.Grid{Rho0: []float64{0.01, 0.1, 1}, WeightDecay: []float64{0, 1e-3}, Seeds: []uint64{1, 2}}
	rs, _ := sweep.Run(context.Background(), gr.Points(), fakeRun, 1)
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
