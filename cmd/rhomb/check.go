package main

import (
	"errors"
	"fmt"
	"io"
	"math"

	"github.com/rhomb/rhomb/data"
	"github.com/rhomb/rhomb/internal/calib"
	"github.com/rhomb/rhomb/internal/score"
	"github.com/rhomb/rhomb/net"
	"github.com/rhomb/rhomb/net/classify"
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
	sep := fs.String("sep", ",", "field `separator` of the CSV input: one character, or \"tab\"")
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
	comma, err := separator(*sep)
	if err != nil {
		return err
	}
	m, err := loadServing(*model)
	if err != nil {
		return err
	}
	return check(e, m, *in, *label, *images, *labels, comma, *skip)
}

func check(e *env, m *classify.Model, in, label, images, labels string, sep rune, skip bool) error {
	conf := score.New(m.Classes())
	var bs binaryScores
	if images != "" {
		var x []float64
		var truth []int
		if p := m.Pipeline(); p != nil {
			t, err := readIDXTable(images, labels)
			if err != nil {
				return err
			}
			s, err := data.Encode[float64](t, allRows(t.Rows), p, m.Classes())
			if err != nil {
				return dataError{err}
			}
			x, truth = s.X, classesOf(s)
		} else {
			s, err := readIDXSet[float64](images, labels)
			if err != nil {
				return err
			}
			if s.Features != m.Features() || s.Outputs != m.Outputs() {
				return dataError{fmt.Errorf("%s: %d features and %d classes; the model takes %d and gives %d", images, s.Features, s.Outputs, m.Features(), m.Outputs())}
			}
			x, truth = s.X, classesOf(s)
		}
		rows := len(truth)
		answers := make([]classify.Answer, rows)
		if err := m.ClassifyVectors(nil, x, rows, answers); err != nil {
			return dataError{fmt.Errorf("%s: %w", images, err)}
		}
		var ds decisionStats
		for r, a := range answers {
			conf.Add(truth[r], a.Class)
			addScore(&bs, a.Scores, truth[r])
			ds.add(a, truth[r])
		}
		if err := writeScores(e.stdout, conf, &bs); err != nil {
			return err
		}
		return ds.write(e.stdout, m)
	}
	if label == "" {
		label = m.Info().Label
	}
	if label == "" {
		return usageError{errors.New("check: the model does not record its label column; name it with -label")}
	}
	index := map[string]int{}
	for i, c := range m.Classes() {
		index[c] = i
	}
	skipped := 0
	var ds decisionStats
	err := forEachRow(e, m, in, label, nil, sep, skip, func(row csvRow) error {
		if !row.answered {
			skipped++
			return nil
		}
		truth, ok := index[row.label]
		if !ok {
			return dataError{&data.ParseError{File: in, Line: row.line, Field: label, Err: fmt.Errorf("class %q is not one the model knows (%s)", row.label, joinClasses(m.Classes()))}}
		}
		conf.Add(truth, row.answer.Class)
		addScore(&bs, row.answer.Scores, truth)
		ds.add(row.answer, truth)
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
	if err := writeScores(e.stdout, conf, &bs); err != nil {
		return err
	}
	return ds.write(e.stdout, m)
}

// decisionStats measures what a model file's decision adds, on labelled
// rows: the calibration (expected calibration error of the top-class
// probability), the prediction sets (coverage and mean size) and the
// reject option (the share of rows answered and their error rate).
type decisionStats struct {
	conf                  []float64
	correct               []bool
	rows, covered, inSets int
	answered, wrong       int
}

func (d *decisionStats) add(a classify.Answer, truth int) {
	d.rows++
	if a.Probabilities != nil {
		top := a.Probabilities[0]
		for _, p := range a.Probabilities {
			top = max(top, p)
		}
		d.conf, d.correct = append(d.conf, top), append(d.correct, a.Class == truth)
	}
	d.inSets += len(a.Set)
	for _, j := range a.Set {
		if j == truth {
			d.covered++
		}
	}
	if !a.Abstained {
		d.answered++
		if a.Class != truth {
			d.wrong++
		}
	}
}

func (d *decisionStats) write(w io.Writer, m *classify.Model) error {
	dec := m.Decision()
	if dec == nil || d.rows == 0 {
		return nil
	}
	if dec.Threshold != nil {
		fmt.Fprintf(w, "decision threshold %.6g on the score (chosen for %s)\n", *dec.Threshold, dec.ThresholdFor)
	}
	if dec.Calibration != nil {
		fmt.Fprintf(w, "calibration (%s): expected calibration error %.4f (top-class probability, %d equal bins)\n",
			dec.Calibration.Kind, calib.ECE(d.conf, d.correct, eceBins), eceBins)
	}
	if s := dec.Sets; s != nil {
		fmt.Fprintf(w, "prediction sets for %.3g coverage: %.4f of rows covered, %.3f classes per set on average\n",
			s.Coverage, float64(d.covered)/float64(d.rows), float64(d.inSets)/float64(d.rows))
	}
	if a := dec.Abstain; a != nil {
		errRate := math.NaN()
		if d.answered > 0 {
			errRate = float64(d.wrong) / float64(d.answered)
		}
		fmt.Fprintf(w, "reject option for %.3g error: %.4f of rows answered, error %.4f among them (%d of %d)\n",
			a.TargetError, float64(d.answered)/float64(d.rows), errRate, d.wrong, d.answered)
	}
	return nil
}

// eceBins is the number of equal confidence bins of the expected
// calibration error (15, as Guo et al. 2017 use; from memory).
const eceBins = 15

// classesOf returns each row's class index.
func classesOf[T net.Float](s *data.Set[T]) []int {
	c := make([]int, s.Rows)
	for r := range c {
		c[r] = s.Class(r)
	}
	return c
}

// binaryScores keeps a two-class model's scores (its one ±1 output) and
// whether each row is of the second class, the +1 one.
type binaryScores struct {
	scores   []float64
	positive []bool
}

// addScore records a row's score when the model has one output.
func addScore(b *binaryScores, out []float64, truth int) {
	if len(out) == 1 {
		b.scores, b.positive = append(b.scores, out[0]), append(b.positive, truth == 1)
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
