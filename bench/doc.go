// Package bench measures one SGD training step of a bias-free ReLU network
// with the square loss, built from rhomb's public API, side by side with
// the same step written the way a Go programmer would write it with
// gonum's mat.Dense.
//
// The package holds no code of its own: everything is in its tests. Run
//
//	go test -run '^$' -bench . -benchtime 20x ./bench/
//
// The benchmarks are named by their parameters:
//
//	BenchmarkStep/net=784-512-512-10/batch=128/float=32       rhomb, one step by hand
//	BenchmarkStepGonum/net=784-512-512-10/batch=128/float=64  the gonum mat.Dense baseline
//	BenchmarkTrainer/net=784-512-512-10/batch=128/float=32    optim.Trainer, one epoch of 8 steps
//	BenchmarkTrainer/net=784-512-512-10/batch=128/float=32/T=1e-8   the same with Langevin noise
//
// for the networks 784-512-512-10 at batch 128 (Fashion-MNIST-shaped
// inputs: 784 values in [0, 1), 10 classes) and 16-32-32-4 at batch 32,
// in float32 and float64 (the gonum baseline in float64 only: mat.Dense
// has no float32 counterpart). Each reports samples/s and allocations per
// operation; a rhomb step allocates nothing after warm-up, a gonum step
// does (its large products start goroutines).
//
// Twenty operations keep the large network's run short; the small
// network's steps take tens of microseconds, and its figures settle only
// with the default -benchtime of one second (or -count 5 and benchstat).
//
// Read the figures as ratios between benchmarks measured in the same run
// on the same machine, never as absolute speeds: absolute figures depend
// on the processor, GOMAXPROCS, the Go release and whatever else the
// machine is doing. Both implementations do the same work (forward pass,
// square-loss gradient, backward pass without the input gradient, plain
// SGD update); TestSameGradients checks that they compute the same
// gradients, within a rounding-error bound, so the comparison is fair.
//
// Further benchmarks, each named by its parameters:
//
//	BenchmarkPeak          the machine's peak (register-only FMA loop, kern.Peak) on GOMAXPROCS
//	                       cores, float64 and float32; every GFLOP/s figure also reports
//	                       "of-peak", its fraction of the peak measured once in the same run
//	BenchmarkStepBlas      the step with gonum's BLAS (Sgemm/Dgemm) and loops, float32 and float64
//	BenchmarkRatio         rhomb and both gonum baselines interleaved in one operation; reports
//	                       each one's samples/s and rhomb's speed-up ("x-blas", "x-mat"). Each
//	                       rhomb step there follows a gonum step several times longer, so it
//	                       starts with cold caches and parked workers: 14–30% below
//	                       BenchmarkStep's figure on 2026-12-03. Compare rhomb with numpy by
//	                       BenchmarkStep, which like numpy_step.py times steps back to back
//	BenchmarkStepProducts  the eight matrix products of a step alone, rhomb and gonum
//	BenchmarkProduct       each of those products alone (op=fwd1-128x512x784, ...)
//	BenchmarkGemmSquare    C = A·Bᵀ on square sizes 64 to 1024, rhomb and gonum
//	BenchmarkEpochRows     one optim.Trainer epoch at 10k to 60k rows (slow; only with RHOMB_EPOCH_ROWS=1)
//	BenchmarkFashionEpoch  one epoch of the 60,000 Fashion-MNIST training images through optim.Trainer,
//	                       784-256-128-10 and 784-512-512-10, batch 128 (only with RHOMB_OPENDATA;
//	                       numpy_epoch.py is the same epoch in numpy); also the share of exact zeros
//	                       after each ReLU on real rows, at the initial weights and after the epoch
//
// GFLOP/s counts 2mnk per product, three forward and five backward products
// per step (the first layer's input gradient is not computed). Run with
// -cpu 1,2 for GOMAXPROCS 1 against 2. The "/cpu-s" metrics divide by the
// processor time the process used (all threads) instead of wall-clock
// time: on a machine shared with other work they show the code's
// efficiency, while wall-clock figures show the speed-up from a second
// core. numpy_step.py is the same step in plain numpy, the optimized-BLAS
// reference, and compare.sh runs it interleaved with the Go benchmarks.
// Its main figures are means over its rounds, as go test -bench reports
// the Go benchmarks' (it also prints its best round: compare a best with
// a best only — on the shared host of 2026-12-03 the best of five rounds
// ran 1–30% above their mean, 4% in the median).
//
// Without -bench, go test ./bench/ runs only that check and is quick.
package bench
