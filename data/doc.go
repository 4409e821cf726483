// Package data reads labelled tables and turns them into the form the
// trainer reads.
//
//   - ReadCSV reads a CSV file with a header in one streaming pass: a
//     label column chosen by name, feature columns typed numeric or
//     categorical (automatically, or as told), missing values refused,
//     dropped or kept for imputation, and every problem reported as a
//     *ParseError with file, line, column and field. The input must be
//     UTF-8 with lines ending in LF or CR LF, and a record is limited in
//     fields and bytes, so that a file that is no table is refused early
//     and cheaply; NewCSVReader gives the same checks to a program that
//     reads rows itself.
//   - ReadIDX reads the IDX files of the MNIST family, gzipped or not.
//   - Stratified and Folds split rows reproducibly from a seed.
//   - Encode applies a fitted preprocessing pipeline (package data/prep)
//     and the square-loss label encoding — one ±1 column for two classes,
//     one-hot rows for more — to give a Set: features and targets as
//     contiguous row-major matrices.
//
// Subpackage prep holds the preprocessing, which serving shares; demo
// holds rhomb's invented demo data.
package data
