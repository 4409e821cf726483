package report_test

import (
	"bytes"
	"context"
	"flag"
	"github.com/rhomb/rhomb/internal/demorun"
	"image/png"
	"math"
	"os"
	"path/filepath"
	"testing"

	"github.com/rhomb/rhomb/optim/gauge/plot"
)

var update = flag.Bool("update", false, "rewrite the README's figures in docs/figures from a demo run")

// figuresDir is docs/figures at the repository's root, from this package's
// directory (where go test runs).
var figuresDir = filepath.Join("..", "..", "..", "docs", "figures")

// TestREADMEFigures keeps the README's figures: with -update,
//
//	go test ./optim/gauge/report -run TestREADMEFigures -update
//
// trains the default demo run (report.Demo with zero options: 30 epochs,
// seed 1) and writes every figure as docs/figures/NAME.png. Without
// -update it checks that each committed figure is there and is a PNG of
// the size the figure's nominal size gives at plot.DPI, so a figure
// renamed or resized in code without refreshing the files fails. It
// does not compare pixels: training bits may differ between builds
// (assembly or pure-Go kernels), and the figures need only show a run.
func TestREADMEFigures(t *testing.T) {
	if *update {
		r, err := demorun.Run(context.Background(), demorun.Options{})
		if err != nil {
			t.Fatal(err)
		}
		figs, err := plot.All(r.History, plot.Options{Heldout: r.Heldout, HeldoutLoss: r.HeldoutLoss, Start: r.Start})
		if err != nil {
			t.Fatal(err)
		}
		if err := os.MkdirAll(figuresDir, 0o755); err != nil {
			t.Fatal(err)
		}
		for _, f := range figs {
			path, err := f.Save(figuresDir, plot.PNG)
			if err != nil {
				t.Fatal(err)
			}
			t.Logf("wrote %s", path)
		}
	}
	// The sizes come from the builders; the History only needs to hold
	// every measure for All to make every figure.
	r, _ := demoReport(t)
	figs, err := plot.All(r.History, plot.Options{HeldoutLoss: r.HeldoutLoss, Start: r.Start})
	if err != nil {
		t.Fatal(err)
	}
	for _, f := range figs {
		path := filepath.Join(figuresDir, f.Name+".png")
		b, err := os.ReadFile(path)
		if err != nil {
			t.Errorf("%v (refresh with: go test ./optim/gauge/report -run TestREADMEFigures -update)", err)
			continue
		}
		c, err := png.DecodeConfig(bytes.NewReader(b))
		if err != nil {
			t.Errorf("%s: %v", path, err)
			continue
		}
		// vg lengths are in points, 72 to the inch.
		w := int(math.Round(float64(f.Width) / 72 * plot.DPI))
		h := int(math.Round(float64(f.Height) / 72 * plot.DPI))
		if c.Width != w || c.Height != h {
			t.Errorf("%s is %d×%d; the figure is now %d×%d (refresh with -update)", path, c.Width, c.Height, w, h)
		}
	}
}
