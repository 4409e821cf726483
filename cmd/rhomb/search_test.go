package main

import (
	"path/filepath"
	"strings"
	"testing"

	"github.com/rhomb/rhomb/internal/opendata"
	"github.com/rhomb/rhomb/optim/modelfile"
)

// TestTrainSearch races four candidates on the Palmer penguins
// (REFERENCES.md) and checks the command's promises: a table of the four,
// one saved model that classifies, and a training record naming the
// winner's settings. The three species are nearly separable on these
// measurements (the penguins check in internal/checks reaches 0.97), so
// the winner's validation accuracy must be at least 0.9, a regression
// guard far above the majority rate, 0.44.
func TestTrainSearch(t *testing.T) {
	data := opendata.File(t, opendata.Penguins)
	model := filepath.Join(t.TempDir(), "search.model")
	r := mustRun(t, append(penguinArgs(data), "-missing", "impute", "-hidden", "8", "-epochs", "16", "-search", "4", "-o", model)...)
	if !strings.Contains(r.stdout, "search: 4 candidates by successive halving") || strings.Count(r.stdout, "\n") < 6 {
		t.Fatalf("no candidate table:\n%s", r.stdout)
	}
	m, err := modelfile.Load[float32](model)
	if err != nil {
		t.Fatal(err)
	}
	acc, ok := m.Metrics["validation_accuracy"].(float64)
	if !ok || acc < 0.9 {
		t.Errorf("validation accuracy %v; want at least 0.9", m.Metrics["validation_accuracy"])
	}
	if !strings.Contains(string(m.Training), `"search":4`) {
		t.Errorf("the training record does not say the model was searched: %s", m.Training)
	}
	mustRun(t, "classify", "-model", model, "-data", data, "-blank-missing")

	// Settings a search cannot honour are refused before any work, naming
	// the flag.
	r = run(t, nil, append(penguinArgs(data), "-search", "4", "-act", "smooth:5", "-o", model)...)
	want(t, r, exitUsage, "-search", "-act")
	r = run(t, nil, append(penguinArgs(data), "-search", "1", "-o", model)...)
	want(t, r, exitUsage, "-search 1")
}
