package calib

import (
	"fmt"
	"math"
)

// Bin is one bar of a reliability diagram: the rows whose confidence lies
// in [Lo, Hi) (the last bin also holds confidence 1), how many there are,
// their mean confidence and the fraction of them answered correctly. A
// perfectly calibrated model has Accuracy = Confidence in every bin. An
// empty bin has Rows = 0 and Confidence = Accuracy = 0; check Rows before
// plotting it.
type Bin struct {
	Lo, Hi     float64
	Rows       int
	Confidence float64
	Accuracy   float64
}

// Reliability sorts rows into bins equal-width confidence bins on [0, 1]
// and returns them in order, for a reliability diagram (Guo, Pleiss, Sun
// and Weinberger 2017, ICML). conf[i] is the confidence given to row i's
// answer (for the top-label diagram, the largest calibrated probability)
// and correct[i] whether that answer was right. Bin b holds
// b/bins ≤ c < (b+1)/bins, the last bin also c = 1; a confidence within
// rounding of a boundary may land on either side of it.
//
// It panics when bins < 1, the slices differ in length, or a confidence is
// NaN or outside [0, 1] (a score passed where a probability belongs).
func Reliability(conf []float64, correct []bool, bins int) []Bin {
	if bins < 1 {
		panic(fmt.Sprintf("calib: Reliability: %d bins", bins))
	}
	if len(conf) != len(correct) {
		panic(fmt.Sprintf("calib: Reliability: %d confidences but %d outcomes", len(conf), len(correct)))
	}
	out := make([]Bin, bins)
	for b := range out {
		out[b].Lo = float64(b) / float64(bins)
		out[b].Hi = float64(b+1) / float64(bins)
	}
	right := make([]int, bins)
	for i, c := range conf {
		if !(c >= 0 && c <= 1) {
			panic(fmt.Sprintf("calib: Reliability: confidence %v of row %d is not in [0, 1]", c, i))
		}
		b := min(int(c*float64(bins)), bins-1)
		out[b].Rows++
		out[b].Confidence += c
		if correct[i] {
			right[b]++
		}
	}
	for b := range out {
		if r := out[b].Rows; r > 0 {
			out[b].Confidence /= float64(r)
			out[b].Accuracy = float64(right[b]) / float64(r)
		}
	}
	return out
}

// ECE is the top-label expected calibration error with bins equal-width
// confidence bins (Guo, Pleiss, Sun and Weinberger 2017, ICML):
//
//	ECE = Σ_b (n_b/n)·|accuracy_b − confidence_b|
//
// over the bins of Reliability. It is 0 for a perfectly calibrated model
// on infinitely many rows; on n rows even a calibrated model shows an ECE
// of order √(bins/n) from sampling alone. NaN with no rows. It panics as
// Reliability does.
func ECE(conf []float64, correct []bool, bins int) float64 {
	if len(conf) == 0 {
		if len(correct) != 0 {
			panic(fmt.Sprintf("calib: ECE: 0 confidences but %d outcomes", len(correct)))
		}
		return math.NaN()
	}
	var e float64
	for _, b := range Reliability(conf, correct, bins) {
		e += float64(b.Rows) * math.Abs(b.Accuracy-b.Confidence)
	}
	return e / float64(len(conf))
}
