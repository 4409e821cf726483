package checks

import (
	"strconv"
	"testing"
	"time"

	"github.com/rhomb/rhomb/data"
	"github.com/rhomb/rhomb/data/prep"
	"github.com/rhomb/rhomb/internal/opendata"
	"github.com/rhomb/rhomb/loss"
	"github.com/rhomb/rhomb/normalize"
	"github.com/rhomb/rhomb/optim"
	"github.com/rhomb/rhomb/optim/modelfile"
)

// Fashion-MNIST (Expat licence; Debian dataset-fashion-mnist;
// REFERENCES.md, "Fashion-MNIST"): 60,000 training and 10,000 test images
// of 28×28 bytes, 10 classes.

// fashionTable reads an image file and its label file into a Table of 784
// numeric columns, p0 … p783 in row-major pixel order, holding pixel/255,
// and the labels "0" … "9"; and returns the image array too, for the raw
// cells of the serving path. The images do not come from a CSV file, so
// the table is built here; everything after it is the public path.
//
// The preprocessing goes through the prep pipeline, 784 numeric steps
// fitted on the training rows, rather than being done by hand on the Set,
// so that the model file carries the standardization and serving applies
// it. The price is memory: the training columns hold 60,000×784 float64,
// 376 MB, next to the 188 MB of the float32 training set, for the time of
// the encoding (measured: the test process peaks at a resident size of about 0.76 GB).
func fashionTable(t *testing.T, images, labels string) (*data.Table, *data.IDX) {
	t.Helper()
	img, err := data.ReadIDXFile(opendata.File(t, images))
	if err != nil {
		t.Fatal(err)
	}
	lab, err := data.ReadIDXFile(opendata.File(t, labels))
	if err != nil {
		t.Fatal(err)
	}
	if len(img.Dims) != 3 || len(lab.Dims) != 1 || img.Dims[0] != lab.Dims[0] {
		t.Fatalf("images %v, labels %v; want N×28×28 and N", img.Dims, lab.Dims)
	}
	rows, width := img.Dims[0], img.Dims[1]*img.Dims[2]
	tab := &data.Table{Source: images, Label: "label", Rows: rows, Labels: make([]string, rows), Columns: make([]data.Column, width)}
	for j := range tab.Columns {
		c := &tab.Columns[j]
		c.Name, c.Kind, c.Num = "p"+strconv.Itoa(j), data.Numeric, make([]float64, rows)
		for r := range rows {
			c.Num[r] = float64(img.Data[r*width+j]) / 255
		}
	}
	for r, l := range lab.Data {
		tab.Labels[r] = strconv.Itoa(int(l))
	}
	return tab, img
}

