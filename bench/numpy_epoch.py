"""One epoch of the Fashion-MNIST training images in plain numpy: the
optimized-BLAS reference for BenchmarkFashionEpoch (bench/fashion_test.go).

The same work as the Go benchmark: 60,000 rows, pixels/255, one-hot
targets, a bias-free ReLU network (784-256-128-10 and 784-512-512-10),
shuffled minibatches of 128 (the last one shorter), the square loss (mean
over rows of ||o - y||^2, gradient 2(o - y)/rows), backward without the
input gradient, plain update W -= lr*dW. Each batch's rows are gathered
into a contiguous array, as the trainer does.

    env -u OPENBLAS_CORETYPE -u OPENBLAS_L2_SIZE python3 bench/numpy_epoch.py DIR

DIR is the folder .ci/fetch-data fills (its fashion-mnist/ subfolder).
Prints seconds per epoch and samples/s, float32 and float64; read them as
ratios against the Go benchmark run just before or after.
"""
import gzip
import os
import sys
import time

import numpy as np

LR = 1e-3
BATCH = 128


def idx(path):
    with gzip.open(path, "rb") as f:
        raw = f.read()
    ndim = raw[3]
    dims = [int.from_bytes(raw[4 + 4 * i : 8 + 4 * i], "big") for i in range(ndim)]
    return np.frombuffer(raw, dtype=np.uint8, offset=4 + 4 * ndim).reshape(dims)


def epoch(x, y, widths, dtype):
    rng = np.random.default_rng(1)
    w = [
        (rng.standard_normal((widths[l + 1], widths[l])) * np.sqrt(2 / widths[l])).astype(dtype)
        for l in range(3)
    ]
    lr = dtype(LR)
    order = rng.permutation(len(x))
    t0 = time.perf_counter()
    for s in range(0, len(x), BATCH):
        rows = order[s : s + BATCH]
        xb, yb = x[rows], y[rows]
        h1 = xb @ w[0].T
        r1 = np.maximum(h1, 0)
        h2 = r1 @ w[1].T
        r2 = np.maximum(h2, 0)
        o = r2 @ w[2].T
        g = dtype(2 / len(rows)) * (o - yb)
        dw3 = g.T @ r2
        d2 = (g @ w[2]) * (h2 > 0)
        dw2 = d2.T @ r1
        d1 = (d2 @ w[1]) * (h1 > 0)
        dw1 = d1.T @ xb
        w[0] -= lr * dw1
        w[1] -= lr * dw2
        w[2] -= lr * dw3
    return time.perf_counter() - t0


def main():
    if len(sys.argv) < 2:
        sys.exit("usage: numpy_epoch.py DIR (the folder .ci/fetch-data fills)")
    d = os.path.join(sys.argv[1], "fashion-mnist")
    images = idx(os.path.join(d, "train-images-idx3-ubyte.gz"))
    labels = idx(os.path.join(d, "train-labels-idx1-ubyte.gz"))
    n = len(images)
    for name, dtype in (("float=32", np.float32), ("float=64", np.float64)):
        x = images.reshape(n, -1).astype(dtype) / dtype(255)
        y = np.zeros((n, 10), dtype=dtype)
        y[np.arange(n), labels] = 1
        for widths in ((784, 256, 128, 10), (784, 512, 512, 10)):
            sec = min(epoch(x, y, widths, dtype) for _ in range(2))
            net = "-".join(map(str, widths))
            print(f"numpy epoch net={net}/batch={BATCH}/{name}: {sec:.3f} s/epoch, {n / sec:.0f} samples/s")


if __name__ == "__main__":
    main()
