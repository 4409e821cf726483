// Package data holds datasets in the form the trainer reads: features and
// targets as contiguous row-major matrices, with the square-loss target
// encodings (±1 for two classes, one-hot for more).
//
// Subpackage demo holds rhomb's invented demo data.
package data
