package main

import (
	"path/filepath"
	"strings"
	"testing"
)

// TestMissingAtServeTime: a model trained without imputation refuses a row
// with a missing cell (exit 3, naming line and column); check -skip-missing
// leaves such rows out and counts them; classify -blank-missing writes an
// empty output row in their place, keeping the row order.
func TestMissingAtServeTime(t *testing.T) {
	dir := t.TempDir()
	_, model := sensorModel(t, dir, "-missing", "fail")
	rows := "x1,x2,site,state\n0.5,0.1,north,on\n-1,NA,south,off\n-0.7,-0.2,north,off\n"
	data := writeFile(t, filepath.Join(dir, "gaps.csv"), rows)

	want(t, run(t, nil, "check", "-model", model, "-data", data), exitBadData, data+":3:4", "missing", "-missing impute")

	r := mustRun(t, "check", "-model", model, "-data", data, "-skip-missing")
	if !strings.Contains(r.stdout, "rows left out for missing values: 1") || !strings.Contains(r.stdout, "on 2 rows") {
		t.Errorf("check -skip-missing:\n%s", r.stdout)
	}

	r = mustRun(t, "classify", "-model", model, "-data", data, "-blank-missing")
	lines := strings.Split(strings.TrimSpace(r.stdout), "\n")
	if len(lines) != 4 || lines[2] != "," || lines[1] == "," || lines[3] == "," {
		t.Errorf("classify -blank-missing: want a header, two results and a blank row in the middle:\n%s", r.stdout)
	}
}

// TestHelpShownOnce: the flag package shows a command's usage itself on
// -h; the tool must not show it a second time.
func TestHelpShownOnce(t *testing.T) {
	for _, c := range commands() {
		r := run(t, nil, c.name, "-h")
		if n := strings.Count(r.stdout, "usage: rhomb "+c.name+" "); n != 1 {
			t.Errorf("%s -h shows its usage %d times", c.name, n)
		}
	}
}
