/**
 * Per-event kernels of stepwise EM: weighted component log-densities (forward substitution with
 * the lower Cholesky factor) and the sufficient-statistic update. A generic version for any d and
 * an unrolled d = 4 version that keeps every intermediate in locals; both perform the same
 * floating-point operations in the same order, so they give bit-identical results (tested).
 * Module-level functions over typed arrays: no closures, no allocation.
 */

/**
 * out[j] = logConst[j] − ½ |L_j⁻¹ (z − μ_j)|² for every component; returns max_j out[j].
 * Blocks: means k·d, chol k·d·d (row-major lower), invDiag k·d.
 */
export function weightedLogDensities(
  d: number,
  k: number,
  z: Float64Array,
  means: Float64Array,
  chol: Float64Array,
  invDiag: Float64Array,
  logConst: Float64Array,
  y: Float64Array,
  out: Float64Array,
): number {
  let max = -Infinity;
  for (let j = 0; j < k; j++) {
    const mo = j * d;
    const lo = mo * d;
    let q = 0;
    for (let i = 0; i < d; i++) {
      const ri = lo + i * d;
      let s = z[i] - means[mo + i];
      for (let m = 0; m < i; m++) s -= chol[ri + m] * y[m];
      const yi = s * invDiag[mo + i];
      y[i] = yi;
      q += yi * yi;
    }
    const v = logConst[j] - 0.5 * q;
    out[j] = v;
    if (v > max) max = v;
  }
  return max;
}

/** weightedLogDensities for d = 4, unrolled. */
export function weightedLogDensities4(
  k: number,
  z: Float64Array,
  means: Float64Array,
  chol: Float64Array,
  invDiag: Float64Array,
  logConst: Float64Array,
  out: Float64Array,
): number {
  const z0 = z[0];
  const z1 = z[1];
  const z2 = z[2];
  const z3 = z[3];
  let max = -Infinity;
  for (let j = 0; j < k; j++) {
    const mo = j << 2;
    const lo = j << 4;
    const y0 = (z0 - means[mo]) * invDiag[mo];
    const y1 = (z1 - means[mo + 1] - chol[lo + 4] * y0) * invDiag[mo + 1];
    const y2 = (z2 - means[mo + 2] - chol[lo + 8] * y0 - chol[lo + 9] * y1) * invDiag[mo + 2];
    const y3 = (z3 - means[mo + 3] - chol[lo + 12] * y0 - chol[lo + 13] * y1 - chol[lo + 14] * y2) * invDiag[mo + 3];
    const q = y0 * y0 + y1 * y1 + y2 * y2 + y3 * y3;
    const v = logConst[j] - 0.5 * q;
    out[j] = v;
    if (v > max) max = v;
  }
  return max;
}

/**
 * Turn out[j] (log-densities, max given) into unnormalised responsibilities exp(out[j] − max)
 * in place; returns their sum (≥ 1, since the largest term is exp(0)).
 */
export function expShift(k: number, max: number, out: Float64Array): number {
  let sum = 0;
  for (let j = 0; j < k; j++) {
    const e = Math.exp(out[j] - max);
    out[j] = e;
    sum += e;
  }
  return sum;
}

/**
 * Stepwise-EM statistics update, s ← (1−γ)s + γ·r_j·s(x), in mass/mean/centred-scatter form
 * (West 1979, weighted incremental mean and scatter). resp[j]·gOverSum = γ·r_j.
 * Scatter is the packed lower triangle (d(d+1)/2 per component); `diff` is scratch of length d.
 */
export function accumulate(
  d: number,
  k: number,
  z: Float64Array,
  resp: Float64Array,
  gOverSum: number,
  keep: number,
  statWeight: Float64Array,
  statMean: Float64Array,
  statScatter: Float64Array,
  diff: Float64Array,
): void {
  const tri = (d * (d + 1)) >> 1;
  for (let j = 0; j < k; j++) {
    const oldW = keep * statWeight[j];
    const w = gOverSum * resp[j];
    const newW = oldW + w;
    statWeight[j] = newW;
    const po = j * tri;
    if (!(newW > 0) || w === 0) {
      for (let p = 0; p < tri; p++) statScatter[po + p] *= keep;
      continue;
    }
    const f = w / newW;
    const c = f * oldW;
    const mo = j * d;
    for (let i = 0; i < d; i++) {
      const dl = z[i] - statMean[mo + i];
      diff[i] = dl;
      statMean[mo + i] += f * dl;
    }
    let p = po;
    for (let a = 0; a < d; a++) {
      const ca = c * diff[a];
      for (let b = 0; b <= a; b++) {
        statScatter[p] = keep * statScatter[p] + ca * diff[b];
        p++;
      }
    }
  }
}

/** accumulate for d = 4, unrolled (10 scatter entries per component). */
export function accumulate4(
  k: number,
  z: Float64Array,
  resp: Float64Array,
  gOverSum: number,
  keep: number,
  statWeight: Float64Array,
  statMean: Float64Array,
  statScatter: Float64Array,
): void {
  const z0 = z[0];
  const z1 = z[1];
  const z2 = z[2];
  const z3 = z[3];
  for (let j = 0; j < k; j++) {
    const oldW = keep * statWeight[j];
    const w = gOverSum * resp[j];
    const newW = oldW + w;
    statWeight[j] = newW;
    const p = j * 10;
    if (!(newW > 0) || w === 0) {
      for (let q = 0; q < 10; q++) statScatter[p + q] *= keep;
      continue;
    }
    const f = w / newW;
    const c = f * oldW;
    const mo = j << 2;
    const d0 = z0 - statMean[mo];
    const d1 = z1 - statMean[mo + 1];
    const d2 = z2 - statMean[mo + 2];
    const d3 = z3 - statMean[mo + 3];
    statMean[mo] += f * d0;
    statMean[mo + 1] += f * d1;
    statMean[mo + 2] += f * d2;
    statMean[mo + 3] += f * d3;
    const c0 = c * d0;
    const c1 = c * d1;
    const c2 = c * d2;
    const c3 = c * d3;
    statScatter[p] = keep * statScatter[p] + c0 * d0;
    statScatter[p + 1] = keep * statScatter[p + 1] + c1 * d0;
    statScatter[p + 2] = keep * statScatter[p + 2] + c1 * d1;
    statScatter[p + 3] = keep * statScatter[p + 3] + c2 * d0;
    statScatter[p + 4] = keep * statScatter[p + 4] + c2 * d1;
    statScatter[p + 5] = keep * statScatter[p + 5] + c2 * d2;
    statScatter[p + 6] = keep * statScatter[p + 6] + c3 * d0;
    statScatter[p + 7] = keep * statScatter[p + 7] + c3 * d1;
    statScatter[p + 8] = keep * statScatter[p + 8] + c3 * d2;
    statScatter[p + 9] = keep * statScatter[p + 9] + c3 * d3;
  }
}
