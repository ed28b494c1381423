import { MvMixture } from './mixture.js';
import { accumulate, accumulate4, expShift, weightedLogDensities, weightedLogDensities4 } from './online-kernels.js';

export interface OnlineMvOptions {
  /** Step-size exponent α, 0.5 < α ≤ 1 (Cappé & Moulines 2009; Liang & Klein 2009). Default 0.6. */
  alpha?: number;
  /** Offset t0 in γ_t = (t + t0)^-α. Default 2. */
  t0?: number;
  /** Forgetting window W in events: γ never drops below 1/W. Infinity gives γ_min = 0. Default 5000. */
  window?: number;
  /** Events between M-steps (means, covariances, Cholesky factors). Default 16. */
  miniBatch?: number;
  /**
   * Events the starting mixture already summarises (e.g. the size of the batch fit), so the
   * schedule continues at γ ≈ initialCount^-α instead of restarting at t0^-α and overwriting
   * the fit with the first few events. Default 0.
   */
  initialCount?: number;
  /** Covariance floor in the working frame. Default: the mixture's regCovar. */
  regCovar?: number;
}

/** Fully resolved schedule and state, as serialised. */
export interface OnlineMvSettings {
  alpha: number;
  t0: number;
  gammaMin: number;
  miniBatch: number;
}

/**
 * Stepwise (online) EM for a full-covariance Gaussian mixture on sufficient statistics
 * (Cappé & Moulines 2009, "On-line expectation-maximization algorithm for latent data models";
 * Liang & Klein 2009, "Online EM for unsupervised models"):
 *
 *   s ← (1 − γ_t)·s + γ_t·E[s(x) | x; θ],   γ_t = max((t + t0)^-α, γ_min),
 *
 * with per-component statistics (mass, Σ r·x, Σ r·x·xᵀ), here held in the equivalent,
 * numerically stable form (mass W, mean m, centred scatter M2 = Σ r·x·xᵀ − W·m·mᵀ) and updated
 * with West's (1979) weighted incremental mean/scatter recursion, in the mixture's working
 * frame. Statistics change on every event; the M-step (θ from s, plus the covariance floor
 * that keeps a component from collapsing onto one repeated value) runs every `miniBatch`
 * events. Depends only on the events in order, so a replay gives the same model.
 *
 * Caller contract: check each event with `validateVector` first; `update` throws RangeError on
 * a wrong length or a non-finite value rather than corrupt the state.
 *
 * @example
 * const fit = fitMvMixture(first2000, 2000, 2, { k: 2 });
 * const online = OnlineMvMixture.fromMixture(fit.mixture, { initialCount: 2000 });
 * for (const x of stream) online.update(x);
 * online.mixture.meanOf(0); // current location of component 0
 */
export class OnlineMvMixture {
  readonly k: number;
  readonly d: number;
  readonly settings: Readonly<OnlineMvSettings>;
  /** Parameters from the latest M-step; read-only for callers. */
  readonly mixture: MvMixture;
  /** Sufficient statistics: component mass (k). */
  readonly statWeight: Float64Array;
  /** Sufficient statistics: component mean in the frame (k·d). */
  readonly statMean: Float64Array;
  /** Sufficient statistics: centred scatter, packed lower triangle per component (k·d(d+1)/2). */
  readonly statScatter: Float64Array;
  private t: number;
  private seen: number;
  private sinceMStep: number;
  private gammaFloored: boolean;
  private readonly z: Float64Array;
  private readonly diff: Float64Array;
  private readonly y: Float64Array;
  private readonly resp: Float64Array;
  private readonly tri: number;

