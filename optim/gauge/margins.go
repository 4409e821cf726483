package gauge

import (
	"fmt"
	"math"
	"slices"

	"github.com/rhomb/rhomb/data"
	"github.com/rhomb/rhomb/net"
	"github.com/rhomb/rhomb/optim"
)

// MarginOptions chooses what MarginsOf summarizes. The zero value asks for
// γ = 0 (the fraction below is then the fraction of margins < 0), the
// quantiles DefaultProbs and a 20-bin histogram spanning the margins seen.
type MarginOptions struct {
	// Gamma is the margin γ for Stats.Below: rows with margin < γ.
	Gamma float64
	// Probs are the probabilities, in [0, 1], of the quantiles to report;
	// nil means DefaultProbs.
	Probs []float64
	// Edges, when it has at least two increasing values, fixes the
	// histogram's bin edges. Fix them to compare histograms across epochs
	// or runs (the start and end of training on one figure): a normalized
	// margin lies in [−√2·B, √2·B] for inputs of norm ≤ B (Bound's B), so
	// UniformEdges(−√2·B, √2·B, n) holds every row.
	Edges []float64
	// Bins is the number of equal bins between the smallest and largest
	// margin when Edges is not given; zero means 20.
	Bins int
	// KeepValues keeps every row's margin in MarginReport.Values.
	KeepValues bool
}

// DefaultProbs are the quantiles reported when MarginOptions.Probs is nil:
// the extremes, the quartiles and the 5% and 95% points.
var DefaultProbs = []float64{0, 0.05, 0.25, 0.5, 0.75, 0.95, 1}

// MarginStats summarizes a set of normalized margins.
type MarginStats struct {
	Rows      int
	Min, Max  float64
	Mean      float64
	Below     int       // rows with margin < γ
	FracBelow float64   // Below/Rows
	Errors    int       // rows with margin ≤ 0: misclassified or on the boundary (as optim.Margins.Negative)
	Quantiles []float64 // at MarginReport.Probs
}

// Histogram counts values in bins [Edges[i], Edges[i+1]); the last bin also
// holds values equal to its upper edge. Values outside the edges are
// counted in Under and Over, never dropped silently.
type Histogram struct {
	Edges       []float64 // len(Counts)+1 increasing values
	Counts      []int
	Under, Over int
	NaN         int // values that are not numbers
}

// MarginReport is the distribution of the normalized margins of a whole
// data set: f(x; W)/ρ with ρ = ∏‖W_k‖_F, the output of the network whose
// every layer has unit Frobenius norm (positive homogeneity).
type MarginReport struct {
	Gamma    float64
	Probs    []float64
	All      MarginStats
	PerClass []MarginStats // by class index (data.ClassOf); a class with no rows has Rows = 0 and NaN statistics
	Hist     Histogram
	Rho      float64   // the ρ the outputs were divided by
	Values   []float64 // every row's margin, in row order, with KeepValues
}

// MarginsOf computes the normalized margin of every row of set (see
// optim.Margin: y·f for one ±1 output, f_y − max_{j≠y} f_j for one-hot
// targets) and summarizes them overall and per class. It runs a forward
// pass over the set, which overwrites the network's stored activations.
func MarginsOf[T net.Float](m Model[T], set *data.Set[T], o MarginOptions) (*MarginReport, error) {
	probs := o.Probs
	if probs == nil {
		probs = DefaultProbs
	}
	for _, p := range probs {
		if !(p >= 0 && p <= 1) {
			return nil, fmt.Errorf("gauge: MarginOptions.Probs holds %v; want probabilities in [0, 1]", p)
		}
	}
	vals := make([]float64, 0, max(set.Rows, 0))
	labels := make([]int, 0, max(set.Rows, 0))
	cols := set.Outputs
	rho, err := sweep(m, set, func(start, rows int, out []T) {
		// ρ is read inside sweep before the pass; Margin divides by it.
		for r := range rows {
			y := set.Y[(start+r)*cols : (start+r+1)*cols]
			vals = append(vals, optim.Margin(out[r*cols:(r+1)*cols], y, 1))
			labels = append(labels, data.ClassOf(y))
		}
	})
	if err != nil {
		return nil, err
	}
	for i := range vals {
		vals[i] /= rho
	}
	return summarize(vals, labels, classes(cols), rho, o)
}

