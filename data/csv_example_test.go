package data_test

import (
	"errors"
	"fmt"
	"strings"

	"github.com/rhomb/rhomb/data"
)

// Read a small table of invented pump readings: drop the rows that lack a
// reading, keep the ones that lack only the site (the preprocessing
// pipeline imputes it later), and skip the serial-number column.
func ExampleReadCSV() {
	const file = `serial,vib_rms,temp_rise,site,condition
A-101,1.58,20.3,river-intake,healthy
A-102,4.12,NA,north-yard,bearing-wear
A-103,3.90,31.0,,bearing-wear
A-104,1.61,19.8,north-yard,healthy
`
	tab, err := data.ReadCSV(strings.NewReader(file), "pumps.csv", data.CSVOptions{
		Label:       "condition",
		Ignore:      []string{"serial"},
		OnMissing:   data.MissingDrop,
		OnMissingIn: map[string]data.MissingPolicy{"site": data.MissingKeep},
	})
	if err != nil {
		fmt.Println(err)
		return
	}
	fmt.Printf("%d rows (%d dropped), classes %v\n", tab.Rows, tab.Dropped, tab.Classes())
	for _, c := range tab.Columns {
		fmt.Printf("%-9s %-11v missing %v\n", c.Name, c.Kind, c.Missing)
	}
	fmt.Println("rows from lines", tab.Lines)
	// Output:
	// 3 rows (1 dropped), classes [bearing-wear healthy]
	// vib_rms   numeric     missing [false false false]
	// temp_rise numeric     missing [false false false]
	// site      categorical missing [false true false]
	// rows from lines [2 4 5]
}

// Errors say where the problem is and what to do about it, and carry a
// sentinel cause for errors.Is.
func ExampleReadCSV_error() {
	const file = `vib_rms,condition
1.58,healthy
high,cavitation
`
	_, err := data.ReadCSV(strings.NewReader(file), "pumps.csv", data.CSVOptions{Label: "condition"})
	fmt.Println(errors.Is(err, data.ErrNotNumber))
	var pe *data.ParseError
	if errors.As(err, &pe) {
		fmt.Printf("line %d, column %d, field %s\n", pe.Line, pe.Column, pe.Field)
	}
	fmt.Println(err)
	// Output:
	// true
	// line 3, column 1, field vib_rms
	// pumps.csv:3:1 (column "vib_rms"): not a number in a numeric column: "high"; the column was read as numeric from its first value "1.58" on line 2. If the column holds categories, set CSVOptions.Kinds["vib_rms"] = Categorical; if "high" marks a missing value, add it to CSVOptions.Missing
}
