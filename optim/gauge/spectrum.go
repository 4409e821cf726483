package gauge

import (
	"errors"
	"fmt"
	"math"

	"gonum.org/v1/gonum/mat"

	"github.com/rhomb/rhomb/net"
)

// Spectrum is the singular-value spectrum of one layer's direction
// V_k = W_k/‖W_k‖_F. Because ‖V_k‖_F = 1, Σσ_i² = 1: the spectrum shows how
// the unit of "weight" is shared among directions, and spectra of
// different layers, epochs and runs compare on one scale.
type Spectrum struct {
	Layer  string
	Rows   int
	Cols   int
	Values []float64 // σ_1 ≥ σ_2 ≥ … ≥ 0, min(Rows, Cols) of them
	// EffectiveRank is exp(H(p)) with p_i = σ_i/Σσ_j and H the Shannon
	// entropy in nats (Roy and Vetterli, "The effective rank: a measure of
	// effective dimensionality", EUSIPCO 2007; definition from memory). It
	// runs from 1 (one non-zero singular value) to min(Rows, Cols) (all
	// equal), and falls as training concentrates a layer on few directions.
	EffectiveRank float64
	// StableRank is ‖V‖_F²/‖V‖_2² = 1/σ_1² (common practice, no source),
	// a cruder measure between 1 and the rank.
	StableRank float64
}

// SpectrumOf returns the spectrum of the rows×cols row-major matrix w after
// dividing it by its Frobenius norm.
func SpectrumOf(name string, w []float64, rows, cols int) (Spectrum, error) {
	if rows < 1 || cols < 1 || len(w) != rows*cols {
		return Spectrum{}, fmt.Errorf("gauge: SpectrumOf %q: %d values for %d×%d", name, len(w), rows, cols)
	}
	fn := net.FrobeniusNorm(w)
	if !(fn > 0) || math.IsInf(fn, 0) {
		return Spectrum{}, fmt.Errorf("gauge: SpectrumOf %q: Frobenius norm %v; want a finite non-zero matrix", name, fn)
	}
	v := make([]float64, len(w))
	for i, x := range w {
		v[i] = x / fn
	}
	var svd mat.SVD
	if !svd.Factorize(mat.NewDense(rows, cols, v), mat.SVDNone) {
		return Spectrum{}, errors.New("gauge: SpectrumOf " + name + ": the SVD did not converge")
	}
	s := Spectrum{Layer: name, Rows: rows, Cols: cols, Values: svd.Values(nil)}
	s.EffectiveRank = EffectiveRank(s.Values)
	s.StableRank = 1 / (s.Values[0] * s.Values[0])
	return s, nil
}

// EffectiveRank returns exp(−Σ p_i ln p_i) with p_i = σ_i/Σσ_j, taking
// 0·ln 0 = 0 (see Spectrum.EffectiveRank). It returns NaN when every σ is
// zero.
func EffectiveRank(sigma []float64) float64 {
	var sum float64
	for _, s := range sigma {
		sum += s
	}
	if !(sum > 0) {
		return math.NaN()
	}
	var h float64
	for _, s := range sigma {
		if s > 0 {
			p := s / sum
			h -= p * math.Log(p)
		}
	}
	return math.Exp(h)
}

// Spectra returns the spectrum of every dense layer of the model's
// network, in order (the readout last), from W as the model holds it now.
func Spectra[T net.Float](m Model[T]) ([]Spectrum, error) {
	var out []Spectrum
	for _, d := range m.Base().Dense() {
		w := make([]float64, len(d.W.Value))
		for i, x := range d.W.Value {
			w[i] = float64(x)
		}
		s, err := SpectrumOf(d.Name(), w, d.Out(), d.In())
		if err != nil {
			return nil, err
		}
		out = append(out, s)
	}
	return out, nil
}
