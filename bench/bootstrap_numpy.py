"""The bootstrap of the statement's estimates written the way a practitioner would, with NumPy.

Reads the K x n 0/1 loss matrix the C# harness wrote (uint8), then for B resamples: draw n row indices with
replacement, count them (the weight matrix), multiply the loss matrix by the weights (one K x n by n x B product),
select the lowest in-bag error per resample and score it on the out-of-bag rows (bootstrap bias correction,
Tsamardinos et al. 2018), and take the studentized max-statistic quantile (Westfall & Young 1993; Romano & Wolf 2005).
Prints the time of the whole computation and the matrix product's rate in GFLOP/s.
"""
import sys
import time

import numpy as np


def bootstrap(losses, resamples, seed, confidence=0.95):
    k, n = losses.shape
    rng = np.random.default_rng(seed)
    index = rng.integers(0, n, size=(resamples, n))
    offsets = (index + np.arange(resamples)[:, None] * n).ravel()
    weights = np.bincount(offsets, minlength=resamples * n).reshape(resamples, n).astype(np.float32)
    sums = losses @ weights.T                      # K x B in-bag error counts
    resampled = sums / n
    observed = losses.mean(axis=1, dtype=np.float64)
    # bootstrap-bias: select on the in-bag rows, score the choice on the out-of-bag rows
    selected = np.argmin(resampled, axis=0)
    out_of_bag = weights == 0
    oob_error = (losses[selected] * out_of_bag).sum(axis=1) / out_of_bag.sum(axis=1)
    bbc = oob_error.mean()
    bbc_upper = np.quantile(oob_error, confidence, method="inverted_cdf")
    # max-bootstrap: studentized largest deviation over all looks
    scale = np.sqrt(np.maximum(resampled * (1 - resampled), 1.0 / n) / n)
    maxima = ((observed[:, None] - resampled) / scale).max(axis=0)
    critical = np.quantile(maxima, confidence, method="inverted_cdf")
    return bbc, bbc_upper, critical


def main():
    k, n, resamples, seed, path = int(sys.argv[1]), int(sys.argv[2]), int(sys.argv[3]), int(sys.argv[4]), sys.argv[5]
    losses = np.fromfile(path, dtype=np.uint8).reshape(k, n).astype(np.float32)
    weights = np.random.default_rng(0).integers(0, 3, size=(n, resamples)).astype(np.float32)
    losses @ weights  # warm-up: BLAS threads start
    product = []
    for _ in range(5):
        start = time.perf_counter()
        losses @ weights
        product.append(time.perf_counter() - start)
    print(f"numpy_matmul_gflops {2.0 * k * n * resamples / np.median(product) / 1e9:.1f}")
    bootstrap(losses, resamples, seed)  # warm-up
    runs = []
    for _ in range(5):
        start = time.perf_counter()
        bbc, bbc_upper, critical = bootstrap(losses, resamples, seed)
        runs.append(time.perf_counter() - start)
    print(f"numpy_bootstrap_seconds {np.median(runs):.4f}")
    print(f"numpy_bbc_estimate {bbc:.5f}")
    print(f"numpy_bbc_upper {bbc_upper:.5f}")
    print(f"numpy_max_critical {critical:.4f}")
    print(f"numpy_version {np.__version__}")


if __name__ == "__main__":
    main()
