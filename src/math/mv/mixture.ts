import type { Random } from '../random.js';
import { PIVOT_REL, choleskyLower, logDetFromCholesky, mahalanobisSq } from './cholesky.js';
import { frameClamp, powerOfTwoNear, type Frame } from './frame.js';
import { expShift, weightedLogDensities, weightedLogDensities4 } from './online-kernels.js';

/** Largest supported dimension. */
export const MV_MAX_DIM = 8;

/** Covariance floor added to every diagonal entry in the working frame, as scikit-learn's
 * GaussianMixture reg_covar default (1e-6); here relative to the data's spread (see frame.ts). */
export const DEFAULT_REG_COVAR = 1e-6;

const LOG_2PI = Math.log(2 * Math.PI);

/** How many times the floor is multiplied by 10 when a covariance fails to factor. */
const MAX_JITTER_STEPS = 30;

/** Smallest weight used in log-weights, so that an emptied component yields -745, not -Infinity. */
const MIN_WEIGHT = 1e-300;

/**
 * A Gaussian mixture with full covariances in d ≤ 8 dimensions.
 *
 * Parameters live in a working frame z = (x − center) / scale (see frame.ts): `frameMeans`
 * (k·d) and `frameCovariances` (k·d·d, row-major blocks), with cached lower Cholesky
 * factors, their inverted diagonals and log-determinants. Read-outs in the stream's own
 * units: `means()`, `covariances()`, `meanOf`, `covarianceOf`, `sdOf`.
 *
 * Densities (`logpdf`, `componentLogPdf`, `responsibilities`) are in stream units and
 * allocate nothing. After writing weights/frame parameters directly, call `refresh()`.
 *
 * @example
 * const m = MvMixture.fromParameters({ weights: [0.4, 0.6], means: [0, 0, 5, 5],
 *   covariances: [1, 0, 0, 1, 2, 0.5, 0.5, 1] });
 * m.logpdf([1, 1]); // log density at (1, 1)
 */
export class MvMixture {
  readonly k: number;
  readonly d: number;
  readonly weights: Float64Array;
  readonly center: Float64Array;
  readonly scale: Float64Array;
  readonly invScale: Float64Array;
  /** Per-coordinate clamp on |z| (see frame.ts): events further out are winsorised. */
  readonly zMax: Float64Array;
  readonly regCovar: number;
  readonly frameMeans: Float64Array;
  readonly frameCovariances: Float64Array;
  readonly frameChol: Float64Array;
  readonly frameInvDiag: Float64Array;
  readonly frameLogDet: Float64Array;
  /** log w_j − ½ log det Σ_j − ½ d log 2π − Σ log scale_i: the constant part of log w_j N(x; μ_j, Σ_j). */
  readonly logConst: Float64Array;
  private readonly z: Float64Array;
  private readonly diff: Float64Array;
  private readonly y: Float64Array;
  private readonly lp: Float64Array;

  constructor(k: number, d: number, frame: Frame, regCovar: number = DEFAULT_REG_COVAR) {
    if (!Number.isInteger(k) || k < 1) throw new RangeError(`component count k must be an integer >= 1, got ${k}`);
    if (!Number.isInteger(d) || d < 1 || d > MV_MAX_DIM)
      throw new RangeError(`dimension d must be an integer in 1..${MV_MAX_DIM}, got ${d}`);
    if (frame.center.length !== d || frame.scale.length !== d)
      throw new RangeError(`frame must have ${d} centre and scale entries`);
    if (!(regCovar > 0) || !Number.isFinite(regCovar)) throw new RangeError(`regCovar must be > 0, got ${regCovar}`);
    this.k = k;
    this.d = d;
    this.regCovar = regCovar;
    this.weights = new Float64Array(k);
    this.center = Float64Array.from(frame.center);
    this.scale = Float64Array.from(frame.scale);
    this.invScale = new Float64Array(d);
    this.zMax = new Float64Array(d);
    for (let i = 0; i < d; i++) {
      const s = this.scale[i];
      if (!(s > 0) || !Number.isFinite(s)) throw new RangeError(`frame scale[${i}] must be positive and finite`);
      if (!Number.isFinite(this.center[i])) throw new RangeError(`frame center[${i}] must be finite`);
      this.invScale[i] = 1 / s;
      this.zMax[i] = frameClamp(s);
    }
    this.frameMeans = new Float64Array(k * d);
    this.frameCovariances = new Float64Array(k * d * d);
    this.frameChol = new Float64Array(k * d * d);
    this.frameInvDiag = new Float64Array(k * d);
    this.frameLogDet = new Float64Array(k);
    this.logConst = new Float64Array(k);
    this.z = new Float64Array(d);
    this.diff = new Float64Array(d);
    this.y = new Float64Array(d);
    this.lp = new Float64Array(k);
  }

