package main

import (
	"fmt"
	"io"
	"math"
	"time"

	"github.com/schollz/progressbar/v3"

	"github.com/rhomb/rhomb/optim"
)

// epochLine is what the tool reports after every epoch.
type epochLine struct {
	epoch, epochs int
	loss          float64
	trainAcc      float64
	valAcc        float64 // NaN without validation rows
	rho, rhoStar  float64 // ρ* NaN for losses without a closed form
	minMargin     float64
	elapsed       time.Duration
	best          bool // the best validation score so far: the epoch train keeps
}

func (l epochLine) String() string {
	s := fmt.Sprintf("epoch %d/%d  loss %.5f  train %.4f", l.epoch, l.epochs, l.loss, l.trainAcc)
	if !math.IsNaN(l.valAcc) {
		s += fmt.Sprintf("  valid %.4f", l.valAcc)
	}
	s += fmt.Sprintf("  ρ %.4g", l.rho)
	if !math.IsNaN(l.rhoStar) {
		s += fmt.Sprintf("  ρ* %.4g", l.rhoStar)
	}
	s += fmt.Sprintf("  min margin %+.4f", l.minMargin)
	if l.best {
		s += "  best"
	}
	return s
}

// reporter shows training progress: a bar with ETA on a terminal, one
// plain line per epoch otherwise, nothing when quiet.
type reporter interface {
	step()
	epoch(l epochLine)
	// note shows a decision the training procedure took on its own.
	note(s string)
	finish()
}

type quietReporter struct{}

func (quietReporter) step()           {}
func (quietReporter) epoch(epochLine) {}
func (quietReporter) note(string)     {}
func (quietReporter) finish()         {}

type lineReporter struct{ w io.Writer }

func (r lineReporter) step() {}
func (r lineReporter) epoch(l epochLine) {
	fmt.Fprintf(r.w, "%s  (%s)\n", l, l.elapsed.Round(time.Millisecond))
}
func (r lineReporter) note(s string) { fmt.Fprintf(r.w, "note: %s\n", s) }
func (r lineReporter) finish()       {}

type barReporter struct {
	w   io.Writer
	bar *progressbar.ProgressBar
}

func newBar(w io.Writer, steps int) *barReporter {
	return &barReporter{w: w, bar: progressbar.NewOptions(steps,
		progressbar.OptionSetWriter(w),
		progressbar.OptionSetDescription("training"),
		progressbar.OptionShowCount(),
		progressbar.OptionSetPredictTime(true),
		progressbar.OptionSetElapsedTime(true),
		progressbar.OptionThrottle(100*time.Millisecond),
		progressbar.OptionFullWidth(),
		progressbar.OptionOnCompletion(func() { fmt.Fprintln(w) }),
	)}
}

func (r *barReporter) step()             { r.bar.Add(1) }
func (r *barReporter) epoch(l epochLine) { r.bar.Describe(l.String()) }
func (r *barReporter) finish()           { r.bar.Finish() }
func (r *barReporter) note(s string) {
	r.bar.Clear()
	fmt.Fprintf(r.w, "note: %s\n", s)
}

func newReporter(e *env, quiet bool, steps int) reporter {
	switch {
	case quiet:
		return quietReporter{}
	case e.terminal:
		return newBar(e.stderr, steps)
	}
	return lineReporter{e.stderr}
}

// stepTracker keeps the latest step diagnostics for the epoch line.
type stepTracker struct{ rho, rhoStar float64 }

func (s *stepTracker) observe(i *optim.StepInfo) { s.rho, s.rhoStar = i.Rho, i.RhoStar }
