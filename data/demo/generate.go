// Package demo holds rhomb's demo dataset: readings from an invented fleet
// of water pumps, labelled with their condition, as an edge gateway beside
// each pump might record them. Nothing in it is measured: Generate makes
// every row from a seeded random model, documented below, and the file
// pumps.csv embedded in this package is Generate's output for DefaultSeed
// and DefaultRows (a test keeps the two equal).
//
// The generating model. Each reading belongs to one of four conditions,
// drawn with probabilities healthy 0.55, imbalance 0.15, bearing-wear 0.15,
// cavitation 0.15. A latent load factor u ~ U(0.6, 1.1) scales the
// vibration and the temperature of every condition. Given the condition,
// the features are:
//
//	vib_rms_mm_s        RMS vibration velocity: u·LogNormal(ln m, 0.25),
//	                    m = 1.8 healthy, 4.2 imbalance, 2.6 bearing-wear, 3.0 cavitation
//	vib_kurtosis        3 + N(0, 0.3) healthy and imbalance, 5.2 + N(0, 0.9) bearing-wear,
//	                    3.8 + N(0, 0.5) cavitation
//	crest_factor        0.45·kurtosis + 1.9 + N(0, 0.25)
//	band_1x_ratio       share of energy at running speed: N(0.35, 0.07)
//	                    (mean 0.68 for imbalance), clipped to [0.01, 0.99]
//	band_hf_ratio       share above 5 kHz: mean 0.08, 0.09, 0.24, 0.19, sd 0.035, clipped
//	temp_rise_c         bearing temperature above ambient: u·(18 + N(0, 4)),
//	                    +11 for bearing-wear
//	current_imbalance_pct  1.5 + |N(0, 0.8)|, +1.2 for imbalance
//	suction_kpa         N(120, 15); N(62, 18) for cavitation
//	site                one of north-yard, river-intake, east-tank (no effect on the label)
//
// Like real gateway logs the file has defects for the pipeline to handle:
// the temperature probe drops out on 3% of readings (written NA) and the
// suction transmitter on 1% (an empty cell), independently of the
// condition; site is a categorical column.
//
// The conditions overlap by design (a worn bearing at light load looks
// healthy), so no classifier reaches 100%.
package demo

import (
	"encoding/csv"
	"fmt"
	"io"
	"math"
	"math/rand/v2"
	"strconv"
)

// DefaultSeed and DefaultRows are the settings of the embedded file.
const (
	DefaultSeed = 20261201
	DefaultRows = 1200
)

// Conditions are the class names, in label order.
var Conditions = []string{"healthy", "imbalance", "bearing-wear", "cavitation"}

// Header is the CSV header Generate writes; the label is the last column.
var Header = []string{"site", "vib_rms_mm_s", "vib_kurtosis", "crest_factor", "band_1x_ratio", "band_hf_ratio", "temp_rise_c", "current_imbalance_pct", "suction_kpa", "condition"}

var sites = []string{"north-yard", "river-intake", "east-tank"}

// Generate writes rows readings as CSV, with a header, to w.
func Generate(w io.Writer, seed uint64, rows int) error {
	rng := rand.New(rand.NewPCG(seed, 0x70756d7073)) // "pumps"
	cw := csv.NewWriter(w)
	if err := cw.Write(Header); err != nil {
		return err
	}
	clip := func(v, lo, hi float64) float64 { return math.Min(math.Max(v, lo), hi) }
	f := func(v float64, prec int) string { return strconv.FormatFloat(v, 'f', prec, 64) }
	for range rows {
		c := 0
		switch p := rng.Float64(); {
		case p < 0.15:
			c = 1
		case p < 0.30:
			c = 2
		case p < 0.45:
			c = 3
		}
		u := 0.6 + 0.5*rng.Float64()
		rms := u * math.Exp(math.Log([]float64{1.8, 4.2, 2.6, 3.0}[c])+0.25*rng.NormFloat64())
		kurt := []float64{3, 3, 5.2, 3.8}[c] + []float64{0.3, 0.3, 0.9, 0.5}[c]*rng.NormFloat64()
		crest := 0.45*kurt + 1.9 + 0.25*rng.NormFloat64()
		b1 := clip([]float64{0.35, 0.68, 0.35, 0.35}[c]+0.07*rng.NormFloat64(), 0.01, 0.99)
		hf := clip([]float64{0.08, 0.09, 0.24, 0.19}[c]+0.035*rng.NormFloat64(), 0.001, 0.9)
		temp := u * (18 + 4*rng.NormFloat64())
		if c == 2 {
			temp += 11
		}
		cur := 1.5 + math.Abs(0.8*rng.NormFloat64())
		if c == 1 {
			cur += 1.2
		}
		suc := 120 + 15*rng.NormFloat64()
		if c == 3 {
			suc = 62 + 18*rng.NormFloat64()
		}
		rec := []string{sites[rng.IntN(len(sites))], f(rms, 3), f(kurt, 3), f(crest, 3), f(b1, 4), f(hf, 4), f(temp, 2), f(cur, 2), f(suc, 1), Conditions[c]}
		if rng.Float64() < 0.03 {
			rec[6] = "NA"
		}
		if rng.Float64() < 0.01 {
			rec[8] = ""
		}
		if err := cw.Write(rec); err != nil {
			return err
		}
	}
	cw.Flush()
	if err := cw.Error(); err != nil {
		return fmt.Errorf("demo: writing CSV: %w", err)
	}
	return nil
}
