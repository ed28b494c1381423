import { bic, mixtureFreeParameters } from '../bic.js';
import { Random } from '../random.js';
import { mahalanobisSq } from './cholesky.js';
import { frameFromData } from './frame.js';
import { kmeansPlusPlus } from './kmeans-pp.js';
import { DEFAULT_REG_COVAR, MV_MAX_DIM, MvMixture } from './mixture.js';

export interface MvFitOptions {
  /** Number of components. */
  k: number;
  /** Independent k-means++ starts; the one with the highest final log-likelihood wins. Default 5. */
  restarts?: number;
  /** Seed of the Random that drives every start. Default 1. */
  seed?: number;
  /** Stop when the mean log-likelihood per point changes by less than this. Default 1e-3 (scikit-learn's tol). */
  tol?: number;
  /** Iteration cap per start. Default 100 (scikit-learn's max_iter). */
  maxIterations?: number;
  /** Covariance floor in the working frame (relative to the data's spread). Default 1e-6. */
  regCovar?: number;
}

export interface MvFitResult {
  mixture: MvMixture;
  /** Total log-likelihood of the data under the returned mixture, stream units. */
  logLikelihood: number;
  /** logLikelihood / n. */
  meanLogLikelihood: number;
  /** Schwarz BIC, lower is better (as scikit-learn's GaussianMixture.bic). */
  bic: number;
  /** EM iterations of the winning start. */
  iterations: number;
  /** Whether the winning start met tol before maxIterations. */
  converged: boolean;
  n: number;
  k: number;
}

export interface MvSelectOptions extends Omit<MvFitOptions, 'k'> {
  kMin?: number;
  kMax: number;
}

export interface MvSelectResult {
  best: MvFitResult;
  candidates: { k: number; logLikelihood: number; bic: number }[];
}

const EPS10 = 10 * Number.EPSILON; // scikit-learn adds 10·eps to every component's mass

function checkData(data: Float64Array, n: number, d: number): void {
  if (!Number.isInteger(d) || d < 1 || d > MV_MAX_DIM) throw new RangeError(`dimension d must be in 1..${MV_MAX_DIM}, got ${d}`);
  if (!Number.isInteger(n) || n < 1) throw new RangeError(`row count n must be an integer >= 1, got ${n}`);
  if (data.length < n * d) throw new RangeError(`data holds ${data.length} values, fewer than n·d = ${n * d}`);
  for (let i = 0; i < n * d; i++) {
    if (!Number.isFinite(data[i])) throw new RangeError(`data[${i}] (row ${Math.floor(i / d)}, column ${i % d}) is not finite`);
  }
}

/**
 * Batch EM for a full-covariance Gaussian mixture (Dempster, Laird & Rubin 1977), with
 * k-means++ starts and several restarts. Convergence, floor and the 10·eps mass guard
 * follow scikit-learn's GaussianMixture so that fits can be compared with it.
 * `data` is row-major n·d in stream units; all work happens in the data's frame (frame.ts).
 */
export function fitMvMixture(data: Float64Array, n: number, d: number, opts: MvFitOptions): MvFitResult {
  checkData(data, n, d);
  const k = opts.k;
  if (!Number.isInteger(k) || k < 1) throw new RangeError(`k must be an integer >= 1, got ${k}`);
  if (k > n) throw new RangeError(`k = ${k} exceeds the number of rows n = ${n}`);
  const restarts = Math.max(1, Math.floor(opts.restarts ?? 5));
  const tol = opts.tol ?? 1e-3;
  const maxIterations = Math.max(1, Math.floor(opts.maxIterations ?? 100));
  const regCovar = opts.regCovar ?? DEFAULT_REG_COVAR;
  const rng = new Random(opts.seed ?? 1);

  const frame = frameFromData(data, n, d);
  const z = new Float64Array(n * d);
  for (let r = 0; r < n; r++)
    for (let i = 0; i < d; i++) z[r * d + i] = (data[r * d + i] - frame.center[i]) / frame.scale[i];

  const resp = new Float64Array(n * k);
  const work = new EmWork(n, d, k);
  let best: { mixture: MvMixture; ll: number; iterations: number; converged: boolean } | null = null;

  for (let start = 0; start < restarts; start++) {
    const m = new MvMixture(k, d, frame, regCovar);
    const centers = kmeansPlusPlus(z, n, d, k, rng);
    hardAssign(z, n, d, k, centers, resp);
    mStep(z, n, resp, m, work);
    let lower = -Infinity;
    let converged = false;
    let iterations = 0;
    for (let it = 1; it <= maxIterations; it++) {
      iterations = it;
      const prev = lower;
      lower = eStep(z, n, m, resp, work);
      mStep(z, n, resp, m, work);
      if (Math.abs(lower - prev) < tol) {
        converged = true;
        break;
      }
    }
    const ll = eStep(z, n, m, null, work) * n;
    if (best === null || ll > best.ll) best = { mixture: m, ll, iterations, converged };
  }
  const b = best as { mixture: MvMixture; ll: number; iterations: number; converged: boolean };
  return {
    mixture: b.mixture,
    logLikelihood: b.ll,
    meanLogLikelihood: b.ll / n,
    bic: bic(b.ll, mixtureFreeParameters(k, d), n),
    iterations: b.iterations,
    converged: b.converged,
    n,
    k,
  };
}

