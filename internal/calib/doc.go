// Package calib fits, on validation rows, the maps a served model uses to
// say how sure it is and when not to answer: calibrated probabilities
// (Platt scaling for one signed score, temperature scaling for several),
// the expected calibration error and a reliability diagram to judge them,
// split-conformal prediction sets, a reject option on the margin, and a
// tuned decision threshold for two classes.
//
// # Scores
//
// A square-loss network's outputs are scores, not log-odds. For two
// classes there is one signed score s per row, positive meaning the second
// class (index 1); for k ≥ 3 classes there are k scores per row, stored
// row-major in one flat slice, and the class is the arg-max. Labels are
// class indices 0..k−1. Turning scores into probabilities is what the
// calibration maps here are for; a raw score is not a probability.
//
// # Which rows
//
// Every map is fitted on validation rows: rows the network was not trained
// on, drawn the way served rows will be. Fitting on training rows gives
// over-confident maps. Measuring a map (ECE, coverage, the error of the
// answered rows) on the rows it was fitted on flatters it; hold out rows
// for that, or at least say that the figure is an in-sample one. The
// split-conformal guarantee in particular needs calibration rows that
// nothing else was chosen on.
//
// # Errors and panics
//
// Problems with the data (too few rows, a class absent, a NaN score, a
// label out of range) are returned as an *Error that names the row where
// there is one and unwraps to one of ErrTooFewRows, ErrOneClass,
// ErrNotFinite or ErrLabel. Programmer mistakes (slices of different
// lengths, α outside (0, 1), a confidence outside [0, 1]) panic.
//
// # Safety
//
// A calibrated probability, a prediction set or a reject option is an
// estimate made on finite validation rows, for rows like them. It is no
// safety guarantee. Where a model's answer can drive a decision that hurts
// someone (an alarm, an interlock, credit), validate on your own data,
// monitor the served rows for drift, and follow local codes and licensed
// practice.
package calib
