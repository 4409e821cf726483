package main

import (
	"bytes"
	"encoding/csv"
	"strconv"
	"strings"
	"testing"

	"github.com/rhomb/rhomb/data/demo"
	"github.com/rhomb/rhomb/net/classify"
)

// TestRunMatchesClassify runs the program on the demo file and checks
// every output line against package classify on the same row by name
// (ClassifyMap), exact to the last bit of every score; and that the
// embedded file is the float32 11-16-16-4 model the generator documents.
func TestRunMatchesClassify(t *testing.T) {
	var out bytes.Buffer
	if err := run(modelFile, "embedded", bytes.NewReader(demo.CSV), &out); err != nil {
		t.Fatal(err)
	}
	m, err := classify.Read(modelFile, "embedded")
	if err != nil {
		t.Fatal(err)
	}
	if in := m.Info(); in.DType != "float32" || in.Features != 11 || in.Outputs != 4 || len(in.Graph) != 6 {
		t.Fatalf("embedded model: %+v", in)
	}
	recs, err := csv.NewReader(bytes.NewReader(demo.CSV)).ReadAll()
	if err != nil {
		t.Fatal(err)
	}
	lines := strings.Split(strings.TrimSuffix(out.String(), "\n"), "\n")
	if len(lines) != len(recs)-1 {
		t.Fatalf("%d output lines for %d rows", len(lines), len(recs)-1)
	}
	w := m.NewWork()
	for i, rec := range recs[1:] {
		row := map[string]string{}
		for j, h := range recs[0] {
			if h != demo.Label {
				row[h] = rec[j]
			}
		}
		a, err := m.ClassifyMap(w, row)
		if err != nil {
			t.Fatal(err)
		}
		want := a.Label
		for _, s := range a.Scores {
			want += "," + strconv.FormatFloat(s, 'g', -1, 64)
		}
		if lines[i] != want {
			t.Fatalf("row %d: %q, classify gives %q", i, lines[i], want)
		}
	}
}

// TestRunRefusesBadHeader: a file without the model's columns is an error
// naming the column, not a silent guess.
func TestRunRefusesBadHeader(t *testing.T) {
	err := run(modelFile, "embedded", strings.NewReader("a,b\n1,2\n"), &bytes.Buffer{})
	if err == nil || !strings.Contains(err.Error(), `"site"`) {
		t.Fatalf("got %v", err)
	}
}
