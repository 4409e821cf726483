package demo_test

import (
	"fmt"

	"github.com/rhomb/rhomb/data/demo"
)

// The embedded demo table: invented pump-condition readings from three
// invented sites, the label in the last column.
func ExampleTable() {
	t, err := demo.Table()
	if err != nil {
		fmt.Println(err)
		return
	}
	fmt.Println(t.Rows, "rows, label", demo.Label)
	fmt.Println(demo.Conditions)
	// Output:
	// 1200 rows, label condition
	// [healthy imbalance bearing-wear cavitation]
}
