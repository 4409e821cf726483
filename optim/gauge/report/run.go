package report

import (
	"fmt"
	"math"
	"strings"
	"time"

	"github.com/rhomb/rhomb/data"
	"github.com/rhomb/rhomb/internal/score"
	"github.com/rhomb/rhomb/loss"
	"github.com/rhomb/rhomb/net"
	"github.com/rhomb/rhomb/optim"
	"github.com/rhomb/rhomb/optim/gauge"
	"github.com/rhomb/rhomb/optim/gauge/plot"
)

// Run is everything a report shows. Only History is required; every
// other field left at its zero value leaves its section out (or, for
// Cautions, uses the defaults).
type Run struct {
	// Title heads the report; empty means "rhomb run report".
	Title string
	// Created is printed under the title when not zero. Leave it zero for
	// a report whose bytes depend only on the run.
	Created time.Time
	// Status is the run's termination status (optim.Status.String()), with
	// epochs and steps.
	Status        string
	Epochs, Steps int
	Network       string    // the layers, as Describe prints them
	Settings      []Setting // in the order to show
	Data          *Data
	History       *gauge.History
	// Heldout names the set the recorder measured as its Test set;
	// empty means "test".
	Heldout string
	// HeldoutLoss is that set's loss after every epoch (LossTrack), or nil.
	HeldoutLoss []float64
	// Start is the whole-set measurement before training
	// (gauge.Recorder.Measure), or nil.
	Start *gauge.Record
	// Final is the whole-set measurement of the final weights; nil means
	// the last epoch of History.
	Final *gauge.Record
	// Bound is the margin bound of the final weights with the measured
	// test error beside it (gauge.BoundOf with the test set); nil means
	// Final's bound, if any.
	Bound *gauge.BoundReport
	// BoundSet names the set whose error Bound.TestError is; empty means
	// "test". Name it truthfully: with no test split, say "validation".
	BoundSet string
	// Confusion holds the confusion matrices to show, in order.
	Confusion []Confusion
	// Calibration, when not nil, is the reliability of the saved model's
	// calibrated probabilities on some labelled rows; the report then has
	// a calibration section with its reliability diagram
	// (plot.Reliability) and expected calibration error.
	Calibration *plot.Calibration
	// Notes are cautions about this run's data, shown first among the
	// cautions (say, that demo data are invented).
	Notes []string
	// Cautions replace DefaultCautions when not nil.
	Cautions []string
}

// Setting is one line of the settings table.
type Setting struct{ Name, Value string }

// Data summarizes the data a run was trained on.
type Data struct {
	Source  string // file name, or a description
	Rows    int    // rows kept after reading
	Dropped int    // rows left out for missing values
	Columns int    // feature columns in the file (the label excluded)
	Inputs  int    // network inputs after encoding
	Classes []string
	Missing int // missing cells in the kept rows
	// MissingRows counts kept rows with at least one missing cell.
	MissingRows int
	// Handling says what was done with missing cells ("imputed with the
	// training rows' mean or most frequent value").
	Handling string
	Splits   []Split
}

// Split is one of the sets the rows were split into.
type Split struct {
	Name     string
	Rows     int
	PerClass []int // rows per class, in the order of Data.Classes
}

// Named is a data set with the name a report gives it.
type Named[T net.Float] struct {
	Name string
	Set  *data.Set[T]
}

// DescribeData summarizes a table read from a file (nil for data that
// did not come from one, such as IDX images) and the sets encoded from it,
// with handling describing what was done with missing cells. Nil sets are
// left out.
func DescribeData[T net.Float](t *data.Table, handling string, sets ...Named[T]) *Data {
	d := &Data{Handling: handling}
	// The classes in the order of the sets' output columns, which the
	// per-class counts follow; a table's own order (sorted) only when no
	// set names them.
	for _, s := range sets {
		if s.Set != nil && s.Set.Classes != nil {
			d.Classes = s.Set.Classes
			break
		}
	}
	if t != nil {
		d.Source, d.Rows, d.Dropped, d.Columns = t.Source, t.Rows, t.Dropped, len(t.Columns)
		if d.Classes == nil {
			d.Classes = t.Classes()
		}
		for r := range t.Rows {
			miss := 0
			for _, c := range t.Columns {
				if c.Missing != nil && c.Missing[r] {
					miss++
				}
			}
			d.Missing += miss
			if miss > 0 {
				d.MissingRows++
			}
		}
	}
	for _, s := range sets {
		if s.Set == nil {
			continue
		}
		d.Inputs = s.Set.Features
		sp := Split{Name: s.Name, Rows: s.Set.Rows, PerClass: make([]int, max(s.Set.Outputs, 2))}
		for r := range s.Set.Rows {
			if c := s.Set.Class(r); c < len(sp.PerClass) {
				sp.PerClass[c]++
			}
		}
		d.Splits = append(d.Splits, sp)
	}
	if t == nil {
		for _, s := range d.Splits {
			d.Rows += s.Rows
		}
	}
	return d
}

