package bench

import (
	"context"
	"fmt"
	"os"
	"path/filepath"
	"testing"

	"github.com/rhomb/rhomb/data"
	"github.com/rhomb/rhomb/loss"
	"github.com/rhomb/rhomb/net"
	"github.com/rhomb/rhomb/optim"
)

// fashionArchs are the networks of BenchmarkFashionEpoch: the one the
// full-set run in the README trains and the large benchmark network.
var fashionArchs = []arch{{784, 256, 128, 10, 128}, {784, 512, 512, 10, 128}}

// BenchmarkFashionEpoch is the work a user waits for: one epoch of the
// 60,000 Fashion-MNIST training images (pixels/255, one-hot targets;
// Debian dataset-fashion-mnist) through optim.Trainer, shuffled minibatches
// of 128, plain SGD. numpy_epoch.py runs the same epoch in numpy;
// compare.sh runs both, interleaved, when RHOMB_OPENDATA names the folder
// .ci/fetch-data fills:
//
//	RHOMB_OPENDATA=$PWD/.cache/opendata go test -run '^$' -bench FashionEpoch -benchtime 1x ./bench/
func BenchmarkFashionEpoch(b *testing.B) {
	dir := os.Getenv("RHOMB_OPENDATA")
	if dir == "" {
		b.Skip("set RHOMB_OPENDATA to the folder .ci/fetch-data fills")
	}
	images, err := data.ReadIDXFile(filepath.Join(dir, "fashion-mnist", "train-images-idx3-ubyte.gz"))
	if err != nil {
		b.Fatal(err)
	}
	labels, err := data.ReadIDXFile(filepath.Join(dir, "fashion-mnist", "train-labels-idx1-ubyte.gz"))
	if err != nil {
		b.Fatal(err)
	}
	set32, err := data.IDXSet[float32](images, labels, 10, true)
	if err != nil {
		b.Fatal(err)
	}
	set64, err := data.IDXSet[float64](images, labels, 10, true)
	if err != nil {
		b.Fatal(err)
	}
	for _, a := range fashionArchs {
		b.Run(fmt.Sprintf("%s/%s", a, floatName[float32]()), func(b *testing.B) { fashionEpoch(b, a, set32) })
		b.Run(fmt.Sprintf("%s/%s", a, floatName[float64]()), func(b *testing.B) { fashionEpoch(b, a, set64) })
	}
}

func fashionEpoch[T net.Float](b *testing.B, a arch, set *data.Set[T]) {
	n := build[T](b, a)
	zeros0 := reluZeros(n, set)
	tr, err := optim.NewTrainer[T](n, loss.Square[T]{}, set, optim.Settings{LearningRate: 1e-3, BatchSize: a.batch, Epochs: b.N, Seed: 1})
	if err != nil {
		b.Fatal(err)
	}
	b.ResetTimer()
	res, err := tr.Run(context.Background())
	b.StopTimer()
	if err != nil || res.Status != optim.Finished || res.Epochs != b.N {
		b.Fatalf("Run: %+v, %v", res, err)
	}
	b.ReportMetric(b.Elapsed().Seconds()/float64(b.N), "s/epoch")
	report(b, set.Rows, res.Loss)
	// How much work a product that skipped zero activations could save,
	// on real rows: the share of exact zeros after each ReLU, at the
	// initial weights and after the run.
	zeros := reluZeros(n, set)
	for i, z := range zeros {
		b.ReportMetric(zeros0[i], fmt.Sprintf("zeros-r%d-init", i+1))
		b.ReportMetric(z, fmt.Sprintf("zeros-r%d", i+1))
	}
}

// reluZeros returns, for each of the two ReLU nodes of build's network, the
// share of its outputs that are exactly 0 on the first 4,096 rows of set.
func reluZeros[T net.Float](n *net.Network[T], set *data.Set[T]) []float64 {
	rows := min(4096, set.Rows)
	n.Forward(set.X[:rows*set.Features], rows)
	var shares []float64
	for _, name := range []string{"r1", "r2"} {
		out, width := n.Output(name)
		zero := 0
		for _, v := range out[:rows*width] {
			if v == 0 {
				zero++
			}
		}
		shares = append(shares, float64(zero)/float64(rows*width))
	}
	return shares
}
