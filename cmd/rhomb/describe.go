package main

import (
	"bytes"
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"os"
	"sort"
	"strings"
	"time"

	"github.com/rhomb/rhomb/data/prep"
	"github.com/rhomb/rhomb/net"
	"github.com/rhomb/rhomb/normalize"
	"github.com/rhomb/rhomb/optim/modelfile"
)

const describeSummary = `Show what a model file holds: the network, its scales, the preprocessing
of every input column, the classes, how it was trained and its figures.

With -json the description is one JSON object, whose field names stay
the same from release to release (fields may be added):
  file, kind ("model" or "checkpoint"), written_by, created (RFC 3339),
  weights ("float32" or "float64"),
  network: inputs, outputs, rho (the product of the layers' weight
    norms), layers: [{name, kind, inputs, outputs, weight_norm} for dense
    layers; {name, kind} and sharpness or degree, lo, hi, fit for
    activations],
  normalization (absent without): scale ("layer", "global" or "unit"),
    hold ("multiplier" or "projection"), rho: {parameter: value},
  classes, label, loss,
  preprocessing (absent without): features, impute, unit_norm,
    zero_unseen, columns: [{name, kind ("numeric" or "categorical"),
    mean and scale, or categories and other_levels}],
  training (the settings as train recorded them), figures (the final
  figures as train recorded them),
  checkpoint (absent in a model): step, epoch, steps_in_epoch.`

const describeExample = `  rhomb describe -model pumps.model
  rhomb describe -model pumps.model -json | jq .figures`

func runDescribe(e *env, args []string) error {
	fs := newFlags(e, "describe", describeSummary, describeExample)
	model := fs.String("model", "", "model or checkpoint `file` (required)")
	asJSON := fs.Bool("json", false, "print the description as one JSON object (fields listed above)")
	if err := parse(fs, args); err != nil {
		return err
	}
	if *model == "" {
		return usageError{errors.New("describe: -model names the model file")}
	}
	if fi, err := os.Stat(*model); err == nil && fi.IsDir() {
		return usageError{fmt.Errorf("describe: -model %s is a directory, not a model file; name a file written by rhomb train -o", *model)}
	}
	if *asJSON {
		return withModel(*model,
			func(m *modelfile.Model[float32]) error { return describeJSON(e.stdout, *model, "float32", m) },
			func(m *modelfile.Model[float64]) error { return describeJSON(e.stdout, *model, "float64", m) })
	}
	return withModel(*model,
		func(m *modelfile.Model[float32]) error { return describe(e.stdout, *model, "float32", m) },
		func(m *modelfile.Model[float64]) error { return describe(e.stdout, *model, "float64", m) })
}

// The JSON description; see describeSummary for the fields. The names
// are the tool's own and do not follow the library's types, so that they
// stay put when those change.
type (
	jsonDescription struct {
		File          string             `json:"file"`
		Kind          string             `json:"kind"`
		WrittenBy     string             `json:"written_by"`
		Created       string             `json:"created"`
		Weights       string             `json:"weights"`
		Network       jsonNetwork        `json:"network"`
		Normalization *jsonNormalization `json:"normalization,omitempty"`
		Classes       []string           `json:"classes"`
		Label         string             `json:"label,omitempty"`
		Loss          string             `json:"loss,omitempty"`
		Preprocessing *jsonPrep          `json:"preprocessing,omitempty"`
		Training      json.RawMessage    `json:"training,omitempty"`
		Figures       map[string]any     `json:"figures,omitempty"`
		Checkpoint    *jsonCheckpoint    `json:"checkpoint,omitempty"`
	}
	jsonNetwork struct {
		Inputs  int         `json:"inputs"`
		Outputs int         `json:"outputs"`
		Rho     float64     `json:"rho"`
		Layers  []jsonLayer `json:"layers"`
	}
	jsonLayer struct {
		Name       string   `json:"name"`
		Kind       string   `json:"kind"`
		Inputs     int      `json:"inputs,omitempty"`
		Outputs    int      `json:"outputs,omitempty"`
		WeightNorm *float64 `json:"weight_norm,omitempty"`
		Sharpness  float64  `json:"sharpness,omitempty"`
		Degree     int      `json:"degree,omitempty"`
		Lo         *float64 `json:"lo,omitempty"`
		Hi         *float64 `json:"hi,omitempty"`
		Fit        string   `json:"fit,omitempty"`
	}
	jsonNormalization struct {
		Scale string             `json:"scale"`
		Hold  string             `json:"hold"`
		Rho   map[string]float64 `json:"rho"`
	}
	jsonPrep struct {
		Features   int          `json:"features"`
		Impute     bool         `json:"impute"`
		UnitNorm   bool         `json:"unit_norm"`
		ZeroUnseen bool         `json:"zero_unseen"`
		Columns    []jsonColumn `json:"columns"`
	}
	jsonColumn struct {
		Name       string   `json:"name"`
		Kind       string   `json:"kind"`
		Mean       *float64 `json:"mean,omitempty"`
		Scale      *float64 `json:"scale,omitempty"`
		Categories []string `json:"categories,omitempty"`
		// OtherLevels is the number of training categories pooled in the
		// column's "other" feature (-level-cap); absent when none.
		OtherLevels int `json:"other_levels,omitempty"`
	}
	jsonCheckpoint struct {
		Step         int `json:"step"`
		Epoch        int `json:"epoch"`
		StepsInEpoch int `json:"steps_in_epoch"`
	}
)

