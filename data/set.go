package data

import (
	"fmt"
	"math"

	"github.com/rhomb/rhomb/internal/kern"
)

// Float is the set of element types rhomb computes in: float32 or float64.
type Float = kern.Float

// Set is a labelled dataset held in memory, ready for training: features
// and targets as contiguous row-major matrices.
//
// Targets follow the square-loss encodings: one column with ±1 for two
// classes, or one-hot rows (1 for the class, 0 elsewhere) for more.
type Set[T Float] struct {
	X        []T // Rows×Features
	Y        []T // Rows×Outputs
	Rows     int
	Features int
	Outputs  int
	// Classes names the classes in the order of the output columns; for
	// one ±1 column, Classes[0] is the class encoded −1 and Classes[1] +1.
	// May be nil.
	Classes []string
}

// RowError reports a bad value in a Set.
type RowError struct {
	Row, Column int    // from 0
	Field       string // "X" or "Y"
	Value       float64
	Err         string
}

func (e *RowError) Error() string {
	return fmt.Sprintf("data: row %d, %s column %d: value %v: %s", e.Row, e.Field, e.Column, e.Value, e.Err)
}

// Validate checks the sizes and that every value is finite.
func (s *Set[T]) Validate() error {
	if s.Rows < 1 || s.Features < 1 || s.Outputs < 1 {
		return fmt.Errorf("data: set has %d rows, %d features, %d outputs; each must be at least 1", s.Rows, s.Features, s.Outputs)
	}
	if len(s.X) != s.Rows*s.Features || len(s.Y) != s.Rows*s.Outputs {
		return fmt.Errorf("data: set holds %d feature and %d target values, want %d×%d and %d×%d", len(s.X), len(s.Y), s.Rows, s.Features, s.Rows, s.Outputs)
	}
	for i, v := range s.X {
		if f := float64(v); math.IsNaN(f) || math.IsInf(f, 0) {
			return &RowError{Row: i / s.Features, Column: i % s.Features, Field: "X", Value: f, Err: "not finite; impute or drop missing values before training"}
		}
	}
	for i, v := range s.Y {
		if f := float64(v); math.IsNaN(f) || math.IsInf(f, 0) {
			return &RowError{Row: i / s.Outputs, Column: i % s.Outputs, Field: "Y", Value: f, Err: "not finite"}
		}
	}
	return nil
}

// Class returns the class index of row r: for one ±1 column, 1 if the
// target is positive and 0 otherwise; for one-hot rows, the column of the
// largest target.
func (s *Set[T]) Class(r int) int { return ClassOf(s.Y[r*s.Outputs : (r+1)*s.Outputs]) }

// ClassOf returns the class index encoded by one target row; see Set.Class.
func ClassOf[T Float](y []T) int {
	if len(y) == 1 {
		if y[0] > 0 {
			return 1
		}
		return 0
	}
	best := 0
	for j, v := range y {
		if v > y[best] {
			best = j
		}
	}
	return best
}

// Subset returns a new Set holding the given rows, in that order.
func (s *Set[T]) Subset(rows []int) *Set[T] {
	out := &Set[T]{Rows: len(rows), Features: s.Features, Outputs: s.Outputs, Classes: s.Classes,
		X: make([]T, 0, len(rows)*s.Features), Y: make([]T, 0, len(rows)*s.Outputs)}
	for _, r := range rows {
		out.X = append(out.X, s.X[r*s.Features:(r+1)*s.Features]...)
		out.Y = append(out.Y, s.Y[r*s.Outputs:(r+1)*s.Outputs]...)
	}
	return out
}

// Labels returns the class index of every row (see Class).
func (s *Set[T]) Labels() []int {
	out := make([]int, s.Rows)
	for r := range out {
		out[r] = s.Class(r)
	}
	return out
}
