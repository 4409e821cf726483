package main

// Tests of the command line's rough edges: flag errors, the version
// command, describe -json and on a directory, output paths checked before
// a run, the progress bar at common terminal widths, and messages that
// name flags rather than the library's Go identifiers.

import (
	"bytes"
	"encoding/json"
	"fmt"
	"math"
	"os"
	"path/filepath"
	"regexp"
	"runtime/debug"
	"slices"
	"sort"
	"strings"
	"testing"
	"time"
	"unicode/utf8"

	"github.com/rhomb/rhomb/internal/version"
	"github.com/rhomb/rhomb/optim/modelfile"
)

// TestFlagErrorIsOneLine: a flag that does not parse gives one line that
// names the flag and points to the help, and not the whole help (the flag
// package shows the usage on every parse error unless told otherwise).
func TestFlagErrorIsOneLine(t *testing.T) {
	for _, c := range commands() {
		r := run(t, nil, c.name, "-bogus")
		want(t, r, exitUsage, "-bogus", "rhomb help "+c.name)
		if r.stdout != "" || strings.Count(r.stderr, "\n") != 1 {
			t.Errorf("%s -bogus: stdout %d bytes, stderr %d lines, want nothing and one line:\n%s%s", c.name, len(r.stdout), strings.Count(r.stderr, "\n"), r.stdout, r.stderr)
		}
	}
	r := run(t, nil, "train", "-hidden", "3x")
	want(t, r, exitUsage, `"3x"`, "-hidden", "rhomb help train")
	if r.stdout != "" || strings.Count(r.stderr, "\n") != 1 {
		t.Errorf("train -hidden 3x: want one line on stderr, got stdout:\n%s\nstderr:\n%s", r.stdout, r.stderr)
	}
	// Help asked for is still shown, once.
	if r := run(t, nil, "train", "-h"); r.code != exitOK || strings.Count(r.stdout, "usage: rhomb train") != 1 {
		t.Errorf("train -h: exit %d\n%s", r.code, r.stdout)
	}
}

// TestVersion: the version command prints the library version that model
// files record (internal/version), and the revision and time of the
// build when runtime/debug knows them; the setting names are those
// runtime/debug documents for BuildInfo.Settings.
func TestVersion(t *testing.T) {
	r := mustRun(t, "version")
	if !strings.HasPrefix(r.stdout, "rhomb "+version.Version+"\n") {
		t.Errorf("version prints:\n%s", r.stdout)
	}
	if r := mustRun(t, "version", "-short"); r.stdout != version.Version+"\n" {
		t.Errorf("version -short prints %q", r.stdout)
	}
	bi := &debug.BuildInfo{GoVersion: "go1.26.0", Settings: []debug.BuildSetting{
		{Key: "vcs.revision", Value: "0123456789abcdef"}, {Key: "vcs.time", Value: "2026-01-02T03:04:05Z"},
		{Key: "vcs.modified", Value: "true"}, {Key: "GOOS", Value: "linux"}, {Key: "GOARCH", Value: "arm64"},
	}}
	got := versionText(bi, true)
	for _, p := range []string{"rhomb " + version.Version, "revision: 0123456789abcdef of 2026-01-02T03:04:05Z", "changes not committed", "go1.26.0 linux/arm64"} {
		if !strings.Contains(got, p) {
			t.Errorf("version text lacks %q:\n%s", p, got)
		}
	}
	if got := versionText(&debug.BuildInfo{GoVersion: "go1.26.0"}, true); !strings.Contains(got, "revision: not recorded") {
		t.Errorf("without VCS settings:\n%s", got)
	}
	if got := versionText(nil, false); !strings.Contains(got, "not recorded") {
		t.Errorf("without build information:\n%s", got)
	}
}

// describeKeys are the top-level fields of describe -json, as its help
// documents them.
var describeKeys = []string{"file", "kind", "written_by", "created", "weights", "network", "normalization", "classes", "label", "loss", "preprocessing", "training", "figures", "checkpoint"}

