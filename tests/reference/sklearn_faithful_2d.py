"""Reference fits for tests/math-mv-batch.test.ts.

Fits scikit-learn's GaussianMixture (covariance_type="full") to the Old Faithful data
(tests/fixtures/old-faithful.csv: eruptions, waiting; R datasets::faithful, 272 rows) for
k = 1..4 and writes tests/reference/sklearn-faithful-2d.json with the weights, means,
covariances, mean log-likelihood per point and BIC of each fit, plus the library versions.

Run with Debian's python3-sklearn:  /usr/bin/python3 tests/reference/sklearn_faithful_2d.py
"""
import csv
import json
import os
import sys

import numpy as np
import sklearn
from sklearn.mixture import GaussianMixture

HERE = os.path.dirname(os.path.abspath(__file__))
FIXTURE = os.path.join(HERE, "..", "fixtures", "old-faithful.csv")
OUT = os.path.join(HERE, "sklearn-faithful-2d.json")


def main() -> None:
    with open(FIXTURE, newline="") as f:
        rows = [(float(r["eruptions"]), float(r["waiting"])) for r in csv.DictReader(f)]
    x = np.array(rows, dtype=np.float64)
    fits = []
    for k in range(1, 5):
        gm = GaussianMixture(
            n_components=k,
            covariance_type="full",
            tol=1e-6,
            reg_covar=1e-6,
            max_iter=1000,
            n_init=10,
            init_params="k-means++",
            random_state=20240501,
        ).fit(x)
        order = np.argsort(gm.means_[:, 0])  # components listed by eruption duration
        fits.append(
            {
                "k": k,
                "weights": gm.weights_[order].tolist(),
                "means": gm.means_[order].tolist(),
                "covariances": gm.covariances_[order].tolist(),
                "meanLogLikelihood": float(gm.score(x)),
                "bic": float(gm.bic(x)),
                "converged": bool(gm.converged_),
                "iterations": int(gm.n_iter_),
            }
        )
    doc = {
        "source": "scikit-learn GaussianMixture(covariance_type='full', tol=1e-6, reg_covar=1e-6, "
        "max_iter=1000, n_init=10, init_params='k-means++', random_state=20240501)",
        "data": "tests/fixtures/old-faithful.csv (eruptions, waiting), n = %d" % len(rows),
        "sklearnVersion": sklearn.__version__,
        "numpyVersion": np.__version__,
        "pythonVersion": sys.version.split()[0],
        "fits": fits,
    }
    with open(OUT, "w") as f:
        json.dump(doc, f, indent=2)
        f.write("\n")


if __name__ == "__main__":
    main()
