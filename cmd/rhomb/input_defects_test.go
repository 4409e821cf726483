package main

// Tests of defects in what train reads and writes: a CSV file that is
// not UTF-8 once gave a model that no reader would load, and every file
// train writes must be one that rhomb's own readers load.

import (
	"fmt"
	"math/rand/v2"
	"os"
	"path/filepath"
	"slices"
	"strings"
	"testing"

	serving "github.com/rhomb/rhomb/net/classify"
	"github.com/rhomb/rhomb/optim/modelfile"
)

// cityCSV writes an invented two-class table with a city column, in
// UTF-8 or, with latin1, in Latin-1 (ISO 8859-1, where "ü" is the byte
// 0xFC and "ä" 0xE4), the defect report's case.
func cityCSV(t *testing.T, dir string, latin1 bool) string {
	t.Helper()
	rng := rand.New(rand.NewPCG(3, 5))
	cities := []string{"Münster", "Märzhausen", "Berlin"}
	var b strings.Builder
	b.WriteString("reading,city,state\n")
	for range 120 {
		x := rng.NormFloat64()
		state := "off"
		if x > 0 {
			state = "on"
		}
		fmt.Fprintf(&b, "%.4f,%s,%s\n", x, cities[rng.IntN(3)], state)
	}
	text := b.String()
	name := "cities.csv"
	if latin1 {
		name = "cities-latin1.csv"
		var l []byte
		for _, r := range text {
			l = append(l, byte(r)) // every rune here is below U+0100: Latin-1 is its code point
		}
		text = string(l)
	}
	return writeFile(t, filepath.Join(dir, name), text)
}

// TestTrainRefusesLatin1: a Latin-1 file is refused with the file, line,
// column and field of the first byte that is not UTF-8, and how to
// convert the file; nothing is written. Before, train exited 0 and wrote a
// model whose header held U+FFFD for ü and ä, so "Münster" and
// "Märzhausen" could collide, and check, describe and the server refused
// it as damaged.
func TestTrainRefusesLatin1(t *testing.T) {
	dir := t.TempDir()
	csv := cityCSV(t, dir, true)
	out := filepath.Join(dir, "cities.model")
	r := run(t, nil, "train", "-data", csv, "-label", "state", "-hidden", "4", "-epochs", "2", "-quiet", "-o", out)
	// Find the first city with an umlaut, to know where the bad byte is.
	lines := strings.Split(readFile(t, csv), "\n")
	line, col := 0, 0
	for i, l := range lines {
		if j := strings.IndexAny(l, "\xfc\xe4"); j >= 0 {
			line, col = i+1, j+1
			break
		}
	}
	want(t, r, exitBadData, fmt.Sprintf("%s:%d:%d", csv, line, col), `(column "city")`, "not UTF-8", "iconv -f latin1 -t utf-8")
	if _, err := os.Stat(out); err == nil {
		t.Errorf("a refused file still gave a model %s", out)
	}

	// The same table in UTF-8 trains, and the model holds the names.
	csv = cityCSV(t, dir, false)
	mustRun(t, "train", "-data", csv, "-label", "state", "-hidden", "4", "-epochs", "2", "-quiet", "-o", out)
	m, err := modelfile.Load[float32](out)
	if err != nil {
		t.Fatal(err)
	}
	for _, s := range m.Pipeline.Encodings {
		if s.Name == "city" && !slices.Equal(s.Categories, []string{"Berlin", "Märzhausen", "Münster"}) {
			t.Errorf("the model's cities are %q", s.Categories)
		}
	}
}

// TestTrainLineEnds: a file whose lines end in a CR alone is refused
// plainly, with how to convert it, instead of a confusing header error.
func TestTrainLineEnds(t *testing.T) {
	dir := t.TempDir()
	csv := writeFile(t, filepath.Join(dir, "mac.csv"), "x1,x2,state\r1,2,on\r2,1,off\r3,3,on\r")
	r := run(t, nil, "train", "-data", csv, "-label", "state", "-quiet", "-o", filepath.Join(dir, "m.model"))
	want(t, r, exitBadData, csv+":1:12", "carriage return", `tr '\r' '\n'`)
	if strings.Contains(r.stderr, "no column of that name") {
		t.Errorf("the header error is still given:\n%s", r.stderr)
	}
}

// TestTrainFromStdin: -data - reads the table from standard input, as
// check and classify do; errors name standard input.
func TestTrainFromStdin(t *testing.T) {
	dir := t.TempDir()
	csv := sensorCSV(t, dir, 120)
	out := filepath.Join(dir, "stdin.model")
	f, err := os.Open(csv)
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	r := run(t, f, "train", "-data", "-", "-label", "state", "-hidden", "4", "-epochs", "2", "-quiet", "-o", out)
	if r.code != exitOK {
		t.Fatalf("exit %d:\n%s", r.code, r.stderr)
	}
	// The same data from the file give the same model, bit for bit.
	fromFile := filepath.Join(dir, "file.model")
	mustRun(t, "train", "-data", csv, "-label", "state", "-hidden", "4", "-epochs", "2", "-quiet", "-o", fromFile)
	a, err1 := modelfile.Load[float32](out)
	b, err2 := modelfile.Load[float32](fromFile)
	if err1 != nil || err2 != nil {
		t.Fatal(err1, err2)
	}
	for i, p := range a.Network.Params() {
		if !slices.Equal(p.Value, b.Network.Params()[i].Value) {
			t.Errorf("parameter %s differs between -data - and -data FILE", p.Name)
		}
	}
	r = run(t, strings.NewReader("x1,x2,state\n1,2,on\nNA,1,off\n"), "train", "-data", "-", "-label", "state", "-missing", "fail", "-quiet", "-o", out)
	want(t, r, exitBadData, "standard input:3:1", "-missing drop")
}

