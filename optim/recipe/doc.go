// Package recipe is rhomb's one path from data to a validated model: split
// the rows, fit the preprocessing on the training rows, build a bias-free
// ReLU network split into scales and directions, measure a stable step
// size, train while scoring every epoch on the validation rows, keep the
// best epoch, stop when the score no longer improves, and check the chosen
// model for degenerate answers before it is saved.
//
// The command-line tool's train command runs this package; a library user
// needs a few lines:
//
//	p, err := recipe.Prepare[float32](table, recipe.Split{Holdout: 0.2, Seed: 1, Prep: prep.Options{Impute: true}})
//	f, err := recipe.Fit(ctx, p.Train, p.Val, recipe.Plan{}, false, nil)
//	err = modelfile.Save("model.rhomb", f.File(p, table.Label))
//
// Plan{} means the defaults the benchmark suite chose (Defaults, and the
// README's table).
//
// # The step size
//
// Unless the plan fixes it, the base step size is measured: the largest
// eigenvalue h of the objective's Hessian on up to 512 training rows
// (power iteration with Hessian–vector products, optim.Sharpness), and
// η = StepFactor × optim.StableRate(h, μ), the threshold above which the
// heavy-ball update diverges on a quadratic of that curvature. The rate
// rises linearly from η/10 over the warm-up epochs, then follows half a
// cosine down to Floor·η. The curvature is measured again at steps 1, 2,
// 4, 8, … (while ρ grows from its small start the curvature grows with
// it) and after every epoch; η falls at once when the new threshold asks
// for it and rises at most twofold per measurement. These measurements
// can take as long as the training steps themselves: in the README's
// churn example, 92 measurements of 11.8 power-iteration steps on
// average took 40% of the run's processor time. (Stopping them at a 1%
// instead of 0.1% agreement halved the steps, but changed the runs
// enough to lower the benchmark suite's mean test accuracy from 0.8846
// to 0.8674, so the default stays.) A non-finite step lowers η fourfold
// and the run goes on from the weights before it.
//
// # Choosing the epoch
//
// Every epoch is scored on the validation rows with forward passes only.
// The best epoch by the plan's metric (ties: the larger minimum normalized
// margin) is kept, and its weights are put back when the run ends, which
// it does after the last epoch or after Patience epochs without a better
// score. The Outcome records the epoch, the metric and why the run
// stopped.
//
// # Degenerate models
//
// After training, Check looks at the chosen model's validation answers: a
// single class for every row, an accuracy no better than always answering
// the most frequent class, or a class none of whose rows is recognized.
// Fit reports these in Fitted.Health, and fails with ErrDegenerate under
// Plan.Strict.
//
// A classifier is no safety guarantee: where its answers can drive an
// alarm, an interlock, a credit decision or anything else that can hurt
// someone, validate it on your own data and follow the local codes and
// licensed practice that govern that decision.
package recipe
