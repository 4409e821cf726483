package main

// classify as a filter: standard input to standard output, and -o files
// that appear whole or not at all.

import (
	"fmt"
	"os"
	"path/filepath"
	"slices"
	"strings"
	"testing"
)

func names(t *testing.T, dir string) []string {
	t.Helper()
	entries, err := os.ReadDir(dir)
	if err != nil {
		t.Fatal(err)
	}
	var s []string
	for _, e := range entries {
		s = append(s, e.Name())
	}
	return s
}

func TestClassifyStdin(t *testing.T) {
	dir := t.TempDir()
	data, model := sensorModel(t, dir)
	raw := readFile(t, data)
	_, inRows := readCSV(t, raw)

	fromFile := mustRun(t, "classify", "-model", model, "-data", data).stdout
	// "-data -" and no -data at all (its default is -) both read stdin.
	for _, args := range [][]string{{"-data", "-"}, nil} {
		r := run(t, strings.NewReader(raw), append([]string{"classify", "-model", model}, args...)...)
		if r.code != exitOK {
			t.Fatalf("classify %v: exit %d\n%s", args, r.code, r.stderr)
		}
		if r.stdout != fromFile {
			t.Errorf("classify %v from stdin differs from the same file read by name", args)
		}
		head, rows := readCSV(t, r.stdout)
		if len(rows) != len(inRows) {
			t.Errorf("%d output rows for %d input rows", len(rows), len(inRows))
		}
		// Two classes: one output and one score, headed by the class a
		// positive score means (classify's documented layout).
		if !slices.Equal(head, []string{"class", "score:on"}) {
			t.Errorf("header %v, want [class score:on]", head)
		}
	}

	// -o FILE: the same text in the file, nothing on stdout, and nothing
	// else left in the directory.
	before := names(t, dir)
	out := filepath.Join(dir, "labelled.csv")
	r := run(t, strings.NewReader(raw), "classify", "-model", model, "-data", "-", "-o", out)
	if r.code != exitOK || r.stdout != "" {
		t.Fatalf("classify -o: exit %d, stdout %q, stderr:\n%s", r.code, r.stdout, r.stderr)
	}
	if got := readFile(t, out); got != fromFile {
		t.Errorf("-o file holds %d bytes, stdout gave %d", len(got), len(fromFile))
	}
	wantNames := append(slices.Clone(before), "labelled.csv")
	slices.Sort(wantNames) // os.ReadDir sorts by name
	if after := names(t, dir); !slices.Equal(after, wantNames) {
		t.Errorf("directory before %v, after %v: want only labelled.csv added", before, after)
	}
	for _, n := range names(t, dir) {
		if strings.HasPrefix(n, ".") {
			t.Errorf("classify left a temporary file %s", n)
		}
	}
}

// TestClassifyOutputAtomic checks that a run failing part-way leaves no
// output file and no temporary file, and leaves an existing output as it
// was. The bad row comes after more than one of classify's batches, so
// some rows were written before the failure.
func TestClassifyOutputAtomic(t *testing.T) {
	dir := t.TempDir()
	data, model := sensorModel(t, dir)
	var b strings.Builder
	b.WriteString(readFile(t, data))
	for i := range 300 {
		fmt.Fprintf(&b, "%d.5,1,north,on\n", i%3)
	}
	b.WriteString("0.5,1,west,on\n") // a site the model never saw
	bad := writeFile(t, filepath.Join(dir, "bad.csv"), b.String())

	out := filepath.Join(dir, "labelled.csv")
	before := names(t, dir)
	r := run(t, nil, "classify", "-model", model, "-data", bad, "-o", out)
	want(t, r, exitBadData, bad, "west")
	if after := names(t, dir); !slices.Equal(after, before) {
		t.Errorf("a failed classify changed the directory: before %v, after %v", before, after)
	}

	writeFile(t, out, "old contents\n")
	r = run(t, nil, "classify", "-model", model, "-data", bad, "-o", out)
	want(t, r, exitBadData, bad)
	if got := readFile(t, out); got != "old contents\n" {
		t.Errorf("a failed classify replaced the existing output with %d bytes", len(got))
	}
}

// TestClassifyOutputMode checks that -o makes a file with the permissions
// any new file gets (0666 less the umask, as os.Create makes it), not
// those of a private temporary file: the output is data for whoever reads
// the directory.
func TestClassifyOutputMode(t *testing.T) {
	dir := t.TempDir()
	data, model := sensorModel(t, dir)
	out := filepath.Join(dir, "labelled.csv")
	mustRun(t, "classify", "-model", model, "-data", data, "-o", out)
	ref := filepath.Join(dir, "reference")
	f, err := os.Create(ref)
	if err != nil {
		t.Fatal(err)
	}
	f.Close()
	got, err1 := os.Stat(out)
	wantInfo, err2 := os.Stat(ref)
	if err1 != nil || err2 != nil {
		t.Fatal(err1, err2)
	}
	if got.Mode().Perm() != wantInfo.Mode().Perm() {
		t.Errorf("classify -o made %s with mode %v; os.Create makes %v", out, got.Mode().Perm(), wantInfo.Mode().Perm())
	}
}
