// Package optim trains a model by minibatch stochastic gradient descent,
// with the options the square-loss theory of deep classifiers asks for:
// weight decay, momentum, learning-rate schedules and Langevin noise.
//
// A Trainer takes a Model (a *net.Network, or a *normalize.Net around one),
// a loss, a *data.Set and Settings. Settings' zero value is documented and
// usable. Run trains until the epochs are done, a target loss is reached, a
// hook stops it, or its context is canceled, and returns a Result with the
// reason. Run can be called again to continue: the trainer holds the whole
// state of the run, batch order and random streams included, and a run
// that was interrupted and continued gives the same bits as one that was
// not.
//
// # The step
//
// For parameters θ (W for plain layers; ρ and V for normalized ones) a step
// with learning rate η, weight decay λ, momentum μ and temperature T is
//
//	g ← ∇_θ L_data + 2λθ   (the 2λθ only where Param.Decay is set)
//	v ← μv + g;  θ ← θ − ηv                   (heavy ball; Nesterov: θ ← θ − η(g + μv))
//	θ ← θ + √(2ηT)·ξ,  ξ ~ N(0, I)
//
// followed by the model's constraint (directions back on the sphere). The
// noise term is the Euler–Maruyama discretization of the Langevin equation
// dθ = −∇L dt + √(2T) dB, whose stationary density is ∝ exp(−L/T). Random
// numbers come from two PCG streams seeded by Settings.Seed, one for batch
// order and one for noise. The noise stream gives one key per step; each
// block of 1,024 elements of a parameter has a seed made from that key
// (through SplitMix64), and element j of a block draws ξ_j from the
// SplitMix64 output at position j by the ziggurat method (Marsaglia &
// Tsang, 2000), eight at a time where the processor has AVX-512. Both
// cores draw at once and the bits do not depend on which core drew which
// block. With float32 weights the step and the noise are each rounded to
// float32.
//
// A loss, gradient or updated weight that is NaN or infinite ends the run
// with a *NonFiniteError naming the step and the parameter; the weights,
// momentum and noise stream are restored to those before the step.
//
// # Determinism
//
// The same seed, data, model and settings give the same bits, whatever
// GOMAXPROCS is: the matrix kernels never split a sum across goroutines,
// and the update splits a parameter only into independent chunks.
//
// # Hooks
//
// Hooks are a struct of optional functions called after every step and at
// the end of every epoch with read-only info values: loss split into its
// terms, ρ and every ρ_k, ‖V_k‖, ‖V̇_k‖, the multipliers ν_k, the
// minibatch's normalized margins, ρ̇ and the equilibrium ρ*. What only a
// hook needs is computed only when that hook is set; margins over the whole
// training set cost a forward pass and are opt-in. JSONLines is a
// ready-made set of hooks that logs these as JSON Lines.
package optim
