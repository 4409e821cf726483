package main

// Tests of the command line itself: help, usage errors and the demo. They
// run the tool in-process through dispatch, with buffers for its streams
// and files under t.TempDir(), so they check exactly what a user sees:
// the exit status and the text.

import (
	"bytes"
	"fmt"
	"io"
	"math/rand/v2"
	"os"
	"path/filepath"
	"strconv"
	"strings"
	"testing"
)

// result is what one run of the tool left behind.
type result struct {
	code           int
	stdout, stderr string
}

// run runs the tool with args and stdin (nil: empty), as if from a shell
// whose stderr is not a terminal.
func run(t *testing.T, stdin io.Reader, args ...string) result {
	t.Helper()
	if stdin == nil {
		stdin = strings.NewReader("")
	}
	var out, errb bytes.Buffer
	code := dispatch(&env{stdout: &out, stderr: &errb, stdin: stdin}, args)
	return result{code: code, stdout: out.String(), stderr: errb.String()}
}

// mustRun runs the tool and fails the test unless it exits 0.
func mustRun(t *testing.T, args ...string) result {
	t.Helper()
	r := run(t, nil, args...)
	if r.code != exitOK {
		t.Fatalf("rhomb %s: exit %d\nstderr:\n%s", strings.Join(args, " "), r.code, r.stderr)
	}
	return r
}

// want fails the test unless r exited with code and its stderr holds every
// one of the pieces.
func want(t *testing.T, r result, code int, pieces ...string) {
	t.Helper()
	if r.code != code {
		t.Errorf("exit %d, want %d\nstderr:\n%s", r.code, code, r.stderr)
	}
	for _, p := range pieces {
		if !strings.Contains(r.stderr, p) {
			t.Errorf("stderr lacks %q:\n%s", p, r.stderr)
		}
	}
}

func writeFile(t *testing.T, path, content string) string {
	t.Helper()
	if err := os.WriteFile(path, []byte(content), 0o644); err != nil {
		t.Fatal(err)
	}
	return path
}

// sensorCSV writes an invented two-class table (invented data: these tests
// check properties that hold for any data): two numeric readings, a
// categorical site and a state that is "on" when x1 + x2/2 > 0. Seeded, so
// every run writes the same file.
func sensorCSV(t *testing.T, dir string, rows int) string {
	t.Helper()
	rng := rand.New(rand.NewPCG(7, 11))
	var b strings.Builder
	b.WriteString("x1,x2,site,state\n")
	for range rows {
		x1, x2 := rng.NormFloat64(), rng.NormFloat64()
		site := []string{"north", "south"}[rng.IntN(2)]
		state := "off"
		if x1+x2/2 > 0 {
			state = "on"
		}
		fmt.Fprintf(&b, "%s,%s,%s,%s\n", strconv.FormatFloat(x1, 'g', 6, 64), strconv.FormatFloat(x2, 'g', 6, 64), site, state)
	}
	return writeFile(t, filepath.Join(dir, "sensors.csv"), b.String())
}

// sensorModel trains a small, quick model on sensorCSV and returns the
// data and model paths.
func sensorModel(t *testing.T, dir string, extra ...string) (csvPath, modelPath string) {
	t.Helper()
	csvPath = sensorCSV(t, dir, 200)
	modelPath = filepath.Join(dir, "sensors.model")
	args := append([]string{"train", "-data", csvPath, "-label", "state", "-hidden", "8", "-epochs", "3", "-quiet", "-o", modelPath}, extra...)
	mustRun(t, args...)
	return csvPath, modelPath
}

// The flags each command must document; the flag package prints each as
// "  -name" at the start of a line.
var helpFlags = map[string][]string{
	"train":       {"data", "label", "missing", "skip", "epochs", "o", "resume", "save-every", "checkpoint", "quiet"},
	"check":       {"model", "data", "label", "images", "labels"},
	"classify":    {"model", "data", "o"},
	"describe":    {"model"},
	"export":      {"model", "onnx", "features"},
	"demo":        {"epochs", "o", "quiet", "metrics"},
	"sweep":       {"data", "label", "rho0", "decay", "lr", "temp", "seed", "shard", "workers", "o", "model", "heatmap"},
	"sweep-merge": {"in", "o", "model", "heatmap", "top"},
	"version":     {"short"},
}

