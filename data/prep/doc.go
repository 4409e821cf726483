// Package prep turns raw table columns into the numeric features a network
// reads, the same way in training and in serving.
//
// It imports only the standard library, so that an edge binary that serves
// a model needs neither gonum nor the training code to apply the model's
// preprocessing.
package prep
