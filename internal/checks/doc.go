// Package checks holds end-to-end checks of the library against open
// datasets: each test walks the public path a user walks — read the data
// (package data), fit the preprocessing on the training rows only
// (data/prep), build and train a network (net, normalize, loss, optim),
// save it to a model file and load it back (optim/modelfile), then predict
// with the loaded model, its pipeline applied to the raw cell text as a
// serving program would — and compares the accuracy with a published or
// stated figure named beside the check.
//
// The unit tests of each package check its parts against closed forms;
// these checks catch what only the whole path shows: a pipeline that
// encodes serving rows differently from training rows, a model file that
// does not give back the very same predictions, or a trainer that no
// longer learns a benchmark to its published accuracy.
//
// The package holds no code besides this comment: everything is in the
// tests. The open data files are located by internal/opendata (Iris is
// vendored; the others are fetched by .ci/fetch-data). Under go test
// -short the long Fashion-MNIST training is skipped.
package checks
