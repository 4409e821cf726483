package main

import (
	"os"
	"path/filepath"
	"strings"
	"testing"
)

// rhomb demo -report writes one self-contained page with every figure and
// the cautions; the page's content is tested in optim/gauge/report, here
// only that the command wires it up. rhomb train -report on a CSV without
// a test split puts the bound beside the validation error and says so.
func TestReportFlag(t *testing.T) {
	dir := t.TempDir()
	path := filepath.Join(dir, "demo.html")
	r := mustRun(t, "demo", "-quiet", "-epochs", "3", "-report", path)
	if !strings.Contains(r.stdout, "report written to "+path) {
		t.Errorf("stdout does not say where the report went:\n%s", r.stdout)
	}
	b, err := os.ReadFile(path)
	if err != nil {
		t.Fatal(err)
	}
	page := string(b)
	for _, s := range []string{`data-check="pending"`, "no safety guarantee", "The demo data are invented",
		`id="fig-scale"`, `id="fig-collapse"`, `id="confusion-validation"`, "the embedded demo file"} {
		if !strings.Contains(page, s) {
			t.Errorf("the demo report lacks %q", s)
		}
	}
	if strings.Contains(page, "http://") || strings.Contains(page, "https://") {
		t.Error("the report names a web address")
	}

	csvPath := sensorCSV(t, dir, 120)
	out := filepath.Join(dir, "train.html")
	mustRun(t, "train", "-quiet", "-data", csvPath, "-label", "state", "-epochs", "2", "-o", filepath.Join(dir, "m.model"), "-report", out)
	b, err = os.ReadFile(out)
	if err != nil {
		t.Fatal(err)
	}
	if !strings.Contains(string(b), "The bound beside the validation error") {
		t.Error("without a test split the bound should stand beside the validation error")
	}
}
