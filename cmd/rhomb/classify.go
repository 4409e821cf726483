package main

import (
	"encoding/csv"
	"errors"
	"io"
	"strconv"

	"github.com/rhomb/rhomb/data"
	"github.com/rhomb/rhomb/internal/atomicfile"
	"github.com/rhomb/rhomb/net"
	"github.com/rhomb/rhomb/net/modelfile"
)

const classifySummary = `Label rows with a saved model. Reads a CSV file with a header (the model's
input columns, in any order, others ignored), applies the model's saved
preprocessing, and writes one output row per input row, in the same order:
the class, then the network's score for each class (for two classes, one
score: positive means the second class). Streams: any file size.`

const classifyExample = `  rhomb classify -model pumps.model -data today.csv -o today-labelled.csv
  cat today.csv | rhomb classify -model pumps.model > labelled.csv`

func runClassify(e *env, args []string) error {
	fs := newFlags(e, "classify", classifySummary, classifyExample)
	model := fs.String("model", "", "model `file` (required)")
	in := fs.String("data", "-", "CSV `file` to label; - reads standard input")
	out := fs.String("o", "-", "CSV `file` to write; - writes standard output")
	blank := fs.Bool("blank-missing", false, "write an empty output row for a row with a missing cell, instead of failing, when the model does not impute")
	if err := parse(fs, args); err != nil {
		return err
	}
	if *model == "" {
		return usageError{errors.New("classify: -model names the model file")}
	}
	var w io.Writer = e.stdout
	var f *atomicfile.File
	if *out != "-" {
		// Write beside the target and rename at the end, so a failed run
		// leaves no half-written output.
		var err error
		if f, err = atomicfile.Create(*out); err != nil {
			return err
		}
		defer f.Abort()
		w = f
	}
	cw := csv.NewWriter(w)
	err := withModel(*model,
		func(m *modelfile.Model[float32]) error { return classify(e, m, *in, cw, *blank) },
		func(m *modelfile.Model[float64]) error { return classify(e, m, *in, cw, *blank) })
	if err != nil {
		return err
	}
	cw.Flush()
	if err := cw.Error(); err != nil {
		return err
	}
	if f != nil {
		return f.Commit()
	}
	return nil
}

func classify[T net.Float](e *env, m *modelfile.Model[T], in string, cw *csv.Writer, blank bool) error {
	head := []string{"class"}
	if m.Network.Out() == 1 {
		head = append(head, "score")
	} else {
		for _, c := range m.Classes {
			head = append(head, "score:"+c)
		}
	}
	if err := cw.Write(head); err != nil {
		return err
	}
	rec := make([]string, len(head))
	return forEachRow(e, m, in, "", blank, func(line int, out []T, _ string) error {
		if out == nil {
			clear(rec)
			return cw.Write(rec)
		}
		rec[0] = m.Classes[data.ClassOf(out)]
		for j, v := range out {
			rec[j+1] = strconv.FormatFloat(float64(v), 'g', -1, bits[T]())
		}
		return cw.Write(rec)
	})
}

// bits is the size of T, for formatting its values exactly.
func bits[T net.Float]() int {
	var z T
	if _, ok := any(z).(float32); ok {
		return 32
	}
	return 64
}
