package score

import (
	"fmt"
	"math"
	"strings"
	"testing"
)

// TestWorkedExample checks the figures on a confusion matrix worked by hand
// (common practice, no source, for the definitions):
//
//	        pred a  pred b
//	true a     3       1      precision a = 3/5, recall a = 3/4
//	true b     2       4      precision b = 4/5, recall b = 4/6
func TestWorkedExample(t *testing.T) {
	c := New([]string{"a", "b"})
	for _, p := range [][2]int{{0, 0}, {0, 0}, {0, 0}, {0, 1}, {1, 0}, {1, 0}, {1, 1}, {1, 1}, {1, 1}, {1, 1}} {
		c.Add(p[0], p[1])
	}
	if c.Total() != 10 || c.Accuracy() != 0.7 {
		t.Errorf("total %d accuracy %v, want 10 and 0.7", c.Total(), c.Accuracy())
	}
	k := c.PerClass()
	want := []Class{{"a", 4, 0.6, 0.75, 2 * 0.6 * 0.75 / 1.35}, {"b", 6, 0.8, 4.0 / 6, 2 * 0.8 * (4.0 / 6) / (0.8 + 4.0/6)}}
	for i := range want {
		if k[i].Name != want[i].Name || k[i].Support != want[i].Support || math.Abs(k[i].Precision-want[i].Precision) > 1e-15 || math.Abs(k[i].Recall-want[i].Recall) > 1e-15 || math.Abs(k[i].F1-want[i].F1) > 1e-15 {
			t.Errorf("class %d: %+v, want %+v", i, k[i], want[i])
		}
	}
	var b strings.Builder
	if err := c.Write(&b); err != nil {
		t.Fatal(err)
	}
	if !strings.Contains(b.String(), "accuracy 0.7000 on 10 rows") || !strings.Contains(b.String(), "b            2        4") {
		t.Errorf("report:\n%s", b.String())
	}
	if p := New([]string{"x", "y"}).PerClass(); !math.IsNaN(p[0].Precision) {
		t.Errorf("precision with no predictions %v, want NaN", p[0].Precision)
	}
}

// TestBalancedAccuracy checks balanced accuracy, the mean recall over the
// classes present, on small tallies worked by hand (common practice, no
// source, for the definition).
func TestBalancedAccuracy(t *testing.T) {
	// The worked example above: recalls 3/4 and 4/6, mean 17/24.
	c := New([]string{"a", "b"})
	for _, p := range [][2]int{{0, 0}, {0, 0}, {0, 0}, {0, 1}, {1, 0}, {1, 0}, {1, 1}, {1, 1}, {1, 1}, {1, 1}} {
		c.Add(p[0], p[1])
	}
	// Two recalls and one division by 2: a few ulps of 0.7.
	if got := c.BalancedAccuracy(); math.Abs(got-17.0/24) > 1e-15 {
		t.Errorf("balanced accuracy %v, want 17/24 = %v", got, 17.0/24)
	}

	// Always answering the common class of 9 against 1: accuracy 0.9,
	// balanced accuracy (9/9 + 0/1)/2 = 0.5.
	m := New([]string{"common", "rare", "absent"})
	for range 9 {
		m.Add(0, 0)
	}
	m.Add(1, 0)
	// The class "absent" has no rows; it is left out of the mean, not
	// counted as recall 0 or NaN.
	if acc, bal := m.Accuracy(), m.BalancedAccuracy(); acc != 0.9 || bal != 0.5 {
		t.Errorf("accuracy %v balanced %v, want 0.9 and 0.5", acc, bal)
	}
	if b := New([]string{"x", "y"}).BalancedAccuracy(); !math.IsNaN(b) {
		t.Errorf("balanced accuracy with no predictions %v, want NaN", b)
	}
}

// TestConfusionHeadsNotCut: two class names that share their first seven
// letters stay apart in the confusion table's heads (they were cut to
// "cavita…" before), and a table too wide for whole names numbers its
// columns with a legend on the rows.
func TestConfusionHeadsNotCut(t *testing.T) {
	c := New([]string{"cavitation-early", "cavitation-late", "ok"})
	c.Add(0, 0)
	c.Add(1, 0)
	c.Add(2, 2)
	var b strings.Builder
	if err := c.Write(&b); err != nil {
		t.Fatal(err)
	}
	text := b.String()
	_, table, _ := strings.Cut(text, "columns: predicted)\n")
	head := strings.Fields(strings.SplitN(table, "\n", 2)[0])
	if len(head) != 3 || head[0] != "cavitation-early" || head[1] != "cavitation-late" || head[2] != "ok" {
		t.Fatalf("heads %q:\n%s", head, text)
	}
	var names []string
	for i := range 12 {
		names = append(names, fmt.Sprintf("a-rather-long-class-name-%02d", i))
	}
	wide := New(names)
	wide.Add(3, 4)
	b.Reset()
	if err := wide.Write(&b); err != nil {
		t.Fatal(err)
	}
	_, table, _ = strings.Cut(b.String(), "columns: predicted)\n")
	lines := strings.Split(table, "\n")
	if h := strings.Fields(lines[0]); len(h) != 12 || h[0] != "1" || h[11] != "12" {
		t.Fatalf("numbered heads %q", h)
	}
	if !strings.HasPrefix(lines[4], "4 a-rather-long-class-name-03") {
		t.Fatalf("row 4 %q: want its number and whole name", lines[4])
	}
	for _, l := range lines[:13] {
		if n := len([]rune(l)); n > 200 {
			t.Fatalf("a line of %d characters", n)
		}
	}
}
