package main

import (
	"bytes"
	"os"
	"path/filepath"
	"testing"

	"github.com/rhomb/rhomb/optim/modelfile"
	"github.com/rhomb/rhomb/optim/modelfile/onnx"
)

// TestExportONNX: rhomb export writes exactly what the library's exporter
// makes of the saved model (the ONNX format itself is checked against
// onnxruntime in optim/modelfile/onnx's tests and .ci/onnx-check), refuses a
// checkpoint, and names its flags when they are missing.
func TestExportONNX(t *testing.T) {
	dir := t.TempDir()
	_, model := sensorModel(t, dir)
	out := filepath.Join(dir, "m.onnx")
	mustRun(t, "export", "-model", model, "-onnx", out)
	got, err := os.ReadFile(out)
	if err != nil {
		t.Fatal(err)
	}
	m, err := modelfile.Load[float32](model)
	if err != nil {
		t.Fatal(err)
	}
	lib, err := onnx.Marshal(m, onnx.Options{})
	if err != nil {
		t.Fatal(err)
	}
	if !bytes.Equal(got, lib) {
		t.Fatalf("the exported file (%d bytes) differs from onnx.Marshal of the model (%d bytes)", len(got), len(lib))
	}
	mustRun(t, "train", "-data", filepath.Join(dir, "sensors.csv"), "-label", "state", "-hidden", "4", "-epochs", "2", "-quiet", "-save-every", "1", "-o", filepath.Join(dir, "c.model"))
	r := run(t, nil, "export", "-model", filepath.Join(dir, "c.model.checkpoint"), "-onnx", out)
	want(t, r, exitBadModel, "is a checkpoint")
	want(t, run(t, nil, "export", "-model", model), exitUsage, "-onnx")
}
