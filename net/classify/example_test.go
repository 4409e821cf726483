package classify_test

import (
	"context"
	"fmt"
	"log"
	"os"
	"path/filepath"

	"github.com/rhomb/rhomb/data/demo"
	"github.com/rhomb/rhomb/loss"
	"github.com/rhomb/rhomb/net"
	"github.com/rhomb/rhomb/net/classify"
	"github.com/rhomb/rhomb/normalize"
	"github.com/rhomb/rhomb/optim"
	"github.com/rhomb/rhomb/optim/modelfile"
)

// exampleModel trains a small model on the invented demo data and saves
// it, as a training program would; a serving program only needs the file.
func exampleModel() string {
	split, err := demo.Pumps[float64](900)
	if err != nil {
		log.Fatal(err)
	}
	tr := split.Train
	n, _ := net.NewBuilder[float64](tr.Features).ConstantFeature("one").
		Dense("hidden1", 16).ReLU("relu1").Dense("hidden2", 16).ReLU("relu2").
		Readout("readout", tr.Outputs).Build()
	n.Init(net.InitSettings{Rho0: 1, Seed: 1})
	w, _ := normalize.Wrap(n, normalize.Options{Scale: normalize.Global})
	t, _ := optim.NewTrainer[float64](w, loss.Square[float64]{}, tr, optim.Settings{LearningRate: 0.1, BatchSize: 32, WeightDecay: 1e-4, Epochs: 30, Seed: 1})
	if _, err := t.Run(context.Background()); err != nil {
		log.Fatal(err)
	}
	dir, _ := os.MkdirTemp("", "classify-example")
	path := filepath.Join(dir, "pumps.model")
	m := &modelfile.Model[float64]{Network: n, Normalized: w, Pipeline: split.Pipeline, Classes: tr.Classes, Label: demo.Label}
	if err := modelfile.Save(path, m); err != nil {
		log.Fatal(err)
	}
	return path
}

// Load a model file and classify one row given by field name.
func Example() {
	path := exampleModel()
	defer os.RemoveAll(filepath.Dir(path))

	m, err := classify.Load(path)
	if err != nil {
		log.Fatal(err)
	}
	w := m.NewWork() // one per goroutine; reused, it allocates nothing
	a, err := m.ClassifyMap(w, map[string]string{
		"site": "river-intake", "vib_rms_mm_s": "1.576", "vib_kurtosis": "2.505", "crest_factor": "3.283",
		"band_1x_ratio": "0.4781", "band_hf_ratio": "0.0887", "temp_rise_c": "20.30",
		"current_imbalance_pct": "1.65", "suction_kpa": "127.0",
	})
	if err != nil {
		log.Fatal(err)
	}
	fmt.Println(a.Label, len(a.Scores), "scores")

	_, err = m.ClassifyMap(w, map[string]string{"site": "moon-base"})
	fmt.Println(err)
	// Output:
	// healthy 4 scores
	// prep: field "site": value "moon-base": category not seen in training; check the spelling, or retrain with rows that hold this category or with unseen categories encoded as zeros
}

// Classify rows held in a struct of the caller's: Bind matches its fields
// to the model's inputs once.
func ExampleBind() {
	path := exampleModel()
	defer os.RemoveAll(filepath.Dir(path))
	m, err := classify.Load(path)
	if err != nil {
		log.Fatal(err)
	}
	type Reading struct {
		Site    string  `classify:"site"`
		RMS     float64 `classify:"vib_rms_mm_s"`
		Kurt    float64 `classify:"vib_kurtosis"`
		Crest   float64 `classify:"crest_factor"`
		Band1x  float64 `classify:"band_1x_ratio"`
		BandHF  float64 `classify:"band_hf_ratio"`
		Temp    float64 `classify:"temp_rise_c"`
		Current float64 `classify:"current_imbalance_pct"`
		Suction float64 `classify:"suction_kpa"`
	}
	b, err := classify.Bind[Reading](m)
	if err != nil {
		log.Fatal(err)
	}
	r := Reading{"river-intake", 1.576, 2.505, 3.283, 0.4781, 0.0887, 20.30, 1.65, 127.0}
	a, err := b.Classify(nil, &r)
	if err != nil {
		log.Fatal(err)
	}
	fmt.Println(a.Label)
	// Output: healthy
}
