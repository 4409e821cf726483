package main

// Tests of rhomb sweep and rhomb sweep-merge on a small copy of the demo
// data (invented pump readings, data/demo: these tests check properties
// that hold for any data — shards and merges agree with one process, the
// best model is the best run's). They call the commands' run functions
// directly, so they do not depend on the command list.

import (
	"bytes"
	"fmt"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"github.com/rhomb/rhomb/data/demo"
	"github.com/rhomb/rhomb/optim/modelfile"
	"github.com/rhomb/rhomb/optim/sweep"
)

// runFn runs one command's run function as dispatch would, returning
// what it printed and its exit code.
func runFn(t *testing.T, f func(*env, []string) error, args ...string) result {
	t.Helper()
	var out, errb bytes.Buffer
	e := &env{stdout: &out, stderr: &errb, stdin: strings.NewReader("")}
	code := exitCode(e, f(e, args))
	return result{code: code, stdout: out.String(), stderr: errb.String()}
}

func mustRunFn(t *testing.T, f func(*env, []string) error, args ...string) result {
	t.Helper()
	r := runFn(t, f, args...)
	if r.code != exitOK {
		t.Fatalf("exit %d\nstdout:\n%s\nstderr:\n%s", r.code, r.stdout, r.stderr)
	}
	return r
}

// demoCSV writes the first rows of the embedded demo file (its header and
// rows data lines) to dir.
func demoCSV(t *testing.T, dir string, rows int) string {
	t.Helper()
	lines := strings.SplitAfterN(string(demo.CSV), "\n", rows+2)
	return writeFile(t, filepath.Join(dir, "pumps.csv"), strings.Join(lines[:rows+1], ""))
}

// sweepArgs is a 2 × 2 × 1 × 1 × 2 = 8-point grid, 2 epochs each.
func sweepArgs(csv string) []string {
	return []string{"-data", csv, "-label", demo.Label, "-missing", "impute", "-hidden", "8", "-epochs", "2", "-batch", "32",
		"-rho0", "0.1,1", "-decay", "1e-4,1e-2", "-seed", "1,2", "-test", "0.2", "-quiet"}
}

func loadResults(t *testing.T, path string) *sweep.Results {
	t.Helper()
	r, err := sweep.LoadResults(path)
	if err != nil {
		t.Fatal(err)
	}
	return r
}

// rankingOf lists the ranking by point, with the ranking keys, as text.
func rankingOf(rs []sweep.Result) string {
	var b strings.Builder
	for _, r := range sweep.Rank(rs) {
		fmt.Fprintf(&b, "%d %v %v %v %s\n", r.Index, r.ValAccuracy, r.MarginMin, r.Bound, r.Err)
	}
	return b.String()
}

