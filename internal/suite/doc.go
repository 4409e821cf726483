// Package suite holds the datasets of rhomb's open benchmark suite and the
// steps every comparison on them shares: load a table, split it into
// training and test rows, and encode rows into features.
//
// The suite compares rhomb's default training with two references on the
// same rows and the same features: the majority class, and a multinomial
// logistic regression fitted to its optimum with its L2 strength chosen on
// validation rows (internal/logreg). The tests that run the comparison
// live with the code they compare (internal/checks); this package only
// says what the data is and how it is prepared, so that every side sees
// it the same way.
//
// # The datasets
//
// Datasets lists eleven open tables (each names its source and licence in
// Dataset.Source): Palmer penguins, Iris, a 10,000-image stratified subset
// of Fashion-MNIST, and eight tables of the R package modeldata. Every one
// but Iris is fetched by .ci/fetch-data from Debian packages (see
// internal/opendata); Iris is vendored. Columns that would make the
// comparison meaningless — identifiers, a marker of the package's own
// train/test split, the year of collection — are skipped, each with its
// reason beside it in Datasets. The modeldata package holds more tables
// than these eight: the others are kept aside for independent checks and
// are never trained or tuned on.
//
// # Loading
//
// Load reads a dataset as a data.Table with missing cells kept
// (data.MissingKeep), so that the preprocessing imputes them, and fails
// the test when the table differs from what its source says: the number
// of rows, of feature columns, of missing cells, and the rows of every
// class, as the dataset's entry records them (REFERENCES.md and R's nrow
// and table on the package's own data). A file that is not fetched skips
// the test, or fails it under RHOMB_OPENDATA_REQUIRED (opendata.File).
//
// # Splitting and encoding
//
// Split draws the suite's stratified 80/20 split of a table's rows into
// training and test rows (data.Stratified), so every class keeps its share
// in both. Encode fits the preprocessing (data/prep: numeric columns
// standardized, categories one-hot, missing values imputed) on one set of
// rows only and encodes any others with it, so that nothing about held-out
// rows leaks into the features.
//
// Fashion-MNIST in the suite is a 10,000-row subset of the 60,000
// training images, to keep the suite's run short; the full set is trained
// on by internal/checks (TestFashionMNIST) and outside CI.
package suite
