package prep_test

import (
	"encoding/json"
	"fmt"
	"math"

	"github.com/rhomb/rhomb/data/prep"
)

// Fit a pipeline on the training rows of a table, store it as JSON the way
// a model file does, and serve a request with the decoded copy. The table is
// invented: pump readings with one missing temperature.
func Example() {
	cols := []prep.Column{
		{Name: "temp_rise", Kind: prep.Numeric,
			Num:     []float64{4, 6, math.NaN(), 8, 30},
			Missing: []bool{false, false, true, false, false}},
		{Name: "site", Kind: prep.Categorical,
			Cat:     []string{"north-yard", "east", "east", "north-yard", "east"},
			Missing: make([]bool, 5)},
	}
	train := []int{0, 1, 2, 3} // row 4 is held out: it does not move the mean
	p, err := prep.Fit(cols, train, prep.Options{Impute: true})
	if err != nil {
		fmt.Println(err)
		return
	}
	fmt.Println(p.FeatureNames())

	// Training path: row 2's missing temperature takes the training mean, 6.
	x := make([]float64, p.Width())
	_ = p.ApplyColumns(cols, 2, x)
	fmt.Println("row 2:", x)

	// Serving path, from the stored pipeline.
	b, _ := json.Marshal(p)
	var served prep.Pipeline
	_ = json.Unmarshal(b, &served)
	_ = served.ApplyMap(map[string]string{"temp_rise": "8", "site": "north-yard"}, x)
	fmt.Println("request:", x)
	err = served.ApplyStrings([]string{"7", "west-yard"}, x)
	fmt.Println(err)
	// Output:
	// [temp_rise site=east site=north-yard]
	// row 2: [0 1 0]
	// request: [1 0 1]
	// prep: field "site": value "west-yard": category not seen in training; check the spelling, or retrain with rows that hold this category or with unseen categories encoded as zeros
}

// Bound the one-hot block of a column with many levels. The parts column
// (invented) has gasket ×3, valve ×2 and seal, pump, hose once each; with
// the cap at 2, gasket and valve keep their features, and every other
// value — a part seen in training beyond the two, or one never seen —
// sets the one "other" feature, with no unknown-category error.
func ExampleOptions_levelCap() {
	cols := []prep.Column{{Name: "part", Kind: prep.Categorical,
		Cat: []string{"gasket", "valve", "gasket", "seal", "valve", "gasket", "pump", "hose"}}}
	p, err := prep.Fit(cols, nil, prep.Options{LevelCap: 2})
	if err != nil {
		fmt.Println(err)
		return
	}
	fmt.Printf("%q, %d levels pooled\n", p.FeatureNames(), p.Encodings[0].OtherLevels)
	x := make([]float64, p.Width())
	for _, part := range []string{"valve", "seal", "impeller"} {
		_ = p.ApplyStrings([]string{part}, x)
		fmt.Println(part, x)
	}
	// Output:
	// ["part=gasket" "part=valve" "part= (other)"], 3 levels pooled
	// valve [0 1 0]
	// seal [0 0 1]
	// impeller [0 0 1]
}
