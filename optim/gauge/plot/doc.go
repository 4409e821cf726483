// Package plot draws a training run as gauge recorded it: figures made
// with gonum.org/v1/plot, written as PNG or SVG.
//
// Each builder takes a *gauge.History (and Options for what the history
// does not hold: the held-out set's name and loss, a measurement before
// training) and returns a *Figure, or *ErrNoData when the run did not
// measure what the figure shows:
//
//	Error            training and held-out error per epoch, in % of rows
//	Loss             training and held-out loss per epoch
//	Scale            ρ with ρ* over the steps, and where equilibrium held
//	Margins          mean and minimum normalized margin per epoch
//	MarginHistogram  the training margins at the start and at the end
//	Collapse         NC1–NC3 (log scale) and NC4 per epoch
//	Spectra          singular values of every V_k at the start and the end
//
// All makes every figure the history allows, in that order; package
// report puts them into an HTML page.
//
// One figure is drawn from other data than a History: Reliability, the
// reliability diagram of a model's calibrated probabilities (Calibration:
// the bins of the top-class probability on labelled rows, with the
// uncalibrated map's beside them), whose caption states the expected
// calibration error (ECE). Points below its diagonal mean the model is
// overconfident there.
//
// # Reading the figures
//
// Every axis says what it measures and in which unit: epochs completed,
// steps (minibatch updates), % of rows, normalized margins in output units
// of the network scaled to ρ = 1, dimensionless scales and collapse
// measures. A value that was not measured (NaN in the History) leaves a
// gap rather than a point at zero. Colours are the Okabe–Ito palette, which
// stays readable to colour-blind readers; training curves are solid and
// held-out or "start" curves dashed, so the figures also read in grey.
//
// PNG output is rendered at DPI = 192, twice the 96 pixels per inch that
// browsers lay pages out in, so figures stay sharp on high-density
// screens; SVG output embeds its fonts. Fonts are Liberation Sans, which
// gonum.org/v1/plot carries, so figures look the same on every machine
// and need no fonts installed.
//
// # The README's figures
//
// docs/figures holds the figures of the default demo run, made with
//
//	go test ./optim/gauge/report -run TestREADMEFigures -update
package plot
