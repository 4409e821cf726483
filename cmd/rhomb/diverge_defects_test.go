package main

// Tests of a run that diverges: its last finite weights are saved as a
// checkpoint, the message says where and how to go on, and -lr may be
// given with -resume to go on with a smaller step size, which the
// training record keeps.

import (
	"encoding/json"
	"os"
	"path/filepath"
	"regexp"
	"slices"
	"strings"
	"testing"

	"github.com/rhomb/rhomb/optim/modelfile"
)

func TestDivergenceKeepsTheRun(t *testing.T) {
	dir := t.TempDir()
	csv := sensorCSV(t, dir, 150)
	model := filepath.Join(dir, "sensors.model")
	ckpt := model + ".checkpoint"
	// A step size of a million diverges at once on standardized inputs,
	// whatever the data (common practice, no source: stable steps are of
	// the order of 2/λ_max, and λ_max of a small network on standardized
	// inputs is of order 1 to 100); the run's four quarterings bring it
	// to 1e6/256, still far too large, so no epoch ends.
	r := run(t, nil, "train", "-data", csv, "-label", "state", "-hidden", "6", "-epochs", "3", "-lr", "1e6", "-quiet", "-o", model)
	want(t, r, exitFailed, "training diverged", "no model to save", "saved in the checkpoint "+ckpt, "rhomb train -resume "+ckpt+" -o "+model+" -lr ")
	if strings.Contains(r.stderr, "the weights are those before the step") {
		t.Errorf("the message still says the weights are kept without saving them:\n%s", r.stderr)
	}
	if _, err := os.Stat(model); err == nil {
		t.Error("a run with no finished epoch wrote a model")
	}
	m, err := modelfile.Load[float32](ckpt)
	if err != nil {
		t.Fatalf("the checkpoint of the diverged run does not load: %v", err)
	}
	if m.Checkpoint == nil || m.Checkpoint.Epoch != 0 || m.Checkpoint.Step != 0 {
		t.Fatalf("checkpoint %+v, want the start of the run", m.Checkpoint)
	}
	for _, p := range m.Network.Params() {
		for _, v := range p.Value {
			if v != v || v > 1e30 || v < -1e30 {
				t.Fatalf("parameter %s holds %v: not the last finite weights", p.Name, v)
			}
		}
	}

	// The advice is a tenth of the last step tried: 1e6 quartered four
	// times is 3906.25, a tenth of it 391 to three digits.
	lr := regexp.MustCompile(`-resume \S+ -o \S+ -lr (\S+)`).FindStringSubmatch(r.stderr)
	if lr == nil || lr[1] != "391" {
		t.Errorf("advice %q, want -lr 391:\n%s", lr, r.stderr)
	}
	// That still diverges on these data; a small step goes on.
	r = run(t, nil, "train", "-resume", ckpt, "-o", model, "-lr", "0.02", "-quiet")
	if r.code != exitOK {
		t.Fatalf("resume with -lr 0.02: exit %d\n%s", r.code, r.stderr)
	}
	got, err := modelfile.Load[float32](model)
	if err != nil {
		t.Fatal(err)
	}
	var rec struct {
		LR      float64 `json:"learning_rate"`
		Changes []struct {
			Epoch int     `json:"after_epoch"`
			LR    float64 `json:"learning_rate"`
			Was   float64 `json:"was"`
		} `json:"step_changes"`
	}
	if err := json.Unmarshal(got.Training, &rec); err != nil {
		t.Fatal(err)
	}
	// 1e6 quartered four times: 1e6/4⁴ = 3906.25, the step the run had
	// reached.
	if rec.LR != 0.02 || len(rec.Changes) != 1 || rec.Changes[0].LR != 0.02 || rec.Changes[0].Epoch != 0 || rec.Changes[0].Was != 3906.25 {
		t.Errorf("training record %s: want learning_rate 0.02 and one step change at epoch 0 from 3906.25", got.Training)
	}
	if d := mustRun(t, "describe", "-model", model).stdout; !strings.Contains(d, `"step_changes"`) {
		t.Errorf("describe does not show the change of step size:\n%s", d)
	}

	// -step-factor applies to a measured rate only, and not with -lr.
	want(t, run(t, nil, "train", "-resume", ckpt, "-o", model, "-step-factor", "0.1"), exitUsage, "-step-factor", "fixed step size", "-lr")
	want(t, run(t, nil, "train", "-resume", ckpt, "-o", model, "-step-factor", "0.1", "-lr", "0.1"), exitUsage, "not both")
	want(t, run(t, nil, "train", "-resume", ckpt, "-o", model, "-lr", "0"), exitUsage, "-lr 0", "positive")
}

// TestResumeWithStepFactor: a run with a measured step size takes a new
// -step-factor on resuming, recorded like -lr.
func TestResumeWithStepFactor(t *testing.T) {
	dir := t.TempDir()
	_, model := sensorModel(t, dir, "-save-every", "1")
	out := filepath.Join(dir, "again.model")
	mustRun(t, "train", "-resume", model+".checkpoint", "-o", out, "-epochs", "4", "-step-factor", "0.05", "-quiet")
	m, err := modelfile.Load[float32](out)
	if err != nil {
		t.Fatal(err)
	}
	var rec struct {
		Factor  float64 `json:"step_factor"`
		Changes []struct {
			Factor float64 `json:"step_factor"`
			Was    float64 `json:"was"`
		} `json:"step_changes"`
	}
	if err := json.Unmarshal(m.Training, &rec); err != nil {
		t.Fatal(err)
	}
	if rec.Factor != 0.05 || len(rec.Changes) != 1 || rec.Changes[0].Factor != 0.05 || !(rec.Changes[0].Was > 0) {
		t.Errorf("training record %s: want step_factor 0.05 and one change recorded", m.Training)
	}
}

