// Package loss holds the losses rhomb trains with: the square loss and its
// rescaled many-class form, softmax cross-entropy, and the binary logistic
// and exponential losses.
//
// # Batches and the mean over rows
//
// A loss sees a batch as two row-major rows×cols matrices, the network's
// outputs and the targets, one row per example. Func.Eval returns the mean
// over the rows of the per-example loss ℓ(f_n, y_n), and the gradient it
// writes is the gradient of that mean: each element carries a factor
// 1/rows. The mean, not the sum, is the convention throughout rhomb, so a
// learning rate and a weight-decay coefficient mean the same thing at every
// batch size, and the objective the equilibrium scale ρ* minimizes is
//
//	mean_n ℓ(ρ·f_n, y_n) + λρ²
//
// (Equilibrium). Whatever the element type, values are accumulated in
// float64: a float32 batch gives the loss of its values computed in float64,
// and its gradient is the float64 gradient rounded once to float32.
//
// # Target encodings
//
//   - Two classes, one output per row (cols = 1): targets are +1 and −1 and
//     y·f is the margin. Square, Logistic and Exponential take this form;
//     Logistic and Exponential accept no other and panic when cols ≠ 1.
//   - C classes, C outputs per row: targets are one-hot rows (1 at the
//     class, 0 elsewhere). Square and CrossEntropy take this form;
//     Rescaled reads the class as the index of the row's largest target, and
//     CrossEntropy accepts any non-negative target weights.
//
// # The losses
//
//	Square        ‖f − y‖²                             "square"
//	Rescaled      (1/C)[K(f_c − M)² + Σ_{i≠c} f_i²]    "rescaled-square"
//	CrossEntropy  −Σ_j y_j log softmax(f)_j            "cross-entropy"
//	Logistic      log(1 + exp(−y f))                   "logistic"
//	Exponential   exp(−y f)                            "exponential"
//	Weighted      w_class(y)·ℓ(f, y) for an inner loss ℓ   "weighted-" + inner name
//
// Weighted scales each row's loss by its class's weight (for imbalanced
// labels; see data.ClassWeights). The last column is Name, the identifier used in logs and model files.
// Every loss is an empty or small value type, usable as its zero value
// (Rescaled{} is Square divided by C), safe for concurrent use, and
// allocation-free. The square losses are quadratic in the outputs and
// implement Equilibrium, which gives ρ* in closed form.
//
// # Misuse
//
// Wiring mistakes panic with the loss's name: rows or cols below 1, a slice
// shorter than rows·cols, a binary loss given more than one column, a
// negative weight decay given to RhoStar. Values are not checked: a NaN
// output gives a NaN loss.
package loss
