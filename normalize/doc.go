// Package normalize splits a network's dense layers into scale and
// direction, W_k = ρ_k·V_k with ‖V_k‖_F = 1, and trains those instead of W.
//
// A *Net wraps a *net.Network the way a transposed view wraps a matrix: it
// offers the same Forward, Backward and Params, and behind them keeps the
// wrapped network's W equal to ρ·V. Options choose
//
//   - one scale per layer (PerLayer, the default: ρ = ∏ρ_k), one for the
//     whole network (Global), or one per unit (PerUnit: each row of W_k);
//   - which layers: all dense layers by default, or those named in Layers,
//     optionally leaving the readout plain (SkipReadout), as is common;
//   - how the unit norm is held: by a Lagrange multiplier (Multiplier, the
//     default), which projects the direction's gradient onto the sphere's
//     tangent space and, unless NoRetraction, rescales V back to the sphere
//     after each step to undo the O(η²) drift of a finite step; or by plain
//     projection (Projection), an ordinary step followed by V ← V/‖V‖.
//
// Start small. The step a direction takes grows with the scale (its
// gradient is ρ_k·G_k), so a network wrapped at a large ρ — a He-normal
// initialization of a few layers has ρ of 10 or more — moves its
// directions as if the learning rate were that much larger, and can kill
// its hidden units in the first steps. Initialize with a small
// net.InitSettings.Rho0 (0.1, say) before wrapping, as the theory
// recommends anyway.
//
// Weight decay then acts on the scales, as λρ² (λΣρ_k² per layer): the
// directions carry Param.Decay = false.
//
// # The quantities
//
// With the objective L = (1/B)Σ_n ℓ(ρ f_n, y_n) + λρ² and G_k = ∂L_data/∂W_k,
// the wrapper's gradients are ∂L/∂ρ_k = ⟨G_k, V_k⟩ and ∂L/∂V_k = ρ_k·G_k
// (projected under Multiplier). For the square loss this is the
// weight-normalized dynamics
//
//	ρ̇   = (2/B) Σ_n (y_n − ρ f_n) f_n − 2λρ
//	V̇_k = (2ρ/B) Σ_n (y_n − ρ f_n)(∂f_n/∂V_k − f_n V_k)
//	ν_k = (ρ/B) Σ_n (y_n − ρ f_n) f_n
//
// with equilibrium ρ* = Σ y_n f_n / (Σ f_n² + λB). Package optim reports
// these at every step through its hooks, for wrapped and plain networks
// alike (a plain network's ρ_k is ‖W_k‖_F).
package normalize
