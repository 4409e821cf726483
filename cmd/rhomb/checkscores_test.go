package main

import (
	"math"
	"regexp"
	"strconv"
	"testing"

	"github.com/rhomb/rhomb/optim/modelfile"
)

// TestCheckScores: check reports balanced accuracy and macro-F1, and for
// a two-class model the ROC and precision–recall areas of its scores. The
// AUC it prints must be the Mann–Whitney statistic of the model's own
// scores on those rows (Hanley and McNeil 1982), recomputed here by pair
// counting from the scores that classify writes; the two agree to the
// four decimals printed. (Invented sensor rows: the property holds for
// any data.)
func TestCheckScores(t *testing.T) {
	dir := t.TempDir()
	data, model := sensorModel(t, dir)
	r := mustRun(t, "check", "-model", model, "-data", data)
	got := regexp.MustCompile(`balanced accuracy ([0-9.]+)  macro-F1 ([0-9.]+)\nROC AUC ([0-9.]+)  precision-recall AUC ([0-9.]+) \(class "on" positive`).FindStringSubmatch(r.stdout)
	if got == nil {
		t.Fatalf("check printed no balanced accuracy, macro-F1 and areas:\n%s", r.stdout)
	}
	auc, _ := strconv.ParseFloat(got[3], 64)

	m, err := modelfile.Load[float32](model)
	if err != nil {
		t.Fatal(err)
	}
	if m.Classes[1] != "on" {
		t.Fatalf("classes %v; the test expects \"on\" second", m.Classes)
	}
	c := mustRun(t, "classify", "-model", model, "-data", data)
	rows := regexp.MustCompile(`(?m)^(on|off),([-0-9.e+]+)$`).FindAllStringSubmatch(c.stdout, -1)
	truth := regexp.MustCompile(`(?m),(on|off)$`).FindAllStringSubmatch(readFile(t, data), -1)
	if len(rows) == 0 || len(rows) != len(truth) {
		t.Fatalf("%d scores for %d rows", len(rows), len(truth))
	}
	var u float64
	pos, neg := 0, 0
	scores := make([]float64, len(rows))
	for i, row := range rows {
		scores[i], _ = strconv.ParseFloat(row[2], 64)
	}
	for i := range scores {
		if truth[i][1] != "on" {
			neg++
			continue
		}
		pos++
		for j := range scores {
			switch {
			case truth[j][1] == "on":
			case scores[i] > scores[j]:
				u++
			case scores[i] == scores[j]:
				u += 0.5
			}
		}
	}
	if want := u / float64(pos*neg); math.Abs(auc-want) > 0.00005 {
		t.Errorf("check's ROC AUC %v, Mann–Whitney of the scores %v", auc, want)
	}
}
