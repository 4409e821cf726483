// Command gen trains the edge example's embedded model and writes it:
// an 11-16-16-4 ReLU network (constant feature, two hidden layers of 16,
// four classes) with one global scale, trained with the square loss on the
// first 900 rows of the invented demo data (data/demo) with fixed seeds,
// then exported with float32 weights (the float64 model loaded as float32
// by package modelfile and saved). It prints the test accuracy and the
// largest difference between the float64 model's scores and the float32
// export's on the training rows.
//
//	go generate ./examples/edge     # runs: go run ./gen -o pumps.model
package main

import (
	"context"
	"flag"
	"fmt"
	"log"
	"os"
	"path/filepath"

	"github.com/rhomb/rhomb/data"
	"github.com/rhomb/rhomb/data/demo"
	"github.com/rhomb/rhomb/loss"
	"github.com/rhomb/rhomb/net"
	"github.com/rhomb/rhomb/net/classify"
	"github.com/rhomb/rhomb/net/modelfile"
	"github.com/rhomb/rhomb/normalize"
	"github.com/rhomb/rhomb/optim"
)

func main() {
	out := flag.String("o", "pumps.model", "model `file` to write")
	flag.Parse()
	if err := run(*out); err != nil {
		log.Fatal(err)
	}
}

func run(out string) error {
	split, err := demo.Pumps[float64](900)
	if err != nil {
		return err
	}
	tr := split.Train
	n, err := net.NewBuilder[float64](tr.Features).ConstantFeature("one").
		Dense("hidden1", 16).ReLU("relu1").Dense("hidden2", 16).ReLU("relu2").
		Readout("readout", tr.Outputs).Build()
	if err != nil {
		return err
	}
	if err := n.Init(net.InitSettings{Scheme: net.HeNormal, Rho0: 1, Seed: 1}); err != nil {
		return err
	}
	w, err := normalize.Wrap(n, normalize.Options{Scale: normalize.Global})
	if err != nil {
		return err
	}
	settings := optim.Settings{LearningRate: 0.1, BatchSize: 32, WeightDecay: 1e-4, Epochs: 60, Seed: 1}
	t, err := optim.NewTrainer[float64](w, loss.Square[float64]{}, tr, settings)
	if err != nil {
		return err
	}
	if _, err := t.Run(context.Background()); err != nil {
		return err
	}
	acc := accuracy(w, split.Test)
	m := &modelfile.Model[float64]{
		Network: n, Normalized: w, Pipeline: split.Pipeline, Classes: tr.Classes, Label: demo.Label, Loss: "square",
		Training: []byte(`{"data":"data/demo pumps.csv, first 900 rows (invented)","epochs":60,"learning_rate":0.1,"batch":32,"weight_decay":1e-4,"seed":1,"export":"float32"}`),
		Metrics:  map[string]any{"test_accuracy": acc, "test_rows": split.Test.Rows},
	}
	tmp, err := os.MkdirTemp("", "edge-gen")
	if err != nil {
		return err
	}
	defer os.RemoveAll(tmp)
	p64 := filepath.Join(tmp, "pumps64.model")
	if err := modelfile.Save(p64, m); err != nil {
		return err
	}
	m32, err := modelfile.Load[float32](p64) // the float32 export
	if err != nil {
		return err
	}
	if err := modelfile.Save(out, m32); err != nil {
		return err
	}
	c64, err := classify.Load(p64)
	if err != nil {
		return err
	}
	c32, err := classify.Load(out)
	if err != nil {
		return err
	}
	d, err := classify.MaxDifference(c64, c32, tr.X, tr.Rows)
	if err != nil {
		return err
	}
	st, _ := os.Stat(out)
	fmt.Printf("wrote %s (%d bytes, version %s): test accuracy %.3f on %d rows\n", out, st.Size(), c32.Info().Version, acc, split.Test.Rows)
	fmt.Printf("float32 export vs float64 on the %d training rows: max |Δscore| %.3g, max relative %.3g, %d class disagreements\n", d.Rows, d.MaxAbs, d.MaxRel, d.Disagree)
	return nil
}

func accuracy(m optim.Model[float64], s *data.Set[float64]) float64 {
	out := m.Forward(s.X, s.Rows)
	right := 0
	for r := range s.Rows {
		if data.ClassOf(out[r*s.Outputs:(r+1)*s.Outputs]) == s.Class(r) {
			right++
		}
	}
	return float64(right) / float64(s.Rows)
}
