/**
 * Stepwise (online) EM for a univariate Gaussian mixture, one event at a time.
 *
 * Sufficient statistics follow s <- (1-γ)s + γ·E[s(x)] (Cappé & Moulines 2009, "On-line
 * expectation-maximization algorithm for latent data models"), with the step size
 * γ_t = max((t + t0)^-α, γ_min), 0.5 < α <= 1 (Liang & Klein 2009, "Online EM for
 * unsupervised models"). γ_min = 1/W forgets with a window of about W events; with a
 * half-life H in event time instead, γ_min = 1/N_t where N_t = 2^(-Δt/H)·N_{t-1} + 1 is the
 * effective number of events in the window, so a replay of the same events (same
 * timestamps) gives the same model however the events were batched.
 *
 * Per component the statistics are kept as (s0, mean, variance) and updated in the
 * numerically stable weighted form (West 1979): with f = γ r / s0',
 *   mean' = mean + f (y - mean),  var' = (1 - f)(var + f (y - mean)²),
 * which equals the (s0, s1, s2) recursion without its cancellation. A variance floor keeps a
 * component from collapsing onto a repeated value. An optional fixed background component
 * (a Cauchy density with a small weight, the "noise component" of Banfield & Raftery 1993)
 * takes scattered outliers so they do not drag the Gaussians.
 *
 * Internally values are standardised by (center, unit) fixed at construction, so magnitudes from
 * 1e-300 to 1e300 behave alike. The update path allocates nothing.
 */
import { Mixture1D } from './mixture1d.js';
import { expNonPositive } from './exp.js';
import type { ScaleName } from './scale.js';

export interface StepwiseOptions {
  /** Decay exponent of the step size, 0.5 < alpha <= 1. */
  alpha: number;
  /** Offset of the schedule (larger t0 = smaller early steps). */
  t0: number;
  /** Forgetting window in events (γ_min = 1/window). Ignored when halfLifeMs is set. */
  window: number;
  /** Forgetting half-life in event time (ms), or 0 to forget by event count. */
  halfLifeMs: number;
  /** Variance floor on the model scale, as a fraction of `unit` (the bootstrap spread): floor = (fraction·unit)². */
  sdFloorFraction: number;
  /** Weight of the fixed background component (0 disables it). */
  backgroundWeight: number;
  /** Most components the model may hold (births beyond it are refused). */
  capacity: number;
}

export const DEFAULT_STEPWISE: StepwiseOptions = {
  alpha: 0.6,
  t0: 2,
  window: 5000,
  halfLifeMs: 0,
  sdFloorFraction: 1e-3,
  backgroundWeight: 0,
  capacity: 8,
};

// Fields of one component, interleaved (component j at j*FIELDS): one cache line per component.
const S0 = 0; // weight statistic
const MU = 1; // mean (standardised units)
const VAR = 2; // variance statistic (standardised units), unfloored
const W = 3; // normalised weight
// Field 4 is unused: eight fields keep a component on one 64-byte line.
const COEF = 5; // (1-ε) w / (sd √2π): density coefficient
const INV2V = 6; // 1 / (2 sd²)
const RESP = 7; // scratch: responsibilities of the last event
const FIELDS = 8;

const INV_SQRT_2PI = 1 / Math.sqrt(2 * Math.PI);
const Z_CLIP = 1e8;

export class OnlineMixture1D {
  readonly scale: ScaleName;
  readonly options: StepwiseOptions;
  // Numeric fields are declared with a number so that V8 keeps them as unboxed doubles: a field
  // that starts as undefined becomes tagged, and the hot path then boxes (allocates) on every event.
  /** Standardisation: z = (y - center) / unit. */
  readonly center: number = 0;
  readonly unit: number = 1;
  private readonly cap: number;
  private readonly buf: Float64Array;
  private readonly idBuf: Int32Array;
  private kActive = 0;
  private nextId = 1;
  /** Events seen since the schedule (re)started. */
  private t = 0;
  /** Effective number of events in the event-time window (half-life mode). */
  private nEff = 0;
  private lastTs = Number.NaN;
  private readonly floorVar: number = 0;
  private readonly tSwitch: number = 0;
  private readonly gammaMin: number = 0;
  /** Background density on z: Cauchy(0, bgScale) with weight ε. */
  private readonly bgScale: number = 0;
  private readonly bgWeight: number = 0;
  /** Density (standardised units) of the last event, or 0 when it was computed in the log domain. */
  private lastDensity = 0;
  private lastLogDensityFallback = 0;
  private lastZ = 0;
  // Hot-path copies of options (no lookups through this.options per event).
  private readonly t0: number = 0;
  private readonly alpha: number = 0;
  private readonly halfLifeMs: number = 0;
  /** Value and time handed from the small public wrappers to the E/M steps (doubles pass through fields, not calls). */
  private inY = 0;
  private inTs = 0;
  /** Step size of the current event, written by schedule(). */
  private gamma = 0;

