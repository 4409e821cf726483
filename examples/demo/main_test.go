package main

import (
	"bytes"
	"strings"
	"testing"

	"github.com/rhomb/rhomb/optim/recipe"
)

// TestDemoRuns runs the README's first command in short form. The demo data
// is invented, so this checks that the program works, not how well it
// learns.
func TestDemoRuns(t *testing.T) {
	var out bytes.Buffer
	if err := run(&out, recipe.Plan{Epochs: 3, Temperature: 1e-7, Hidden: []int{16, 16}, Seed: 1}, ""); err != nil {
		t.Fatal(err)
	}
	s := out.String()
	for _, want := range []string{"660 training, 240 validation and 300 test readings", "ρ*", "step size: curvature", "after 3 epochs", "kept epoch", "test accuracy"} {
		if !strings.Contains(s, want) {
			t.Errorf("output lacks %q:\n%s", want, s)
		}
	}
	epochs := 0
	for _, l := range strings.Split(s, "\n") {
		if f := strings.Fields(l); len(f) >= 9 && f[0] != "·" && strings.Trim(f[0], "0123456789") == "" {
			epochs++
		}
	}
	if epochs != 3 {
		t.Errorf("%d epoch lines, want 3:\n%s", epochs, s)
	}
}