  /**
   * Build from parameters in stream units. The frame is centred on the mean of the component
   * means and scaled to the largest component standard deviation per coordinate.
   */
  static fromParameters(p: {
    weights: ArrayLike<number>;
    means: ArrayLike<number>;
    covariances: ArrayLike<number>;
    regCovar?: number;
  }): MvMixture {
    const k = p.weights.length;
    const d = k > 0 ? p.means.length / k : 0;
    if (!Number.isInteger(d) || d < 1) throw new RangeError('means must hold k·d values');
    if (p.covariances.length !== k * d * d) throw new RangeError(`covariances must hold k·d·d = ${k * d * d} values`);
    const center = new Float64Array(d);
    const scale = new Float64Array(d);
    for (let i = 0; i < d; i++) {
      let c = 0;
      let v = 0;
      for (let j = 0; j < k; j++) {
        c += p.means[j * d + i] / k;
        v = Math.max(v, p.covariances[j * d * d + i * d + i]);
      }
      center[i] = c;
      scale[i] = powerOfTwoNear(Math.sqrt(v));
    }
    const m = new MvMixture(k, d, { center, scale }, p.regCovar ?? DEFAULT_REG_COVAR);
    for (let j = 0; j < k; j++) {
      m.weights[j] = p.weights[j];
      for (let a = 0; a < d; a++) {
        m.frameMeans[j * d + a] = (p.means[j * d + a] - center[a]) * m.invScale[a];
        for (let b = 0; b < d; b++) {
          m.frameCovariances[j * d * d + a * d + b] = p.covariances[j * d * d + a * d + b] * m.invScale[a] * m.invScale[b];
        }
      }
    }
    m.normalizeWeights();
    m.refresh();
    return m;
  }

  /** Rescale weights to sum to 1 (uniform if they are all zero or not finite). */
  normalizeWeights(): void {
    let s = 0;
    for (let j = 0; j < this.k; j++) s += this.weights[j];
    if (!(s > 0) || !Number.isFinite(s)) {
      this.weights.fill(1 / this.k);
      return;
    }
    for (let j = 0; j < this.k; j++) this.weights[j] /= s;
  }

  /**
   * Recompute Cholesky factors, log-determinants and constants after parameters changed.
   * A covariance that does not factor gets each diagonal entry raised by max(regCovar, its own
   * rounding level)·10^m, m = 0, 1, … until it does; the raised covariance is written back so
   * parameters and factors agree.
   */
  refresh(): void {
    for (let j = 0; j < this.k; j++) this.refreshComponent(j);
  }

  /** Refresh one component (see refresh). */
  refreshComponent(j: number): void {
    const d = this.d;
    const off = j * d * d;
    const cov = this.frameCovariances;
    if (!choleskyLower(cov, off, d, this.frameChol, off, this.frameInvDiag, j * d)) {
      // Raise each diagonal entry by the larger of the floor and its own rounding level (relative
      // jitter, i.e. on the correlation scale), so that it also works for components far wider
      // than the frame without swamping the narrower coordinates.
      let mult = 1;
      let ok = false;
      for (let step = 0; step < MAX_JITTER_STEPS && !ok; step++) {
        for (let a = 0; a < d * d; a++) if (!Number.isFinite(cov[off + a])) cov[off + a] = 0;
        for (let i = 0; i < d; i++) {
          const ii = off + i * d + i;
          if (cov[ii] < 0) cov[ii] = 0;
          cov[ii] += mult * Math.max(this.regCovar, cov[ii] * PIVOT_REL);
        }
        ok = choleskyLower(cov, off, d, this.frameChol, off, this.frameInvDiag, j * d);
        mult *= 10;
      }
      if (!ok) {
        // Last resort: the floor alone (identity times regCovar) always factors.
        for (let a = 0; a < d * d; a++) cov[off + a] = 0;
        for (let i = 0; i < d; i++) cov[off + i * d + i] = this.regCovar;
        choleskyLower(cov, off, d, this.frameChol, off, this.frameInvDiag, j * d);
      }
    }
    const ld = logDetFromCholesky(this.frameChol, off, d);
    this.frameLogDet[j] = ld;
    let logScale = 0;
    for (let i = 0; i < d; i++) logScale += Math.log(this.scale[i]);
    const w = this.weights[j];
    this.logConst[j] = Math.log(w > MIN_WEIGHT ? w : MIN_WEIGHT) - 0.5 * ld - 0.5 * d * LOG_2PI - logScale;
  }

  /** Map x (stream units) into the frame, clamping absurd outliers (see frame.ts). */
  toFrame(x: ArrayLike<number>, out: Float64Array): void {
    for (let i = 0; i < this.d; i++) {
      let v = (x[i] - this.center[i]) * this.invScale[i];
      const lim = this.zMax[i];
      if (v > lim) v = lim;
      else if (v < -lim) v = -lim;
      out[i] = v;
    }
  }

  /** Frame-space log of w_j N(z; μ_j, Σ_j) minus Σ log scale, i.e. the stream-unit log of w_j N(x). */
  private weightedLogPdfFrame(j: number, z: Float64Array): number {
    const d = this.d;
    const mo = j * d;
    for (let i = 0; i < d; i++) this.diff[i] = z[i] - this.frameMeans[mo + i];
    const q = mahalanobisSq(this.frameChol, j * d * d, this.frameInvDiag, mo, d, this.diff, this.y);
    return this.logConst[j] - 0.5 * q;
  }

