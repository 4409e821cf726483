package main

import (
	"fmt"
	"io"
	"math"
	"strings"
	"time"
	"unicode/utf8"

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

// figures are the epoch's figures for the bar, most wanted first, in
// ASCII: every character one column wide on every terminal (ρ is of
// ambiguous width, two columns in East Asian locales, UAX #11).
func (l epochLine) figures() []string {
	f := []string{fmt.Sprintf("loss %.5f", l.loss)}
	if !math.IsNaN(l.valAcc) {
		f = append(f, fmt.Sprintf("valid %.4f", l.valAcc))
	}
	f = append(f, fmt.Sprintf("train %.4f", l.trainAcc))
	if l.best {
		f = append(f, "best")
	}
	f = append(f, fmt.Sprintf("rho %.4g", l.rho))
	if !math.IsNaN(l.rhoStar) {
		f = append(f, fmt.Sprintf("rho* %.4g", l.rhoStar))
	}
	return append(f, fmt.Sprintf("min margin %+.4f", l.minMargin))
}

// reporter shows training progress: a bar with the time left on a
// terminal, one plain line per epoch otherwise, nothing when quiet.
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

// barState is what one frame of the bar shows.
type barState struct {
	done, steps int
	elapsed     time.Duration
	line        *epochLine // the last epoch's figures; nil before the first
}

// Bar sizes, in columns. A bar narrower than minBar shows too little to
// read; one wider than maxBar takes room from the figures for nothing
// (common practice, no source).
const (
	minBar = 10
	maxBar = 40
)

// barFrame lays out one frame in at most width-1 columns (the last column
// is left free: writing into it makes some terminals wrap at once, and a
// wrapped frame is not overwritten by the next, so the frames scroll). It
// holds, in this order and as far as they fit: the epoch, the bar, the
// percentage, the time left, then the figures of the last epoch, most
// wanted first. It is all ASCII, one column a character.
func barFrame(width int, s barState) string {
	room := width - 1
	pct := 0
	if s.steps > 0 {
		pct = min(100, 100*s.done/s.steps)
	}
	head := "training"
	if s.line != nil {
		head = fmt.Sprintf("epoch %d/%d", s.line.epoch, s.line.epochs)
	}
	tail := []string{fmt.Sprintf("%3d%%", pct)}
	if left, ok := timeLeft(s); ok {
		tail = append(tail, left)
	}
	var figs []string
	if s.line != nil {
		figs = s.line.figures()
	}
	// The bar's share first: the head, the brackets, the percentage.
	used := cols(head) + 1 + 2 + minBar + 1 + cols(tail[0])
	if used > room {
		// Too narrow for words: the bar and the percentage alone.
		bar := room - 2 - 1 - cols(tail[0])
		if bar < 1 {
			return tail[0][:min(len(tail[0]), max(room, 0))]
		}
		return drawBar(bar, s) + " " + tail[0]
	}
	parts := []string{tail[0]}
	for _, t := range tail[1:] {
		if used+2+cols(t) <= room {
			parts = append(parts, t)
			used += 2 + cols(t)
		}
	}
	sep := "  |  "
	var shown []string
	for _, f := range figs {
		extra := 2 + cols(f)
		if len(shown) == 0 {
			extra = cols(sep) + cols(f)
		}
		if used+extra > room {
			break // keep the order: a later figure never jumps an earlier one
		}
		shown = append(shown, f)
		used += extra
	}
	bar := min(maxBar, minBar+room-used)
	line := head + " " + drawBar(bar, s) + " " + strings.Join(parts, "  ")
	if len(shown) > 0 {
		line += sep + strings.Join(shown, "  ")
	}
	return line
}

// drawBar draws a bar of n columns, brackets included.
func drawBar(n int, s barState) string {
	inner := max(n-2, 0)
	if n < 3 {
		inner = n
	}
	full := 0
	if s.steps > 0 {
		full = min(inner, inner*s.done/s.steps)
	}
	b := strings.Repeat("=", full) + strings.Repeat(" ", inner-full)
	if full > 0 && full < inner {
		b = b[:full-1] + ">" + b[full:]
	}
	if n < 3 {
		return b
	}
	return "[" + b + "]"
}

// timeLeft estimates the time to the last step from the pace so far.
func timeLeft(s barState) (string, bool) {
	if s.done == 0 || s.steps <= s.done || s.elapsed <= 0 {
		return "", false
	}
	left := time.Duration(float64(s.elapsed) / float64(s.done) * float64(s.steps-s.done))
	return clock(left) + " left", true
}

// clock writes d as h:mm:ss or m:ss.
func clock(d time.Duration) string {
	sec := int(d.Round(time.Second) / time.Second)
	if sec >= 3600 {
		return fmt.Sprintf("%d:%02d:%02d", sec/3600, sec/60%60, sec%60)
	}
	return fmt.Sprintf("%d:%02d", sec/60, sec%60)
}

// cols is the width of s in columns: the bar writes ASCII only.
func cols(s string) int { return utf8.RuneCountInString(s) }

// barReporter redraws one line on a terminal: each frame begins with a
// carriage return and is padded with spaces over the last one, so it
// needs no terminal control sequences. Notes are written above it; at
// the end the last frame stays and the line is ended, so what is printed
// next starts on a line of its own.
type barReporter struct {
	w     io.Writer
	width func() int // the terminal's columns, asked at every frame
	now   func() time.Time
	every time.Duration // the most frames a step draws: one per every

	start, drawn time.Time
	st           barState
	line         epochLine
	shown        int // columns of the frame on screen; 0 when none
	done         bool
}

// redraw is how often steps redraw the bar; epochs and notes always do.
const redraw = 100 * time.Millisecond

func newBar(w io.Writer, steps int, width func() int) *barReporter {
	r := &barReporter{w: w, width: width, now: time.Now, every: redraw}
	r.start = r.now()
	r.st.steps = steps
	return r
}

func (r *barReporter) draw() {
	if r.done {
		return
	}
	now := r.now()
	r.drawn = now
	r.st.elapsed = now.Sub(r.start)
	f := barFrame(r.width(), r.st)
	pad := max(r.shown-cols(f), 0)
	fmt.Fprintf(r.w, "\r%s%s", f, strings.Repeat(" ", pad))
	if pad > 0 {
		fmt.Fprintf(r.w, "\r%s", f)
	}
	r.shown = cols(f)
}

func (r *barReporter) step() {
	r.st.done++
	if r.now().Sub(r.drawn) >= r.every {
		r.draw()
	}
}

func (r *barReporter) epoch(l epochLine) {
	r.line = l
	r.st.line = &r.line
	r.draw()
}

func (r *barReporter) note(s string) {
	if r.shown > 0 {
		fmt.Fprintf(r.w, "\r%s\r", strings.Repeat(" ", r.shown))
		r.shown = 0
	}
	fmt.Fprintf(r.w, "note: %s\n", s)
	r.draw()
}

func (r *barReporter) finish() {
	if r.done {
		return
	}
	r.draw()
	r.done = true
	fmt.Fprintln(r.w)
}

func newReporter(e *env, quiet bool, steps int) reporter {
	switch {
	case quiet:
		return quietReporter{}
	case e.terminal:
		width := e.width
		if width == nil {
			width = func() int { return 80 }
		}
		return newBar(e.stderr, steps, width)
	}
	return lineReporter{e.stderr}
}

// stepTracker keeps the latest step diagnostics for the epoch line.
type stepTracker struct{ rho, rhoStar float64 }

func (s *stepTracker) observe(i *optim.StepInfo) { s.rho, s.rhoStar = i.Rho, i.RhoStar }
