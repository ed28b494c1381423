/**
 * A univariate Gaussian mixture on a stream's model scale (identity, log or log1p), with
 * read-outs in the stream's own units. Parameters are plain typed arrays so that callers on the
 * hot path can read them without allocation.
 */
import { LOG_SQRT_2PI, standardNormalCdf, standardNormalQuantile } from './normal.js';
import { fromModel, logJacobian, toModel, type ScaleName } from './scale.js';
import type { Random } from './random.js';

/** One component as an operator reads it, in the stream's own units. */
export interface ComponentSummary {
  weight: number;
  /** Median in the stream's units (= mean on the identity scale). */
  location: number;
  /** Half the width of the central 68.27 % interval, in the stream's units (= sd on identity). */
  spread: number;
  /** Mean in the stream's units. */
  mean: number;
  /** Mean and sd on the model scale. */
  modelMean: number;
  modelSd: number;
}

export class Mixture1D {
  readonly k: number;
  readonly scale: ScaleName;
  readonly weights: Float64Array;
  /** Means and standard deviations on the model scale. */
  readonly means: Float64Array;
  readonly sds: Float64Array;

  constructor(scale: ScaleName, weights: ArrayLike<number>, means: ArrayLike<number>, sds: ArrayLike<number>) {
    const k = weights.length;
    if (k < 1 || means.length !== k || sds.length !== k) throw new Error('Mixture1D: weights, means and sds must have the same length >= 1');
    this.k = k;
    this.scale = scale;
    this.weights = Float64Array.from(weights);
    this.means = Float64Array.from(means);
    this.sds = Float64Array.from(sds);
    for (let i = 0; i < k; i++) {
      if (!(this.sds[i] > 0) || !Number.isFinite(this.sds[i])) throw new Error(`Mixture1D: sd ${i} must be finite and > 0`);
      if (!(this.weights[i] >= 0) || !Number.isFinite(this.means[i])) throw new Error(`Mixture1D: component ${i} has an invalid weight or mean`);
    }
  }

  /** Log density on the model scale (log-sum-exp). */
  logpdfModel(y: number): number {
    let max = -Infinity;
    for (let i = 0; i < this.k; i++) {
      const l = this.componentLogPdfModel(i, y);
      if (l > max) max = l;
    }
    if (max === -Infinity) return -Infinity;
    let s = 0;
    for (let i = 0; i < this.k; i++) s += Math.exp(this.componentLogPdfModel(i, y) - max);
    return max + Math.log(s);
  }

  /** log(w_i) + log N(y; mu_i, sd_i). */
  componentLogPdfModel(i: number, y: number): number {
    const z = (y - this.means[i]) / this.sds[i];
    return Math.log(this.weights[i]) - 0.5 * z * z - Math.log(this.sds[i]) - LOG_SQRT_2PI;
  }

  /** Log density in the stream's units (Jacobian included); -Infinity outside the scale's domain. */
  logpdf(x: number): number {
    if (this.scale === 'log' && !(x > 0)) return -Infinity;
    if (this.scale === 'log1p' && !(x > -1)) return -Infinity;
    return this.logpdfModel(toModel(this.scale, x)) + logJacobian(this.scale, x);
  }

  pdf(x: number): number {
    return Math.exp(this.logpdf(x));
  }

  cdfModel(y: number): number {
    let c = 0;
    for (let i = 0; i < this.k; i++) c += this.weights[i] * standardNormalCdf((y - this.means[i]) / this.sds[i]);
    return Math.min(1, Math.max(0, c));
  }

  cdf(x: number): number {
    if (this.scale === 'log' && !(x > 0)) return 0;
    if (this.scale === 'log1p' && !(x > -1)) return 0;
    return this.cdfModel(toModel(this.scale, x));
  }

  /** Quantile in the stream's units: bracket by the components' own quantiles, then bisect (monotone, exact to ~1e-12). */
  quantile(p: number): number {
    if (!(p >= 0 && p <= 1)) return NaN;
    if (p === 0) return fromModel(this.scale, -Infinity);
    if (p === 1) return fromModel(this.scale, Infinity);
    const zq = standardNormalQuantile(p);
    let lo = Infinity;
    let hi = -Infinity;
    for (let i = 0; i < this.k; i++) {
      const q = this.means[i] + this.sds[i] * zq;
      if (q < lo) lo = q;
      if (q > hi) hi = q;
    }
    // The mixture quantile lies between the smallest and largest component quantiles.
    for (let it = 0; it < 200 && hi - lo > 1e-13 * Math.max(1, Math.abs(lo) + Math.abs(hi)); it++) {
      const mid = 0.5 * (lo + hi);
      if (this.cdfModel(mid) < p) lo = mid;
      else hi = mid;
    }
    return fromModel(this.scale, 0.5 * (lo + hi));
  }

  /** One draw in the stream's units. */
  sample(rng: Random): number {
    let u = rng.uniform() * this.totalWeight();
    let i = 0;
    for (; i < this.k - 1; i++) {
      u -= this.weights[i];
      if (u < 0) break;
    }
    return fromModel(this.scale, this.means[i] + this.sds[i] * rng.normal());
  }

  totalWeight(): number {
    let s = 0;
    for (let i = 0; i < this.k; i++) s += this.weights[i];
    return s;
  }

  component(i: number): ComponentSummary {
    return summarizeComponent(this.scale, this.weights[i], this.means[i], this.sds[i]);
  }

  components(): ComponentSummary[] {
    const out: ComponentSummary[] = [];
    for (let i = 0; i < this.k; i++) out.push(this.component(i));
    return out;
  }
}

/** A component's read-out in the stream's units. Location is the median; spread is half the central 68.27 % interval. */
export function summarizeComponent(scale: ScaleName, weight: number, mu: number, sd: number): ComponentSummary {
  let location: number;
  let spread: number;
  let mean: number;
  if (scale === 'identity') {
    location = mu;
    spread = sd;
    mean = mu;
  } else if (scale === 'log') {
    location = Math.exp(mu);
    spread = 0.5 * (Math.exp(mu + sd) - Math.exp(mu - sd));
    mean = Math.exp(mu + 0.5 * sd * sd);
  } else {
    location = Math.expm1(mu);
    spread = 0.5 * (Math.expm1(mu + sd) - Math.expm1(mu - sd));
    mean = Math.exp(mu + 0.5 * sd * sd) - 1;
  }
  return { weight, location, spread, mean, modelMean: mu, modelSd: sd };
}