  constructor(scale: ScaleName, center: number, unit: number, options: Partial<StepwiseOptions> = {}) {
    const o = { ...DEFAULT_STEPWISE, ...options };
    if (!(o.alpha > 0.5 && o.alpha <= 1)) throw new Error(`alpha must be in (0.5, 1], got ${o.alpha}`);
    if (!(o.window >= 1)) throw new Error(`window must be >= 1 event, got ${o.window}`);
    if (!(o.capacity >= 1 && o.capacity <= 64)) throw new Error(`capacity must be 1..64, got ${o.capacity}`);
    if (!(o.backgroundWeight >= 0 && o.backgroundWeight < 0.5)) throw new Error('backgroundWeight must be in [0, 0.5)');
    if (!Number.isFinite(center) || !(unit > 0) || !Number.isFinite(unit)) throw new Error('center and unit must be finite, unit > 0');
    this.scale = scale;
    this.options = o;
    this.center = center;
    this.unit = unit;
    this.cap = o.capacity;
    this.buf = new Float64Array(this.cap * FIELDS);
    this.idBuf = new Int32Array(this.cap);
    this.floorVar = o.sdFloorFraction * o.sdFloorFraction;
    this.gammaMin = 1 / o.window;
    this.tSwitch = Math.pow(this.gammaMin, -1 / o.alpha) - o.t0;
    this.bgScale = 8; // eight bootstrap spreads: broad against the components
    this.bgWeight = o.backgroundWeight;
    this.t0 = o.t0;
    this.alpha = o.alpha;
    this.halfLifeMs = o.halfLifeMs;
  }

  /** Start from a fitted mixture (its scale must match). Weights are renormalised. `t` sets how far along the schedule it is. */
  static fromMixture(m: Mixture1D, options: Partial<StepwiseOptions> = {}, t = 0): OnlineMixture1D {
    let lo = Infinity;
    let hi = -Infinity;
    let maxSd = 0;
    for (let i = 0; i < m.k; i++) {
      lo = Math.min(lo, m.means[i]);
      hi = Math.max(hi, m.means[i]);
      maxSd = Math.max(maxSd, m.sds[i]);
    }
    const center = 0.5 * (lo + hi);
    // A unit below 1e-290 would make the floored sd (unit × sdFloorFraction) underflow to zero: model such
    // (denormal) data at that resolution instead.
    const unit = Math.max(0.5 * (hi - lo), maxSd, 1e-290);
    const model = new OnlineMixture1D(m.scale, center, Number.isFinite(unit) ? unit : 1, options);
    for (let i = 0; i < m.k; i++) model.addComponent(m.means[i], m.sds[i], m.weights[i]);
    model.normalizeWeights();
    model.t = t;
    return model;
  }

  get k(): number {
    return this.kActive;
  }
  get capacity(): number {
    return this.cap;
  }
  get eventsSeen(): number {
    return this.t;
  }

  /** Learn from one value y on the model scale, at event time ts (ms). Returns this. */
  update(y: number, ts: number): this {
    this.inY = y;
    this.inTs = ts;
    this.eStep();
    this.mStep();
    return this;
  }

  /**
   * E-step only: responsibilities and density of y under the current parameters, kept for
   * read-out (responsibility(i), lastLogDensity) and for a following learn(). Detectors read
   * them between the two calls, so their statistics use parameters fixed before the event.
   */
  evaluate(y: number): void {
    // Small on purpose: V8 inlines it into the caller, so y reaches eStep through a field without being boxed.
    this.inY = y;
    this.eStep();
  }

