package main

import (
	"errors"
	"fmt"
	"github.com/rhomb/rhomb/optim/recipe"
	"io"

	"github.com/rhomb/rhomb/data"
	"github.com/rhomb/rhomb/internal/score"
	"github.com/rhomb/rhomb/net"
	"github.com/rhomb/rhomb/net/modelfile"
)

const checkSummary = `Measure a saved model on labelled rows: accuracy, precision, recall and F1
for every class, and the confusion matrix. The rows are read and encoded
exactly as classify reads them; the label column is the one the model was
trained with unless -label names another.`

const checkExample = `  rhomb check -model pumps.model -data holdout.csv
  rhomb check -model digits.model -images t10k-images-idx3-ubyte.gz -labels t10k-labels-idx1-ubyte.gz`

func runCheck(e *env, args []string) error {
	fs := newFlags(e, "check", checkSummary, checkExample)
	model := fs.String("model", "", "model `file` (required)")
	in := fs.String("data", "", "labelled CSV `file`; - reads standard input")
	label := fs.String("label", "", "label column `name` (default: the one the model was trained with)")
	images := fs.String("images", "", "IDX images `file`, instead of -data")
	labels := fs.String("labels", "", "IDX labels `file` for -images")
	skip := fs.Bool("skip-missing", false, "leave out rows with a missing cell (counted) instead of failing, when the model does not impute")
	if err := parse(fs, args); err != nil {
		return err
	}
	switch {
	case *model == "":
		return usageError{errors.New("check: -model names the model file")}
	case (*in == "") == (*images == ""):
		return usageError{errors.New("check: give -data FILE.csv or -images and -labels")}
	case *images != "" && *labels == "":
		return usageError{errors.New("check: -images needs -labels")}
	}
	return withModel(*model,
		func(m *modelfile.Model[float32]) error { return check(e, m, *in, *label, *images, *labels, *skip) },
		func(m *modelfile.Model[float64]) error { return check(e, m, *in, *label, *images, *labels, *skip) })
}

func check[T net.Float](e *env, m *modelfile.Model[T], in, label, images, labels string, skip bool) error {
	conf := score.New(m.Classes)
	if images != "" {
		var s *data.Set[T]
		if m.Pipeline != nil {
			t, err := readIDXTable(images, labels)
			if err != nil {
				return err
			}
			if s, err = data.Encode[T](t, allRows(t.Rows), m.Pipeline, m.Classes); err != nil {
				return dataError{err}
			}
		} else {
			var err error
			if s, err = readIDXSet[T](images, labels); err != nil {
				return err
			}
		}
		if s.Features != m.Network.In() || s.Outputs != m.Network.Out() {
			return dataError{fmt.Errorf("%s: %d features and %d classes; the model takes %d and gives %d", images, s.Features, s.Outputs, m.Network.In(), m.Network.Out())}
		}
		var bs binaryScores
		recipe.Predict[T](m.Network, s, func(r int, out []T) {
			conf.Add(s.Class(r), data.ClassOf(out))
			addScore(&bs, out, s.Class(r))
		})
		return writeScores(e.stdout, conf, &bs)
	}
	if label == "" {
		label = m.Label
	}
	if label == "" {
		return usageError{errors.New("check: the model does not record its label column; name it with -label")}
	}
	index := map[string]int{}
	for i, c := range m.Classes {
		index[c] = i
	}
	skipped := 0
	var bs binaryScores
	err := forEachRow(e, m, in, label, skip, func(line int, out []T, l string) error {
		if out == nil {
			skipped++
			return nil
		}
		truth, ok := index[l]
		if !ok {
			return dataError{&data.ParseError{File: in, Line: line, Field: label, Err: fmt.Errorf("class %q is not one the model knows (%s)", l, joinClasses(m.Classes))}}
		}
		conf.Add(truth, data.ClassOf(out))
		addScore(&bs, out, truth)
		return nil
	})
	if err != nil {
		return err
	}
	if conf.Total() == 0 {
		return dataError{&data.ParseError{File: in, Err: data.ErrEmpty}}
	}
	if skipped > 0 {
		fmt.Fprintf(e.stdout, "rows left out for missing values: %d\n", skipped)
	}
	return writeScores(e.stdout, conf, &bs)
}

// binaryScores keeps a two-class model's scores (its one ±1 output) and
// whether each row is of the second class, the +1 one.
type binaryScores struct {
	scores   []float64
	positive []bool
}

// addScore records a row's score when the model has one output.
func addScore[T net.Float](b *binaryScores, out []T, truth int) {
	if len(out) == 1 {
		b.scores, b.positive = append(b.scores, float64(out[0])), append(b.positive, truth == 1)
	}
}

// writeScores prints the tally, then balanced accuracy and macro-F1, and
// for a two-class model the areas under the ROC and precision–recall
// curves of its scores.
func writeScores(w io.Writer, conf *score.Confusion, b *binaryScores) error {
	if err := conf.Write(w); err != nil {
		return err
	}
	fmt.Fprintf(w, "\nbalanced accuracy %.4f  macro-F1 %.4f\n", conf.BalancedAccuracy(), conf.MacroF1())
	if len(b.scores) > 0 && len(conf.Classes) == 2 {
		fmt.Fprintf(w, "ROC AUC %.4f  precision-recall AUC %.4f (class %q positive; from the model's scores)\n",
			score.ROCAUC(b.scores, b.positive), score.AveragePrecision(b.scores, b.positive), conf.Classes[1])
	}
	return nil
}

// allRows is 0, 1, …, n−1.
func allRows(n int) []int {
	r := make([]int, n)
	for i := range r {
		r[i] = i
	}
	return r
}