func TestHelpForEveryCommand(t *testing.T) {
	if len(helpFlags) != len(commands()) {
		t.Fatalf("the test knows %d commands, the tool has %d: add the new one to helpFlags", len(helpFlags), len(commands()))
	}
	for _, c := range commands() {
		t.Run(c.name, func(t *testing.T) {
			viaHelp := run(t, nil, "help", c.name)
			viaFlag := run(t, nil, c.name, "-h")
			for _, r := range []result{viaHelp, viaFlag} {
				if r.code != exitOK {
					t.Fatalf("exit %d, want 0; stderr:\n%s", r.code, r.stderr)
				}
				if r.stderr != "" {
					t.Errorf("help wrote to stderr:\n%s", r.stderr)
				}
			}
			if viaHelp.stdout != viaFlag.stdout {
				t.Errorf("rhomb help %s and rhomb %s -h differ:\n%s\n---\n%s", c.name, c.name, viaHelp.stdout, viaFlag.stdout)
			}
			out := viaHelp.stdout
			if !strings.HasPrefix(out, "usage: rhomb "+c.name+" [flags]\n") {
				t.Errorf("help does not start with the usage line:\n%s", out)
			}
			flagsAt, exampleAt := strings.Index(out, "\nflags:\n"), strings.Index(out, "\nexample:\n")
			if flagsAt < 0 || exampleAt < flagsAt {
				t.Fatalf("help lacks a flags: section followed by an example: section:\n%s", out)
			}
			for _, f := range helpFlags[c.name] {
				if !strings.Contains(out[flagsAt:exampleAt], "\n  -"+f+" ") && !strings.Contains(out[flagsAt:exampleAt], "\n  -"+f+"\n") {
					t.Errorf("flags section does not list -%s:\n%s", f, out[flagsAt:exampleAt])
				}
			}
			if ex := out[exampleAt:]; !strings.Contains(ex, "rhomb "+c.name) {
				t.Errorf("example does not run rhomb %s:\n%s", c.name, ex)
			}
		})
	}
}

func TestTopLevelUsage(t *testing.T) {
	// No arguments is a usage error; asking for help is not.
	r := run(t, nil)
	want(t, r, exitUsage, "usage: rhomb COMMAND")
	for _, args := range [][]string{{"help"}, {"-h"}, {"--help"}} {
		r := run(t, nil, args...)
		if r.code != exitOK {
			t.Errorf("rhomb %v: exit %d, want 0", args, r.code)
		}
		text := r.stdout + r.stderr
		for _, c := range commands() {
			if !strings.Contains(text, "  "+c.name+" ") {
				t.Errorf("rhomb %v does not list %s:\n%s", args, c.name, text)
			}
		}
	}
}

func TestUnknownCommand(t *testing.T) {
	for _, args := range [][]string{{"frobnicate"}, {"help", "frobnicate"}} {
		r := run(t, nil, args...)
		want(t, r, exitUsage, `unknown command "frobnicate"`, "usage: rhomb COMMAND")
	}
}

