"""The training step of bench/step_test.go in plain numpy: the optimized-BLAS
reference for the Go benchmarks (see bench/doc.go).

One SGD step of a bias-free ReLU network with the square loss, mean over
rows of ||o - y||^2, whose gradient is 2(o - y)/rows; backward without the
input gradient; plain update W -= lr*dW. W is out x in, a layer computes
H = X W^T. Also times a 512^3 matrix product alone, and the eight products
of the step alone.

Run with OpenBLAS's processor detection left alone:

    env -u OPENBLAS_CORETYPE -u OPENBLAS_L2_SIZE python3 bench/numpy_step.py

It prints samples/s and GFLOP/s (2mnk per product, 3 forward and 5
backward) for float32 and float64: the mean over five rounds, as the Go
benchmarks report theirs, then the best round. (Until 2026-12-03 the
script printed only the best round, against the Go benchmarks' mean: a
bias in numpy's favour on a shared host.) Read the figures as ratios against the Go
benchmarks run just before or after, on the same machine.
"""
import sys
import time

import numpy as np

LR = 1e-4


def flops(widths, batch):
    f = 0
    for l in range(3):
        f += 2 * batch * widths[l] * widths[l + 1]  # forward
        f += 2 * batch * widths[l] * widths[l + 1]  # dW
        if l > 0:
            f += 2 * batch * widths[l] * widths[l + 1]  # dX
    return f


def rates(fn, reps, rounds=5):
    """Calls per second over several rounds of reps calls, after one call
    to warm up: the mean (all calls over all their time, the figure
    `go test -bench` reports for the Go benchmarks) and the best round."""
    fn()
    total, best = 0.0, 0.0
    for _ in range(rounds):
        t0 = time.perf_counter()
        for _ in range(reps):
            fn()
        dt = time.perf_counter() - t0
        total += dt
        best = max(best, reps / dt)
    return rounds * reps / total, best


def step_bench(dtype, widths, batch, reps):
    rng = np.random.default_rng(1)
    x = rng.random((batch, widths[0]), dtype=np.float32).astype(dtype)
    y = np.zeros((batch, widths[-1]), dtype=dtype)
    y[np.arange(batch), rng.integers(0, widths[-1], batch)] = 1
    w = [
        (rng.standard_normal((widths[l + 1], widths[l])) * np.sqrt(2 / widths[l])).astype(dtype)
        for l in range(3)
    ]
    scale = dtype(2 / batch)
    lr = dtype(LR)

    def step():
        h1 = x @ w[0].T
        r1 = np.maximum(h1, 0)
        h2 = r1 @ w[1].T
        r2 = np.maximum(h2, 0)
        o = r2 @ w[2].T
        g = scale * (o - y)
        dw3 = g.T @ r2
        d2 = (g @ w[2]) * (h2 > 0)
        dw2 = d2.T @ r1
        d1 = (d2 @ w[1]) * (h1 > 0)
        dw1 = d1.T @ x
        w[0] -= lr * dw1
        w[1] -= lr * dw2
        w[2] -= lr * dw3

    mean, best = rates(step, reps)
    return mean * batch, mean * flops(widths, batch) / 1e9, best * batch


def matmul_bench(dtype, n, reps):
    rng = np.random.default_rng(2)
    a = rng.random((n, n)).astype(dtype)
    b = rng.random((n, n)).astype(dtype)
    mean, best = rates(lambda: a @ b.T, reps)
    return mean * 2 * n**3 / 1e9, best * 2 * n**3 / 1e9


def main():
    print("numpy", np.__version__, file=sys.stderr)
    np.show_config() if "-v" in sys.argv else None
    for name, dtype in (("float=32", np.float32), ("float=64", np.float64)):
        for widths, batch, reps in (((784, 512, 512, 10), 128, 50), ((16, 32, 32, 4), 32, 2000)):
            sps, gf, best = step_bench(dtype, widths, batch, reps)
            net = "-".join(map(str, widths))
            print(f"numpy step net={net}/batch={batch}/{name}: {sps:.0f} samples/s, {gf:.1f} GFLOP/s (best round {best:.0f} samples/s)")
        for n in (64, 128, 256, 512, 1024):
            gf, best = matmul_bench(dtype, n, max(3, int(2e9 / (2 * n**3))))
            print(f"numpy matmul size={n}/{name}: {gf:.1f} GFLOP/s (best round {best:.1f})")


if __name__ == "__main__":
    main()