  private eStep(): void {
    const k = this.kActive;
    const b = this.buf;
    if (k === 0) {
      this.lastDensity = 0;
      this.lastLogDensityFallback = -Infinity;
      return;
    }
    let z = (this.inY - this.center) / this.unit;
    if (z > Z_CLIP) z = Z_CLIP;
    else if (z < -Z_CLIP) z = -Z_CLIP;
    this.lastZ = z;
    // E-step in the linear domain (fast); log domain when everything underflows.
    let total = 0;
    for (let j = 0, o = 0; j < k; j++, o += FIELDS) {
      const d = z - b[o + MU];
      const p = b[o + COEF] * expNonPositive(-d * d * b[o + INV2V]);
      b[o + RESP] = p;
      total += p;
    }
    let bg = 0;
    if (this.bgWeight > 0) {
      const u = z / this.bgScale;
      bg = this.bgWeight / (Math.PI * this.bgScale * (1 + u * u));
    }
    if (total > 1e-300) {
      const all = total + bg;
      this.lastDensity = all;
      const inv = 1 / all;
      for (let o = RESP, e = k * FIELDS; o < e; o += FIELDS) b[o] *= inv;
    } else {
      this.logDomainResponsibilities(z, bg);
    }
  }

  /** M-step for the value given to the last evaluate(). */
  learn(ts: number): this {
    this.inTs = ts;
    this.mStep();
    return this;
  }

  private mStep(): void {
    const k = this.kActive;
    if (k === 0) return;
    const b = this.buf;
    const z = this.lastZ;
    this.schedule();
    const gamma = this.gamma;
    const keep = 1 - gamma;
    // M-step on the statistics, per component (stable weighted mean/variance form).
    let s0sum = 0;
    for (let j = 0, o = 0; j < k; j++, o += FIELDS) {
      const g = gamma * b[o + RESP];
      const s0 = keep * b[o + S0] + g;
      if (g > 0 && s0 > 0) {
        const f = g / s0;
        const d = z - b[o + MU];
        b[o + MU] += f * d;
        b[o + VAR] = (1 - f) * (b[o + VAR] + f * d * d);
      }
      b[o + S0] = s0;
      s0sum += s0;
    }
    // Events taken by the background shrink every s0 alike; renormalise so nothing underflows.
    if (s0sum < 0.5) {
      const inv = 1 / s0sum;
      for (let o = S0, e = k * FIELDS; o < e; o += FIELDS) b[o] *= inv;
      s0sum = 1;
    }
    this.refresh(s0sum);
  }

  /** Log density (model scale, background included) of the last event given to update(). */
  get lastLogDensity(): number {
    return this.lastDensity > 0 ? Math.log(this.lastDensity) - Math.log(this.unit) : this.lastLogDensityFallback;
  }

  private logDomainResponsibilities(z: number, bg: number): void {
    const b = this.buf;
    const k = this.kActive;
    let max = bg > 0 ? Math.log(bg) : -Infinity;
    for (let j = 0; j < k; j++) {
      const d = z - b[j * FIELDS + MU];
      const l = Math.log(b[j * FIELDS + COEF]) - d * d * b[j * FIELDS + INV2V];
      b[j * FIELDS + RESP] = l;
      if (l > max) max = l;
    }
    let s = bg > 0 ? Math.exp(Math.log(bg) - max) : 0;
    for (let j = 0; j < k; j++) {
      const e = Math.exp(b[j * FIELDS + RESP] - max);
      b[j * FIELDS + RESP] = e;
      s += e;
    }
    this.lastDensity = 0;
    this.lastLogDensityFallback = max + Math.log(s) - Math.log(this.unit);
    for (let j = 0; j < k; j++) b[j * FIELDS + RESP] /= s;
  }

  /** Advance the schedule by one event and set this.gamma (γ_t, see the header) for it. */
  private schedule(): void {
    this.t++;
    const t = this.t;
    const h = this.halfLifeMs;
    if (h === 0 && t > this.tSwitch) {
      this.gamma = this.gammaMin; // the common steady state: a constant step
      return;
    }
    // α = 1 is a plain division (bit-identical to Math.pow(x, -1), which returns 1/x).
    const sched = t > this.tSwitch ? 0 : this.alpha === 1 ? 1 / (t + this.t0) : Math.pow(t + this.t0, -this.alpha);
    let gamma = sched > this.gammaMin ? sched : this.gammaMin;
    if (h > 0) {
      const ts = this.inTs;
      const prev = this.lastTs;
      const dt = prev === prev && ts > prev ? ts - prev : 0;
      if (ts > prev || prev !== prev) this.lastTs = ts;
      this.nEff = (dt > 0 ? this.nEff * Math.pow(2, -dt / h) : this.nEff) + 1;
      const inv = 1 / this.nEff;
      gamma = sched > inv ? sched : inv;
    }
    this.gamma = gamma > 1 ? 1 : gamma;
  }