  private constructor(mixture: MvMixture, settings: OnlineMvSettings, t: number, seen: number, sinceMStep: number) {
    this.k = mixture.k;
    this.d = mixture.d;
    this.mixture = mixture;
    this.settings = Object.freeze({ ...settings });
    this.tri = (this.d * (this.d + 1)) / 2;
    this.statWeight = new Float64Array(this.k);
    this.statMean = new Float64Array(this.k * this.d);
    this.statScatter = new Float64Array(this.k * this.tri);
    this.t = t;
    this.seen = seen;
    this.sinceMStep = sinceMStep;
    this.gammaFloored = false;
    this.z = new Float64Array(this.d);
    this.diff = new Float64Array(this.d);
    this.y = new Float64Array(this.d);
    this.resp = new Float64Array(this.k);
  }

  /** Start from a (batch-fitted) mixture; the mixture is copied, its frame kept for life. */
  static fromMixture(m: MvMixture, opts: OnlineMvOptions = {}): OnlineMvMixture {
    const settings = resolveSettings(opts);
    const initialCount = opts.initialCount ?? 0;
    if (!(initialCount >= 0) || !Number.isFinite(initialCount))
      throw new RangeError(`initialCount must be a finite number >= 0, got ${initialCount}`);
    const reg = opts.regCovar ?? m.regCovar;
    let mixture = m.clone();
    if (reg !== m.regCovar) {
      mixture = new MvMixture(m.k, m.d, { center: m.center, scale: m.scale }, reg);
      mixture.weights.set(m.weights);
      mixture.frameMeans.set(m.frameMeans);
      mixture.frameCovariances.set(m.frameCovariances);
      mixture.refresh();
    }
    const o = new OnlineMvMixture(mixture, settings, initialCount, 0, 0);
    const { k, d } = o;
    for (let j = 0; j < k; j++) {
      const w = mixture.weights[j];
      o.statWeight[j] = w;
      for (let i = 0; i < d; i++) o.statMean[j * d + i] = mixture.frameMeans[j * d + i];
      let p = j * o.tri;
      for (let a = 0; a < d; a++) {
        for (let b = 0; b <= a; b++) {
          let c = mixture.frameCovariances[j * d * d + a * d + b];
          if (a === b) c = Math.max(0, c - reg); // the M-step adds the floor back
          o.statScatter[p++] = w * c;
        }
      }
    }
    return o;
  }

  /** Rebuild from serialised parts (used by mvFromJSON). Arrays are copied. */
  static restore(
    mixture: MvMixture,
    settings: OnlineMvSettings,
    state: { t: number; seen: number; sinceMStep: number; weight: ArrayLike<number>; mean: ArrayLike<number>; scatter: ArrayLike<number> },
  ): OnlineMvMixture {
    const o = new OnlineMvMixture(mixture.clone(), settings, state.t, state.seen, state.sinceMStep);
    o.statWeight.set(state.weight);
    o.statMean.set(state.mean);
    o.statScatter.set(state.scatter);
    return o;
  }

  /** Events passed to update since this model was created from a mixture. */
  get eventsSeen(): number {
    return this.seen;
  }

  /** Schedule counter t (initialCount + eventsSeen). */
  get stepCount(): number {
    return this.t;
  }

  /** Events since the last M-step. */
  get pendingEvents(): number {
    return this.sinceMStep;
  }

  /** Step size the next event will get. */
  nextGamma(): number {
    const s = this.settings;
    return Math.max(Math.pow(this.t + 1 + s.t0, -s.alpha), s.gammaMin);
  }

  /** Copy of the current parameters. */
  snapshot(): MvMixture {
    return this.mixture.clone();
  }

