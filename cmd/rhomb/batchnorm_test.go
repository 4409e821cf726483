package main

import (
	"path/filepath"
	"strings"
	"testing"

	"github.com/rhomb/rhomb/net/classify"
)

// TestBatchNormFlag: -batchnorm trains a network with a batch-norm node
// after each hidden layer, which the other commands read, serve and
// export; with weight normalization it is refused before any work, naming
// both flags. The data are invented (sensorCSV): the properties hold for
// any data.
func TestBatchNormFlag(t *testing.T) {
	dir := t.TempDir()
	csvPath := sensorCSV(t, dir, 200)
	model := filepath.Join(dir, "bn.model")
	want(t, run(t, nil, "train", "-data", csvPath, "-label", "state", "-batchnorm", "-o", model), exitUsage, "-batchnorm needs -norm none")

	mustRun(t, "train", "-data", csvPath, "-label", "state", "-hidden", "8,6", "-epochs", "3", "-batchnorm", "-norm", "none", "-quiet", "-o", model)
	m, err := classify.Load(model)
	if err != nil {
		t.Fatal(err)
	}
	var kinds []string
	for _, n := range m.Info().Graph {
		kinds = append(kinds, n.Kind)
	}
	if got := strings.Join(kinds, ","); got != "constant-one,dense,batch-norm,relu,dense,batch-norm,relu,readout" {
		t.Errorf("graph %s", got)
	}
	out := mustRun(t, "classify", "-model", model, "-data", csvPath).stdout
	if strings.Count(out, "\n") != 201 {
		t.Errorf("classify wrote %d lines for 200 rows and a header", strings.Count(out, "\n"))
	}
	if d := mustRun(t, "describe", "-model", model).stdout; !strings.Contains(d, "batch-norm") {
		t.Errorf("describe does not show the batch-norm nodes:\n%s", d)
	}
	mustRun(t, "export", "-model", model, "-onnx", filepath.Join(dir, "bn.onnx"))
}
