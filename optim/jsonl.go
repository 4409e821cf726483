package optim

import (
	"encoding/json"
	"io"
	"math"
)

// JSONLines returns hooks that write one JSON object per line to w: a
// record of kind "step" every `every` steps (none when every ≤ 0) and one
// of kind "epoch" at the end of every epoch. Values that are not finite
// (ρ* for a loss without one) are written as null. Write errors end the
// run.
func JSONLines(w io.Writer, every int) *Hooks {
	enc := json.NewEncoder(w)
	h := &Hooks{}
	if every > 0 {
		h.Step = func(s *StepInfo) error {
			if s.Step%every != 0 {
				return nil
			}
			return enc.Encode(stepRecord{
				Kind: "step", Step: s.Step, Epoch: s.Epoch, LearningRate: num(s.LearningRate), Temperature: num(s.Temperature),
				Loss: lossRecord{num(s.Loss.Data), num(s.Loss.Decay), num(s.Loss.Multiplier), num(s.Loss.Total)},
				Rho:  num(s.Rho), LayerRho: nums(s.LayerRho), DirNorm: nums(s.DirNorm), DirSpeed: nums(s.DirSpeed), Nu: nums(s.Nu),
				RhoDot: num(s.RhoDot), RhoStar: num(s.RhoStar),
				Margins: margins(&s.Margins), Full: margins(s.Full),
			})
		}
	}
	h.Epoch = func(e *EpochInfo) error {
		return enc.Encode(epochRecord{Kind: "epoch", Epoch: e.Epoch, Steps: e.Steps, Loss: num(e.Loss), Rho: num(e.Rho), Seconds: e.Elapsed.Seconds(), Full: margins(e.Full)})
	}
	return h
}

// num is a float that encodes NaN and ±Inf as null, which JSON lacks.
type num float64

func (f num) MarshalJSON() ([]byte, error) {
	if math.IsNaN(float64(f)) || math.IsInf(float64(f), 0) {
		return []byte("null"), nil
	}
	return json.Marshal(float64(f))
}

func nums(v []float64) []num {
	out := make([]num, len(v))
	for i, x := range v {
		out[i] = num(x)
	}
	return out
}

type lossRecord struct {
	Data       num `json:"data"`
	Decay      num `json:"decay"`
	Multiplier num `json:"multiplier"`
	Total      num `json:"total"`
}

type marginRecord struct {
	Rows     int `json:"rows"`
	Mean     num `json:"mean"`
	Min      num `json:"min"`
	Negative int `json:"negative"`
}

func margins(m *Margins) *marginRecord {
	if m == nil {
		return nil
	}
	return &marginRecord{m.Rows, num(m.Mean), num(m.Min), m.Negative}
}

type stepRecord struct {
	Kind         string        `json:"kind"`
	Step         int           `json:"step"`
	Epoch        int           `json:"epoch"`
	LearningRate num           `json:"learning_rate"`
	Temperature  num           `json:"temperature"`
	Loss         lossRecord    `json:"loss"`
	Rho          num           `json:"rho"`
	LayerRho     []num         `json:"layer_rho"`
	DirNorm      []num         `json:"direction_norm"`
	DirSpeed     []num         `json:"direction_speed"`
	Nu           []num         `json:"nu"`
	RhoDot       num           `json:"rho_rate"`
	RhoStar      num           `json:"rho_equilibrium"`
	Margins      *marginRecord `json:"batch_margins"`
	Full         *marginRecord `json:"train_margins,omitempty"`
}

type epochRecord struct {
	Kind    string        `json:"kind"`
	Epoch   int           `json:"epoch"`
	Steps   int           `json:"steps"`
	Loss    num           `json:"loss"`
	Rho     num           `json:"rho"`
	Seconds float64       `json:"seconds"`
	Full    *marginRecord `json:"train_margins,omitempty"`
}