// TestDescribeJSON checks describe -json against the model file as the
// library reads it (modelfile.Load), and that every field it prints is
// documented in its help.
func TestDescribeJSON(t *testing.T) {
	dir := t.TempDir()
	_, model := sensorModel(t, dir, "-save-every", "3")
	help := mustRun(t, "help", "describe").stdout
	for _, path := range []string{model, model + ".checkpoint"} {
		r := mustRun(t, "describe", "-model", path, "-json")
		var d map[string]any
		if err := json.Unmarshal([]byte(r.stdout), &d); err != nil {
			t.Fatalf("describe -json does not print JSON: %v\n%s", err, r.stdout)
		}
		m, err := modelfile.Load[float32](path)
		if err != nil {
			t.Fatal(err)
		}
		for k := range d {
			if !slices.Contains(describeKeys, k) || !strings.Contains(help, k) {
				t.Errorf("field %q is not documented", k)
			}
		}
		kind := "model"
		if m.Checkpoint != nil {
			kind = "checkpoint"
			cp := d["checkpoint"].(map[string]any)
			if cp["epoch"] != float64(m.Checkpoint.Epoch) || cp["step"] != float64(m.Checkpoint.Step) {
				t.Errorf("checkpoint %v, the file says %+v", cp, m.Checkpoint)
			}
		} else if _, ok := d["checkpoint"]; ok {
			t.Error("a model is described with a checkpoint")
		}
		network := d["network"].(map[string]any)
		if d["kind"] != kind || d["file"] != path || d["weights"] != "float32" || d["label"] != "state" ||
			network["inputs"] != float64(m.Network.In()) || network["outputs"] != float64(m.Network.Out()) {
			t.Errorf("%s: described as %v", path, d)
		}
		if rho := network["rho"].(float64); math.Abs(rho-m.Network.Rho()) > 1e-12*m.Network.Rho() {
			t.Errorf("rho %v, the network's %v", rho, m.Network.Rho())
		}
		if got := fmt.Sprint(d["classes"]); got != fmt.Sprint(m.Classes) {
			t.Errorf("classes %s, want %v", got, m.Classes)
		}
		var cols []string
		for _, c := range d["preprocessing"].(map[string]any)["columns"].([]any) {
			cols = append(cols, c.(map[string]any)["name"].(string))
		}
		if !slices.Equal(cols, m.Pipeline.Inputs()) {
			t.Errorf("columns %v, the pipeline's %v", cols, m.Pipeline.Inputs())
		}
		if m.Checkpoint == nil {
			figs := d["figures"].(map[string]any)
			if figs["train_accuracy"] != m.Metrics["train_accuracy"] {
				t.Errorf("train_accuracy %v, the file's %v", figs["train_accuracy"], m.Metrics["train_accuracy"])
			}
		}
	}
}

// TestDescribeDirectory: a directory given as the model is said to be one
// (it was reported as a truncated file).
func TestDescribeDirectory(t *testing.T) {
	dir := t.TempDir()
	r := run(t, nil, "describe", "-model", dir)
	want(t, r, exitUsage, dir+" is a directory", "-model")
	if strings.Contains(r.stderr, "truncated") {
		t.Errorf("still called truncated:\n%s", r.stderr)
	}
}

// TestOutputsCheckedFirst: a path train cannot write fails before the run,
// as a usage error naming the flag, instead of after it.
func TestOutputsCheckedFirst(t *testing.T) {
	dir := t.TempDir()
	csv := sensorCSV(t, dir, 100)
	missing := filepath.Join(dir, "missing", "x")
	base := []string{"train", "-data", csv, "-label", "state", "-hidden", "4", "-epochs", "2"}
	for _, c := range []struct {
		args   []string
		pieces []string
	}{
		{[]string{"-o", missing + ".model"}, []string{"-o " + missing + ".model", "does not exist"}},
		{[]string{"-o", dir}, []string{"-o " + dir + " is a directory"}},
		{[]string{"-o", filepath.Join(dir, "m.model"), "-checkpoint", missing + ".checkpoint"}, []string{"-checkpoint", "does not exist"}},
		{[]string{"-o", filepath.Join(dir, "m.model"), "-report", missing + ".html"}, []string{"-report", "does not exist"}},
		{[]string{"-o", filepath.Join(dir, "m.model"), "-metrics", missing + ".jsonl"}, []string{"-metrics", "does not exist"}},
	} {
		r := run(t, nil, append(base, c.args...)...)
		want(t, r, exitUsage, c.pieces...)
		if strings.Contains(r.stderr, "epoch") || r.stdout != "" {
			t.Errorf("%v: the run started before the path was checked:\n%s%s", c.args, r.stdout, r.stderr)
		}
	}
	entries, _ := os.ReadDir(dir)
	if len(entries) != 1 {
		t.Errorf("the checks left files behind: %v", entries)
	}
}

// sampleLine is an epoch line as wide as real runs make them: four-digit
// epochs, every figure present, negative margin.
var sampleLine = epochLine{epoch: 999, epochs: 1000, loss: 0.123456, trainAcc: 0.93125, valAcc: 0.91111,
	rho: 12.345678, rhoStar: 5.6789, minMargin: -0.12345, best: true}

