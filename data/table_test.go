package data

import (
	"math"
	"slices"
	"strings"
	"testing"

	"github.com/rhomb/rhomb/data/prep"
)

// TestTableSubset checks that Subset copies the chosen rows of every part
// of a table. The table is invented (a property that holds for any data):
// a numeric and a categorical column, each with a missing cell kept for
// imputation, read by ReadCSV so that Lines, Missing, NaN and "" are as
// the reader sets them.
func TestTableSubset(t *testing.T) {
	const in = "x,colour,y\n1.5,red,a\nNA,blue,b\n3,,a\n\n4.25,red,b\n"
	tab, err := ReadCSV(strings.NewReader(in), "subset.csv", CSVOptions{Label: "y", OnMissing: MissingKeep})
	if err != nil {
		t.Fatal(err)
	}
	tab.Dropped = 7 // stands for a read that dropped rows; Subset keeps it
	rows := []int{3, 1, 1, 2}
	sub := tab.Subset(rows)

	if sub.Source != "subset.csv" || sub.Label != "y" || sub.Rows != 4 || sub.Dropped != 7 {
		t.Errorf("Source %q Label %q Rows %d Dropped %d, want subset.csv, y, 4, 7", sub.Source, sub.Label, sub.Rows, sub.Dropped)
	}
	if want := []string{"b", "b", "b", "a"}; !slices.Equal(sub.Labels, want) {
		t.Errorf("labels %q, want %q", sub.Labels, want)
	}
	// Line 5 is empty and skipped, so row 3 is on line 6.
	if want := []int{6, 3, 3, 4}; !slices.Equal(sub.Lines, want) {
		t.Errorf("lines %v, want %v", sub.Lines, want)
	}
	if len(sub.Columns) != 2 {
		t.Fatalf("%d columns, want 2", len(sub.Columns))
	}
	x, c := sub.Columns[0], sub.Columns[1]
	if x.Name != "x" || x.Kind != Numeric || x.Cat != nil || c.Name != "colour" || c.Kind != Categorical || c.Num != nil {
		t.Errorf("columns %q %v (Cat %v), %q %v (Num %v)", x.Name, x.Kind, x.Cat, c.Name, c.Kind, c.Num)
	}
	if len(x.Num) != 4 || x.Num[0] != 4.25 || !math.IsNaN(x.Num[1]) || !math.IsNaN(x.Num[2]) || x.Num[3] != 3 {
		t.Errorf("x values %v, want [4.25 NaN NaN 3]", x.Num)
	}
	if want := []bool{false, true, true, false}; !slices.Equal(x.Missing, want) {
		t.Errorf("x missing %v, want %v", x.Missing, want)
	}
	if want := []string{"red", "blue", "blue", ""}; !slices.Equal(c.Cat, want) {
		t.Errorf("colour values %q, want %q", c.Cat, want)
	}
	if want := []bool{false, false, false, true}; !slices.Equal(c.Missing, want) {
		t.Errorf("colour missing %v, want %v", c.Missing, want)
	}

	// Copies, not views: writing to the subset leaves the table alone.
	sub.Labels[0], sub.Lines[0], x.Num[0], x.Missing[0], c.Cat[0] = "z", 99, -1, true, "green"
	if tab.Labels[3] != "b" || tab.Lines[3] != 6 || tab.Columns[0].Num[3] != 4.25 || tab.Columns[0].Missing[3] || tab.Columns[1].Cat[3] != "red" {
		t.Error("writing to the subset changed the table")
	}

	// Encoding a subset gives the rows Encode gives for the same rows of
	// the table.
	p, err := prep.Fit(tab.Columns, nil, prep.Options{Impute: true})
	if err != nil {
		t.Fatal(err)
	}
	classes := tab.Classes()
	want, err := Encode[float64](tab, rows, p, classes)
	if err != nil {
		t.Fatal(err)
	}
	got, err := Encode[float64](tab.Subset(rows), nil, p, classes)
	if err != nil {
		t.Fatal(err)
	}
	if !slices.Equal(got.X, want.X) || !slices.Equal(got.Y, want.Y) {
		t.Errorf("encoded subset\n%v %v\nwant\n%v %v", got.X, got.Y, want.X, want.Y)
	}
}

// TestTableSubsetNoMissing checks that a table built without missing
// markers or line numbers (as the IDX-based tables are) keeps them nil,
// and that an empty row list gives an empty table (a property that holds
// for any data).
func TestTableSubsetNoMissing(t *testing.T) {
	tab := &Table{Source: "built", Label: "y", Rows: 3, Labels: []string{"a", "b", "a"},
		Columns: []Column{{Name: "v", Kind: Numeric, Num: []float64{1, 2, 3}}}}
	sub := tab.Subset([]int{2, 0})
	if sub.Lines != nil || sub.Columns[0].Missing != nil || sub.Columns[0].Cat != nil {
		t.Errorf("Lines %v Missing %v Cat %v, want nil", sub.Lines, sub.Columns[0].Missing, sub.Columns[0].Cat)
	}
	if !slices.Equal(sub.Columns[0].Num, []float64{3, 1}) || !slices.Equal(sub.Labels, []string{"a", "a"}) {
		t.Errorf("values %v labels %q", sub.Columns[0].Num, sub.Labels)
	}
	if e := tab.Subset(nil); e.Rows != 0 || len(e.Labels) != 0 || len(e.Columns[0].Num) != 0 {
		t.Errorf("empty subset: %d rows, %d labels, %d values", e.Rows, len(e.Labels), len(e.Columns[0].Num))
	}
	defer func() {
		if recover() == nil {
			t.Error("Subset with row 3 of 3 did not panic")
		}
	}()
	tab.Subset([]int{3})
}