  /** log N(x; μ_j, Σ_j) in stream units (without the weight). */
  componentLogPdf(j: number, x: ArrayLike<number>): number {
    this.toFrame(x, this.z);
    const w = this.weights[j];
    return this.weightedLogPdfFrame(j, this.z) - Math.log(w > MIN_WEIGHT ? w : MIN_WEIGHT);
  }

  /** log p(x) = log Σ_j w_j N(x; μ_j, Σ_j), by log-sum-exp. */
  logpdf(x: ArrayLike<number>): number {
    const max = this.weightedLogDensities(x, this.lp);
    return max + Math.log(expShift(this.k, max, this.lp));
  }

  /** Posterior component probabilities for x into out[0..k); returns log p(x). */
  responsibilities(x: ArrayLike<number>, out: Float64Array): number {
    const max = this.weightedLogDensities(x, out);
    const s = expShift(this.k, max, out);
    const inv = 1 / s;
    for (let j = 0; j < this.k; j++) out[j] *= inv;
    return max + Math.log(s);
  }

  /** out[j] = log w_j N(x; μ_j, Σ_j) (stream units); returns the largest. */
  private weightedLogDensities(x: ArrayLike<number>, out: Float64Array): number {
    this.toFrame(x, this.z);
    if (this.d === 4)
      return weightedLogDensities4(this.k, this.z, this.frameMeans, this.frameChol, this.frameInvDiag, this.logConst, out);
    return weightedLogDensities(this.d, this.k, this.z, this.frameMeans, this.frameChol, this.frameInvDiag, this.logConst, this.y, out);
  }

  /** Draw one vector (stream units) into out[0..d). */
  sample(rng: Random, out: Float64Array): Float64Array {
    const d = this.d;
    let u = rng.uniform();
    let j = 0;
    for (; j < this.k - 1; j++) {
      u -= this.weights[j];
      if (u < 0) break;
    }
    for (let i = 0; i < d; i++) this.z[i] = rng.normal();
    const lo = j * d * d;
    for (let i = d - 1; i >= 0; i--) {
      let s = 0;
      for (let m = 0; m <= i; m++) s += this.frameChol[lo + i * d + m] * this.z[m];
      out[i] = this.center[i] + (this.frameMeans[j * d + i] + s) * this.scale[i];
    }
    return out;
  }

  /** Draw n vectors, row-major n·d. */
  sampleMany(rng: Random, n: number): Float64Array {
    const out = new Float64Array(n * this.d);
    const row = new Float64Array(this.d);
    for (let r = 0; r < n; r++) {
      this.sample(rng, row);
      out.set(row, r * this.d);
    }
    return out;
  }

  /** Mean of component j in stream units, into out[0..d). */
  meanOf(j: number, out: Float64Array = new Float64Array(this.d)): Float64Array {
    for (let i = 0; i < this.d; i++) out[i] = this.center[i] + this.frameMeans[j * this.d + i] * this.scale[i];
    return out;
  }

  /**
   * Covariance of component j in stream units (row-major d·d). Entries overflow to ±Infinity only
   * when the data's spread exceeds about 1e154; `sdOf` and the frame parameters stay finite.
   */
  covarianceOf(j: number, out: Float64Array = new Float64Array(this.d * this.d)): Float64Array {
    const d = this.d;
    for (let a = 0; a < d; a++)
      for (let b = 0; b < d; b++)
        out[a * d + b] = this.frameCovariances[j * d * d + a * d + b] * this.scale[a] * this.scale[b];
    return out;
  }

  /** Standard deviation of coordinate i in component j, stream units. */
  sdOf(j: number, i: number): number {
    return Math.sqrt(this.frameCovariances[j * this.d * this.d + i * this.d + i]) * this.scale[i];
  }

  /** All component means in stream units (k·d). Allocates. */
  means(): Float64Array {
    const out = new Float64Array(this.k * this.d);
    for (let j = 0; j < this.k; j++) out.set(this.meanOf(j), j * this.d);
    return out;
  }

  /** All covariances in stream units (k·d·d). Allocates. */
  covariances(): Float64Array {
    const dd = this.d * this.d;
    const out = new Float64Array(this.k * dd);
    for (let j = 0; j < this.k; j++) out.set(this.covarianceOf(j), j * dd);
    return out;
  }

  /** Deep copy (same parameters, same cached factors, bit for bit). */
  clone(): MvMixture {
    const c = new MvMixture(this.k, this.d, { center: this.center, scale: this.scale }, this.regCovar);
    c.weights.set(this.weights);
    c.frameMeans.set(this.frameMeans);
    c.frameCovariances.set(this.frameCovariances);
    c.frameChol.set(this.frameChol);
    c.frameInvDiag.set(this.frameInvDiag);
    c.frameLogDet.set(this.frameLogDet);
    c.logConst.set(this.logConst);
    return c;
  }
}
