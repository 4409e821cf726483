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
// A categorical column gets one feature per category seen in training,
// unless Options.LevelCap bounds it: a column with more than that many
// categories then keeps only the most frequent ones (of equal counts, the
// byte-wise smaller first) and gets one more feature, named
// "column= (other)", for every other value, including values never seen
// in training, which then encode there rather than fail. Fitting holds
// one count per distinct category, so a column with thousands of levels
// costs memory in its levels, not in rows times levels. Pipelines fitted
// without the cap, and model files written before it existed, encode as
// they always did.
//
// It imports only the standard library, so that an edge binary that serves
// a model needs neither gonum nor the training code to apply the model's
// preprocessing.
package prep
