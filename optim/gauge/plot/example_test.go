package plot_test

import (
	"fmt"
	"io"
	"math"

	"github.com/rhomb/rhomb/optim/gauge"
	"github.com/rhomb/rhomb/optim/gauge/plot"
)

// Draw the figures of a recorded run and write them as PNG. The history
// here is a hand-made one of three epochs that measured only the trainer's
// values and the error, so the figures that need margins, collapse or
// spectra are left out.
func ExampleAll() {
	h := &gauge.History{}
	for e, v := range []struct{ loss, rho, star, trainErr, testErr float64 }{
		{0.9, 0.2, 1.1, 0.40, 0.42}, {0.5, 0.8, 1.2, 0.20, 0.24}, {0.3, 1.1, 1.2, 0.10, 0.15},
	} {
		h.Epochs = append(h.Epochs, gauge.Record{Epoch: e, Steps: 10 * (e + 1), Loss: v.loss, Rho: v.rho,
			RhoStarMean: v.star, GapMean: math.Abs(v.rho-v.star) / v.star, TrainError: v.trainErr, TestError: v.testErr})
	}
	figs, err := plot.All(h, plot.Options{Heldout: "validation"})
	if err != nil {
		fmt.Println(err)
		return
	}
	for _, f := range figs {
		if err := f.Encode(io.Discard, plot.PNG); err != nil { // or f.Save(dir, plot.SVG)
			fmt.Println(err)
			return
		}
		w, h := f.PixelSize()
		fmt.Printf("%-6s %d×%d: %s\n", f.Name, w, h, f.Title)
	}
	// Output:
	// error  605×340: Classification error per epoch
	// loss   605×340: Loss per epoch
	// scale  605×340: Scale ρ against its equilibrium ρ*
}