// TestBarFrame lays out frames at 80, 120 and 220 columns, the common
// terminal widths, and narrower, and checks that every frame fits in one
// column less than the terminal (so that it never wraps), that the bar
// keeps at least minBar columns where there is room for it, and that the
// figures appear in order as room allows: at 220 all of them. This tests
// the layout function itself; the terminal's width is an argument.
func TestBarFrame(t *testing.T) {
	long := sampleLine
	states := []barState{
		{done: 0, steps: 300000},
		{done: 1, steps: 300000, elapsed: time.Second},
		{done: 150000, steps: 300000, elapsed: 5 * time.Hour, line: &long},
		{done: 300000, steps: 300000, elapsed: 10 * time.Hour, line: &long},
	}
	bar := regexp.MustCompile(`\[[=> ]*\]`)
	for _, width := range []int{220, 120, 80, 60, 40, 24, 12, 5, 1} {
		for i, s := range states {
			f := barFrame(width, s)
			if n := utf8.RuneCountInString(f); n > width-1 {
				t.Errorf("width %d, state %d: frame of %d columns: %q", width, i, n, f)
			}
			if strings.ContainsAny(f, "\r\n\t") {
				t.Errorf("width %d: frame holds a control character: %q", width, f)
			}
			if width >= 40 {
				b := bar.FindString(f)
				if len(b) < minBar || len(b) > maxBar {
					t.Errorf("width %d, state %d: bar %q of %d columns, want %d to %d: %q", width, i, b, len(b), minBar, maxBar, f)
				}
			}
			if s.line == nil {
				continue
			}
			figs := s.line.figures()
			at := -1
			for _, g := range figs {
				j := strings.Index(f, g)
				if j >= 0 && j < at {
					t.Errorf("width %d: %q shown out of order: %q", width, g, f)
				}
				at = max(at, j)
			}
			switch width {
			case 220:
				for _, g := range figs {
					if !strings.Contains(f, g) {
						t.Errorf("width 220: %q not shown: %q", g, f)
					}
				}
			case 120, 80:
				if !strings.Contains(f, figs[0]) || !strings.Contains(f, figs[1]) {
					t.Errorf("width %d: the loss and validation score are not shown: %q", width, f)
				}
			}
		}
	}
}

// TestBarStream drives the bar as train does, with a fake clock and a
// terminal 80, 120 or 220 columns wide, and reads the stream as a
// terminal would show it: every stretch between carriage returns and
// line feeds must fit the width, notes get lines of their own, and
// after finish the next output starts a new line (at 220 columns the
// summary was glued to the last frame).
func TestBarStream(t *testing.T) {
	for _, width := range []int{80, 120, 220} {
		var w bytes.Buffer
		clock := time.Date(2026, 1, 1, 0, 0, 0, 0, time.UTC)
		r := newBar(&w, 300, func() int { return width })
		r.now = func() time.Time { return clock }
		r.start = clock
		for s := 1; s <= 300; s++ {
			clock = clock.Add(37 * time.Millisecond)
			r.step()
			if s%30 == 0 {
				l := sampleLine
				l.epoch, l.epochs = s/30, 10
				r.epoch(l)
			}
			if s == 100 {
				r.note("step size lowered after a non-finite step")
			}
		}
		r.finish()
		r.epoch(sampleLine) // after finish, nothing more is drawn
		fmt.Fprintln(&w, "trained 10 epochs")
		out := w.String()
		for _, line := range strings.Split(out, "\n") {
			for _, seg := range strings.Split(line, "\r") {
				if n := utf8.RuneCountInString(seg); n > width-1 {
					t.Errorf("width %d: %d columns written in one stretch: %q", width, n, seg)
				}
			}
		}
		if !strings.Contains(out, "\nnote: step size lowered after a non-finite step\n") && !strings.Contains(out, "\rnote: step size lowered after a non-finite step\n") {
			t.Errorf("width %d: the note is not on a line of its own:\n%q", width, out)
		}
		if !strings.HasSuffix(out, "\ntrained 10 epochs\n") {
			t.Errorf("width %d: the summary does not start a line: %q", width, out[max(0, len(out)-300):])
		}
		last := strings.Split(strings.TrimSuffix(out, "\ntrained 10 epochs\n"), "\n")
		final := last[len(last)-1]
		final = final[strings.LastIndex(final, "\r")+1:]
		if !strings.Contains(final, "100%") || !strings.HasPrefix(final, "epoch 10/10 ") {
			t.Errorf("width %d: the last frame is %q, want the finished bar and the last epoch", width, final)
		}
	}
}

