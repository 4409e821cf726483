package main

import (
	"bytes"
	"strings"
	"testing"
)

// TestDemoRuns runs the README's first command in short form. The demo data
// is invented, so this checks that the program works, not how well it
// learns.
func TestDemoRuns(t *testing.T) {
	var out bytes.Buffer
	if err := run(&out, 3, 0.05, 32, 1e-3, 1e-7, 0.1, 16, 1, ""); err != nil {
		t.Fatal(err)
	}
	s := out.String()
	for _, want := range []string{"900 training and 300 test readings", "ρ*", "run finished after 3 epochs", "test accuracy"} {
		if !strings.Contains(s, want) {
			t.Errorf("output lacks %q:\n%s", want, s)
		}
	}
	if lines := strings.Count(s, "\n"); lines != 2+3+2 {
		t.Errorf("%d lines, want a header, 3 epochs and 2 summary lines:\n%s", lines, s)
	}
}