// TestResumeStillExact: keeping the last epoch boundary for a diverged
// run must not change a run, nor a resumed one: resumed from a checkpoint
// it gives the model of the run never interrupted, bit for bit, as
// TestResumeThroughTheCLI checks on open data (which this machine may
// lack). Momentum and Langevin noise make the trainer's saved state
// matter; without validation rows the last epoch is kept, so that the
// 2-epoch model differs from the 4-epoch one.
func TestResumeStillExact(t *testing.T) {
	dir := t.TempDir()
	csv := sensorCSV(t, dir, 200)
	path := func(name string) string { return filepath.Join(dir, name) }
	settings := []string{"train", "-data", csv, "-label", "state", "-momentum", "0.9", "-temp", "1e-6", "-hidden", "8,8", "-holdout", "0", "-quiet"}
	mustRun(t, append(settings, "-epochs", "4", "-o", path("whole.model"))...)
	mustRun(t, append(settings, "-epochs", "2", "-save-every", "2", "-o", path("half.model"))...)
	mustRun(t, "train", "-resume", path("half.model.checkpoint"), "-epochs", "4", "-quiet", "-o", path("resumed.model"))
	load := func(name string) *modelfile.Model[float32] {
		t.Helper()
		m, err := modelfile.Load[float32](path(name))
		if err != nil {
			t.Fatal(err)
		}
		return m
	}
	whole, half, resumed := load("whole.model"), load("half.model"), load("resumed.model")
	same := func(a, b *modelfile.Model[float32]) bool {
		for i, p := range a.Network.Params() {
			if !slices.Equal(p.Value, b.Network.Params()[i].Value) {
				return false
			}
		}
		return true
	}
	if !same(whole, resumed) {
		t.Error("the resumed run differs from the run never interrupted")
	}
	if same(whole, half) {
		t.Error("2 and 4 epochs give the same weights: the comparison cannot tell a resumed run from a stopped one")
	}
}

// TestDivergenceAfterBestEpoch: a run that diverges after epochs that
// finished ends with its best epoch, saved as the model, and now also
// keeps its last finite weights in a checkpoint, named with the command
// that goes on from them. The divergence is forced by resuming a sound
// run with a step size of a million, which also checks that -lr is
// recorded when given with -resume.
func TestDivergenceAfterBestEpoch(t *testing.T) {
	dir := t.TempDir()
	_, model := sensorModel(t, dir, "-save-every", "3")
	out := filepath.Join(dir, "pushed.model")
	r := mustRun(t, "train", "-resume", model+".checkpoint", "-o", out, "-epochs", "5", "-lr", "1e6", "-quiet")
	for _, p := range []string{"diverged", "saved " + out, "from the end of epoch 3", "saved in the checkpoint " + out + ".checkpoint", "rhomb train -resume " + out + ".checkpoint -o " + out + " -lr "} {
		if !strings.Contains(r.stdout, p) {
			t.Errorf("output lacks %q:\n%s", p, r.stdout)
		}
	}
	ckpt, err := modelfile.Load[float32](out + ".checkpoint")
	if err != nil {
		t.Fatal(err)
	}
	if ckpt.Checkpoint == nil || ckpt.Checkpoint.Epoch != 3 {
		t.Errorf("checkpoint %+v, want the end of epoch 3", ckpt.Checkpoint)
	}
	m, err := modelfile.Load[float32](out)
	if err != nil {
		t.Fatal(err)
	}
	if s, _ := m.Metrics["stopped"].(string); !strings.Contains(s, "diverged") {
		t.Errorf("the model's figures say it stopped: %q", s)
	}
	if !strings.Contains(string(m.Training), `"step_changes":[{"after_epoch":3,"learning_rate":1000000`) {
		t.Errorf("training record %s lacks the change of step size", m.Training)
	}
}

// TestDivergenceKeepsRunningStatistics: with batch normalization, the
// checkpoint of a run that diverges before any epoch ends holds the
// running statistics of its start (mean 0, variance 1, as the node
// documents) beside the start's weights — not the statistics the failing
// steps moved. (Before, it paired the old weights with the new
// statistics.)
func TestDivergenceKeepsRunningStatistics(t *testing.T) {
	dir := t.TempDir()
	csv := sensorCSV(t, dir, 150)
	model := filepath.Join(dir, "bn.model")
	ckpt := model + ".checkpoint"
	r := run(t, nil, "train", "-data", csv, "-label", "state", "-hidden", "6", "-batchnorm", "-norm", "none", "-epochs", "3", "-lr", "1e6", "-quiet", "-o", model)
	want(t, r, exitFailed, "training diverged", "saved in the checkpoint "+ckpt)
	m, err := modelfile.Load[float32](ckpt)
	if err != nil {
		t.Fatal(err)
	}
	rs := m.Network.Running()
	if len(rs) == 0 {
		t.Fatal("the checkpoint holds no running statistics")
	}
	for _, rv := range rs {
		want := float32(0)
		if strings.HasSuffix(rv.Name, ".var") {
			want = 1
		}
		for i, v := range rv.Value {
			if v != want {
				t.Fatalf("%s[%d] = %v; the start of the run has %v", rv.Name, i, v, want)
			}
		}
	}
}
