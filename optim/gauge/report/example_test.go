package report_test

import (
	"context"
	"fmt"
	"github.com/rhomb/rhomb/internal/demorun"
	"io"

	"github.com/rhomb/rhomb/optim/gauge/report"
)

// Write a run's report. The Run here is the fixed demo run the package's
// tests use (built as the package documentation shows: a recorder on the
// trainer's hooks, the held-out loss, the bound, the confusion matrices);
// a real program writes it to a file with report.WriteFile("run.html", r).
func ExampleWrite() {
	r, err := demorun.Run(context.Background(), demorun.Options{Epochs: 5})
	if err != nil {
		fmt.Println(err)
		return
	}
	if err := report.Write(io.Discard, r); err != nil {
		fmt.Println(err)
		return
	}
	fmt.Printf("run %s: %d epochs, %d steps\n", r.Status, r.Epochs, r.Steps)
	fmt.Printf("data: %d rows of %d columns, %d missing cells imputed\n", r.Data.Rows, r.Data.Columns, r.Data.Missing)
	for _, s := range r.Data.Splits {
		fmt.Printf("%s: %d rows\n", s.Name, s.Rows)
	}
	// Output:
	// run finished: 5 epochs, 145 steps
	// data: 1200 rows of 9 columns, 36 missing cells imputed
	// training: 900 rows
	// test: 300 rows
}