// Confusion is a confusion matrix: Count[i][j] rows of true class i were
// decided as class j.
type Confusion struct {
	Name    string // the set, e.g. "test"
	Classes []string
	Count   [][]int
}

func (c Confusion) score() *score.Confusion {
	return &score.Confusion{Classes: c.Classes, Count: c.Count}
}

// ConfusionOf runs m over set and tallies its decisions (the sign of one
// output, the largest of several) against the set's classes.
func ConfusionOf[T net.Float](m gauge.Model[T], name string, set *data.Set[T]) Confusion {
	classes := set.Classes
	if classes == nil {
		classes = make([]string, max(set.Outputs, 2))
		for i := range classes {
			classes[i] = fmt.Sprint(i)
		}
	}
	c := score.New(classes)
	const chunk = 1024
	for start := 0; start < set.Rows; start += chunk {
		rows := min(chunk, set.Rows-start)
		out := m.Forward(set.X[start*set.Features:(start+rows)*set.Features], rows)
		for r := range rows {
			c.Add(set.Class(start+r), data.ClassOf(out[r*set.Outputs:(r+1)*set.Outputs]))
		}
	}
	return Confusion{Name: name, Classes: c.Classes, Count: c.Count}
}

// Describe returns a one-line description of a network's nodes: each
// dense layer with its width, other nodes by kind.
func Describe[T net.Float](n *net.Network[T]) string {
	parts := []string{fmt.Sprintf("%d inputs", n.In())}
	for _, nd := range n.Nodes() {
		switch d := nd.(type) {
		case *net.Dense[T]:
			parts = append(parts, fmt.Sprintf("%s (dense, %d)", d.Name(), d.Out()))
		default:
			parts = append(parts, fmt.Sprintf("%s (%s)", nd.Name(), nd.Kind()))
		}
	}
	return strings.Join(parts, " → ")
}

// LossTrack measures a set's mean loss at the end of every epoch, for the
// loss figure's held-out curve. The recorder does not: it keeps the
// trainer's minibatch losses only.
type LossTrack[T net.Float] struct {
	m    gauge.Model[T]
	lf   loss.Func[T]
	set  *data.Set[T]
	Loss []float64 // one per epoch seen
}

// TrackLoss returns a LossTrack of lf on set; pass its Hooks to the
// trainer, joined with the recorder's (optim.Join).
func TrackLoss[T net.Float](m gauge.Model[T], lf loss.Func[T], set *data.Set[T]) *LossTrack[T] {
	return &LossTrack[T]{m: m, lf: lf, set: set}
}

// Hooks returns an Epoch hook that appends the set's loss to l.Loss.
func (l *LossTrack[T]) Hooks() *optim.Hooks {
	return &optim.Hooks{Epoch: func(*optim.EpochInfo) error {
		l.Loss = append(l.Loss, SetLoss(l.m, l.lf, l.set))
		return nil
	}}
}

// SetLoss returns lf's mean loss over every row of set (NaN for an empty
// or nil set), evaluated in chunks and combined with each chunk's row
// count as weight, so the result is the mean over rows whatever the chunk
// size.
func SetLoss[T net.Float](m gauge.Model[T], lf loss.Func[T], set *data.Set[T]) float64 {
	if set == nil || set.Rows == 0 {
		return math.NaN()
	}
	const chunk = 256
	var sum float64
	for start := 0; start < set.Rows; start += chunk {
		rows := min(chunk, set.Rows-start)
		out := m.Forward(set.X[start*set.Features:(start+rows)*set.Features], rows)
		sum += float64(rows) * lf.Eval(out, set.Y[start*set.Outputs:(start+rows)*set.Outputs], rows, set.Outputs, nil)
	}
	return sum / float64(set.Rows)
}

// FinalRecord returns the whole-set measures of the final weights: the
// recorder's last epoch when that epoch took them (RecorderOptions.EpochEvery
// may skip it), else a fresh rec.Measure() with the last epoch's trainer
// values (epoch, steps, loss, mean ρ*) copied in. Call it after Run.
func FinalRecord[T net.Float](rec *gauge.Recorder[T]) (*gauge.Record, error) {
	last := rec.History().Last()
	if last != nil && last.Train != nil {
		return last, nil
	}
	m, err := rec.Measure()
	if err != nil {
		return nil, err
	}
	if last != nil {
		m.Epoch, m.Steps, m.Seconds, m.Loss = last.Epoch, last.Steps, last.Seconds, last.Loss
		m.RhoStarMean, m.GapMean, m.SpeedMean = last.RhoStarMean, last.GapMean, last.SpeedMean
	}
	return &m, nil
}
