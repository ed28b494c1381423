/**
 * Batch EM for univariate Gaussian mixtures (Dempster, Laird & Rubin 1977), started by
 * k-means++ (Arthur & Vassilvitskii 2007) with several restarts, and the number of
 * components chosen by BIC (Schwarz 1978; lower is better, as scikit-learn's convention).
 *
 * The data are standardised before fitting, so the variance floor (like scikit-learn's
 * reg_covar) is relative to the data's spread and magnitudes from 1e-300 to 1e300 fit alike.
 */
import { bic, mixtureFreeParameters } from './bic.js';
import { Mixture1D } from './mixture1d.js';
import { Random } from './random.js';
import { logJacobian, toModel, type ScaleName } from './scale.js';
import { LOG_SQRT_2PI } from './normal.js';
import { expNonPositive } from './exp.js';

export interface BatchFitOptions {
  /** Convergence: stop when the mean log-likelihood per point changes by less than this. */
  tol?: number;
  maxIter?: number;
  restarts?: number;
  seed?: number;
  /** Variance floor relative to the data's variance (scikit-learn's reg_covar on standardised data). */
  regVar?: number;
}

export interface SelectionOptions extends BatchFitOptions {
  /**
   * Stop at the first k whose BIC is above the previous k's instead of fitting every k (the usual elbow: past
   * it, added components only split or duplicate modes). Cheaper for callers that refine the model afterwards,
   * such as a stream monitor's bootstrap; `modewatch fit` reports every k and does not set it.
   */
  stopAtFirstRise?: boolean;
}

export interface BatchFit {
  mixture: Mixture1D;
  /** Log-likelihood of the data in the stream's own units (Jacobian of the scale included). */
  logLikelihood: number;
  bic: number;
  iterations: number;
  converged: boolean;
}

export interface ModelSelection {
  best: BatchFit;
  candidates: { k: number; logLikelihood: number; bic: number }[];
}

const DEFAULTS: Required<BatchFitOptions> = { tol: 1e-6, maxIter: 500, restarts: 4, seed: 1, regVar: 1e-6 };

/** Fit k components to values x (stream units) on the given scale. The caller has rejected values outside the domain. */
export function fitMixture1D(x: ArrayLike<number>, k: number, scale: ScaleName, options: BatchFitOptions = {}): BatchFit {
  const opts = { ...DEFAULTS, ...options };
  const prepared = prepare(x, scale);
  return fitPrepared(prepared, k, opts, new Random(opts.seed));
}

/** Fit k = kMin..kMax and choose the lowest BIC. */
export function selectMixture1D(
  x: ArrayLike<number>,
  scale: ScaleName,
  kMin: number,
  kMax: number,
  options: SelectionOptions = {},
): ModelSelection {
  if (!(kMin >= 1 && kMax >= kMin)) throw new Error(`k range ${kMin}..${kMax} is empty`);
  const { stopAtFirstRise, ...fitOptions } = options;
  const opts = { ...DEFAULTS, ...fitOptions };
  const prepared = prepare(x, scale);
  const rng = new Random(opts.seed);
  let best: BatchFit | null = null;
  const candidates: ModelSelection['candidates'] = [];
  for (let k = kMin; k <= kMax; k++) {
    if (k > prepared.n) break;
    const fit = fitPrepared(prepared, k, opts, rng);
    const previous = candidates.length > 0 ? candidates[candidates.length - 1].bic : Infinity;
    candidates.push({ k, logLikelihood: fit.logLikelihood, bic: fit.bic });
    if (best === null || fit.bic < best.bic) best = fit;
    if (stopAtFirstRise === true && fit.bic > previous) break;
  }
  if (best === null) throw new Error('no data to fit');
  return { best, candidates };
}

/**
 * Choose among scales by the likelihood of the data in its own units (the Jacobian makes
 * the likelihoods comparable); every candidate has the same number of parameters, so the
 * lowest BIC is the highest likelihood.
 */
export function selectScaleAndMixture1D(
  x: ArrayLike<number>,
  scales: readonly ScaleName[],
  kMin: number,
  kMax: number,
  options: SelectionOptions = {},
): ModelSelection & { scale: ScaleName; byScale: { scale: ScaleName; bic: number }[] } {
  let chosen: (ModelSelection & { scale: ScaleName }) | null = null;
  const byScale: { scale: ScaleName; bic: number }[] = [];
  for (const scale of scales) {
    if (!inDomain(x, scale)) continue;
    const sel = selectMixture1D(x, scale, kMin, kMax, options);
    byScale.push({ scale, bic: sel.best.bic });
    if (chosen === null || sel.best.bic < chosen.best.bic) chosen = { ...sel, scale };
  }
  if (chosen === null) throw new Error('no scale admits every value');
  return { ...chosen, byScale };
}