/** Fit k = kMin..kMax (capped at n) and keep the lowest BIC. */
export function selectMvMixture(data: Float64Array, n: number, d: number, opts: MvSelectOptions): MvSelectResult {
  const kMin = Math.max(1, Math.floor(opts.kMin ?? 1));
  const kMax = Math.min(Math.floor(opts.kMax), n);
  if (kMax < kMin) throw new RangeError(`kMax (${opts.kMax}, capped at n = ${n}) is below kMin (${kMin})`);
  const candidates: MvSelectResult['candidates'] = [];
  let best: MvFitResult | null = null;
  for (let k = kMin; k <= kMax; k++) {
    const fit = fitMvMixture(data, n, d, { ...opts, k });
    candidates.push({ k, logLikelihood: fit.logLikelihood, bic: fit.bic });
    if (best === null || fit.bic < best.bic) best = fit;
  }
  return { best: best as MvFitResult, candidates };
}

class EmWork {
  readonly nk: Float64Array;
  readonly diff: Float64Array;
  readonly y: Float64Array;
  readonly lp: Float64Array;
  constructor(n: number, d: number, k: number) {
    this.nk = new Float64Array(k);
    this.diff = new Float64Array(d);
    this.y = new Float64Array(d);
    this.lp = new Float64Array(k);
  }
}

function hardAssign(z: Float64Array, n: number, d: number, k: number, centers: Int32Array, resp: Float64Array): void {
  resp.fill(0);
  for (let r = 0; r < n; r++) {
    let bestJ = 0;
    let bestD = Infinity;
    for (let j = 0; j < k; j++) {
      let s = 0;
      const c = centers[j] * d;
      for (let i = 0; i < d; i++) {
        const t = z[r * d + i] - z[c + i];
        s += t * t;
      }
      if (s < bestD) {
        bestD = s;
        bestJ = j;
      }
    }
    resp[r * k + bestJ] = 1;
  }
}

/** M-step: weights, means and centred covariances (two-pass) plus the floor; then refresh factors. */
function mStep(z: Float64Array, n: number, resp: Float64Array, m: MvMixture, w: EmWork): void {
  const { k, d } = m;
  const nk = w.nk;
  nk.fill(EPS10);
  m.frameMeans.fill(0);
  m.frameCovariances.fill(0);
  for (let r = 0; r < n; r++) {
    for (let j = 0; j < k; j++) {
      const p = resp[r * k + j];
      nk[j] += p;
      for (let i = 0; i < d; i++) m.frameMeans[j * d + i] += p * z[r * d + i];
    }
  }
  for (let j = 0; j < k; j++) for (let i = 0; i < d; i++) m.frameMeans[j * d + i] /= nk[j];
  const diff = w.diff;
  for (let r = 0; r < n; r++) {
    for (let j = 0; j < k; j++) {
      const p = resp[r * k + j];
      if (p === 0) continue;
      for (let i = 0; i < d; i++) diff[i] = z[r * d + i] - m.frameMeans[j * d + i];
      const co = j * d * d;
      for (let a = 0; a < d; a++) {
        const pa = p * diff[a];
        for (let b = 0; b <= a; b++) m.frameCovariances[co + a * d + b] += pa * diff[b];
      }
    }
  }
  for (let j = 0; j < k; j++) {
    const co = j * d * d;
    for (let a = 0; a < d; a++) {
      for (let b = 0; b <= a; b++) {
        const v = m.frameCovariances[co + a * d + b] / nk[j] + (a === b ? m.regCovar : 0);
        m.frameCovariances[co + a * d + b] = v;
        m.frameCovariances[co + b * d + a] = v;
      }
    }
    m.weights[j] = nk[j] / n;
  }
  m.normalizeWeights();
  m.refresh();
}

/** E-step with log-sum-exp; writes responsibilities when resp is given; returns the mean log-likelihood. */
function eStep(z: Float64Array, n: number, m: MvMixture, resp: Float64Array | null, w: EmWork): number {
  const { k, d } = m;
  const diff = w.diff;
  const lp = w.lp;
  let total = 0;
  for (let r = 0; r < n; r++) {
    let max = -Infinity;
    for (let j = 0; j < k; j++) {
      for (let i = 0; i < d; i++) diff[i] = z[r * d + i] - m.frameMeans[j * d + i];
      const q = mahalanobisSq(m.frameChol, j * d * d, m.frameInvDiag, j * d, d, diff, w.y);
      const v = m.logConst[j] - 0.5 * q;
      lp[j] = v;
      if (v > max) max = v;
    }
    let s = 0;
    for (let j = 0; j < k; j++) s += Math.exp(lp[j] - max);
    const lse = max + Math.log(s);
    total += lse;
    if (resp !== null) for (let j = 0; j < k; j++) resp[r * k + j] = Math.exp(lp[j] - lse);
  }
  return total / n;
}
