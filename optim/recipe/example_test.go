package recipe_test

import (
	"context"
	"fmt"

	"github.com/rhomb/rhomb/data"
	"github.com/rhomb/rhomb/internal/opendata"
	"github.com/rhomb/rhomb/optim/recipe"
)

// Fit trains with the defaults and keeps the best epoch on the validation
// rows; here on Fisher's Iris data, read into a Table as a CSV file would
// be.
func ExampleFit() {
	x, species, _ := opendata.Iris()
	t := &data.Table{Source: "iris", Label: "species", Rows: len(x)}
	for j, name := range []string{"sepal_length", "sepal_width", "petal_length", "petal_width"} {
		c := data.Column{Name: name, Kind: data.Numeric}
		for _, r := range x {
			c.Num = append(c.Num, r[j])
		}
		t.Columns = append(t.Columns, c)
	}
	for _, s := range species {
		t.Labels = append(t.Labels, opendata.IrisSpecies[s])
	}

	p, err := recipe.Prepare[float64](t, recipe.Split{Holdout: 0.2, Test: 0.2, Seed: 1})
	if err != nil {
		fmt.Println(err)
		return
	}
	f, err := recipe.Fit(context.Background(), p.Train, p.Val, recipe.Plan{Seed: 1}, false, nil)
	if err != nil {
		fmt.Println(err)
		return
	}
	fmt.Println("ranked by", f.Outcome.Metric)
	fmt.Println("health:", f.Health)
	fmt.Printf("test accuracy %.2f on %d rows\n", recipe.Evaluate(f.Model(), p.Test).Accuracy(), p.Test.Rows)
	// Output:
	// ranked by accuracy
	// health: no problems found
	// test accuracy 1.00 on 30 rows
}