  /**
   * Recompute weights and density coefficients from the statistics: one division and one square root per
   * component (1/sd as √(1/v); 0.5·(1/v) is bit-identical to 0.5/v). The floored sd is read out on demand.
   */
  private refresh(s0sum: number): void {
    const b = this.buf;
    const inv = 1 / s0sum;
    const keep = (1 - this.bgWeight) * INV_SQRT_2PI;
    const floor = this.floorVar;
    for (let o = 0, e = this.kActive * FIELDS; o < e; o += FIELDS) {
      const w = b[o + S0] * inv;
      const iv = 1 / (b[o + VAR] > floor ? b[o + VAR] : floor);
      b[o + W] = w;
      b[o + COEF] = keep * w * Math.sqrt(iv);
      b[o + INV2V] = 0.5 * iv;
    }
  }

  private normalizeWeights(): void {
    let s = 0;
    for (let j = 0; j < this.kActive; j++) s += this.buf[j * FIELDS + S0];
    if (s > 0) for (let j = 0; j < this.kActive; j++) this.buf[j * FIELDS + S0] /= s;
    this.refresh(1);
  }

  // ---- read-outs (model scale: y) ----
  id(i: number): number {
    return this.idBuf[i];
  }
  indexOf(id: number): number {
    for (let j = 0; j < this.kActive; j++) if (this.idBuf[j] === id) return j;
    return -1;
  }
  weight(i: number): number {
    return this.buf[i * FIELDS + W];
  }
  mean(i: number): number {
    return this.center + this.unit * this.buf[i * FIELDS + MU];
  }
  sd(i: number): number {
    const v = this.buf[i * FIELDS + VAR];
    return this.unit * Math.sqrt(v > this.floorVar ? v : this.floorVar);
  }
  /** Responsibility of component i for the last event (after background). */
  responsibility(i: number): number {
    return this.buf[i * FIELDS + RESP];
  }

  /** Background weight ε and its density at model-scale y (a Cauchy, see the header). */
  get backgroundWeight(): number {
    return this.bgWeight;
  }
  backgroundLogPdf(y: number): number {
    const u = (y - this.center) / (this.unit * this.bgScale);
    return -Math.log(Math.PI * this.bgScale * this.unit * (1 + u * u));
  }
  /** P(background ≤ y): the Cauchy cdf. */
  backgroundCdf(y: number): number {
    return 0.5 + Math.atan((y - this.center) / (this.unit * this.bgScale)) / Math.PI;
  }

  /** Mixture log density on the model scale at y, Gaussians only (no background). */
  logpdfModel(y: number): number {
    const z = (y - this.center) / this.unit;
    const b = this.buf;
    const keep = 1 - this.options.backgroundWeight;
    let max = -Infinity;
    for (let j = 0; j < this.kActive; j++) {
      const d = z - b[j * FIELDS + MU];
      const l = Math.log(b[j * FIELDS + COEF] / keep) - d * d * b[j * FIELDS + INV2V];
      if (l > max) max = l;
    }
    if (max === -Infinity) return -Infinity;
    let s = 0;
    for (let j = 0; j < this.kActive; j++) {
      const d = z - b[j * FIELDS + MU];
      s += Math.exp(Math.log(b[j * FIELDS + COEF] / keep) - d * d * b[j * FIELDS + INV2V] - max);
    }
    return max + Math.log(s) - Math.log(this.unit);
  }

  /** A snapshot as a Mixture1D (allocates; for read-outs, never per event). */
  toMixture(): Mixture1D {
    const k = this.kActive;
    const w = new Float64Array(k);
    const m = new Float64Array(k);
    const s = new Float64Array(k);
    for (let j = 0; j < k; j++) {
      w[j] = this.weight(j);
      m[j] = this.mean(j);
      s[j] = this.sd(j);
    }
    return new Mixture1D(this.scale, w, m, s);
  }

  // ---- lifecycle (not per event) ----