export function inDomain(x: ArrayLike<number>, scale: ScaleName): boolean {
  for (let i = 0; i < x.length; i++) {
    const v = x[i];
    if (scale === 'log' && !(v > 0)) return false;
    if (scale === 'log1p' && !(v > -1)) return false;
  }
  return true;
}

interface Prepared {
  scale: ScaleName;
  n: number;
  /** Standardised model-scale values z = (y - center) / spread. */
  z: Float64Array;
  center: number;
  spread: number;
  /** Σ log|dy/dx| - n log(spread): turns a log-likelihood of z into one of x. */
  logLikShift: number;
}

function prepare(x: ArrayLike<number>, scale: ScaleName): Prepared {
  const n = x.length;
  if (n === 0) throw new Error('no data to fit');
  const y = new Float64Array(n);
  let jac = 0;
  for (let i = 0; i < n; i++) {
    const v = x[i];
    if (!Number.isFinite(v)) throw new Error(`value ${i} is not finite`);
    y[i] = toModel(scale, v);
    jac += logJacobian(scale, v);
  }
  // Two-pass centre and spread; scaled by the largest magnitude first so that 1e300 values do not overflow.
  let maxAbs = 0;
  for (let i = 0; i < n; i++) maxAbs = Math.max(maxAbs, Math.abs(y[i]));
  const m = maxAbs > 0 ? maxAbs : 1;
  let mean = 0;
  for (let i = 0; i < n; i++) mean += y[i] / m;
  mean /= n;
  let varSum = 0;
  for (let i = 0; i < n; i++) {
    const d = y[i] / m - mean;
    varSum += d * d;
  }
  const center = mean * m;
  let spread = Math.sqrt(varSum / n) * m;
  // No spread (one repeated value, or denormals whose spread underflows): any positive unit will do.
  if (!(spread > 0) || !Number.isFinite(spread)) spread = maxAbs * 1e-9 > 0 ? maxAbs * 1e-9 : maxAbs > 0 ? maxAbs : 1;
  const z = new Float64Array(n);
  for (let i = 0; i < n; i++) z[i] = (y[i] - center) / spread;
  return { scale, n, z, center, spread, logLikShift: jac - n * Math.log(spread) };
}

function fitPrepared(p: Prepared, k: number, opts: Required<BatchFitOptions>, rng: Random): BatchFit {
  let best: { w: Float64Array; mu: Float64Array; v: Float64Array; ll: number; it: number; conv: boolean } | null = null;
  for (let r = 0; r < Math.max(1, opts.restarts); r++) {
    const init = kmeansInit(p.z, k, rng);
    const run = runEm(p.z, k, init.w, init.mu, init.v, opts);
    if (best === null || run.ll > best.ll) best = run;
    if (k === 1) break; // one component has a unique MLE
  }
  if (best === null) throw new Error('unreachable');
  const means = new Float64Array(k);
  const sds = new Float64Array(k);
  for (let j = 0; j < k; j++) {
    means[j] = p.center + p.spread * best.mu[j];
    sds[j] = Math.max(p.spread * Math.sqrt(best.v[j]), Number.MIN_VALUE); // denormal data: the sd may underflow
  }
  const mixture = new Mixture1D(p.scale, best.w, means, sds);
  const logLikelihood = best.ll + p.logLikShift;
  return {
    mixture,
    logLikelihood,
    bic: bic(logLikelihood, mixtureFreeParameters(k, 1), p.n),
    iterations: best.it,
    converged: best.conv,
  };
}