// TestFashionMNIST trains one ReLU hidden layer of 100 units on the full
// 60,000-row training set, once with the square loss on one-hot targets
// and once with softmax cross-entropy, and evaluates each on the 10,000
// test rows after a trip through a model file, the test images served as
// raw pixel text through the loaded pipeline.
//
// Source: the Fashion-MNIST benchmark (Xiao, Rasul, Vollgraf 2017,
// arXiv:1708.07747, Table 3; REFERENCES.md) reports 0.871 test accuracy,
// the mean of 5 runs, for an MLP with ReLU hidden layer [100] on inputs
// standardized per pixel. Threshold 0.85 for each loss, the "honest
// threshold with margin" of REFERENCES.md: the sampling standard error of
// an accuracy near 0.87 on 10,000 rows is √(0.87·0.13/10⁴) ≈ 0.0034, so
// 0.85 is about six standard errors below the published mean and leaves
// room for a different training procedure, not for chance.
//
// Square against cross-entropy: square-loss accuracy at least
// cross-entropy's minus 0.03. The ICLR 2021 study of the square loss
// ("Evaluation of Neural Architectures Trained with Square Loss vs
// Cross-Entropy in Classification Tasks", abstract) finds it as good as or
// better than cross-entropy; the 3-point allowance is project-calibrated
// (REFERENCES.md), not from the paper. The difference of two accuracies on
// the same 10,000 rows has a standard error of at most √2·0.0034 ≈ 0.005.
//
// Inputs: pixels/255, then standardized per pixel with the training mean
// and standard deviation (prep's default), as the benchmark did. A pixel
// that is almost always 0 in training has a tiny spread, so its rare
// non-zero values become large: the largest standardized feature is 185
// in the training set and 284 in the test set (measured). Such rows make
// large steps; a plain network with the He scale diverged at learning rate
// 0.008 with momentum 0.9 (measured). Both runs here use weight
// normalization with a scale per layer, a small initial scale ρ0 = 0.1 and
// a little weight decay λ = 1e-4 on the scales, as the square-loss theory
// advises, minibatches of 100, momentum 0.9, learning rate 0.005 annealed
// to 0 along a cosine over 20 epochs, float32. The settings are the same
// for both losses.
//
// Measured on the 2-core development machine (float32, seeds 1; the
// accuracy is bit-reproducible on one build): square 0.8745,
// cross-entropy 0.8797. With initialization and trainer seeds 2 and 3:
// square 0.8719 and 0.8707, cross-entropy 0.8811 and 0.8823. Wall time
// (the machine is shared and noisy): 2 to 4 s to read and encode, 23 to
// 28 s (square) and 25 to 33 s (cross-entropy) to train, about 1 s per
// round trip and serving pass, 55 to 66 s for the whole test. Skipped
// under -short.
func TestFashionMNIST(t *testing.T) {
	if testing.Short() {
		t.Skip("skipped under -short: trains two networks on 60,000 images (about a minute on 2 cores)")
	}
	start := time.Now()
	trainTab, _ := fashionTable(t, opendata.FashionTrainImage, opendata.FashionTrainLabel)
	testTab, testImg := fashionTable(t, opendata.FashionTestImage, opendata.FashionTestLabel)
	if trainTab.Rows != 60000 || testTab.Rows != 10000 || len(trainTab.Columns) != 784 {
		t.Fatalf("%d training rows, %d test rows, %d pixels; REFERENCES.md: 60,000, 10,000, 28×28", trainTab.Rows, testTab.Rows, len(trainTab.Columns))
	}
	classes := trainTab.Classes() // "0" … "9": one digit each, so sorted is numeric order
	p, err := prep.Fit(trainTab.Columns, nil, prep.Options{})
	if err != nil {
		t.Fatal(err)
	}
	train, err := data.Encode[float32](trainTab, nil, p, classes)
	if err != nil {
		t.Fatal(err)
	}
	test, err := data.Encode[float32](testTab, nil, p, classes)
	if err != nil {
		t.Fatal(err)
	}
	trainTab, testTab = nil, nil // let the 440 MB of float64 columns go
	t.Logf("read, fitted and encoded in %.1f s", time.Since(start).Seconds())

	// The serving path receives each pixel as text: the byte over 255 in
	// the shortest form that parses back to the same float64, which is
	// what the training columns hold.
	pixel := make([]string, 256)
	for b := range pixel {
		pixel[b] = strconv.FormatFloat(float64(b)/255, 'g', -1, 64)
	}
	width := test.Features
	row := make([]string, width)
	cells := func(r int) []string {
		for j := range row {
			row[j] = pixel[testImg.Data[r*width+j]]
		}
		return row
	}

	acc := map[string]float64{}
	for _, lf := range []loss.Func[float32]{loss.Square[float32]{}, loss.CrossEntropy[float32]{}} {
		t.Run(lf.Name(), func(t *testing.T) {
			begin := time.Now()
			n := oneHidden[float32](t, train.Features, 100, train.Outputs, 0.1, 1)
			wn, err := normalize.Wrap(n, normalize.Options{Scale: normalize.PerLayer})
			if err != nil {
				t.Fatal(err)
			}
			tr, err := optim.NewTrainer[float32](wn, lf, train, optim.Settings{
				LearningRate: 0.005, Schedule: optim.Cosine{Floor: 0}, BatchSize: 100, Momentum: 0.9,
				WeightDecay: 1e-4, Epochs: 20, Seed: 1,
			})
			if err != nil {
				t.Fatal(err)
			}
			res, err := tr.Run(t.Context())
			if err != nil {
				t.Fatal(err)
			}
			trained := time.Since(begin)
			m := &modelfile.Model[float32]{Network: n, Normalized: wn, Pipeline: p, Classes: classes, Label: "label", Loss: lf.Name()}
			out := serveRoundTrip(t, m, test, cells)
			a := float64(correct(out, test)) / float64(test.Rows)
			acc[lf.Name()] = a
			t.Logf("%s: test accuracy %.4f; final epoch loss %.4f; %d epochs in %.1f s, round trip and serving %.1f s",
				lf.Name(), a, res.Loss, res.Epochs, trained.Seconds(), (time.Since(begin) - trained).Seconds())
			if a < 0.85 {
				t.Errorf("test accuracy %.4f, want at least 0.85 (published 0.871)", a)
			}
		})
	}
	sq, okSq := acc["square"]
	ce, okCE := acc["cross-entropy"]
	if okSq && okCE {
		t.Logf("square %.4f, cross-entropy %.4f: difference %+.4f; whole test %.1f s", sq, ce, sq-ce, time.Since(start).Seconds())
		if sq < ce-0.03 {
			t.Errorf("square-loss accuracy %.4f is more than 3 points below cross-entropy's %.4f", sq, ce)
		}
	}
}