// TestSweepShardsMergeLikeOneProcess runs the sweep as one process and as
// two shards merged, and requires the same results and ranking, and that
// the merge copies the same best model that the one process saved.
func TestSweepShardsMergeLikeOneProcess(t *testing.T) {
	dir := t.TempDir()
	csv := demoCSV(t, dir, 300)
	t.Setenv(sweep.IndexEnv, "")
	os.Unsetenv(sweep.IndexEnv)

	whole := filepath.Join(dir, "whole.jsonl")
	r := mustRunFn(t, runSweep, append(sweepArgs(csv), "-o", whole, "-workers", "2", "-heatmap", filepath.Join(dir, "whole.svg"))...)
	for _, p := range []string{"sweep: 8 of 8 points (shard 0/1)", "rank", "best: #", "saved " + filepath.Join(dir, "whole.model"), "test accuracy"} {
		if !strings.Contains(r.stdout, p) {
			t.Errorf("sweep output lacks %q:\n%s", p, r.stdout)
		}
	}
	one := loadResults(t, whole)
	if len(one.Results) != 8 || one.Model != "whole.model" {
		t.Fatalf("whole sweep: %d results, model %q", len(one.Results), one.Model)
	}
	if fi, err := os.Stat(filepath.Join(dir, "whole.svg")); err != nil || fi.Size() == 0 {
		t.Errorf("heat map: %v", err)
	}

	// Shard 0 explicitly; shard 1 from JOB_COMPLETION_INDEX, as a pod of
	// an Indexed Job would run it.
	s0 := filepath.Join(dir, "shard-0.jsonl")
	mustRunFn(t, runSweep, append(sweepArgs(csv), "-o", s0, "-shard", "0/2", "-workers", "1")...)
	t.Setenv(sweep.IndexEnv, "1")
	s1 := filepath.Join(dir, "shard-1.jsonl")
	r = mustRunFn(t, runSweep, append(sweepArgs(csv), "-o", s1, "-shard", "/2", "-workers", "1")...)
	if !strings.Contains(r.stdout, "4 of 8 points (shard 1/2)") || !strings.Contains(r.stdout, "sweep-merge") {
		t.Errorf("shard 1 output:\n%s", r.stdout)
	}
	os.Unsetenv(sweep.IndexEnv)

	merged, best := filepath.Join(dir, "merged.jsonl"), filepath.Join(dir, "best.model")
	r = mustRunFn(t, runSweepMerge, "-in", filepath.Join(dir, "shard-*.jsonl"), "-o", merged, "-model", best, "-top", "0")
	if !strings.Contains(r.stdout, "merged 2 files: 8 points") {
		t.Errorf("merge output:\n%s", r.stdout)
	}
	m := loadResults(t, merged)
	if m.Fingerprint != one.Fingerprint {
		t.Errorf("merged fingerprint %s, one process %s", m.Fingerprint, one.Fingerprint)
	}
	if got, want := rankingOf(m.Results), rankingOf(one.Results); got != want {
		t.Errorf("merged ranking:\n%s\none process:\n%s", got, want)
	}
	equalBits := func(a, b string) {
		x, err1 := os.ReadFile(a)
		y, err2 := os.ReadFile(b)
		if err1 != nil || err2 != nil {
			t.Fatal(err1, err2)
		}
		// The files differ only in their creation time; compare what they hold.
		ma, err1 := modelfile.Read[float32](x, a)
		mb, err2 := modelfile.Read[float32](y, b)
		if err1 != nil || err2 != nil {
			t.Fatal(err1, err2)
		}
		wa, wb := ma.Network.Dense(), mb.Network.Dense()
		for k := range wa {
			for i, v := range wa[k].W.Value {
				if wb[k].W.Value[i] != v {
					t.Fatalf("%s and %s differ in layer %s weight %d", a, b, wa[k].Name(), i)
				}
			}
		}
		if ma.Metrics["sweep_point"] != mb.Metrics["sweep_point"] {
			t.Errorf("models of points %v and %v", ma.Metrics["sweep_point"], mb.Metrics["sweep_point"])
		}
	}
	equalBits(best, filepath.Join(dir, "whole.model"))
	if m.ModelIndex != one.ModelIndex {
		t.Errorf("merged file names model of point %d, one process %d", m.ModelIndex, one.ModelIndex)
	}
	// The copied model describes itself as the sweep's best.
	d := mustRun(t, "describe", "-model", best)
	for _, p := range []string{"sweep_point", "validation_accuracy", "test_accuracy"} {
		if !strings.Contains(d.stdout, p) {
			t.Errorf("describe lacks %s:\n%s", p, d.stdout)
		}
	}

	// A merge with a shard missing is a data error that names the shard.
	r = runFn(t, runSweepMerge, "-in", s0)
	want(t, r, exitBadData, "missing", "shard 1/2")
}

func TestSweepUsage(t *testing.T) {
	dir := t.TempDir()
	csv := demoCSV(t, dir, 60)
	out := filepath.Join(dir, "r.jsonl")
	t.Setenv(sweep.IndexEnv, "")
	os.Unsetenv(sweep.IndexEnv)
	for _, c := range []struct {
		name   string
		args   []string
		pieces []string
	}{
		{"no output", []string{"-data", csv, "-label", demo.Label}, []string{"-o"}},
		{"no holdout", []string{"-data", csv, "-label", demo.Label, "-o", out, "-holdout", "0"}, []string{"-holdout"}},
		{"bad list", []string{"-data", csv, "-label", demo.Label, "-o", out, "-rho0", "0.1,x"}, []string{"-rho0", `"x"`}},
		{"repeated value", []string{"-data", csv, "-label", demo.Label, "-o", out, "-decay", "0.1,0.1"}, []string{"repeats"}},
		{"bad shard", []string{"-data", csv, "-label", demo.Label, "-o", out, "-shard", "2/2"}, []string{"shard", "0 to 1"}},
		{"shard from unset env", []string{"-data", csv, "-label", demo.Label, "-o", out, "-shard", "/3"}, []string{sweep.IndexEnv}},
		{"heat map format", []string{"-data", csv, "-label", demo.Label, "-o", out, "-heatmap", "h.gif"}, []string{".png"}},
		{"bad activation", []string{"-data", csv, "-label", demo.Label, "-o", out, "-act", "tanh"}, []string{"-act"}},
	} {
		t.Run(c.name, func(t *testing.T) {
			want(t, runFn(t, runSweep, c.args...), exitUsage, c.pieces...)
		})
	}
	if _, err := os.Stat(out); err == nil {
		t.Errorf("a usage error wrote %s", out)
	}
	want(t, runFn(t, runSweepMerge), exitUsage, "-in")
	want(t, runFn(t, runSweepMerge, "-in", filepath.Join(dir, "none-*.jsonl")), exitBadData, "matches no file")
	// JOB_COMPLETION_INDEX without a shard count is refused: every pod
	// would train the whole grid.
	t.Setenv(sweep.IndexEnv, "0")
	want(t, runFn(t, runSweep, "-data", csv, "-label", demo.Label, "-o", out), exitUsage, sweep.IndexEnv)
}

