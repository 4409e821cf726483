// Package gauge measures what the square-loss theory of deep classifiers
// says separates a network that generalizes from one that merely fits:
// normalized margins, the balance of the scale ρ with its equilibrium ρ*,
// neural collapse of the last hidden layer, a norm-based bound on the test
// error, and the spectra of the layers' directions.
//
// Every measure works on the normalized network f(x; V) = f(x; W)/ρ with
// ρ = ∏‖W_k‖_F, which by positive homogeneity of bias-free ReLU networks
// is the network with every layer scaled to unit Frobenius norm. The
// measures take a Model (a *net.Network or a *normalize.Net) and a
// *data.Set, and return plain structs that plots, reports and sweeps read.
//
// # Reading a run
//
// A Recorder turns a training run into a History: one StepRecord per step
// (ρ, ρ_k, ρ*, the relative gap, ‖V̇_k‖, minibatch margins) and one Record
// per epoch with the whole-set measures asked for in RecorderOptions —
// margin distributions on the training and test sets, test error, neural
// collapse, spectra and the bound. Pass Recorder.Hooks() in
// optim.Settings.Hooks. Each whole-set measure costs a forward pass over
// its set and is opt-in.
//
// # Margins
//
// MarginsOf reports, overall and per class, the minimum, mean, maximum,
// quantiles (Hyndman–Fan definition 7), the count and fraction of rows
// with margin below γ, the misclassified rows (margin ≤ 0) and a histogram
// on edges of your choice. The normalized margin is y·f(x; V) for one ±1
// output and f_y(x; V) − max_{j≠y} f_j(x; V) for one-hot targets.
//
// # Equilibrium
//
// Equilibrium consumes optim.StepInfo values and declares the run settled
// when, for Window consecutive steps, |ρ − ρ*|/ρ* ≤ GapTol and
// ‖V̇‖ ≤ SpeedTol·(its peak so far); its documentation says why.
//
// # Neural collapse
//
// Collapse and CollapseOf compute NC1–NC4 of Papyan, Han and Donoho (PNAS
// 2020) on the last hidden layer's features; CollapseReport gives the
// formulas. A bias-free readout keeps the direction of the features'
// global mean, which the paper's biased classifier absorbs; NC3 therefore
// stays away from 0 for ReLU features (which are non-negative and so have a
// non-zero global mean) unless the readout learns to subtract it.
//
// # The bound, and how loose it is
//
// MarginBound states, for a margin γ > 0 fixed before seeing the data and
// δ in (0, 1): with probability at least 1 − δ over the n training rows,
// drawn independently from the distribution the test rows come from,
//
//	P(margin(x, y) ≤ 0) ≤ (1/n)Σ_n Φ_γ(margin_n) + (K/γ)·R + 3√(ln(2/δ)/(2n)),
//	R = B(√(2 ln 2 · L) + 1)/√n,
//
// where Φ_γ(t) is 1 for t ≤ 0, 1 − t/γ for 0 < t < γ and 0 above (so the
// first term is at most the fraction of margins ≤ γ), L is the number of
// dense layers, B the largest norm of a training input as the first dense
// layer sees it, and K = 2 for one ±1 output or K = 4C for C outputs.
//
// It is assembled from two published results. The margin bound in terms
// of the empirical Rademacher complexity R̂_S of the real-valued class:
// binary, P(error) ≤ margin loss + (2/γ)·R̂_S(H) + 3√(ln(2/δ)/(2n)); for C
// classes the same with (4C/γ)·R̂_S(Π₁(H)), Π₁(H) the single outputs
// (Koltchinskii and Panchenko 2002; in the form of Mohri, Rostamizadeh and
// Talwalkar, Foundations of Machine Learning, 2nd ed. 2018, Theorems 5.8
// and 9.2 — constants and theorem numbers from memory). And the bound of
// Golowich, Rakhlin and Shamir (2018, Theorem 1) on R̂_S of depth-L
// networks with 1-Lipschitz positively homogeneous activations,
// ‖W_k‖_F ≤ M_k and ‖x‖ ≤ B: B(√(2 ln 2 · L) + 1)∏M_k/√n. The normalized
// network has ∏‖V_k‖_F = 1, and each of its outputs is such a network
// (a readout row has norm at most ‖V_L‖_F = 1), so R̂_S ≤ R.
//
// The bound is loose: a normalized margin is at most √2·B, so the
// complexity term is at least K(√(2 ln 2·L) + 1)/(√2·√n), and real margins
// are far below √2·B; on data sets of thousands of rows the bound usually
// exceeds 1 and says nothing about one model. Its use is comparative —
// between runs on the same data its terms move with the margins that
// matter — and it is reported beside the measured test error so that no
// one mistakes it for a prediction. Choosing γ after looking at the
// margins voids the guarantee; BestMarginBound restores it for a grid of γ
// fixed in advance by the union bound (δ/K for each of K values).
// The bound needs ReLU (InputNorm rejects smooth or polynomial stand-ins)
// and independent rows; it says nothing about rows from another
// distribution.
//
// # Spectra
//
// Spectra gives the singular values of every V_k (gonum's SVD) with the
// effective rank exp(H(σ/Σσ)) of Roy and Vetterli (2007) and the stable
// rank; a falling effective rank is the low-rank tendency of trained
// layers.
//
// # Cautions
//
// These are diagnostics of a model on the data it was given. A large
// margin or a collapsed layer is no guarantee about rows unlike the
// training rows, and a classifier is no safety guarantee: where a model's
// output can drive decisions that hurt someone, validate it on your own
// data and follow local codes and licensed practice.
package gauge
