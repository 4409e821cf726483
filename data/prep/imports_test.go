package prep_test

import (
	"os/exec"
	"strings"
	"testing"
)

// TestStdlibOnly asserts the import graph the package doc promises: an
// edge binary that serves a model links prep without gonum or any other
// rhomb package. It asks the go tool for every package prep depends on,
// and fails on any outside the standard library.
func TestStdlibOnly(t *testing.T) {
	gobin, err := exec.LookPath("go")
	if err != nil {
		t.Skip("go not on PATH: cannot list the import graph")
	}
	const self = "github.com/rhomb/rhomb/data/prep"
	out, err := exec.Command(gobin, "list", "-deps", "-f", "{{if not .Standard}}{{.ImportPath}}{{end}}", self).CombinedOutput()
	if err != nil {
		t.Fatalf("go list: %v\n%s", err, out)
	}
	var deps int
	for _, p := range strings.Fields(string(out)) {
		deps++
		if p != self {
			t.Errorf("%s imports %s, which is not in the standard library; prep must import the standard library only", self, p)
		}
	}
	if deps == 0 {
		t.Fatalf("go list printed no packages, not even %s itself:\n%s", self, out)
	}
}
