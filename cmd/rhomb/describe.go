package main

import (
	"bytes"
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"sort"
	"strings"

	"github.com/rhomb/rhomb/data/prep"
	"github.com/rhomb/rhomb/net"
	"github.com/rhomb/rhomb/net/modelfile"
	"github.com/rhomb/rhomb/normalize"
)

const describeSummary = `Show what a model file holds: the network, its scales, the preprocessing
of every input column, the classes, how it was trained and its figures.`

const describeExample = `  rhomb describe -model pumps.model`

func runDescribe(e *env, args []string) error {
	fs := newFlags(e, "describe", describeSummary, describeExample)
	model := fs.String("model", "", "model or checkpoint `file` (required)")
	if err := parse(fs, args); err != nil {
		return err
	}
	if *model == "" {
		return usageError{errors.New("describe: -model names the model file")}
	}
	return withModel(*model,
		func(m *modelfile.Model[float32]) error { return describe(e.stdout, *model, "float32", m) },
		func(m *modelfile.Model[float64]) error { return describe(e.stdout, *model, "float64", m) })
}

func describe[T net.Float](w io.Writer, path, dtype string, m *modelfile.Model[T]) error {
	var b strings.Builder
	kind := "model"
	if m.Checkpoint != nil {
		kind = "checkpoint"
	}
	fmt.Fprintf(&b, "%s %s\n  written by %s at %s, %s weights\n", kind, path, m.Library, m.Created.Format("2006-01-02 15:04:05 MST"), dtype)
	n := m.Network
	fmt.Fprintf(&b, "\nnetwork: %d inputs → %d outputs, ρ = ∏‖W_k‖ = %.6g\n", n.In(), n.Out(), n.Rho())
	spec, _ := n.Spec()
	for _, s := range spec {
		switch s.Kind {
		case "dense", "readout":
			d := n.Node(s.Name).(*net.Dense[T])
			fmt.Fprintf(&b, "  %-12s %-12s %d×%d  ‖W‖ = %.6g\n", s.Name, s.Kind, d.Out(), d.In(), net.FrobeniusNorm(d.W.Value))
		case "smooth-relu":
			fmt.Fprintf(&b, "  %-12s %-12s β = %g\n", s.Name, s.Kind, s.Sharpness)
		case "poly-relu":
			fmt.Fprintf(&b, "  %-12s %-12s degree %d on [%g, %g], %s fit\n", s.Name, s.Kind, s.Degree, s.Lo, s.Hi, s.Fit)
		default:
			fmt.Fprintf(&b, "  %-12s %s\n", s.Name, s.Kind)
		}
	}
	if w := m.Normalized; w != nil {
		describeNorm(&b, w)
	}
	if len(m.Classes) > 0 {
		fmt.Fprintf(&b, "\nclasses: %s", joinClasses(m.Classes))
		if m.Label != "" {
			fmt.Fprintf(&b, " (label column %q)", m.Label)
		}
		b.WriteByte('\n')
	}
	if m.Loss != "" {
		fmt.Fprintf(&b, "loss: %s\n", m.Loss)
	}
	if p := m.Pipeline; p != nil {
		describePipeline(&b, p)
	}
	if len(m.Training) > 0 {
		var pretty bytes.Buffer
		if json.Indent(&pretty, m.Training, "  ", "  ") == nil {
			fmt.Fprintf(&b, "\ntraining settings:\n  %s\n", pretty.String())
		}
	}
	if len(m.Metrics) > 0 {
		keys := make([]string, 0, len(m.Metrics))
		for k := range m.Metrics {
			keys = append(keys, k)
		}
		sort.Strings(keys)
		b.WriteString("\nfigures:\n")
		for _, k := range keys {
			fmt.Fprintf(&b, "  %-22s %v\n", k, m.Metrics[k])
		}
	}
	if c := m.Checkpoint; c != nil {
		fmt.Fprintf(&b, "\ncheckpoint: after step %d, epoch %d (+%d steps); resume with rhomb train -resume %s -o MODEL\n", c.Step, c.Epoch, c.InEpoch, path)
	}
	_, err := io.WriteString(w, b.String())
	return err
}

func describeNorm[T net.Float](b *strings.Builder, w *normalize.Net[T]) {
	o := w.Options()
	scale := "a scale per layer"
	switch {
	case o.Scale == normalize.Global:
		scale = "one global scale"
	case o.PerUnit:
		scale = "a scale per unit"
	}
	hold := "a Lagrange multiplier"
	if o.Hold == normalize.Projection {
		hold = "projection"
	}
	fmt.Fprintf(b, "\nweight normalization: W = ρ·V with %s, ‖V‖ = 1 held by %s\n", scale, hold)
	for _, p := range w.Params() {
		if strings.HasSuffix(p.Name, "rho") && len(p.Value) == 1 {
			fmt.Fprintf(b, "  %-14s %.6g\n", p.Name, float64(p.Value[0]))
		}
	}
}

func describePipeline(b *strings.Builder, p *prep.Pipeline) {
	fmt.Fprintf(b, "\npreprocessing: %d input columns → %d features", len(p.Steps), p.Width())
	var notes []string
	if p.Impute {
		notes = append(notes, "missing values imputed")
	}
	if p.UnitNorm {
		notes = append(notes, "rows scaled to unit norm")
	}
	if p.UnknownAsZeros {
		notes = append(notes, "unknown categories encoded as zeros")
	}
	if len(notes) > 0 {
		fmt.Fprintf(b, " (%s)", strings.Join(notes, "; "))
	}
	b.WriteByte('\n')
	for _, s := range p.Steps {
		if s.Kind == prep.Categorical {
			fmt.Fprintf(b, "  %-24s categorical, one-hot over %s\n", s.Name, strings.Join(s.Categories, ", "))
			continue
		}
		fmt.Fprintf(b, "  %-24s numeric, (x − %.6g) / %.6g\n", s.Name, s.Mean, s.Scale)
	}
}
