// Command gen trains the edge example's embedded model and writes it:
// an 11-16-16-4 ReLU network (constant feature, two hidden layers of 16,
// four classes) trained by rhomb's training procedure (optim/recipe, its
// defaults but the widths) on the invented demo data (data/demo), split
// 55/20/25 into training, validation and test rows with seed 1, then
// exported with float32 weights (the float64 model loaded as float32
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

	"github.com/rhomb/rhomb/data/demo"
	"github.com/rhomb/rhomb/data/prep"
	"github.com/rhomb/rhomb/net/classify"
	"github.com/rhomb/rhomb/optim/modelfile"
	"github.com/rhomb/rhomb/optim/recipe"
)

func main() {
	out := flag.String("o", "pumps.model", "model `file` to write")
	flag.Parse()
	if err := run(*out); err != nil {
		log.Fatal(err)
	}
}

func run(out string) error {
	tab, err := demo.Table()
	if err != nil {
		return err
	}
	p, err := recipe.Prepare[float64](tab, recipe.Split{Holdout: 0.2, Test: 0.25, Seed: 1, Prep: prep.Options{Impute: true}})
	if err != nil {
		return err
	}
	tr := p.Train
	f, err := recipe.Fit(context.Background(), tr, p.Val, recipe.Plan{Hidden: []int{16, 16}, Seed: 1}, false, nil)
	if err != nil {
		return err
	}
	if !f.Health.OK() {
		return fmt.Errorf("the trained model is degenerate: %s", f.Health)
	}
	acc := recipe.Evaluate(f.Model(), p.Test).Accuracy()
	m := f.File(p, demo.Label)
	m.Training = []byte(`{"data":"data/demo pumps.csv (invented), stratified 55/20/25 split, seed 1","procedure":"optim/recipe defaults, hidden 16,16","seed":1,"export":"float32"}`)
	m.Metrics = map[string]any{"test_accuracy": acc, "test_rows": p.Test.Rows, "best_epoch": f.Outcome.Best.Epoch}
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
	fmt.Printf("wrote %s (%d bytes, version %s): test accuracy %.3f on %d rows\n", out, st.Size(), c32.Info().Version, acc, p.Test.Rows)
	fmt.Printf("float32 export vs float64 on the %d training rows: max |Δscore| %.3g, max relative %.3g, %d class disagreements\n", d.Rows, d.MaxAbs, d.MaxRel, d.Disagree)
	return nil
}
