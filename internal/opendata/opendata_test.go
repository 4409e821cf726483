package opendata

import "testing"

// TestIris checks the loader against the UCI description of the data: 150
// rows, 50 of each species (REFERENCES.md, Iris).
func TestIris(t *testing.T) {
	x, s, err := Iris()
	if err != nil {
		t.Fatal(err)
	}
	if len(x) != 150 {
		t.Fatalf("%d rows, want 150", len(x))
	}
	var count [3]int
	for _, c := range s {
		count[c]++
	}
	if count != [3]int{50, 50, 50} {
		t.Errorf("rows per species %v, want 50 each", count)
	}
	// First row of the published table: 5.1, 3.5, 1.4, 0.2, setosa.
	if x[0] != [4]float64{5.1, 3.5, 1.4, 0.2} || s[0] != 0 {
		t.Errorf("first row %v %d", x[0], s[0])
	}
}
