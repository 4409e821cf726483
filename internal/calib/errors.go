package calib

import (
	"errors"
	"math"
)

// The kinds of *Error, for errors.Is.
var (
	// ErrTooFewRows: a fit was given fewer rows than it needs.
	ErrTooFewRows = errors.New("too few validation rows")
	// ErrOneClass: Platt scaling was given rows of one class only.
	ErrOneClass = errors.New("only one class among the validation rows")
	// ErrNotFinite: a score is NaN or infinite.
	ErrNotFinite = errors.New("score is NaN or infinite")
	// ErrLabel: a label is not a class index 0..k−1.
	ErrLabel = errors.New("label out of range")
)

// Error is a problem with the validation rows a fit was given. Row is the
// offending row (from 0), or −1 when the problem is with the rows as a
// whole. Msg says what is wrong and what to do, in users' words.
type Error struct {
	Kind error // ErrTooFewRows, ErrOneClass, ErrNotFinite or ErrLabel
	Row  int
	Msg  string
}

func (e *Error) Error() string { return "calib: " + e.Msg }
func (e *Error) Unwrap() error { return e.Kind }

func finite(v float64) bool { return !math.IsNaN(v) && !math.IsInf(v, 0) }
