package classify

import (
	"fmt"
	"math"
)

// Difference is how far two models' scores are apart on a set of rows.
type Difference struct {
	Rows int
	// MaxAbs is the largest |a − b| over every score of every row, and
	// MaxRel the largest |a − b| / max(|a|, |b|) (0 where both are 0).
	MaxAbs, MaxRel float64
	// Row is the row of MaxAbs; Disagree counts rows whose class differs.
	Row      int
	Disagree int
}

// MaxDifference classifies the feature vectors x (rows×Features) with a
// and b, which must take the same features and give the same number of
// outputs, and reports how far their scores differ: typically a float64
// model and its float32 conversion, on the training rows.
func MaxDifference(a, b *Model, x []float64, rows int) (Difference, error) {
	if a.features != b.features || a.outputs != b.outputs {
		return Difference{}, fmt.Errorf("classify: MaxDifference: models of %d→%d and %d→%d are not comparable", a.features, a.outputs, b.features, b.outputs)
	}
	wa, wb := a.NewWork(), b.NewWork()
	d := Difference{Rows: rows}
	if len(x) != rows*a.features {
		return d, fmt.Errorf("classify: MaxDifference: %d values for %d rows of %d features", len(x), rows, a.features)
	}
	for r := range rows {
		row := x[r*a.features : (r+1)*a.features]
		pa, err := a.ClassifyVector(wa, row)
		if err != nil {
			return d, &RowError{Row: r, Err: err}
		}
		pb, err := b.ClassifyVector(wb, row)
		if err != nil {
			return d, &RowError{Row: r, Err: err}
		}
		if pa.Class != pb.Class {
			d.Disagree++
		}
		for j := range pa.Scores {
			u, v := pa.Scores[j], pb.Scores[j]
			diff := math.Abs(u - v)
			if diff > d.MaxAbs {
				d.MaxAbs, d.Row = diff, r
			}
			if s := max(math.Abs(u), math.Abs(v)); s > 0 {
				d.MaxRel = max(d.MaxRel, diff/s)
			}
		}
	}
	return d, nil
}
