package data_test

import (
	"math"
	"os"
	"testing"

	"gonum.org/v1/gonum/stat"

	"github.com/rhomb/rhomb/data"
	"github.com/rhomb/rhomb/internal/opendata"
)

// The Palmer penguins file (CC0; Debian r-cran-palmerpenguins,
// extdata/penguins.csv), checked against the facts listed in
// REFERENCES.md ("Palmer penguins").

var measurements = []string{"bill_length_mm", "bill_depth_mm", "flipper_length_mm", "body_mass_g"}

func readPenguins(t *testing.T, o data.CSVOptions) *data.Table {
	t.Helper()
	f, err := os.Open(opendata.File(t, opendata.Penguins))
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	o.Label = "species"
	tab, err := data.ReadCSV(f, "penguins.csv", o)
	if err != nil {
		t.Fatal(err)
	}
	return tab
}

func TestPenguinsAll(t *testing.T) {
	tab := readPenguins(t, data.CSVOptions{OnMissing: data.MissingKeep})
	// REFERENCES.md: 344 rows.
	if tab.Rows != 344 || tab.Dropped != 0 {
		t.Fatalf("%d rows, %d dropped; want 344, 0", tab.Rows, tab.Dropped)
	}
	// REFERENCES.md: the columns, in this order; species is the label.
	want := []string{"island", "bill_length_mm", "bill_depth_mm", "flipper_length_mm", "body_mass_g", "sex", "year"}
	if len(tab.Columns) != len(want) {
		t.Fatalf("%d feature columns, want %d", len(tab.Columns), len(want))
	}
	for j, name := range want {
		if tab.Columns[j].Name != name {
			t.Errorf("column %d is %q, want %q", j, tab.Columns[j].Name, name)
		}
	}
	// REFERENCES.md: Adelie 152, Gentoo 124, Chinstrap 68.
	count := map[string]int{}
	for _, l := range tab.Labels {
		count[l]++
	}
	if len(count) != 3 || count["Adelie"] != 152 || count["Gentoo"] != 124 || count["Chinstrap"] != 68 {
		t.Errorf("species %v", count)
	}
	// Island and sex hold names and year holds whole numbers, so Auto
	// must make them categorical and numeric (read off the file; that the
	// years are 2007 to 2009, the study years, is from memory of the
	// package documentation).
	for name, k := range map[string]data.Kind{"island": data.Categorical, "sex": data.Categorical, "year": data.Numeric} {
		if c := tab.Column(name); c.Kind != k {
			t.Errorf("%s is %v, want %v", name, c.Kind, k)
		}
	}
	for _, y := range tab.Column("year").Num {
		if y < 2007 || y > 2009 || y != math.Trunc(y) {
			t.Fatalf("year %v", y)
		}
	}
	for _, name := range measurements {
		if c := tab.Column(name); c.Kind != data.Numeric {
			t.Errorf("%s is %v, want numeric", name, c.Kind)
		}
	}
	// REFERENCES.md: 2 rows lack all four measurements (and none lacks
	// only some, since 342 = 344 − 2 rows have all of them); 11 lack sex.
	all, some := 0, 0
	for r := range tab.Rows {
		n := 0
		for _, name := range measurements {
			if tab.Column(name).Missing[r] {
				n++
			}
		}
		if n == len(measurements) {
			all++
		}
		if n > 0 {
			some++
		}
	}
	if all != 2 || some != 2 {
		t.Errorf("%d rows lack all measurements and %d some; want 2 and 2", all, some)
	}
	sex := 0
	for _, m := range tab.Column("sex").Missing {
		if m {
			sex++
		}
	}
	if sex != 11 {
		t.Errorf("%d rows lack sex, want 11", sex)
	}
	// No row spans lines in this file, so row r is on line r+2.
	if tab.Lines[0] != 2 || tab.Lines[343] != 345 {
		t.Errorf("lines %d..%d, want 2..345", tab.Lines[0], tab.Lines[343])
	}
}

