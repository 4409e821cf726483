// Command edge classifies rows with a model embedded in the binary: no
// model file to ship, no training code linked (it imports only package
// classify, which imports only the standard library, data/prep, the model
// file schema and the forward pass's arithmetic).
//
//	edge < readings.csv > labelled.csv
//	edge -in readings.csv
//	edge -model other.model -in readings.csv   (a model file instead of the embedded one)
//
// The input is CSV with a header naming the model's input fields, in any
// order; other columns (such as the label) are ignored. Each output line
// is the input line's class, then its scores, and, when the model file
// holds them, its calibrated probabilities, its prediction set (classes
// joined by |) and its answer (the class, or "no answer" where the model
// abstains). Scores are written with
// strconv.FormatFloat(v, 'g', -1, 64): the shortest decimal that reads
// back to the same float64, so two builds can be compared bit for bit
// (.ci/edge-check runs the linux/arm64 build under qemu and compares it
// with the amd64 one).
//
// The embedded model, pumps.model, is an 11-16-16-4 ReLU network trained
// on the invented demo data and exported with float32 weights;
// `go generate ./examples/edge` retrains and rewrites it (see gen/). It
// says nothing about real pumps.
//
// A classifier is no safety guarantee: where its output drives alarms,
// interlocks or credit decisions, validate it on your own data, keep a
// person or an independent protection in the loop, and follow the local
// codes and licensed practice.
package main

import (
	"bufio"
	_ "embed"
	"encoding/csv"
	"errors"
	"flag"
	"fmt"
	"io"
	"os"
	"strconv"

	"github.com/rhomb/rhomb/net/classify"
)

//go:generate go run ./gen -o pumps.model

//go:embed pumps.model
var modelFile []byte

func main() {
	in := flag.String("in", "-", "CSV `file` to classify; - reads standard input")
	model := flag.String("model", "", "model `file` to use instead of the embedded one")
	flag.Parse()
	b, source := modelFile, "embedded pumps.model"
	if *model != "" {
		var err error
		if b, err = os.ReadFile(*model); err != nil {
			fmt.Fprintln(os.Stderr, "edge:", err)
			os.Exit(1)
		}
		source = *model
	}
	r := io.Reader(os.Stdin)
	if *in != "-" {
		f, err := os.Open(*in)
		if err != nil {
			fmt.Fprintln(os.Stderr, "edge:", err)
			os.Exit(1)
		}
		defer f.Close()
		r = f
	}
	w := bufio.NewWriter(os.Stdout)
	err := run(b, source, r, w)
	if ferr := w.Flush(); err == nil {
		err = ferr
	}
	if err != nil {
		fmt.Fprintln(os.Stderr, "edge:", err)
		os.Exit(1)
	}
}

// run classifies every CSV row of r with the model file held in model
// and writes one line per row to w.
func run(model []byte, source string, r io.Reader, w io.Writer) error {
	m, err := classify.Read(model, source)
	if err != nil {
		return err
	}
	cr := csv.NewReader(r)
	header, err := cr.Read()
	if err != nil {
		return fmt.Errorf("reading the header: %w", err)
	}
	// Where each input field is in the file's columns.
	at := make([]int, len(m.Inputs()))
	for i, name := range m.Inputs() {
		at[i] = -1
		for j, h := range header {
			if h == name {
				at[i] = j
			}
		}
		if at[i] < 0 {
			return fmt.Errorf("the header has no column %q; the model reads %v", name, m.Inputs())
		}
	}
	work := m.NewWork()
	fields := make([]string, len(at))
	line := make([]byte, 0, 128)
	for row := 1; ; row++ {
		rec, err := cr.Read()
		if errors.Is(err, io.EOF) {
			return nil
		}
		if err != nil {
			return err
		}
		for i, j := range at {
			fields[i] = rec[j]
		}
		a, err := m.ClassifyFields(work, fields)
		if err != nil {
			return fmt.Errorf("data row %d: %w", row, err)
		}
		line = append(line[:0], a.Label...)
		for _, s := range a.Scores {
			line = append(line, ',')
			line = strconv.AppendFloat(line, s, 'g', -1, 64)
		}
		// What the model file's decision adds: the calibrated
		// probabilities, the prediction set, and "no answer" where the
		// model abstains.
		for _, p := range a.Probabilities {
			line = append(line, ',')
			line = strconv.AppendFloat(line, p, 'g', 6, 64)
		}
		if a.Set != nil {
			line = append(line, ',')
			for i, j := range a.Set {
				if i > 0 {
					line = append(line, '|')
				}
				if c := m.Classes(); c != nil {
					line = append(line, c[j]...)
				} else {
					line = strconv.AppendInt(line, int64(j), 10)
				}
			}
		}
		if d := m.Decision(); d != nil && d.Abstain != nil {
			line = append(line, ',')
			if a.Abstained {
				line = append(line, "no answer"...)
			} else {
				line = append(line, a.Label...)
			}
		}
		line = append(line, '\n')
		if _, err := w.Write(line); err != nil {
			return err
		}
	}
}
