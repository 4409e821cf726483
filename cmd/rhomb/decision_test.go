package main

import (
	"math"
	"path/filepath"
	"strconv"
	"strings"
	"testing"

	"github.com/rhomb/rhomb/net/classify"
)

// TestDecisionThroughTheCLI: train stores the threshold, calibration,
// prediction sets and reject option it is asked for; classify writes the
// probabilities, the set and the answer columns from them, exactly as the
// serving reader computes them; check measures them; and bad settings
// are usage errors naming the flag.
func TestDecisionThroughTheCLI(t *testing.T) {
	dir := t.TempDir()
	csvPath := sensorCSV(t, dir, 400)
	model := filepath.Join(dir, "d.model")
	r := mustRun(t, "train", "-data", csvPath, "-label", "state", "-hidden", "8", "-epochs", "4", "-o", model,
		"-threshold", "0.1", "-coverage", "0.9", "-target-error", "0.02")
	for _, piece := range []string{"decision: the second class (on) when the score is above 0.1 (-threshold)", "probabilities: Platt calibration", "prediction sets for 0.9 coverage"} {
		if !strings.Contains(r.stdout, piece) {
			t.Errorf("train's report lacks %q:\n%s", piece, r.stdout)
		}
	}
	c, err := classify.Load(model)
	if err != nil {
		t.Fatal(err)
	}
	d := c.Decision()
	if d == nil || d.Threshold == nil || *d.Threshold != 0.1 || d.Calibration == nil || d.Sets == nil || d.Sets.Coverage != 0.9 {
		t.Fatalf("stored decision %+v", d)
	}
	out := mustRun(t, "classify", "-model", model, "-data", csvPath, "-probabilities").stdout
	head, rows := readCSV(t, out)
	heads := []string{"class", "score:on", "p:off", "p:on", "set"}
	if d.Abstain != nil {
		heads = append(heads, "answer")
	}
	if strings.Join(head, ",") != strings.Join(heads, ",") {
		t.Fatalf("header %v, want %v", head, heads)
	}
	w := c.NewWork()
	raw := readFile(t, csvPath)
	_, in := readCSV(t, raw)
	for i, row := range rows {
		a, err := c.ClassifyFields(w, []string{in[i][0], in[i][1], in[i][2]})
		if err != nil {
			t.Fatal(err)
		}
		p1, _ := strconv.ParseFloat(row[3], 64)
		if math.Abs(p1-a.Probabilities[1]) > 5e-6*a.Probabilities[1]+1e-300 { // written with 6 significant digits
			t.Fatalf("row %d: p:on %s, the serving reader gives %v", i, row[3], a.Probabilities[1])
		}
		if row[0] != a.Label {
			t.Fatalf("row %d: class %s, serving %s", i, row[0], a.Label)
		}
	}
	rep := mustRun(t, "check", "-model", model, "-data", csvPath).stdout
	for _, piece := range []string{"decision threshold 0.1", "expected calibration error", "prediction sets for 0.9 coverage"} {
		if !strings.Contains(rep, piece) {
			t.Errorf("check's report lacks %q:\n%s", piece, rep)
		}
	}
	for _, bad := range [][]string{{"-threshold", "high"}, {"-coverage", "1.5"}, {"-target-error", "-0.1"}, {"-coverage", "0.9", "-no-calibration"}} {
		r := run(t, nil, append([]string{"train", "-data", csvPath, "-label", "state", "-o", filepath.Join(dir, "x.model")}, bad...)...)
		want(t, r, exitUsage, bad[0])
	}
	r = run(t, nil, "classify", "-model", sensorModelNoCalibration(t, dir, csvPath), "-data", csvPath, "-probabilities")
	want(t, r, exitUsage, "-probabilities", "no calibration")
}

func sensorModelNoCalibration(t *testing.T, dir, csvPath string) string {
	t.Helper()
	model := filepath.Join(dir, "plain.model")
	mustRun(t, "train", "-data", csvPath, "-label", "state", "-hidden", "4", "-epochs", "2", "-quiet", "-no-calibration", "-threshold", "zero", "-o", model)
	return model
}