// TestEveryFileReadsBack trains small models with many option sets and
// loads every file train wrote, models and checkpoints (periodic and after
// divergence), with both of rhomb's readers: the training library's
// (modelfile.Load) and the serving one (net/classify). Nothing train
// writes may be refused by them.
func TestEveryFileReadsBack(t *testing.T) {
	dir := t.TempDir()
	sensors := sensorCSV(t, dir, 150)
	cities := cityCSV(t, dir, false)
	// The sensor table with gaps: x1 missing on three rows, the site on
	// two.
	lines := strings.Split(readFile(t, sensors), "\n")
	blank := func(field int, value string, rows ...int) {
		for _, r := range rows {
			f := strings.Split(lines[r], ",")
			f[field] = value
			lines[r] = strings.Join(f, ",")
		}
	}
	blank(0, "NA", 3, 10, 20)
	blank(2, "", 5, 15)
	gaps := writeFile(t, filepath.Join(dir, "gaps.csv"), strings.Join(lines, "\n"))
	n := 0
	trainTo := func(name string, args ...string) {
		t.Helper()
		n++
		path := filepath.Join(dir, fmt.Sprintf("%02d-%s.model", n, name))
		args = append([]string{"train", "-quiet", "-o", path}, args...)
		r := run(t, nil, args...)
		// A forced divergence fails (exit 1) but leaves a checkpoint.
		if r.code != exitOK && !strings.Contains(r.stderr, "diverged") {
			t.Fatalf("rhomb %s: exit %d\n%s", strings.Join(args, " "), r.code, r.stderr)
		}
	}
	base := []string{"-data", sensors, "-label", "state", "-epochs", "2"}
	trainTo("plain", append(base, "-hidden", "6", "-save-every", "1")...)
	trainTo("float64", append(base, "-hidden", "6", "-float", "64", "-save-every", "1")...)
	trainTo("global", append(base, "-hidden", "5,4", "-norm", "global", "-act", "smooth:4", "-momentum", "0.9", "-nesterov")...)
	trainTo("unit", append(base, "-hidden", "5", "-norm", "unit", "-hold", "projection", "-act", "poly:3:-3:3", "-loss", "logistic")...)
	trainTo("linear", append(base, "-hidden", "none", "-norm", "none", "-unit-norm", "-balance", "-test", "0.2")...)
	trainTo("plain-readout", append(base, "-hidden", "4", "-plain-readout", "-init", "lecun", "-temp", "1e-6", "-schedule", "constant")...)
	trainTo("search", append(base, "-search", "2")...)
	trainTo("diverged", append(base, "-hidden", "4", "-lr", "1e6")...)
	trainTo("cities", "-data", cities, "-label", "state", "-epochs", "2", "-hidden", "4", "-kind", "reading=numeric", "-save-every", "1")
	trainTo("gaps-drop", "-data", gaps, "-label", "state", "-epochs", "2", "-hidden", "4", "-missing", "drop")
	trainTo("gaps-impute", "-data", gaps, "-label", "state", "-epochs", "2", "-hidden", "4", "-missing", "impute", "-unknown-zero", "-float", "64")

	entries, err := os.ReadDir(dir)
	if err != nil {
		t.Fatal(err)
	}
	models, checkpoints := 0, 0
	for _, e := range entries {
		name := e.Name()
		if !strings.HasSuffix(name, ".model") && !strings.HasSuffix(name, ".checkpoint") {
			if !strings.HasSuffix(name, ".csv") {
				t.Errorf("train left %s behind", name)
			}
			continue
		}
		path := filepath.Join(dir, name)
		dt, err := modelfile.ElementType(path)
		if err != nil {
			t.Errorf("%s: %v", name, err)
			continue
		}
		var ckpt bool
		if dt == "float32" {
			m, err := modelfile.Load[float32](path)
			if err != nil {
				t.Errorf("modelfile.Load refuses %s: %v", name, err)
				continue
			}
			ckpt = m.Checkpoint != nil
		} else {
			m, err := modelfile.Load[float64](path)
			if err != nil {
				t.Errorf("modelfile.Load refuses %s: %v", name, err)
				continue
			}
			ckpt = m.Checkpoint != nil
		}
		if ckpt != strings.HasSuffix(name, ".checkpoint") {
			t.Errorf("%s: checkpoint %v", name, ckpt)
		}
		if _, err := serving.Load(path); err != nil {
			t.Errorf("the serving reader refuses %s: %v", name, err)
		}
		if ckpt {
			checkpoints++
		} else {
			models++
		}
	}
	// Ten runs save a model (the diverged one cannot); four leave a
	// checkpoint: the three with -save-every and the diverged one.
	if models != 10 || checkpoints != 4 {
		t.Errorf("%d models and %d checkpoints read back, want 10 and 4", models, checkpoints)
	}
}
