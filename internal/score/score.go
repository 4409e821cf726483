// Package score tallies a classifier's predictions against the truth:
// accuracy, balanced accuracy, per-class precision, recall and F1, and the
// confusion matrix.
package score

import (
	"fmt"
	"io"
	"math"
	"strconv"
	"strings"
	"unicode/utf8"
)

// Confusion counts predictions: Count[i][j] rows of true class i were
// predicted as class j.
type Confusion struct {
	Classes []string
	Count   [][]int
}

// New returns an empty tally over the named classes.
func New(classes []string) *Confusion {
	c := &Confusion{Classes: classes, Count: make([][]int, len(classes))}
	for i := range c.Count {
		c.Count[i] = make([]int, len(classes))
	}
	return c
}

// Add records one prediction.
func (c *Confusion) Add(truth, predicted int) { c.Count[truth][predicted]++ }

// Total is the number of predictions recorded.
func (c *Confusion) Total() int {
	n := 0
	for _, row := range c.Count {
		for _, v := range row {
			n += v
		}
	}
	return n
}

// Accuracy is the fraction of predictions that were right; NaN with none.
func (c *Confusion) Accuracy() float64 {
	right := 0
	for i := range c.Count {
		right += c.Count[i][i]
	}
	return float64(right) / float64(c.Total())
}

// BalancedAccuracy is the mean of the per-class recalls over the classes
// present (support above 0), so that every class counts the same however
// rare it is; a classifier that always answers one class scores 1/C on C
// present classes, and a perfect one 1. NaN with no predictions. (Common
// practice, no source: balanced accuracy as the macro-average of recall.)
func (c *Confusion) BalancedAccuracy() float64 {
	var sum float64
	present := 0
	for k := range c.Count {
		sup := 0
		for _, v := range c.Count[k] {
			sup += v
		}
		if sup > 0 {
			sum += float64(c.Count[k][k]) / float64(sup)
			present++
		}
	}
	return sum / float64(present)
}

// Class holds one class's figures. Precision is NaN for a class never
// predicted, Recall for a class never present, F1 when either is.
type Class struct {
	Name                  string
	Support               int // rows of this class
	Precision, Recall, F1 float64
}

// MacroF1 is the mean F1 over the classes present (support above 0), a
// class never predicted counting F1 = 0 (common practice, no source:
// the macro-average of F1). NaN with no predictions.
func (c *Confusion) MacroF1() float64 {
	var sum float64
	present := 0
	for _, k := range c.PerClass() {
		if k.Support == 0 {
			continue
		}
		present++
		if !math.IsNaN(k.F1) {
			sum += k.F1
		}
	}
	return sum / float64(present)
}

// PerClass returns every class's precision, recall and F1 (common
// practice, no source: precision = TP/(TP+FP), recall = TP/(TP+FN),
// F1 their harmonic mean).
func (c *Confusion) PerClass() []Class {
	out := make([]Class, len(c.Classes))
	for k := range c.Classes {
		tp, pred, sup := c.Count[k][k], 0, 0
		for i := range c.Count {
			pred += c.Count[i][k]
			sup += c.Count[k][i]
		}
		p := float64(tp) / float64(pred)
		r := float64(tp) / float64(sup)
		out[k] = Class{Name: c.Classes[k], Support: sup, Precision: p, Recall: r, F1: 2 * p * r / (p + r)}
	}
	return out
}

// Write prints the figures and the confusion matrix as aligned text.
func (c *Confusion) Write(w io.Writer) error {
	width := len("class")
	for _, n := range c.Classes {
		width = max(width, utf8.RuneCountInString(n))
	}
	var b strings.Builder
	fmt.Fprintf(&b, "accuracy %.4f on %d rows\n\n", c.Accuracy(), c.Total())
	fmt.Fprintf(&b, "%s  %9s  %9s  %9s  %7s\n", pad("class", width), "precision", "recall", "F1", "rows")
	for _, k := range c.PerClass() {
		fmt.Fprintf(&b, "%s  %9s  %9s  %9s  %7d\n", pad(k.Name, width), figure(k.Precision), figure(k.Recall), figure(k.F1), k.Support)
	}
	// The columns are headed by the whole class names, never cut (two
	// names that share a beginning must not look alike); when that would
	// make the table wider than 100 characters, by numbers, with a legend.
	heads := make([]string, len(c.Classes))
	total := width
	for j, n := range c.Classes {
		heads[j] = n
		total += 2 + max(7, utf8.RuneCountInString(n))
	}
	numbered := total > 100
	if numbered {
		for j := range heads {
			heads[j] = strconv.Itoa(j + 1)
		}
	}
	label := width
	if numbered {
		label += len(strconv.Itoa(len(c.Classes))) + 1
	}
	fmt.Fprintf(&b, "\nconfusion (rows: true class, columns: predicted)\n%s", pad("", label))
	for _, h := range heads {
		fmt.Fprintf(&b, "  %s", padLeft(h, max(7, utf8.RuneCountInString(h))))
	}
	b.WriteByte('\n')
	for i, row := range c.Count {
		name := c.Classes[i]
		if numbered {
			name = fmt.Sprintf("%d %s", i+1, name)
		}
		b.WriteString(pad(name, label))
		for j, v := range row {
			fmt.Fprintf(&b, "  %s", padLeft(strconv.Itoa(v), max(7, utf8.RuneCountInString(heads[j]))))
		}
		b.WriteByte('\n')
	}
	_, err := io.WriteString(w, b.String())
	return err
}

// pad and padLeft pad s with spaces to n characters (runes, not bytes, so
// that names outside ASCII line up).
func pad(s string, n int) string {
	return s + strings.Repeat(" ", max(0, n-utf8.RuneCountInString(s)))
}

func padLeft(s string, n int) string {
	return strings.Repeat(" ", max(0, n-utf8.RuneCountInString(s))) + s
}

// figure prints a ratio, or "-" where it is undefined (NaN).
func figure(v float64) string {
	if math.IsNaN(v) {
		return "-"
	}
	return fmt.Sprintf("%.4f", v)
}