func describeJSON[T net.Float](w io.Writer, path, dtype string, m *modelfile.Model[T]) error {
	d := jsonDescription{File: path, Kind: "model", WrittenBy: m.Library, Created: m.Created.UTC().Format(time.RFC3339),
		Weights: dtype, Classes: m.Classes, Label: m.Label, Loss: m.Loss, Training: m.Training, Figures: m.Metrics}
	if d.Classes == nil {
		d.Classes = []string{}
	}
	if c := m.Checkpoint; c != nil {
		d.Kind = "checkpoint"
		d.Checkpoint = &jsonCheckpoint{Step: c.Step, Epoch: c.Epoch, StepsInEpoch: c.InEpoch}
	}
	n := m.Network
	d.Network = jsonNetwork{Inputs: n.In(), Outputs: n.Out(), Rho: n.Rho(), Layers: []jsonLayer{}}
	spec, _ := n.Spec()
	for _, s := range spec {
		l := jsonLayer{Name: s.Name, Kind: s.Kind}
		switch s.Kind {
		case "dense", "readout":
			dn := n.Node(s.Name).(*net.Dense[T])
			norm := net.FrobeniusNorm(dn.W.Value)
			l.Inputs, l.Outputs, l.WeightNorm = dn.In(), dn.Out(), &norm
		case "smooth-relu":
			l.Sharpness = s.Sharpness
		case "poly-relu":
			lo, hi := s.Lo, s.Hi
			l.Degree, l.Lo, l.Hi, l.Fit = s.Degree, &lo, &hi, s.Fit
		}
		d.Network.Layers = append(d.Network.Layers, l)
	}
	if wn := m.Normalized; wn != nil {
		o := wn.Options()
		jn := &jsonNormalization{Scale: "layer", Hold: "multiplier", Rho: map[string]float64{}}
		switch {
		case o.Scale == normalize.Global:
			jn.Scale = "global"
		case o.PerUnit:
			jn.Scale = "unit"
		}
		if o.Hold == normalize.Projection {
			jn.Hold = "projection"
		}
		for _, p := range wn.Params() {
			if strings.HasSuffix(p.Name, "rho") && len(p.Value) == 1 {
				jn.Rho[p.Name] = float64(p.Value[0])
			}
		}
		d.Normalization = jn
	}
	if p := m.Pipeline; p != nil {
		jp := &jsonPrep{Features: p.Width(), Impute: p.Impute, UnitNorm: p.UnitNorm, ZeroUnseen: p.ZeroUnseen, Columns: []jsonColumn{}}
		for _, s := range p.Encodings {
			c := jsonColumn{Name: s.Name, Kind: "numeric"}
			if s.Kind == prep.Categorical {
				c.Kind, c.Categories, c.OtherLevels = "categorical", s.Categories, s.OtherLevels
			} else {
				mean, scale := s.Mean, s.Scale
				c.Mean, c.Scale = &mean, &scale
			}
			jp.Columns = append(jp.Columns, c)
		}
		d.Preprocessing = jp
	}
	b, err := json.MarshalIndent(d, "", "  ")
	if err != nil {
		return fmt.Errorf("describe: %s: %v", path, err)
	}
	_, err = w.Write(append(b, '\n'))
	return err
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
	fmt.Fprintf(b, "\npreprocessing: %d input columns → %d features", len(p.Encodings), p.Width())
	var notes []string
	if p.Impute {
		notes = append(notes, "missing values imputed")
	}
	if p.UnitNorm {
		notes = append(notes, "rows scaled to unit norm")
	}
	if p.ZeroUnseen {
		notes = append(notes, "unknown categories encoded as zeros")
	}
	if len(notes) > 0 {
		fmt.Fprintf(b, " (%s)", strings.Join(notes, "; "))
	}
	b.WriteByte('\n')
	for _, s := range p.Encodings {
		if s.Kind == prep.Categorical {
			other := ""
			if s.OtherLevels > 0 {
				other = fmt.Sprintf(", and one \"other\" feature for the %d rarer training categories and any unseen one", s.OtherLevels)
			}
			fmt.Fprintf(b, "  %-24s categorical, one-hot over %s%s\n", s.Name, strings.Join(s.Categories, ", "), other)
			continue
		}
		fmt.Fprintf(b, "  %-24s numeric, (x − %.6g) / %.6g\n", s.Name, s.Mean, s.Scale)
	}
}