  /** Feed one event (stream units). Allocation-free. */
  update(x: ArrayLike<number>): this {
    const d = this.d;
    const k = this.k;
    if (x.length !== d) throw new RangeError(`event has ${x.length} values, model dimension is ${d} (check with validateVector)`);
    const m = this.mixture;
    const z = this.z;
    for (let i = 0; i < d; i++) {
      const xi = x[i];
      if (xi - xi !== 0) throw new RangeError(`event value ${i} is not finite (check with validateVector)`);
      let v = (xi - m.center[i]) * m.invScale[i];
      const lim = m.zMax[i];
      if (v > lim) v = lim;
      else if (v < -lim) v = -lim;
      z[i] = v;
    }

    // Step size; once the floor is reached it stays there (the power term only decreases).
    this.t += 1;
    this.seen += 1;
    const s = this.settings;
    let gamma = s.gammaMin;
    if (!this.gammaFloored) {
      const g = Math.pow(this.t + s.t0, -s.alpha);
      if (g > s.gammaMin) gamma = g;
      else this.gammaFloored = true;
    }

    // E-step with the parameters of the latest M-step (log-sum-exp), then the statistics:
    // s ← (1−γ)s + γ·r_j·s(x). Kernels in online-kernels.ts; d = 4 has an unrolled path.
    const resp = this.resp;
    const keep = 1 - gamma;
    if (d === 4) {
      const max = weightedLogDensities4(k, z, m.frameMeans, m.frameChol, m.frameInvDiag, m.logConst, resp);
      const sum = expShift(k, max, resp);
      accumulate4(k, z, resp, gamma / sum, keep, this.statWeight, this.statMean, this.statScatter);
    } else {
      const max = weightedLogDensities(d, k, z, m.frameMeans, m.frameChol, m.frameInvDiag, m.logConst, this.y, resp);
      const sum = expShift(k, max, resp);
      accumulate(d, k, z, resp, gamma / sum, keep, this.statWeight, this.statMean, this.statScatter, this.diff);
    }

    if (++this.sinceMStep >= s.miniBatch) this.mStep();
    return this;
  }

  /** M-step now: parameters from the statistics, floor on the diagonal, fresh Cholesky factors. */
  mStep(): void {
    const { k, d, tri } = this;
    const m = this.mixture;
    const reg = m.regCovar;
    let total = 0;
    for (let j = 0; j < k; j++) total += this.statWeight[j];
    for (let j = 0; j < k; j++) {
      const w = this.statWeight[j];
      m.weights[j] = total > 0 ? w / total : 1 / k;
      for (let i = 0; i < d; i++) m.frameMeans[j * d + i] = this.statMean[j * d + i];
      const inv = w > 0 ? 1 / w : 0;
      const co = j * d * d;
      let p = j * tri;
      for (let a = 0; a < d; a++) {
        for (let b = 0; b <= a; b++) {
          let v = this.statScatter[p++] * inv;
          if (!Number.isFinite(v)) v = 0;
          if (a === b) v += reg;
          m.frameCovariances[co + a * d + b] = v;
          m.frameCovariances[co + b * d + a] = v;
        }
      }
      m.refreshComponent(j);
    }
    this.sinceMStep = 0;
  }

  /** Internal counters for serialisation. */
  counters(): { t: number; seen: number; sinceMStep: number } {
    return { t: this.t, seen: this.seen, sinceMStep: this.sinceMStep };
  }
}

/** Validate options and resolve defaults. */
export function resolveSettings(opts: OnlineMvOptions): OnlineMvSettings {
  const alpha = opts.alpha ?? 0.6;
  if (!(alpha > 0.5 && alpha <= 1)) throw new RangeError(`alpha must satisfy 0.5 < alpha <= 1, got ${alpha}`);
  const t0 = opts.t0 ?? 2;
  if (!(t0 >= 0) || !Number.isFinite(t0)) throw new RangeError(`t0 must be a finite number >= 0, got ${t0}`);
  const window = opts.window ?? 5000;
  if (!(window >= 1)) throw new RangeError(`window must be >= 1 event (or Infinity), got ${window}`);
  const miniBatch = opts.miniBatch ?? 16;
  if (!Number.isInteger(miniBatch) || miniBatch < 1) throw new RangeError(`miniBatch must be an integer >= 1, got ${miniBatch}`);
  return { alpha, t0, gammaMin: window === Infinity ? 0 : 1 / window, miniBatch };
}