// TestSweepHelp checks the help of both commands as the command-line
// test does for the registered ones.
func TestSweepHelp(t *testing.T) {
	for name, c := range map[string]struct {
		f     func(*env, []string) error
		flags []string
	}{
		"sweep":       {runSweep, []string{"data", "label", "rho0", "decay", "lr", "temp", "seed", "split-seed", "shard", "workers", "o", "model", "heatmap", "gamma"}},
		"sweep-merge": {runSweepMerge, []string{"in", "o", "model", "heatmap", "top"}},
	} {
		r := runFn(t, c.f, "-h")
		if r.code != exitOK || !strings.HasPrefix(r.stdout, "usage: rhomb "+name+" [flags]\n") {
			t.Errorf("%s -h: exit %d\n%s", name, r.code, r.stdout)
		}
		for _, f := range c.flags {
			if !strings.Contains(r.stdout, "\n  -"+f+" ") && !strings.Contains(r.stdout, "\n  -"+f+"\n") {
				t.Errorf("%s -h does not list -%s", name, f)
			}
		}
		if !strings.Contains(r.stdout, "rhomb "+name+" ") {
			t.Errorf("%s -h has no example", name)
		}
	}
}

// TestSweepPointIsTrain checks the documented promise that with one seed
// a sweep point's model is the model rhomb train gives with the same
// flags: same split, same initialization, same steps, so the same weights
// bit for bit (same seed, same bits: DEVELOPERS.md, "Randomness").
func TestSweepPointIsTrain(t *testing.T) {
	dir := t.TempDir()
	csv := demoCSV(t, dir, 200)
	t.Setenv(sweep.IndexEnv, "")
	os.Unsetenv(sweep.IndexEnv)
	common := []string{"-data", csv, "-label", demo.Label, "-missing", "impute", "-hidden", "8", "-epochs", "2", "-batch", "16", "-seed", "3", "-quiet"}
	mustRunFn(t, runSweep, append(common, "-rho0", "0.05", "-decay", "1e-3", "-o", filepath.Join(dir, "s.jsonl"))...)
	mustRunFn(t, runTrain, append(common, "-rho0", "0.05", "-decay", "1e-3", "-o", filepath.Join(dir, "t.model"))...)
	a, err := modelfile.Load[float32](filepath.Join(dir, "s.model"))
	if err != nil {
		t.Fatal(err)
	}
	b, err := modelfile.Load[float32](filepath.Join(dir, "t.model"))
	if err != nil {
		t.Fatal(err)
	}
	for k, d := range a.Network.Dense() {
		for i, v := range d.W.Value {
			if w := b.Network.Dense()[k].W.Value[i]; w != v {
				t.Fatalf("layer %s weight %d: sweep %v, train %v", d.Name(), i, v, w)
			}
		}
	}
	if a.Metrics["validation_accuracy"] != b.Metrics["validation_accuracy"] {
		t.Errorf("validation accuracy: sweep %v, train %v", a.Metrics["validation_accuracy"], b.Metrics["validation_accuracy"])
	}
}

// TestSweepRanksByMetric: with -metric balanced, the table's score column
// and every result carry balanced accuracy, and the ranking's scores do
// not rise down the table (the rule of sweep.Rank).
func TestSweepRanksByMetric(t *testing.T) {
	dir := t.TempDir()
	csv := demoCSV(t, dir, 200)
	os.Unsetenv(sweep.IndexEnv)
	out := filepath.Join(dir, "s.jsonl")
	r := mustRunFn(t, runSweep, "-data", csv, "-label", demo.Label, "-missing", "impute", "-hidden", "8", "-epochs", "2", "-batch", "16",
		"-seed", "3", "-quiet", "-metric", "balanced", "-rho0", "0.05,0.5", "-decay", "1e-4,1e-2", "-o", out)
	if !strings.Contains(r.stdout, "validation balanced-accuracy") || !strings.Contains(r.stdout, "best: ") || !strings.Contains(r.stdout, "validation balanced-accuracy ") {
		t.Fatalf("the report does not name the metric:\n%s", r.stdout)
	}
	res, err := sweep.LoadResults(out)
	if err != nil {
		t.Fatal(err)
	}
	ranked := sweep.Rank(res.Results)
	for i, x := range ranked {
		if x.Metric != "balanced-accuracy" {
			t.Fatalf("result %d ranked by %q", i, x.Metric)
		}
		if i > 0 && x.ValScore > ranked[i-1].ValScore {
			t.Fatalf("rank %d has score %v above rank %d's %v", i+1, x.ValScore, i, ranked[i-1].ValScore)
		}
	}
}