// goNames match what a Go programmer, not a command-line user, would
// write: a type's field (Options.Impute), a package-qualified name
// (optim.Settings), a package's error prefix ("recipe: "), and the
// reader's policy constants.
var goNames = []*regexp.Regexp{
	regexp.MustCompile(`\b[A-Z][A-Za-z]*(Options|Pipeline|Plan|Settings|State|Table|Column|Model|Error)?\.[A-Z][A-Za-z]*\b`),
	regexp.MustCompile(`\b(optim|recipe|prep|data|modelfile|normalize|loss|net|schema|classify|atomicfile|score|calib|sweep|container|arith|report|gauge)\.[A-Za-z]\w*`),
	regexp.MustCompile(`(^|rhomb: |: |\()(optim|recipe|prep|data|modelfile|normalize|schema|atomicfile|sweep|container|classify|calib|arith|loss|net): `),
	regexp.MustCompile(`\bMissing(Drop|Keep|Fail)\b|\bCSVOptions\b`),
}

// knownGoNames are Go identifiers in messages that come from files this
// test's author could not change (the serving path and the library's
// packages), by the case that shows them and the text. A case listed
// here that no longer shows its text fails the test: take it out.
var knownGoNames = map[string]string{}

// TestMessagesNameFlags runs the commands with bad inputs that reach the
// error paths, and scans what they print for Go identifiers, which a user
// of the command line cannot act on.
func TestMessagesNameFlags(t *testing.T) {
	dir := t.TempDir()
	path := func(name string) string { return filepath.Join(dir, name) }
	file := func(name, content string) string { return writeFile(t, path(name), content) }
	sensors := sensorCSV(t, dir, 120)
	_, model := sensorModel(t, dir, "-save-every", "3")
	latin1 := cityCSV(t, dir, true)
	cities := path("cities.model")
	mustRun(t, "train", "-data", cityCSV(t, dir, false), "-label", "state", "-hidden", "4", "-epochs", "2", "-quiet", "-o", cities)
	three := file("three.csv", "x,y\n1,a\n2,b\n3,c\n1,a\n2,b\n3,c\n1,a\n2,b\n3,c\n1,a\n2,b\n3,c\n")
	out := path("out.model")
	train := func(data string, extra ...string) []string {
		return append([]string{"train", "-data", data, "-label", "state", "-hidden", "4", "-epochs", "2", "-quiet", "-o", out}, extra...)
	}
	cases := map[string][]string{
		"latin1":                 train(latin1),
		"cr only":                train(file("cr.csv", "x,state\r1,on\r2,off\r")),
		"utf-16":                 train(file("u16.csv", "\xff\xfex\x00,\x00s\x00")),
		"ragged":                 train(file("ragged.csv", "x,state\n1,on\n2,off,3\n")),
		"short row":              train(file("short.csv", "x,y,state\n1,2,on\n2,off\n")),
		"not a number":           train(file("nan.csv", "x,state\n1,on\nhigh,off\n")),
		"declared numeric":       train(file("decl.csv", "x,state\na,on\nb,off\n"), "-kind", "x=numeric"),
		"missing fail":           train(file("miss.csv", "x,state\n1,on\nNA,off\n"), "-missing", "fail"),
		"missing label":          train(file("missl.csv", "x,state\n1,on\n2,\n"), "-missing", "impute"),
		"infinite":               train(file("inf.csv", "x,state\n1,on\n1e999,off\n")),
		"one class":              train(file("one.csv", "x,state\n1,on\n2,on\n")),
		"no label":               {"train", "-data", sensors, "-label", "nope", "-quiet", "-o", out},
		"unknown skip":           train(sensors, "-skip", "nope"),
		"unknown kind":           train(sensors, "-kind", "nope=numeric"),
		"skip the label":         train(sensors, "-skip", "state"),
		"empty":                  train(file("empty.csv", "")),
		"header only":            train(file("head.csv", "x,state\n")),
		"all dropped":            train(file("drop.csv", "x,state\nNA,on\nNA,off\n"), "-missing", "drop"),
		"no values":              train(file("novals.csv", "x,z,state\nNA,1,on\nNA,2,off\nNA,3,on\n"), "-missing", "impute"),
		"duplicate header":       train(file("dup.csv", "x,x,state\n1,2,on\n")),
		"quote":                  train(file("quote.csv", "x,state\n1,\"on\n")),
		"bare quote":             train(file("bare.csv", "x,state\n1,o\"n\n")),
		"too wide":               train(file("wide.csv", "x,state\n"+strings.Repeat(",", 100_000)+"\n")),
		"momentum":               train(sensors, "-momentum", "1"),
		"batch":                  train(sensors, "-batch", "-1"),
		"decay":                  train(sensors, "-decay", "-1"),
		"temp":                   train(sensors, "-temp", "-1"),
		"target":                 train(sensors, "-target-loss", "-1"),
		"lr NaN":                 train(sensors, "-lr", "NaN"),
		"rho0":                   train(sensors, "-rho0", "-1"),
		"warmup":                 train(sensors, "-warmup", "-1"),
		"patience":               train(sensors, "-patience", "-2"),
		"hidden":                 train(sensors, "-hidden", "3x"),
		"act":                    train(sensors, "-act", "tanh"),
		"loss":                   train(sensors, "-loss", "cross-entropy"),
		"schedule":               train(sensors, "-schedule", "wavy"),
		"norm":                   train(sensors, "-norm", "odd"),
		"hold":                   train(sensors, "-hold", "odd"),
		"metric":                 train(sensors, "-metric", "odd"),
		"auc three":              {"train", "-data", three, "-label", "y", "-metric", "auc", "-quiet", "-o", out},
		"search":                 train(sensors, "-search", "1"),
		"search auc three":       {"train", "-data", three, "-label", "y", "-metric", "auc", "-search", "2", "-quiet", "-o", out},
		"step schedule":          train(sensors, "-schedule", "step:2:-1"),
		"cosine schedule":        train(sensors, "-schedule", "cosine:5"),
		"smooth":                 train(sensors, "-act", "smooth:-1"),
		"poly interval":          train(sensors, "-act", "poly:3:1:-1"),
		"poly degree":            train(sensors, "-act", "poly:0:-1:1"),
		"rescaled":               train(sensors, "-loss", "rescaled:-1:2"),
		"rho0 overflow":          train(sensors, "-rho0", "1e308"),
		"init":                   train(sensors, "-init", "odd"),
		"kind":                   train(sensors, "-kind", "x1=text"),
		"float":                  train(sensors, "-float", "16"),
		"diverged":               train(sensors, "-lr", "1e6"),
		"draw":                   train(sensors, "-draw", "odd"),
		"holdout":                train(sensors, "-holdout", "2"),
		"missing dir":            {"train", "-data", sensors, "-label", "state", "-o", path("no/such/x.model")},
		"no such data":           train(path("absent.csv")),
		"resume model":           {"train", "-resume", model, "-o", out},
		"resume conflict":        {"train", "-resume", model + ".checkpoint", "-o", out, "-hidden", "4"},
		"resume lr 0":            {"train", "-resume", model + ".checkpoint", "-o", out, "-lr", "0"},
		"describe dir":           {"describe", "-model", dir},
		"describe absent":        {"describe", "-model", path("absent.model")},
		"describe garbage":       {"describe", "-model", file("garbage.model", "not a model at all, just text\n")},
		"describe csv":           {"describe", "-model", sensors},
		"check garbage":          {"check", "-model", path("garbage.model"), "-data", sensors},
		"check latin1":           {"check", "-model", model, "-data", latin1},
		"check cr only":          {"check", "-model", model, "-data", path("cr.csv")},
		"classify latin1":        {"classify", "-model", model, "-data", latin1},
		"check latin1 cities":    {"check", "-model", cities, "-data", latin1},
		"classify latin1 cities": {"classify", "-model", cities, "-data", latin1},
		"classify ragged":        {"classify", "-model", model, "-data", path("ragged.csv")},
		"images":                 {"train", "-images", path("garbage.model"), "-labels", path("garbage.model"), "-quiet", "-o", out},
		"version flag":           {"version", "-bogus"},
	}
	names := make([]string, 0, len(cases))
	for name := range cases {
		names = append(names, name)
	}
	sort.Strings(names)
	for _, name := range names {
		args := cases[name]
		r := run(t, nil, args...)
		if r.code == exitOK {
			t.Errorf("%s: rhomb %s succeeded; the case reaches no error", name, strings.Join(args, " "))
			continue
		}
		var found []string
		for _, re := range goNames {
			found = append(found, re.FindAllString(r.stderr, -1)...)
		}
		known, isKnown := knownGoNames[name]
		switch {
		case len(found) == 0 && isKnown:
			t.Errorf("%s: the known Go identifier %q is gone: take the case out of knownGoNames", name, known)
		case len(found) > 0 && isKnown && strings.Contains(r.stderr, known):
			t.Logf("%s: known, from a file outside this change: %q", name, found)
		case len(found) > 0:
			t.Errorf("%s: rhomb %s names Go identifiers %q:\n%s", name, strings.Join(args, " "), found, r.stderr)
		}
	}
}
