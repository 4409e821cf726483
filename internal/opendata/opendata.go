// Package opendata loads the small open datasets that rhomb's tests check
// the library against. It is internal: the public loaders live in package
// data.
package opendata

import (
	_ "embed"
	"encoding/json"
	"fmt"
)

//go:embed testdata/iris.json
var irisJSON []byte

// IrisSpecies are the three species, in the order Iris numbers them.
var IrisSpecies = []string{"setosa", "versicolor", "virginica"}

// Iris returns the 150 rows of Fisher's Iris data: four measurements in
// centimetres and the species index into IrisSpecies.
func Iris() (x [][4]float64, species []int, err error) {
	var rows [][5]any
	if err := json.Unmarshal(irisJSON, &rows); err != nil {
		return nil, nil, fmt.Errorf("opendata: iris.json: %w", err)
	}
	index := map[string]int{}
	for i, s := range IrisSpecies {
		index[s] = i
	}
	for r, row := range rows {
		var m [4]float64
		for j := range 4 {
			v, ok := row[j].(float64)
			if !ok {
				return nil, nil, fmt.Errorf("opendata: iris.json row %d column %d: %v is not a number", r, j, row[j])
			}
			m[j] = v
		}
		name, _ := row[4].(string)
		s, ok := index[name]
		if !ok {
			return nil, nil, fmt.Errorf("opendata: iris.json row %d: unknown species %v", r, row[4])
		}
		x = append(x, m)
		species = append(species, s)
	}
	return x, species, nil
}
