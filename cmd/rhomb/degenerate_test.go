package main

import (
	"os"
	"path/filepath"
	"strings"
	"testing"

	"github.com/rhomb/rhomb/internal/opendata"
)

// TestDegenerateModel trains on modeldata's stackoverflow table, where
// about 10% of the respondents work remotely (575 of 5,594; R's table()
// on the package's data, checked by internal/suite) and the other
// columns tell little about it: the benchmark suite's logistic reference
// also answers "Not remote" for every row. train must say so, with what to
// try, and keep the model; with -strict it must fail (exit 1) and write
// nothing.
func TestDegenerateModel(t *testing.T) {
	data := opendata.File(t, opendata.StackOverflow)
	dir := t.TempDir()
	model := filepath.Join(dir, "remote.model")
	args := []string{"train", "-data", data, "-label", "Remote", "-hidden", "16", "-epochs", "20", "-o", model}
	r := mustRun(t, args...)
	for _, want := range []string{`class "Remote" holds 10.3% of the training rows`, "-balance", "warning: the kept model looks degenerate", `predicts class "Not remote" for every one`, "-strict"} {
		if !strings.Contains(r.stdout, want) {
			t.Errorf("train's output lacks %q:\n%s", want, r.stdout)
		}
	}
	if _, err := os.Stat(model); err != nil {
		t.Errorf("without -strict the model is kept: %v", err)
	}
	strict := filepath.Join(dir, "strict.model")
	args[len(args)-1] = strict
	r = run(t, nil, append(args, "-strict")...)
	want(t, r, exitFailed, "degenerate", "nothing was saved", "-strict")
	if _, err := os.Stat(strict); err == nil {
		t.Error("-strict still wrote the model")
	}
}
