package recipe

import (
	"encoding/json"
	"math"
)

// nullable is a float64 that JSON writes as null when it is NaN or
// infinite (JSON has no such numbers) and reads back from null as NaN.
type nullable float64

func (f nullable) MarshalJSON() ([]byte, error) {
	v := float64(f)
	if math.IsNaN(v) || math.IsInf(v, 0) {
		return []byte("null"), nil
	}
	return json.Marshal(v)
}

func (f *nullable) UnmarshalJSON(b []byte) error {
	if string(b) == "null" {
		*f = nullable(math.NaN())
		return nil
	}
	var v float64
	if err := json.Unmarshal(b, &v); err != nil {
		return err
	}
	*f = nullable(v)
	return nil
}

type scoreJSON struct {
	Epoch     int      `json:"epoch"`
	Value     nullable `json:"value"`
	Accuracy  nullable `json:"accuracy"`
	Balanced  nullable `json:"balanced_accuracy"`
	MacroF1   nullable `json:"macro_f1"`
	AUC       nullable `json:"auc"`
	MinMargin nullable `json:"min_margin"`
	Rate      nullable `json:"rate"`
}

// MarshalJSON writes a score with null for a figure that is not a number.
func (s Score) MarshalJSON() ([]byte, error) {
	return json.Marshal(scoreJSON{s.Epoch, nullable(s.Value), nullable(s.Accuracy), nullable(s.Balanced), nullable(s.MacroF1), nullable(s.AUC), nullable(s.MinMargin), nullable(s.Rate)})
}

// UnmarshalJSON reads what MarshalJSON writes.
func (s *Score) UnmarshalJSON(b []byte) error {
	var j scoreJSON
	if err := json.Unmarshal(b, &j); err != nil {
		return err
	}
	*s = Score{Epoch: j.Epoch, Value: float64(j.Value), Accuracy: float64(j.Accuracy), Balanced: float64(j.Balanced),
		MacroF1: float64(j.MacroF1), AUC: float64(j.AUC), MinMargin: float64(j.MinMargin), Rate: float64(j.Rate)}
	return nil
}

type stateJSON struct {
	Rate      nullable `json:"rate"`
	Sharpness nullable `json:"sharpness"`
	LastLoss  nullable `json:"last_loss"`
	Best      Score    `json:"best"`
	Since     int      `json:"since"`
	Lowered   int      `json:"lowered"`
	Rollbacks int      `json:"rollbacks"`
	Cap       float64  `json:"rate_cap"`
	History   []Score  `json:"history"`
}

// MarshalJSON writes the state but Kept, which a model file stores as
// tensors (optim/modelfile, Model.Kept).
func (s SessionState) MarshalJSON() ([]byte, error) {
	return json.Marshal(stateJSON{nullable(s.Rate), nullable(s.Sharpness), nullable(s.LastLoss), s.Best, s.Since, s.Lowered, s.Rollbacks, s.Cap, s.History})
}

// UnmarshalJSON reads what MarshalJSON writes; Kept is left alone.
func (s *SessionState) UnmarshalJSON(b []byte) error {
	var j stateJSON
	if err := json.Unmarshal(b, &j); err != nil {
		return err
	}
	s.Rate, s.Sharpness, s.LastLoss = float64(j.Rate), float64(j.Sharpness), float64(j.LastLoss)
	s.Best, s.Since, s.Lowered, s.Rollbacks, s.Cap, s.History = j.Best, j.Since, j.Lowered, j.Rollbacks, j.Cap, j.History
	return nil
}