// summarize builds a MarginReport from margins already computed, with
// labels[i] the class of vals[i] in [0, nclass). rho is recorded as given.
func summarize(vals []float64, labels []int, nclass int, rho float64, o MarginOptions) (*MarginReport, error) {
	if len(vals) != len(labels) {
		return nil, fmt.Errorf("gauge: %d margins but %d labels", len(vals), len(labels))
	}
	probs := o.Probs
	if probs == nil {
		probs = DefaultProbs
	}
	rep := &MarginReport{Gamma: o.Gamma, Probs: slices.Clone(probs), Rho: rho}
	if o.KeepValues {
		rep.Values = slices.Clone(vals)
	}
	per := make([][]float64, nclass)
	for i, c := range labels {
		if c < 0 || c >= nclass {
			return nil, fmt.Errorf("gauge: row %d has class %d; want 0 to %d", i, c, nclass-1)
		}
		per[c] = append(per[c], vals[i])
	}
	rep.All = stats(slices.Clone(vals), o.Gamma, probs)
	rep.PerClass = make([]MarginStats, nclass)
	for c := range per {
		rep.PerClass[c] = stats(per[c], o.Gamma, probs)
	}
	edges := o.Edges
	if len(edges) < 2 {
		bins := o.Bins
		if bins <= 0 {
			bins = 20
		}
		lo, hi := rep.All.Min, rep.All.Max
		if len(vals) == 0 {
			lo, hi = 0, 1
		}
		// All margins equal, or so nearly equal that bins of their span
		// would round to the same edges: one span of width 1 around them.
		if !(hi-lo > float64(bins)*1e-12*max(1, math.Abs(lo), math.Abs(hi))) {
			lo, hi = lo-0.5, hi+0.5
		}
		edges = UniformEdges(lo, hi, bins)
	}
	h, err := newHistogram(vals, edges)
	if err != nil {
		return nil, err
	}
	rep.Hist = h
	return rep, nil
}

// stats sorts v in place and summarizes it.
func stats(v []float64, gamma float64, probs []float64) MarginStats {
	s := MarginStats{Rows: len(v), Quantiles: make([]float64, len(probs))}
	if len(v) == 0 {
		nan := math.NaN()
		s.Min, s.Max, s.Mean, s.FracBelow = nan, nan, nan, nan
		for i := range s.Quantiles {
			s.Quantiles[i] = nan
		}
		return s
	}
	slices.Sort(v)
	s.Min, s.Max = v[0], v[len(v)-1]
	for i, x := range v {
		s.Mean += (x - s.Mean) / float64(i+1)
		if x < gamma {
			s.Below++
		}
		if x <= 0 {
			s.Errors++
		}
	}
	s.FracBelow = float64(s.Below) / float64(len(v))
	for i, p := range probs {
		s.Quantiles[i] = quantile(v, p)
	}
	return s
}

// quantile returns the p-quantile of sorted by linear interpolation between
// order statistics: with h = (n−1)·p, x_⌊h⌋ + (h − ⌊h⌋)(x_⌊h⌋+1 − x_⌊h⌋).
// This is definition 7 of Hyndman and Fan (1996), the default of most
// statistics software; it gives the minimum at p = 0, the maximum at p = 1
// and the usual median. sorted must be increasing and non-empty.
func quantile(sorted []float64, p float64) float64 {
	h := float64(len(sorted)-1) * p
	i := int(math.Floor(h))
	if i >= len(sorted)-1 {
		return sorted[len(sorted)-1]
	}
	return sorted[i] + (h-float64(i))*(sorted[i+1]-sorted[i])
}

// UniformEdges returns bins+1 equally spaced edges from lo to hi.
func UniformEdges(lo, hi float64, bins int) []float64 {
	e := make([]float64, bins+1)
	for i := range e {
		e[i] = lo + (hi-lo)*float64(i)/float64(bins)
	}
	e[bins] = hi // exact, whatever the rounding of the sum
	return e
}

// newHistogram counts vals into the bins between edges (see Histogram).
func newHistogram(vals, edges []float64) (Histogram, error) {
	if len(edges) < 2 {
		return Histogram{}, fmt.Errorf("gauge: histogram needs at least two edges, got %d", len(edges))
	}
	for i := 1; i < len(edges); i++ {
		if !(edges[i] > edges[i-1]) {
			return Histogram{}, fmt.Errorf("gauge: histogram edges must increase; edge %d is %v after %v", i, edges[i], edges[i-1])
		}
	}
	h := Histogram{Edges: slices.Clone(edges), Counts: make([]int, len(edges)-1)}
	last := len(edges) - 1
	for _, x := range vals {
		switch {
		case math.IsNaN(x):
			h.NaN++
		case x < edges[0]:
			h.Under++
		case x > edges[last]:
			h.Over++
		case x == edges[last]:
			h.Counts[last-1]++
		default:
			// The first edge above x, minus one, is x's bin.
			i, _ := slices.BinarySearch(edges, x)
			if i < len(edges) && edges[i] == x {
				i++
			}
			h.Counts[i-1]++
		}
	}
	return h, nil
}
