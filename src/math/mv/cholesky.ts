/**
 * Small dense linear algebra on flat Float64Arrays for the per-event hot path:
 * Cholesky factors (lower triangular, row-major d×d blocks inside larger arrays),
 * forward substitution and log-determinants. No allocation, no explicit inverse.
 * Cholesky–Banachiewicz order (common practice; Golub & Van Loan, Matrix Computations, §4.2).
 */

/**
 * Factor the symmetric block `a[aOff .. aOff + d*d)` as L·Lᵀ, writing L (lower triangle,
 * zeros above) into `l[lOff ..]` and 1/L_ii into `invDiag[dOff ..]`.
 * Returns false (leaving the output partly written) when the block is not robustly positive
 * definite: a pivot must exceed PIVOT_REL·a_ii, well above the rounding error of the elimination
 * (about d·eps·a_ii), so that any other backward-stable factorisation agrees with the verdict.
 */
export const PIVOT_REL = 16 * 8 * Number.EPSILON;

export function choleskyLower(
  a: Float64Array,
  aOff: number,
  d: number,
  l: Float64Array,
  lOff: number,
  invDiag: Float64Array,
  dOff: number,
): boolean {
  for (let i = 0; i < d; i++) {
    const ri = lOff + i * d;
    for (let j = 0; j <= i; j++) {
      const rj = lOff + j * d;
      let s = a[aOff + i * d + j];
      for (let m = 0; m < j; m++) s -= l[ri + m] * l[rj + m];
      if (i === j) {
        if (!(s > PIVOT_REL * a[aOff + i * d + i]) || !Number.isFinite(s)) return false;
        const root = Math.sqrt(s);
        l[ri + i] = root;
        invDiag[dOff + i] = 1 / root;
      } else {
        l[ri + j] = s * invDiag[dOff + j];
      }
    }
    for (let j = i + 1; j < d; j++) l[ri + j] = 0;
  }
  return true;
}

/** log det(A) = 2 Σ log L_ii from a Cholesky factor. */
export function logDetFromCholesky(l: Float64Array, lOff: number, d: number): number {
  let s = 0;
  for (let i = 0; i < d; i++) s += Math.log(l[lOff + i * d + i]);
  return 2 * s;
}

/**
 * Squared Mahalanobis length |L⁻¹ v|² by forward substitution, v = diff[0..d).
 * `y` is scratch of length ≥ d.
 */
export function mahalanobisSq(
  l: Float64Array,
  lOff: number,
  invDiag: Float64Array,
  dOff: number,
  d: number,
  diff: Float64Array,
  y: Float64Array,
): number {
  let q = 0;
  for (let i = 0; i < d; i++) {
    const ri = lOff + i * d;
    let s = diff[i];
    for (let m = 0; m < i; m++) s -= l[ri + m] * y[m];
    const yi = s * invDiag[dOff + i];
    y[i] = yi;
    q += yi * yi;
  }
  return q;
}