func TestBadFlags(t *testing.T) {
	dir := t.TempDir()
	for _, c := range commands() {
		t.Run(c.name+"/undefined", func(t *testing.T) {
			r := run(t, nil, c.name, "-bogus")
			want(t, r, exitUsage, "-bogus", "rhomb help "+c.name)
		})
		t.Run(c.name+"/argument", func(t *testing.T) {
			r := run(t, nil, c.name, "stray")
			want(t, r, exitUsage, `unexpected argument "stray"`)
		})
	}
	csv := sensorCSV(t, dir, 20)
	out := filepath.Join(dir, "never.model")
	for _, tc := range []struct {
		name   string
		args   []string
		pieces []string
	}{
		{"not a number", []string{"train", "-data", csv, "-label", "state", "-epochs", "x", "-o", out}, []string{"-epochs", `"x"`}},
		{"negative epochs", []string{"train", "-data", csv, "-label", "state", "-epochs", "-1", "-o", out}, []string{"-epochs -1"}},
		{"missing policy", []string{"train", "-data", csv, "-label", "state", "-missing", "guess", "-o", out}, []string{"-missing", `"guess"`}},
		{"float size", []string{"train", "-data", csv, "-label", "state", "-float", "16", "-o", out}, []string{"-float 16"}},
		{"hidden width", []string{"train", "-data", csv, "-label", "state", "-hidden", "8,0", "-o", out}, []string{"-hidden", `"0"`}},
		{"kind", []string{"train", "-data", csv, "-label", "state", "-kind", "x1=text", "-o", out}, []string{"-kind", "x1=text"}},
		{"activation", []string{"train", "-data", csv, "-label", "state", "-act", "tanh", "-quiet", "-o", out}, []string{"-act", `"tanh"`}},
		{"no output", []string{"train", "-data", csv, "-label", "state"}, []string{"-o"}},
		{"no label", []string{"train", "-data", csv, "-o", out}, []string{"-label"}},
		{"no data", []string{"train", "-label", "state", "-o", out}, []string{"-data"}},
		{"classify no model", []string{"classify", "-data", csv}, []string{"-model"}},
		{"check no model", []string{"check", "-data", csv}, []string{"-model"}},
		{"check no data", []string{"check", "-model", out}, []string{"-data"}},
		{"describe no model", []string{"describe"}, []string{"-model"}},
	} {
		t.Run(tc.name, func(t *testing.T) {
			want(t, run(t, nil, tc.args...), exitUsage, tc.pieces...)
		})
	}
	if _, err := os.Stat(out); err == nil {
		t.Errorf("a usage error wrote %s", out)
	}
}

// TestDemo runs the demo briefly. Its figures are not checked (three
// epochs are too few to mean anything); what is checked is that it needs
// no files, reports accuracy on the held-out rows, and with -o writes a
// model that describe reads back.
func TestDemo(t *testing.T) {
	r := mustRun(t, "demo", "-epochs", "3", "-quiet")
	// 1,200 rows (data/demo DefaultRows), 20% held out by default: 240.
	for _, p := range []string{"train accuracy", "validation rows:", "accuracy ", "on 240 rows", "not kept"} {
		if !strings.Contains(r.stdout, p) {
			t.Errorf("demo output lacks %q:\n%s", p, r.stdout)
		}
	}
	if r.stderr != "" {
		t.Errorf("-quiet demo wrote to stderr:\n%s", r.stderr)
	}

	dir := t.TempDir()
	path := filepath.Join(dir, "pumps.model")
	r = mustRun(t, "demo", "-epochs", "3", "-quiet", "-o", path)
	if !strings.Contains(r.stdout, "saved "+path) {
		t.Errorf("demo -o does not say it saved the model:\n%s", r.stdout)
	}
	d := mustRun(t, "describe", "-model", path)
	// The conditions, label column and columns are those documented in
	// package data/demo: four conditions; site (3 categories, one-hot) and
	// 8 numeric readings make 9 input columns and 3 + 8 = 11 features.
	for _, p := range []string{
		"model " + path,
		`classes: bearing-wear, cavitation, healthy, imbalance (label column "condition")`,
		"preprocessing: 9 input columns → 11 features (missing values imputed)",
		"site ", "categorical, one-hot over east-tank, north-yard, river-intake",
		"validation_accuracy",
	} {
		if !strings.Contains(d.stdout, p) {
			t.Errorf("describe output lacks %q:\n%s", p, d.stdout)
		}
	}
	entries, err := os.ReadDir(dir)
	if err != nil {
		t.Fatal(err)
	}
	if len(entries) != 1 {
		t.Errorf("demo -o left %d files in the directory, want only the model: %v", len(entries), entries)
	}
}

// TestTrainProgressLines checks that without -quiet, and not on a
// terminal, training reports one line per epoch on stderr and keeps stdout
// for the summary.
func TestTrainProgressLines(t *testing.T) {
	dir := t.TempDir()
	csv := sensorCSV(t, dir, 100)
	r := mustRun(t, "train", "-data", csv, "-label", "state", "-hidden", "4", "-epochs", "3", "-o", filepath.Join(dir, "m.model"))
	for e := 1; e <= 3; e++ {
		if !strings.Contains(r.stderr, fmt.Sprintf("epoch %d/3 ", e)) {
			t.Errorf("stderr lacks epoch %d:\n%s", e, r.stderr)
		}
	}
	if strings.Contains(r.stdout, "epoch 1/3") {
		t.Errorf("progress went to stdout:\n%s", r.stdout)
	}
}