// TestPenguinsMeasured reads the 342 rows with all four measurements, two
// ways: ignoring sex, or keeping the rows that lack only sex.
func TestPenguinsMeasured(t *testing.T) {
	ignored := readPenguins(t, data.CSVOptions{OnMissing: data.MissingDrop, Ignore: []string{"sex"}})
	kept := readPenguins(t, data.CSVOptions{OnMissing: data.MissingDrop, OnMissingIn: map[string]data.MissingPolicy{"sex": data.MissingKeep}})
	for _, tab := range []*data.Table{ignored, kept} {
		// REFERENCES.md: 342 rows with all measurements.
		if tab.Rows != 342 || tab.Dropped != 2 {
			t.Fatalf("%d rows, %d dropped; want 342, 2", tab.Rows, tab.Dropped)
		}
	}
	if ignored.Column("sex") != nil {
		t.Error("sex was not ignored")
	}
	// The 2 rows that lack the measurements lack sex too (lines 5 and 273
	// of the file, read off it with grep: a fact of this copy, not a
	// published one), so 11 − 2 = 9 of the 342 lack sex.
	sex := 0
	for _, m := range kept.Column("sex").Missing {
		if m {
			sex++
		}
	}
	if sex != 9 {
		t.Errorf("%d of the 342 lack sex, want 9", sex)
	}
	for _, l := range kept.Lines {
		if l == 5 || l == 273 {
			t.Errorf("line %d was kept", l)
		}
	}

	// REFERENCES.md, over the 342: means 43.92 / 17.15 / 200.9 / 4202 and
	// sample SDs 5.46 / 1.97 / 14.06 / 801.95. The published figures are
	// rounded, so a computed value agrees if it is within half a unit in
	// the last published digit; float64 sums of 342 values are off by
	// about 342·2⁻⁵³ relative, far below that. gonum's stat.MeanStdDev
	// computes the sample (n−1) standard deviation.
	published := []struct {
		mean, meanHalf, sd, sdHalf float64
	}{
		{43.92, 0.005, 5.46, 0.005},
		{17.15, 0.005, 1.97, 0.005},
		{200.9, 0.05, 14.06, 0.005},
		{4202, 0.5, 801.95, 0.005},
	}
	for j, name := range measurements {
		c := kept.Column(name)
		for r, m := range c.Missing {
			if m {
				t.Fatalf("%s row %d missing", name, r)
			}
		}
		mean, sd := stat.MeanStdDev(c.Num, nil)
		p := published[j]
		if math.Abs(mean-p.mean) > p.meanHalf {
			t.Errorf("%s: mean %.6g, published %v", name, mean, p.mean)
		}
		if math.Abs(sd-p.sd) > p.sdHalf {
			t.Errorf("%s: SD %.6g, published %v", name, sd, p.sd)
		}
	}
}

func TestPenguinsComplete(t *testing.T) {
	tab := readPenguins(t, data.CSVOptions{OnMissing: data.MissingDrop})
	// REFERENCES.md: 333 complete rows, so 344 − 333 = 11 dropped.
	if tab.Rows != 333 || tab.Dropped != 11 {
		t.Fatalf("%d rows, %d dropped; want 333, 11", tab.Rows, tab.Dropped)
	}
	for _, c := range tab.Columns {
		for r, m := range c.Missing {
			if m {
				t.Fatalf("%s row %d missing", c.Name, r)
			}
		}
	}
	// Without a policy, the first missing value stops the read: line 5,
	// column 18 (the first NA of "Adelie,Torgersen,NA,...", read off the
	// file), in bill_length_mm.
	f, err := os.Open(opendata.File(t, opendata.Penguins))
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	_, err = data.ReadCSV(f, "penguins.csv", data.CSVOptions{Label: "species"})
	checkParseErrorAt(t, err, data.ErrMissing, "penguins.csv", 5, 18, "bill_length_mm")
}
