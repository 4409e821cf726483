package opendata

import (
	"os"
	"path/filepath"
	"testing"
)

// Files fetched by .ci/fetch-data into the directory named by the
// environment variable RHOMB_OPENDATA:
//
//	penguins.csv                                  Palmer penguins (CC0), Debian r-cran-palmerpenguins
//	fashion-mnist/{train,t10k}-{images-idx3,labels-idx1}-ubyte.gz
//	                                              Fashion-MNIST (Expat), Debian dataset-fashion-mnist
//	modeldata/{attrition,mlc_churn,wa_churn,hpc_data,ad_data,cells,oils,stackoverflow}.csv
//	                                              tables of the R package modeldata (MIT), Debian
//	                                              r-cran-modeldata, exported with R's write.csv:
//	                                              factors as their level text, missing values NA
//
// Only those eight modeldata tables are exported; the package's other
// tables are kept aside for independent checks and are never trained or
// tuned on (REFERENCES.md).
const (
	Penguins          = "penguins.csv"
	FashionTrainImage = "fashion-mnist/train-images-idx3-ubyte.gz"
	FashionTrainLabel = "fashion-mnist/train-labels-idx1-ubyte.gz"
	FashionTestImage  = "fashion-mnist/t10k-images-idx3-ubyte.gz"
	FashionTestLabel  = "fashion-mnist/t10k-labels-idx1-ubyte.gz"

	// The modeldata tables, with their rows as R's nrow() counts them
	// (modeldata 1.1.0; .ci/fetch-data checks them on export).
	Attrition     = "modeldata/attrition.csv"     // 1,470 rows
	MLCChurn      = "modeldata/mlc_churn.csv"     // 5,000 rows
	WAChurn       = "modeldata/wa_churn.csv"      // 7,043 rows
	HPCData       = "modeldata/hpc_data.csv"      // 4,331 rows
	ADData        = "modeldata/ad_data.csv"       // 333 rows
	Cells         = "modeldata/cells.csv"         // 2,019 rows
	Oils          = "modeldata/oils.csv"          // 96 rows
	StackOverflow = "modeldata/stackoverflow.csv" // 5,594 rows
)

// File returns the path of a fetched open-data file. When the file is not
// there it skips the test — unless RHOMB_OPENDATA_REQUIRED is set, as CI
// sets it, and then the test fails: CI never passes by skipping.
//
// To run these tests locally:
//
//	bash .ci/fetch-data .cache/opendata && RHOMB_OPENDATA=$PWD/.cache/opendata go test ./...
func File(t testing.TB, name string) string {
	t.Helper()
	dir := os.Getenv("RHOMB_OPENDATA")
	path := filepath.Join(dir, filepath.FromSlash(name))
	if dir != "" {
		if _, err := os.Stat(path); err == nil {
			return path
		}
	}
	msg := "open data file " + name + " not found under RHOMB_OPENDATA=" + dir + "; run .ci/fetch-data DIR and set RHOMB_OPENDATA=DIR"
	if os.Getenv("RHOMB_OPENDATA_REQUIRED") != "" {
		t.Fatal(msg)
	}
	t.Skip(msg)
	return ""
}
