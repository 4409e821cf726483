package main

import (
	"errors"
	"fmt"

	"github.com/rhomb/rhomb/optim/modelfile"
	"github.com/rhomb/rhomb/optim/modelfile/onnx"
)

const exportSummary = `Write a saved model as an ONNX file, for runtimes outside Go. The graph
takes the raw input columns' encodings and applies the model's own
preprocessing (standardizing, one-hot blocks, imputation, unit norm), then
the network; its outputs are the scores and the class index (for two
classes with one signed score, the class is the second one when the score
is above the model's decision threshold, as rhomb classify answers).
Weights are written as float32. Calibrated probabilities, prediction sets
and the reject option are not part of the graph: read them from the model
file (docs/model-file.md) or serve the model with rhomb's own reader.
-features leaves the preprocessing out: the graph then takes the feature
row itself.`

const exportExample = `  rhomb export -model pumps.model -onnx pumps.onnx
  rhomb export -model pumps.model -onnx pumps-features.onnx -features`

func runExport(e *env, args []string) error {
	fs := newFlags(e, "export", exportSummary, exportExample)
	model := fs.String("model", "", "model `file` to export (required)")
	out := fs.String("onnx", "", "ONNX `file` to write (required)")
	features := fs.Bool("features", false, "leave the preprocessing out: the graph takes the feature row")
	scoresOnly := fs.Bool("scores-only", false, "leave out the class output")
	if err := parse(fs, args); err != nil {
		return err
	}
	switch {
	case *model == "":
		return usageError{errors.New("export: -model names the model file")}
	case *out == "":
		return usageError{errors.New("export: -onnx names the ONNX file to write")}
	}
	if err := writable("export", "-onnx", *out); err != nil {
		return err
	}
	o := onnx.Options{FeatureInput: *features, ScoresOnly: *scoresOnly}
	err := withModel(*model,
		func(m *modelfile.Model[float32]) error { return exportONNX(m, *model, *out, o) },
		func(m *modelfile.Model[float64]) error { return exportONNX(m, *model, *out, o) })
	if err != nil {
		return err
	}
	fmt.Fprintf(e.stdout, "wrote %s\n", *out)
	return nil
}

func exportONNX[T float32 | float64](m *modelfile.Model[T], model, out string, o onnx.Options) error {
	if m.Checkpoint != nil {
		return modelError{fmt.Errorf("%s is a checkpoint; export the model train saved with -o", model)}
	}
	var oe *onnx.Error
	err := onnx.Save(out, m, o)
	if errors.As(err, &oe) {
		return modelError{fmt.Errorf("%s cannot be exported to ONNX: %v", model, libPrefixes.Replace(err.Error()))}
	}
	if err != nil {
		return writeErr("ONNX file", out, err)
	}
	return nil
}
