/**
 * Bayesian information criterion, Schwarz (1978): BIC = -2 ln L + p ln n.
 * Sign convention: lower is better, as in scikit-learn's GaussianMixture.bic.
 */
export function bic(logLikelihood: number, freeParameters: number, n: number): number {
  return -2 * logLikelihood + freeParameters * Math.log(n);
}

/** Free parameters of a k-component Gaussian mixture in d dimensions with full covariances. */
export function mixtureFreeParameters(k: number, d: number): number {
  return k - 1 + k * d + (k * d * (d + 1)) / 2;
}
