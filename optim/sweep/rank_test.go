package sweep

import (
	"bytes"
	"math"
	"strings"
	"testing"
)

// TestRankWorkedExample ranks hand-made results whose order follows from
// the documented rule key by key (the rule is the package's definition;
// each pair below differs in exactly one key).
func TestRankWorkedExample(t *testing.T) {
	nan := math.NaN()
	mk := func(index int, acc, margin, bound float64, err string) Result {
		return Result{Point: Point{Index: index}, ValAccuracy: acc, ValScore: acc, MarginMin: margin, Bound: bound, Err: err}
	}
	in := []Result{
		mk(0, 0.9, 0.1, 3, "diverged"), // failed: last of all, whatever its numbers
		mk(1, 0.8, 0.5, 1, ""),         // lower accuracy than 2–6
		mk(2, 0.9, 0.2, 5, ""),         // ties 3 on accuracy, larger margin: before 3
		mk(3, 0.9, 0.1, 2, ""),         // ties 4 on accuracy and margin, smaller bound: before 4
		mk(4, 0.9, 0.1, 4, ""),         // ties 5 on every measure, smaller index: before 5
		mk(5, 0.9, 0.1, 4, ""),         //
		mk(6, 0.9, 0.1, nan, ""),       // bound not taken: after every number
		mk(7, nan, 0.9, 0, ""),         // no validation accuracy: after every accuracy
		mk(8, 0.7, 0.1, 4, "bad"),      // failed, index after 0
	}
	want := []int{2, 3, 4, 5, 6, 1, 7, 0, 8}
	got := Rank(in)
	for i, r := range got {
		if r.Index != want[i] {
			t.Fatalf("rank %d is point %d, want %d (ranking %v)", i+1, r.Index, want[i], indices(got))
		}
	}
	// The order is total: the same results in any order rank the same.
	rev := make([]Result, len(in))
	for i := range in {
		rev[i] = in[len(in)-1-i]
	}
	if g := indices(Rank(rev)); !equalInts(g, want) {
		t.Errorf("reversed input ranks %v, want %v", g, want)
	}
	if in[0].Index != 0 {
		t.Error("Rank reordered its argument")
	}
}

func indices(rs []Result) []int {
	out := make([]int, len(rs))
	for i, r := range rs {
		out[i] = r.Index
	}
	return out
}

func equalInts(a, b []int) bool {
	if len(a) != len(b) {
		return false
	}
	for i := range a {
		if a[i] != b[i] {
			return false
		}
	}
	return true
}

// TestRankByChosenMetric: the first key is the validation score by the
// sweep's metric, not accuracy: a run with lower accuracy but higher
// balanced accuracy ranks first when the sweep ranks by balanced
// accuracy. A results file keeps the score and the metric, and a file
// written before the metric could be chosen reads with the score equal to
// its accuracy.
func TestRankByChosenMetric(t *testing.T) {
	a := Result{Point: Point{Index: 0}, ValAccuracy: 0.9, ValScore: 0.55, Metric: "balanced-accuracy"}
	b := Result{Point: Point{Index: 1}, ValAccuracy: 0.8, ValScore: 0.75, Metric: "balanced-accuracy"}
	if r := Rank([]Result{a, b}); r[0].Index != 1 {
		t.Fatalf("ranked %d first; the higher balanced accuracy is run 1", r[0].Index)
	}
	gr := &Grid{Rho0: []float64{0.5, 1}}
	a.Point, b.Point = gr.Points()[0], gr.Points()[1]
	res, err := NewResults(gr, All, []Result{a, b})
	if err != nil {
		t.Fatal(err)
	}
	var buf bytes.Buffer
	if _, err := res.WriteTo(&buf); err != nil {
		t.Fatal(err)
	}
	back, err := ReadResults(bytes.NewReader(buf.Bytes()), "r.jsonl")
	if err != nil {
		t.Fatal(err)
	}
	if got := back.Results[1]; got.ValScore != 0.75 || got.Metric != "balanced-accuracy" {
		t.Fatalf("read back %+v", got)
	}
	old := strings.ReplaceAll(buf.String(), `"validation_score":0.55,"metric":"balanced-accuracy",`, "")
	old = strings.ReplaceAll(old, `"validation_score":0.75,"metric":"balanced-accuracy",`, "")
	if old == buf.String() {
		t.Fatalf("the test's edit did not apply to %s", buf.String())
	}
	back, err = ReadResults(strings.NewReader(old), "old.jsonl")
	if err != nil {
		t.Fatal(err)
	}
	if got := back.Results[0]; got.ValScore != 0.9 || got.Metric != "accuracy" {
		t.Fatalf("an old file read as %+v; want the score equal to the accuracy 0.9", got)
	}
}
