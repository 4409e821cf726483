package demo

import (
	"bytes"
	_ "embed"
	"fmt"

	"github.com/rhomb/rhomb/data"
	"github.com/rhomb/rhomb/data/prep"
)

//go:generate go run ./gen -out pumps.csv

// CSV is the embedded demo file, Generate(DefaultSeed, DefaultRows).
//
//go:embed pumps.csv
var CSV []byte

// Label is the name of the label column.
const Label = "condition"

// Split is the demo data ready to train on.
type Split[T data.Float] struct {
	Table       *data.Table    // the file as read, missing cells marked
	Pipeline    *prep.Pipeline // fitted on the training rows
	Train, Test *data.Set[T]
}

// Pumps reads the embedded file through the same path as any CSV — the
// reader keeps rows with missing cells, a pipeline fitted on the first
// trainRows rows imputes them, one-hot encodes the site and standardizes
// the rest — and returns the first trainRows rows for training and the
// others for testing. The rows were generated independently, so the split
// needs no shuffling.
func Pumps[T data.Float](trainRows int) (*Split[T], error) {
	t, err := Table()
	if err != nil {
		return nil, err
	}
	if trainRows < 1 || trainRows >= t.Rows {
		return nil, fmt.Errorf("demo: trainRows = %d; want 1 to %d", trainRows, t.Rows-1)
	}
	train, test := make([]int, trainRows), make([]int, t.Rows-trainRows)
	for i := range train {
		train[i] = i
	}
	for i := range test {
		test[i] = trainRows + i
	}
	p, err := prep.Fit(t.Columns, train, prep.Options{Impute: true})
	if err != nil {
		return nil, fmt.Errorf("demo: %w", err)
	}
	s := &Split[T]{Table: t, Pipeline: p}
	if s.Train, err = data.Encode[T](t, train, p, Conditions); err != nil {
		return nil, fmt.Errorf("demo: %w", err)
	}
	if s.Test, err = data.Encode[T](t, test, p, Conditions); err != nil {
		return nil, fmt.Errorf("demo: %w", err)
	}
	return s, nil
}

// Table reads the embedded file as a Table, its missing cells (the
// sensor dropouts) kept for the preprocessing to impute.
func Table() (*data.Table, error) {
	t, err := data.ReadCSV(bytes.NewReader(CSV), "pumps.csv", data.CSVOptions{Label: Label, OnMissing: data.MissingKeep})
	if err != nil {
		return nil, fmt.Errorf("demo: %w", err)
	}
	return t, nil
}
