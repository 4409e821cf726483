package data

import (
	"errors"
	"fmt"
	"math"

	"github.com/rhomb/rhomb/data/prep"
)

// ClassIndex returns the index in classes of every label. classes fixes the
// order of the output columns (see Set.Classes), so pass the same classes
// for the training, validation and test rows; Table.Classes gives the
// sorted labels of a table. A label not in classes is an error wrapping
// ErrUnknownCategory that names the label and its row.
func ClassIndex(labels []string, classes []string) ([]int, error) {
	index, err := classMap(classes)
	if err != nil {
		return nil, err
	}
	out := make([]int, len(labels))
	for r, l := range labels {
		c, ok := index[l]
		if !ok {
			return nil, fmt.Errorf("data: %w", unknownLabel(r, l, classes))
		}
		out[r] = c
	}
	return out, nil
}

func classMap(classes []string) (map[string]int, error) {
	if len(classes) == 0 {
		return nil, errors.New("data: no classes given")
	}
	index := make(map[string]int, len(classes))
	for i, c := range classes {
		if _, dup := index[c]; dup {
			return nil, fmt.Errorf("data: class %q is listed twice; each class names one output column", c)
		}
		index[c] = i
	}
	return index, nil
}

func unknownLabel(row int, label string, classes []string) error {
	known := fmt.Sprintf("%q", classes)
	if len(classes) > 10 {
		known = fmt.Sprintf("%q … (%d classes)", classes[:10], len(classes))
	}
	return fmt.Errorf("row %d: label %q is not one of the classes %s; fit on rows that hold it, or leave the row out: %w", row, label, known, ErrUnknownCategory)
}

// Encode builds the training set of the given rows of t (nil: all rows, in
// order): features from the fitted pipeline p (p.ApplyColumns, so held-out
// rows are encoded with the training rows' statistics), targets in the
// square-loss encodings of Set. With two classes there is one output
// column, −1 for classes[0] and +1 for classes[1]; with more, one-hot rows
// in the order of classes. Set.Classes is a copy of classes.
//
// Errors: fewer than two classes (ErrOneClass), a label not in classes
// (ErrUnknownCategory), a value p cannot encode (the *prep.FieldError,
// wrapped with the file and line of the row), and, for float32, a feature
// beyond float32's range (ErrInfinite).
func Encode[T Float](t *Table, rows []int, p *prep.Pipeline, classes []string) (*Set[T], error) {
	if len(classes) < 2 {
		return nil, fmt.Errorf("data: Encode: %d class given: %w; give every class of the problem, e.g. Table.Classes()", len(classes), ErrOneClass)
	}
	index, err := classMap(classes)
	if err != nil {
		return nil, err
	}
	n := len(t.Labels)
	if rows == nil {
		rows = make([]int, n)
		for r := range rows {
			rows[r] = r
		}
	}
	if len(rows) == 0 {
		return nil, errors.New("data: Encode: no rows; pass nil for all rows")
	}
	w := p.Width()
	out := 1
	if len(classes) > 2 {
		out = len(classes)
	}
	s := &Set[T]{
		X:        make([]T, len(rows)*w),
		Y:        make([]T, len(rows)*out),
		Rows:     len(rows),
		Features: w,
		Outputs:  out,
		Classes:  append([]string(nil), classes...),
	}
	buf := make([]float64, w)
	for i, r := range rows {
		if r < 0 || r >= n {
			return nil, fmt.Errorf("data: Encode: row %d out of range [0, %d)", r, n)
		}
		c, ok := index[t.Labels[r]]
		if !ok {
			return nil, fmt.Errorf("data: %s: %w", rowWhere(t, r), unknownLabel(r, t.Labels[r], classes))
		}
		if err := p.ApplyColumns(t.Columns, r, buf); err != nil {
			return nil, fmt.Errorf("data: %s: %w", rowWhere(t, r), err)
		}
		x := s.X[i*w : (i+1)*w]
		for j, v := range buf {
			x[j] = T(v)
			if math.IsInf(float64(x[j]), 0) {
				return nil, fmt.Errorf("data: %s: feature %d = %g: %w in the element type; standardize the column or use float64", rowWhere(t, r), j, v, ErrInfinite)
			}
		}
		y := s.Y[i*out : (i+1)*out]
		switch {
		case out == 1 && c == 0:
			y[0] = -1
		case out == 1:
			y[0] = 1
		default:
			y[c] = 1
		}
	}
	return s, nil
}

// where names row r of the table's source for messages.
func rowWhere(t *Table, r int) string {
	src := t.Source
	if src == "" {
		src = "input"
	}
	if r < len(t.Lines) {
		return fmt.Sprintf("%s:%d", src, t.Lines[r])
	}
	return fmt.Sprintf("%s row %d", src, r)
}

// ClassWeights returns balanced class weights for a weighted loss:
// w_c = N/(C·n_c), with N = len(labels), C = classes and n_c the number of
// rows of class c. Every class then carries the same total weight
// n_c·w_c = N/C, so a rare class counts as much as a common one, and when
// every class occurs the weights average to 1 over the rows, leaving the
// loss on its usual scale (common practice, no source).
//
// A class with no rows gets weight 0, not an infinite weight: it
// contributes nothing, and the other classes keep N/(C·n_c), so their
// row-average is then below 1 (C_present/C). labels holds class indices
// in [0, classes); ClassWeights panics on one outside, since labels from
// ClassIndex never are.
func ClassWeights(labels []int, classes int) []float64 {
	if classes < 1 {
		panic(fmt.Sprintf("data: ClassWeights: %d classes, want at least 1", classes))
	}
	count := make([]int, classes)
	for r, l := range labels {
		if l < 0 || l >= classes {
			panic(fmt.Sprintf("data: ClassWeights: row %d has class %d, outside [0, %d)", r, l, classes))
		}
		count[l]++
	}
	w := make([]float64, classes)
	for c, n := range count {
		if n > 0 {
			w[c] = float64(len(labels)) / (float64(classes) * float64(n))
		}
	}
	return w
}
