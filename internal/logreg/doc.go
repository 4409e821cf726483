// Package logreg is the reference classifier of rhomb's benchmark suite:
// plain multinomial logistic regression, fitted to its optimum, against
// which the networks rhomb trains are compared. It is deliberately
// independent of the rest of rhomb: it works on float64 rows, computes its
// matrix products with gonum's BLAS and minimizes with gonum's optimize,
// so that a bug in rhomb's kernels or trainer cannot hide in both sides of
// a comparison.
//
// # The model
//
// For C classes and F features the model holds a weight matrix W (C×F)
// and a bias b (C). The score of class k for a row x is z_k = W_k·x + b_k,
// the probability p_k = exp(z_k)/Σ_j exp(z_j) (softmax), and the
// predicted class the one with the largest score (the first on a tie).
// Two classes are fitted the same way, as a two-class softmax; its
// decision depends on W_1 − W_0 and b_1 − b_0 only, which equal the
// coefficients of the usual binary logistic regression.
//
// # The objective
//
// Fit minimizes the mean cross-entropy over the n rows plus an L2 penalty
// on the weights, not on the bias:
//
//	L(W, b) = (1/n) Σ_i −log p_{y_i}(x_i) + λ‖W‖²_F
//
// the project's convention of a mean data term and a penalty λ‖θ‖² (see
// DEVELOPERS.md, "Scaling"). The gradient is analytic: with P the n×C
// matrix of probabilities and Y the one-hot labels,
//
//	∂L/∂W = (1/n)(P − Y)ᵀX + 2λW,   ∂L/∂b = (1/n) Σ_i (P − Y)_i.
//
// L is convex; for λ > 0 it is strictly convex in W, so the fitted
// weights and the predictions are unique. The bias is determined only up
// to a common shift (softmax ignores adding a constant to every score);
// Fit returns the bias shifted to sum to zero. With λ = 0 the weights too
// are determined only up to a common shift, and the optimum does not
// exist when the classes are separable; use λ = 0 only on data known not
// to be separable.
//
// # Convergence
//
// The minimizer is gonum's L-BFGS with the analytic gradient. A fit has
// converged when the infinity norm of ∇L falls below Settings.GradTol
// (DefaultGradTol = 1e-5 unless set); any other ending — the iteration
// limit, a failed line search — is returned as an error wrapping
// ErrNotConverged, never as a silently unfinished model. Near the optimum
// ∇L ≈ H·δ, with H the Hessian and δ the distance to the optimum, so the
// parameters are within about ‖∇L‖₂/λ_min(H) of it; the tests derive
// their tolerances from this.
//
// # Choosing λ
//
// Tune fits every λ of a grid (DefaultGrid: 10⁻⁴ … 10² in decades) on
// training rows, from the largest penalty to the smallest, each fit
// started from the previous optimum, and keeps the λ with the best
// accuracy on separate validation rows; ties go to the larger penalty,
// the simpler model.
package logreg