/** k-means++ seeding then a few Lloyd iterations; parameters from the hard partition. */
function kmeansInit(z: Float64Array, k: number, rng: Random): { w: Float64Array; mu: Float64Array; v: Float64Array } {
  const n = z.length;
  const centers = new Float64Array(k);
  const d2 = new Float64Array(n);
  centers[0] = z[rng.int(n)];
  for (let i = 0; i < n; i++) d2[i] = (z[i] - centers[0]) ** 2;
  for (let c = 1; c < k; c++) {
    let total = 0;
    for (let i = 0; i < n; i++) total += d2[i];
    let pick = 0;
    if (total > 0) {
      let u = rng.uniform() * total;
      for (pick = 0; pick < n - 1; pick++) {
        u -= d2[pick];
        if (u < 0) break;
      }
    } else pick = rng.int(n);
    centers[c] = z[pick];
    for (let i = 0; i < n; i++) d2[i] = Math.min(d2[i], (z[i] - centers[c]) ** 2);
  }
  const label = new Int32Array(n);
  const cnt = new Float64Array(k);
  const sum = new Float64Array(k);
  for (let it = 0; it < 10; it++) {
    cnt.fill(0);
    sum.fill(0);
    let changed = false;
    for (let i = 0; i < n; i++) {
      let bj = 0;
      let bd = Infinity;
      for (let j = 0; j < k; j++) {
        const d = Math.abs(z[i] - centers[j]);
        if (d < bd) {
          bd = d;
          bj = j;
        }
      }
      if (label[i] !== bj) changed = true;
      label[i] = bj;
      cnt[bj] += 1;
      sum[bj] += z[i];
    }
    for (let j = 0; j < k; j++) if (cnt[j] > 0) centers[j] = sum[j] / cnt[j];
    if (!changed && it > 0) break;
  }
  const w = new Float64Array(k);
  const v = new Float64Array(k);
  for (let i = 0; i < n; i++) v[label[i]] += (z[i] - centers[label[i]]) ** 2;
  for (let j = 0; j < k; j++) {
    w[j] = Math.max(cnt[j], 1) / (n + k);
    v[j] = cnt[j] > 1 ? v[j] / cnt[j] : 1;
    if (!(v[j] > 1e-6)) v[j] = 1e-6;
  }
  return { w, mu: centers, v };
}

/**
 * EM iterations until the mean log-likelihood per point changes by less than tol (scikit-learn's rule).
 * One pass over the data per iteration: the E-step accumulates the M-step's sums as it goes, so the
 * responsibilities are never stored. Sums are taken about the current means (d = z - μ_j) — the shifted-data
 * form of the weighted variance, free of cancellation as the means settle — and give
 * μ'_j = μ_j + Σr·d / n_j and v'_j = Σr·d² / n_j - (Σr·d / n_j)² + regVar.
 * The log-likelihood takes one log per chunk of points (a running product of the per-point sums, each in [1, k]).
 */
function runEm(
  z: Float64Array,
  k: number,
  w: Float64Array,
  mu: Float64Array,
  v: Float64Array,
  opts: Required<BatchFitOptions>,
): { w: Float64Array; mu: Float64Array; v: Float64Array; ll: number; it: number; conv: boolean } {
  const n = z.length;
  const logc = new Float64Array(k);
  const inv2v = new Float64Array(k);
  const l = new Float64Array(k);
  const sr = new Float64Array(k);
  const srd = new Float64Array(k);
  const srd2 = new Float64Array(k);
  let prevMeanLl = -Infinity;
  let ll = -Infinity;
  let it = 0;
  let conv = false;
  for (it = 1; it <= opts.maxIter; it++) {
    for (let j = 0; j < k; j++) {
      logc[j] = Math.log(w[j]) - 0.5 * Math.log(v[j]);
      inv2v[j] = 0.5 / v[j];
      sr[j] = 0;
      srd[j] = 0;
      srd2[j] = 0;
    }
    // E-step with log-sum-exp, and the M-step's sums.
    let sumMax = 0;
    let logProd = 0;
    let prod = 1;
    for (let i = 0; i < n; i++) {
      const zi = z[i];
      let max = -Infinity;
      for (let j = 0; j < k; j++) {
        const d = zi - mu[j];
        const lj = logc[j] - d * d * inv2v[j];
        l[j] = lj;
        if (lj > max) max = lj;
      }
      let s = 0;
      for (let j = 0; j < k; j++) {
        const e = expNonPositive(l[j] - max);
        l[j] = e;
        s += e;
      }
      const inv = 1 / s;
      for (let j = 0; j < k; j++) {
        const r = l[j] * inv;
        const d = zi - mu[j];
        const rd = r * d;
        sr[j] += r;
        srd[j] += rd;
        srd2[j] += rd * d;
      }
      sumMax += max;
      prod *= s;
      if (prod > 1e250) {
        logProd += Math.log(prod);
        prod = 1;
      }
    }
    ll = sumMax + (logProd + Math.log(prod)) - n * LOG_SQRT_2PI;
    const meanLl = ll / n;
    if (Math.abs(meanLl - prevMeanLl) < opts.tol) {
      conv = true;
      break;
    }
    prevMeanLl = meanLl;
    // M-step.
    for (let j = 0; j < k; j++) {
      const nj = sr[j] + 10 * Number.EPSILON;
      const shift = srd[j] / nj;
      const spread = srd2[j] / nj - shift * shift;
      mu[j] += shift;
      v[j] = (spread > 0 ? spread : 0) + opts.regVar;
      w[j] = nj / n;
    }
  }
  let sw = 0;
  for (let j = 0; j < k; j++) sw += w[j];
  for (let j = 0; j < k; j++) w[j] /= sw;
  return { w, mu, v, ll, it: Math.min(it, opts.maxIter), conv };
}
