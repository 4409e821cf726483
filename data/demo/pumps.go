package demo

import (
	"bytes"
	_ "embed"
	"encoding/csv"
	"fmt"
	"math"
	"strconv"

	"github.com/rhomb/rhomb/data"
)

//go:generate go run ./gen -out pumps.csv

// CSV is the embedded demo file, Generate(DefaultSeed, DefaultRows).
//
//go:embed pumps.csv
var CSV []byte

// Split is the demo data ready to train on: the numeric features
// standardized with the training rows' means and deviations, one-hot
// targets over Conditions.
type Split[T data.Float] struct {
	Train, Test *data.Set[T]
	Features    []string
	Mean, Std   []float64 // per feature, from the training rows
}

// Pumps parses the embedded file and returns its numeric features (the site
// column is left out), with the first trainRows rows for training and the
// rest for testing. The rows were generated independently, so the split
// needs no shuffling.
func Pumps[T data.Float](trainRows int) (*Split[T], error) {
	recs, err := csv.NewReader(bytes.NewReader(CSV)).ReadAll()
	if err != nil {
		return nil, fmt.Errorf("demo: embedded pumps.csv: %w", err)
	}
	recs = recs[1:]
	if trainRows < 1 || trainRows >= len(recs) {
		return nil, fmt.Errorf("demo: trainRows = %d; want 1 to %d", trainRows, len(recs)-1)
	}
	feats := Header[1 : len(Header)-1]
	nf, nc := len(feats), len(Conditions)
	class := map[string]int{}
	for i, c := range Conditions {
		class[c] = i
	}
	x := make([]float64, len(recs)*nf)
	y := make([]T, len(recs)*nc)
	for r, rec := range recs {
		for j := range nf {
			v, err := strconv.ParseFloat(rec[j+1], 64)
			if err != nil {
				return nil, fmt.Errorf("demo: pumps.csv line %d, column %q: %w", r+2, feats[j], err)
			}
			x[r*nf+j] = v
		}
		c, ok := class[rec[len(rec)-1]]
		if !ok {
			return nil, fmt.Errorf("demo: pumps.csv line %d: unknown condition %q", r+2, rec[len(rec)-1])
		}
		y[r*nc+c] = 1
	}
	s := &Split[T]{Features: feats, Mean: make([]float64, nf), Std: make([]float64, nf)}
	for j := range nf {
		var sum, ssq float64
		for r := range trainRows {
			sum += x[r*nf+j]
		}
		s.Mean[j] = sum / float64(trainRows)
		for r := range trainRows {
			d := x[r*nf+j] - s.Mean[j]
			ssq += d * d
		}
		s.Std[j] = math.Sqrt(ssq / float64(trainRows-1))
	}
	xs := make([]T, len(x))
	for i, v := range x {
		j := i % nf
		xs[i] = T((v - s.Mean[j]) / s.Std[j])
	}
	mk := func(from, to int) *data.Set[T] {
		return &data.Set[T]{X: xs[from*nf : to*nf], Y: y[from*nc : to*nc], Rows: to - from, Features: nf, Outputs: nc, Classes: Conditions}
	}
	s.Train, s.Test = mk(0, trainRows), mk(trainRows, len(recs))
	return s, nil
}
