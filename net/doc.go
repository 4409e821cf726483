// Package net builds bias-free ReLU networks and runs them forward and
// backward on batches.
//
// A network is a chain of named nodes assembled with a Builder:
//
//	n, err := net.NewBuilder[float32](8).
//		ConstantFeature("one").
//		Dense("hidden1", 64).ReLU("relu1").
//		Dense("hidden2", 64).ReLU("relu2").
//		Readout("readout", 4).
//		Build()
//
// Build checks the wiring — unique names, widths, the constant feature
// first, the readout last — and reports the first mistake as a *BuildError
// naming the node, before any arithmetic runs.
//
// # Why bias-free
//
// Dense layers have no bias. A network of bias-free dense layers and ReLUs
// is positively homogeneous: scaling layer k's weights by c_k > 0 scales
// the output by ∏c_k, so f(x; W) = ρ·f(x; V) with ρ = ∏‖W_k‖_F and unit-norm
// directions V_k = W_k/‖W_k‖_F. The theory of training with the square loss
// works in these terms: the scale ρ and the normalized margins of f(x; V).
// Where a bias is needed, ConstantFeature appends an input that is always 1,
// which keeps homogeneity in the weights (though not in x).
//
// SmoothReLU and PolyReLU are activations for research into how much of the
// behaviour depends on ReLU's exact shape; they are not homogeneous.
//
// BatchNorm (batch normalization) adds no bias unless asked, but it
// subtracts a mean and divides out the scale of the layer before it, so
// that layer's ρ_k no longer matters; it has a training and an inference
// mode (Network.SetTraining) and running statistics (Network.Running).
//
// # Buffers and element types
//
// Batches are contiguous row-major slices, rows×width. The network owns the
// activations of the last Forward, sized for the largest batch seen, and
// reuses them: after warm-up Forward and Backward allocate nothing. All
// matrix products go through internal/kern. Networks are generic over
// float32 and float64; float32 is faster, float64 is what gradient checks
// use.
//
// # Initialization
//
// Init draws the weights from a named scheme with an explicit seed, and,
// separately, rescales them to a chosen initial scale ρ0 = ∏‖W_k‖_F. A
// small ρ0 starts training near the origin, where the theory says the
// dynamics favour large margins.
package net
