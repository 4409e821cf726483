// Package prep turns raw table columns into the numeric features a network
// reads, the same way in training and in serving.
//
// Fit learns a Pipeline from the training rows only — means and standard
// deviations for numeric columns, sorted categories for one-hot codes,
// fill values when imputing — and the Pipeline, stored as JSON inside the
// model file, then encodes any row: ApplyColumns from a table in training,
// ApplyStrings or ApplyMap from raw cell text in serving. All three pass
// every value through one encoder, so the same cell gives the same bits.
//
// It imports only the standard library, so that an edge binary that serves
// a model needs neither gonum nor the training code to apply the model's
// preprocessing.
package prep