  /** Add a component (model-scale mean and sd) with the given share of the weight; returns its stable id, or -1 at capacity. */
  addComponent(meanY: number, sdY: number, weight: number, id = 0): number {
    if (this.kActive >= this.cap) return -1;
    const j = this.kActive;
    let s = 0;
    for (let i = 0; i < j; i++) s += this.buf[i * FIELDS + S0];
    const wNew = Math.min(Math.max(weight, 1e-6), 0.999);
    this.buf[j * FIELDS + S0] = j === 0 ? 1 : (wNew / (1 - wNew)) * s;
    this.buf[j * FIELDS + MU] = (meanY - this.center) / this.unit;
    const sdz = sdY / this.unit;
    this.buf[j * FIELDS + VAR] = Number.isFinite(sdz) && sdz > 0 ? sdz * sdz : 1;
    this.idBuf[j] = id > 0 ? id : this.nextId;
    this.nextId = Math.max(this.nextId, this.idBuf[j]) + 1;
    this.kActive++;
    this.normalizeWeights();
    return this.idBuf[j];
  }

  /** Remove component i (its weight is shared out by renormalisation). */
  removeComponent(i: number): void {
    const last = this.kActive - 1;
    for (let j = i; j < last; j++) {
      for (let f = 0; f < FIELDS; f++) this.buf[j * FIELDS + f] = this.buf[(j + 1) * FIELDS + f];
      this.idBuf[j] = this.idBuf[j + 1];
    }
    this.kActive--;
    this.normalizeWeights();
  }

  /** Merge component b into a by moment matching; a keeps its id. */
  mergeComponents(a: number, bIdx: number): void {
    const buf = this.buf;
    const wa = buf[a * FIELDS + S0];
    const wb = buf[bIdx * FIELDS + S0];
    const w = wa + wb;
    if (w > 0) {
      const ma = buf[a * FIELDS + MU];
      const mb = buf[bIdx * FIELDS + MU];
      const m = (wa * ma + wb * mb) / w;
      const v = (wa * (buf[a * FIELDS + VAR] + (ma - m) ** 2) + wb * (buf[bIdx * FIELDS + VAR] + (mb - m) ** 2)) / w;
      buf[a * FIELDS + S0] = w;
      buf[a * FIELDS + MU] = m;
      buf[a * FIELDS + VAR] = v;
    }
    this.removeComponent(bIdx);
  }

  /** Restart the step-size schedule at t (e.g. 0 to learn fast again). */
  restartSchedule(t = 0): void {
    this.t = t;
    this.nEff = 0;
  }

  // ---- state ----
  exportState(): OnlineMixture1DState {
    const k = this.kActive;
    const pick = (field: number): number[] => {
      const out: number[] = [];
      for (let j = 0; j < k; j++) out.push(this.buf[j * FIELDS + field]);
      return out;
    };
    return {
      scale: this.scale,
      options: { ...this.options },
      center: this.center,
      unit: this.unit,
      ids: Array.from(this.idBuf.subarray(0, k)),
      s0: pick(S0),
      mu: pick(MU),
      variance: pick(VAR),
      nextId: this.nextId,
      t: this.t,
      nEff: this.nEff,
      lastTs: Number.isNaN(this.lastTs) ? null : this.lastTs,
    };
  }

  static importState(s: OnlineMixture1DState): OnlineMixture1D {
    const m = new OnlineMixture1D(s.scale, s.center, s.unit, s.options);
    const k = s.ids.length;
    if (k > m.cap || s.s0.length !== k || s.mu.length !== k || s.variance.length !== k) {
      throw new Error('online mixture state: component arrays disagree in length or exceed capacity');
    }
    for (let j = 0; j < k; j++) {
      m.buf[j * FIELDS + S0] = s.s0[j];
      m.buf[j * FIELDS + MU] = s.mu[j];
      m.buf[j * FIELDS + VAR] = s.variance[j];
      m.idBuf[j] = s.ids[j];
    }
    m.kActive = k;
    m.nextId = s.nextId;
    m.t = s.t;
    m.nEff = s.nEff;
    m.lastTs = s.lastTs === null ? Number.NaN : s.lastTs;
    let sum = 0;
    for (let j = 0; j < k; j++) sum += s.s0[j];
    if (k > 0) m.refresh(sum);
    return m;
  }
}

export interface OnlineMixture1DState {
  scale: ScaleName;
  options: StepwiseOptions;
  center: number;
  unit: number;
  ids: number[];
  s0: number[];
  mu: number[];
  variance: number[];
  nextId: number;
  t: number;
  nEff: number;
  lastTs: number | null;
}
