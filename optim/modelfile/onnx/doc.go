// Package onnx exports a trained rhomb classifier as an ONNX model, so that
// it can be served by any program that runs ONNX, the open standard for
// neural-network models, in languages and on devices rhomb does not reach.
//
// Marshal (and Write, Save) takes a modelfile.Model — what modelfile.Load
// returns — and writes an ONNX ModelProto with IR version 8 and the
// default operator set at version 17 (IRVersion, Opset). The file is
// encoded field by field with protowire; wire.go lists the onnx.proto
// field numbers used.
//
// # Inputs and outputs
//
// Without a pipeline, or with Options.FeatureInput, the model has one
// input:
//
//	features  float32 [N, In]  the feature row, as package prep writes it
//
// With the model's pipeline folded in (the default when it has one) the
// inputs are the raw numeric values and the one-hot blocks:
//
//	numeric   float32 [N, k]   the raw values of the k numeric columns, in
//	                           the pipeline's column order; when the
//	                           pipeline imputes, NaN marks a missing value
//	onehot    float32 [N, m]   the one-hot blocks of the categorical
//	                           columns, in column order, each block in the
//	                           pipeline's category order (Step.Categories)
//	                           and, for a column whose levels were capped
//	                           (Step.OtherLevels > 0), ending in its
//	                           "other" feature: exactly the features
//	                           prep.Pipeline writes for those columns,
//	                           imputation, unknown-as-zeros and the other
//	                           feature included
//
// An input is absent when the pipeline has no column of its kind. The
// features, in order, and the class names are recorded as JSON arrays in
// the model's metadata under rhomb.features and rhomb.classes.
//
// The outputs are
//
//	scores    float32 [N, Out] the network's outputs
//	class     int64   [N]      the class index (left out with
//	                           Options.ScoresOnly): the first largest
//	                           score, or for one ±1 score, 1 where it is
//	                           positive and 0 elsewhere, as data.ClassOf
//
// # What exports, and how
//
//	numeric column      Sub(mean), Div(scale), as prep's (x − mean)/scale;
//	                    left out when the pipeline does not standardize
//	imputation          IsNaN, Where(fill) on the numeric input; the
//	                    categorical fill is the caller's (it is in onehot)
//	column order        Concat(numeric, onehot), then Gather to put the
//	                    features back in column order when they interleave
//	unit norm           LpNormalization(axis 1, p 2)
//	constant-one        Shape, Concat, Expand a 1×1 initializer of 1 to
//	                    N×1, and Concat it after the features
//	dense, readout      MatMul(x, Wᵀ), Wᵀ an in×out initializer
//	relu                Relu
//	batch-norm          BatchNormalization (inference: the running mean
//	                    and variance, γ or ones, β or zeros, epsilon)
//	smooth-relu         Mul(β), Softplus, Div(β); Softplus alone for β = 1
//	poly-relu           Sub, Mul to t = (x − mid)·scale, then Clenshaw's
//	                    recurrence in Mul, Add and Sub, three per degree
//
// Operator versions (each the newest at or below opset 17; from memory):
// MatMul 13, Relu 14, BatchNormalization 15, Softplus 1, Add/Sub/Mul/Div 14, Concat 13, Shape 15,
// Expand 13, Gather 13, LpNormalization 1, IsNaN 13, Where 16, ArgMax 13,
// Greater 13, Cast 13, Reshape 14.
//
// A normalized model exports its W = ρ·V (Marshal synchronizes them
// first); the scales and directions, the training record and any
// checkpoint are not part of the ONNX model.
//
// # What does not export
//
// Marshal returns an *Error wrapping ErrUnsupported, naming the node, for:
//
//   - a node of the caller's own kind (only the kinds above are known);
//   - a weight, sharpness, interval, Chebyshev coefficient or
//     batch-norm statistic that is NaN or does not fit in float32
//     (|v| > 3.4e38), and a pipeline mean,
//     scale or fill likewise;
//   - a pipeline whose width differs from the network's input (an *Error
//     of kind "pipeline").
//
// Parts of the pipeline are not in the graph and stay the caller's job:
// turning category strings into the one-hot blocks (the caller applies
// prep, or builds the blocks from Step.Categories: for a capped column,
// a value not in Step.Categories, seen in training or not, sets the
// block's last feature), and rejecting bad rows. A capped column thus
// exports exactly: its block is one feature wider, and the graph takes
// it as it takes any other. The graph computes on whatever it is given: a missing value
// without imputation, an infinity or an out-of-range category yields NaN
// or meaningless scores where package prep would return an error.
//
// # Precision
//
// The ONNX model computes in float32. float64 weights are rounded to
// float32 on export, as are the pipeline's means and scales; rhomb's
// float64 preprocessing becomes float32 arithmetic on raw float32 values.
// The smooth and polynomial ReLUs, which rhomb evaluates in float64 and
// rounds once, are evaluated in float32 by the runtime: Clenshaw's
// recurrence is stable, but its rounding grows with the degree and with
// the distance of x outside [lo, hi]. onnxruntime leaves an all-zero row
// zero under LpNormalization, as prep does (tested; the operator's
// definition does not say).
//
// The package's tests run exported models of every kind above in
// onnxruntime-node, an independent runtime (install and run with
// .ci/onnx-check), and require its scores to match rhomb's within 1e-5
// relative plus a rounding-error bound that covers scores near zero.
package onnx
