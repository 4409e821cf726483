package main

import (
	"fmt"
	"path/filepath"
	"strings"
	"testing"
)

// TestColumnsRefused: train refuses a categorical column of identifiers
// and a label column of measurements before training, naming the column
// and, for the identifier, the flags that deal with it (exit 3, nothing
// written); -keep-ids trains anyway. (Invented files: the rules are about
// the columns' form.)
func TestColumnsRefused(t *testing.T) {
	dir := t.TempDir()
	var ids, prices strings.Builder
	ids.WriteString("order_id,x,state\n")
	prices.WriteString("x,price\n")
	for r := range 60 {
		fmt.Fprintf(&ids, "A-%04d,%d,%s\n", r, r%5, []string{"on", "off"}[r%2])
		fmt.Fprintf(&prices, "%d,%.2f\n", r%5, 10+0.37*float64(r))
	}
	idFile := writeFile(t, filepath.Join(dir, "ids.csv"), ids.String())
	priceFile := writeFile(t, filepath.Join(dir, "prices.csv"), prices.String())
	model := filepath.Join(dir, "m.model")

	want(t, run(t, nil, "train", "-data", idFile, "-label", "state", "-epochs", "1", "-quiet", "-o", model),
		exitBadData, idFile, `column "order_id"`, "nearly all distinct", "-skip order_id", "-keep-ids")
	want(t, run(t, nil, "train", "-data", priceFile, "-label", "price", "-epochs", "1", "-quiet", "-o", model),
		exitBadData, priceFile, `column "price"`, "measurement, not classes", "60 distinct numbers")
	mustRun(t, "train", "-data", idFile, "-label", "state", "-epochs", "1", "-keep-ids", "-quiet", "-o", model)
}
