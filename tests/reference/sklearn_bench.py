"""Times scikit-learn's GaussianMixture on the batch-fit benchmark data, for src/bench/engine.ts.

Usage: python3 tests/reference/sklearn_bench.py FILE TOL N_INIT [MAX_ITER] [REPEATS]

FILE holds the 1-D sample as little-endian float64 (written by the benchmark). For k = 1..4 it fits
GaussianMixture(covariance_type="full") with the same tolerance (change of the mean log-likelihood per
point), n_init and max_iter as modewatch's batch fit, k-means initialisation (modewatch seeds with
k-means++ and refines with Lloyd iterations; scikit-learn's "kmeans" runs KMeans with k-means++ seeds),
and reg_covar = 1e-6 x var(x), which is what modewatch's variance floor of 1e-6 on standardised data
amounts to. Only the fits are timed (best of REPEATS); the BICs are computed afterwards.
Prints one JSON object: {"seconds", "bics", "chosen_k", "iterations", "sklearn_version", ...}.
"""
import json
import sys
import time

import numpy as np
import sklearn
from sklearn.mixture import GaussianMixture


def fit_all(x: np.ndarray, tol: float, n_init: int, max_iter: int, reg: float) -> list:
    fits = []
    for k in range(1, 5):
        gm = GaussianMixture(
            n_components=k,
            covariance_type="full",
            tol=tol,
            reg_covar=reg,
            max_iter=max_iter,
            n_init=n_init,
            init_params="kmeans",
            random_state=1,
        )
        fits.append(gm.fit(x))
    return fits


def main() -> None:
    if len(sys.argv) < 4:
        sys.exit("usage: sklearn_bench.py FILE TOL N_INIT [MAX_ITER] [REPEATS]")
    path, tol, n_init = sys.argv[1], float(sys.argv[2]), int(sys.argv[3])
    max_iter = int(sys.argv[4]) if len(sys.argv) > 4 else 500
    repeats = int(sys.argv[5]) if len(sys.argv) > 5 else 1
    x = np.fromfile(path, dtype="<f8").reshape(-1, 1)
    reg = 1e-6 * float(x.var())
    best = float("inf")
    fits = []
    for _ in range(max(1, repeats)):
        t0 = time.perf_counter()
        fits = fit_all(x, tol, n_init, max_iter, reg)
        best = min(best, time.perf_counter() - t0)
    bics = [float(gm.bic(x)) for gm in fits]
    print(
        json.dumps(
            {
                "seconds": best,
                "bics": bics,
                "chosen_k": int(np.argmin(bics)) + 1,
                "iterations": [int(gm.n_iter_) for gm in fits],
                "converged": [bool(gm.converged_) for gm in fits],
                "n": int(x.shape[0]),
                "sklearn_version": sklearn.__version__,
                "numpy_version": np.__version__,
            }
        )
    )


if __name__ == "__main__":
    main()
