package main

import (
	"path/filepath"
	"slices"
	"strings"
	"testing"

	"github.com/rhomb/rhomb/optim/modelfile"
)

// TestClassifyCarryAndSeparator: -carry copies the named input columns to
// the front of each output row, in the input's row order, and -sep reads
// a file with another field separator to the same answers.
func TestClassifyCarryAndSeparator(t *testing.T) {
	dir := t.TempDir()
	csvPath, model := sensorModel(t, dir)
	raw := readFile(t, csvPath)
	_, in := readCSV(t, raw)

	plain := mustRun(t, "classify", "-model", model, "-data", csvPath).stdout
	carried := mustRun(t, "classify", "-model", model, "-data", csvPath, "-carry", "site, x1").stdout
	head, rows := readCSV(t, carried)
	if want := []string{"site", "x1", "class", "score:on"}; !slices.Equal(head, want) {
		t.Fatalf("header %v, want %v", head, want)
	}
	_, plainRows := readCSV(t, plain)
	for i, r := range rows {
		// The input's columns are x1,x2,site,state.
		if r[0] != in[i][2] || r[1] != in[i][0] || !slices.Equal(r[2:], plainRows[i]) {
			t.Fatalf("row %d: %v; want %s,%s then %v", i, r, in[i][2], in[i][0], plainRows[i])
		}
	}
	r := run(t, nil, "classify", "-model", model, "-data", csvPath, "-carry", "serial")
	want(t, r, exitBadData, `"serial"`, "-carry")

	semi := writeFile(t, filepath.Join(dir, "semi.csv"), strings.ReplaceAll(raw, ",", ";"))
	if got := mustRun(t, "classify", "-model", model, "-data", semi, "-sep", ";").stdout; got != plain {
		t.Error("the same rows separated by ';' and read with -sep ';' give different output")
	}
	tabs := writeFile(t, filepath.Join(dir, "tabs.tsv"), strings.ReplaceAll(raw, ",", "\t"))
	if got := mustRun(t, "classify", "-model", model, "-data", tabs, "-sep", "tab").stdout; got != plain {
		t.Error("the same rows separated by tabs and read with -sep tab give different output")
	}
	checkPlain := mustRun(t, "check", "-model", model, "-data", csvPath).stdout
	if got := mustRun(t, "check", "-model", model, "-data", semi, "-sep", ";").stdout; got != checkPlain {
		t.Error("check -sep ';' differs from check on the comma-separated file")
	}
	r = run(t, nil, "classify", "-model", model, "-data", csvPath, "-sep", "ab")
	want(t, r, exitUsage, "-sep")
}

// TestTrainSeparator: train -sep reads a semicolon-separated copy of the
// data to the same model, weight for weight, as the comma-separated file;
// a bad -sep is a usage error naming the flag.
func TestTrainSeparator(t *testing.T) {
	dir := t.TempDir()
	csvPath := sensorCSV(t, dir, 200)
	semi := writeFile(t, filepath.Join(dir, "semi.csv"), strings.ReplaceAll(readFile(t, csvPath), ",", ";"))
	a, b := filepath.Join(dir, "a.model"), filepath.Join(dir, "b.model")
	mustRun(t, "train", "-data", csvPath, "-label", "state", "-hidden", "6", "-epochs", "3", "-quiet", "-o", a)
	mustRun(t, "train", "-data", semi, "-sep", ";", "-label", "state", "-hidden", "6", "-epochs", "3", "-quiet", "-o", b)
	ma, err := modelfile.Load[float32](a)
	if err != nil {
		t.Fatal(err)
	}
	mb, err := modelfile.Load[float32](b)
	if err != nil {
		t.Fatal(err)
	}
	for i, p := range ma.Network.Params() {
		if !slices.Equal(p.Value, mb.Network.Params()[i].Value) {
			t.Fatalf("parameter %s differs between the comma and the semicolon file", p.Name)
		}
	}
	want(t, run(t, nil, "train", "-data", semi, "-sep", "ab", "-label", "state", "-o", b), exitUsage, "-sep")
}
