/**
 * New modes in vector streams. Events the reference explains badly (tagged by the monitor) go
 * into a small preallocated ring. When at least `minCount` tagged events from the last `window`
 * accepted events lie close together, they are fitted with one Gaussian (seeded at a recent
 * tagged event, refined twice by Mahalanobis trimming) and scored by the profile
 * log-likelihood ratio of "the reference plus this cluster at weight δ̂" against "the reference":
 *
 *   LLR = Σ_members ln(1 − δ̂ + δ̂·N(x; m, C)/p_ref(x)) + (n − members)·ln(1 − δ̂),   δ̂ = members / n,
 *
 * over the n events of the window (events outside the cluster are counted as if N(x) = 0, which
 * only lowers the LLR). Because m, C and δ̂ are fitted to the same events, the statistic is
 * LLR − ½·P·ln n with P = d + d(d+1)/2 + 1 free parameters (Schwarz 1978), and a candidate
 * counts once it reaches the monitor's threshold h. Scattered outliers and the reference's own
 * tail events do not form a tight, populous cluster, so they score low; the member floor, the
 * BIC penalty and the threshold together keep false births rare (measured: no birth on 100 000
 * stationary events, tests/detect/vector-monitor.test.ts).
 *
 * Cost: a search is O(seeds·ring·d²) and runs only on a tagged event when the ring holds enough
 * recent tags. Nothing allocates after construction.
 */
import { choleskyLower, mahalanobisSq } from '../math/mv/cholesky.js';

/** Ring capacity (tagged events kept). */
export const RING = 256;
/** Recent tagged events tried as seeds. */
const SEEDS = 4;
/** Seed radii in reference units (per axis, the smallest reference sd on that axis): a new mode may be far wider than the narrowest component. */
const RADII = [2, 8, 32];
/** Variance floor of a cluster in reference units² (a cluster cannot be tighter than 0.1 reference sd). */
const CLUSTER_FLOOR = 0.01;

export interface VectorCandidate {
  /** Mean (d) and covariance (d·d) in stream units. */
  mean: Float64Array;
  cov: Float64Array;
  /** Estimated share of events in the cluster (δ̂). */
  weight: number;
  members: number;
  /** LLR − penalty. */
  statistic: number;
  firstTs: number;
  firstOffset: number;
}

export class VectorNovelty {
  readonly d: number;
  private readonly xs: Float64Array;
  private readonly surprise: Float64Array;
  private readonly at: Float64Array;
  private readonly ts: Float64Array;
  private readonly off: Float64Array;
  private head = 0;
  private size = 0;
  /** Accepted-event count from which the window counts (detectors reset). */
  private since = 0;
  /** Best statistic of the latest search (for read-outs), 0 when none. */
  private last = 0;
  private readonly member = new Uint8Array(RING);
  private readonly z: Float64Array;
  private readonly mean: Float64Array;
  private readonly cov: Float64Array;
  private readonly chol: Float64Array;
  private readonly inv: Float64Array;
  private readonly diff: Float64Array;
  private readonly y: Float64Array;
  private readonly cand: VectorCandidate;

  constructor(d: number) {
    this.d = d;
    this.xs = new Float64Array(RING * d);
    this.surprise = new Float64Array(RING);
    this.at = new Float64Array(RING);
    this.ts = new Float64Array(RING);
    this.off = new Float64Array(RING);
    this.z = new Float64Array(RING * d);
    this.mean = new Float64Array(d);
    this.cov = new Float64Array(d * d);
    this.chol = new Float64Array(d * d);
    this.inv = new Float64Array(d);
    this.diff = new Float64Array(d);
    this.y = new Float64Array(d);
    this.cand = { mean: new Float64Array(d), cov: new Float64Array(d * d), weight: 0, members: 0, statistic: 0, firstTs: 0, firstOffset: 0 };
  }

  get statistic(): number {
    return this.last;
  }

  /** Forget every tagged event; the window starts at accepted-event count `now`. */
  clear(now: number): void {
    this.head = 0;
    this.size = 0;
    this.since = now;
    this.last = 0;
  }

  /** Keep one tagged event: x (stream units), its surprise −ln p_ref(x), accepted-event count, time, offset. */
  push(x: ArrayLike<number>, surprise: number, at: number, ts: number, offset: number): void {
    const d = this.d;
    const i = this.head;
    for (let a = 0; a < d; a++) this.xs[i * d + a] = x[a];
    this.surprise[i] = surprise;
    this.at[i] = at;
    this.ts[i] = ts;
    this.off[i] = offset;
    this.head = (i + 1) % RING;
    if (this.size < RING) this.size++;
  }

  /** Number of kept tagged events newer than `now − window`. */
  live(now: number, window: number): number {
    let n = 0;
    for (let s = 0; s < this.size; s++) if (this.at[this.slot(s)] > now - window) n++;
    return n;
  }

  /** Slot of the s-th most recent entry. */
  private slot(s: number): number {
    return (this.head - 1 - s + 2 * RING) % RING;
  }

  /**
   * Look for a cluster among the live tagged events; `unit` (d) is the per-axis reference unit.
   * Returns the best candidate (a reused object) or null when there are too few live events.
   */
  search(now: number, window: number, minCount: number, unit: Float64Array): VectorCandidate | null {
    const d = this.d;
    const n = Math.min(window, now - this.since);
    let live = 0;
    for (let s = 0; s < this.size; s++) {
      const i = this.slot(s);
      if (this.at[i] > now - window) {
        live++;
        for (let a = 0; a < d; a++) this.z[i * d + a] = this.xs[i * d + a] / unit[a];
      }
    }
    if (live < minCount || n <= minCount) return null;
    let logUnit = 0;
    for (let a = 0; a < d; a++) logUnit += Math.log(unit[a]);
    this.logUnit = logUnit;
    const P = d + (d * (d + 1)) / 2 + 1;
    const penalty = 0.5 * P * Math.log(n);
    const cut = (Math.sqrt(d) + 2) * (Math.sqrt(d) + 2);
    let best = -Infinity;
    let bestSeed = -1;
    let bestRadius = 0;
    for (let s = 0, tried = 0; s < this.size && tried < SEEDS * RADII.length; s++) {
      const seed = this.slot(s);
      if (!(this.at[seed] > now - window)) continue;
      for (let ri = 0; ri < RADII.length; ri++) {
        const radius = RADII[ri];
        tried++;
        // Members: live events within `radius` units of the seed, then two trimming passes.
        let count = 0;
        for (let t = 0; t < this.size; t++) {
          const i = this.slot(t);
          let inside = 0;
          if (this.at[i] > now - window) {
            let q = 0;
            for (let a = 0; a < d; a++) {
              const v = this.z[i * d + a] - this.z[seed * d + a];
              q += v * v;
            }
            inside = q < radius * radius ? 1 : 0;
          }
          this.member[i] = inside;
          count += inside;
        }
        if (count < minCount) continue;
        for (let pass = 0; pass < 2 && count >= minCount; pass++) {
          if (!this.fitMembers()) break;
          count = 0;
          for (let t = 0; t < this.size; t++) {
            const i = this.slot(t);
            let inside = 0;
            if (this.at[i] > now - window && this.mahal(i) < cut) inside = 1;
            this.member[i] = inside;
            count += inside;
          }
        }
        if (count < minCount || !this.fitMembers()) continue;
        const stat = this.llr(count, n) - penalty;
        if (stat > best) {
          best = stat;
          bestSeed = seed;
          bestRadius = radius;
        }
      }
    }
    if (bestSeed < 0) {
      this.last = 0;
      return null;
    }
    // Rebuild the winner (the member marks hold the last seed's cluster).
    this.rebuild(bestSeed, bestRadius, now, window, minCount, cut);
    const members = this.countMembers();
    this.fitMembers();
    const c = this.cand;
    c.statistic = best;
    c.members = members;
    c.weight = members / n;
    let first = -1;
    for (let t = 0; t < this.size; t++) {
      const i = this.slot(t);
      if (this.member[i] === 1) first = i; // oldest member wins (slots go newest → oldest)
    }
    c.firstTs = first >= 0 ? this.ts[first] : 0;
    c.firstOffset = first >= 0 ? this.off[first] : 0;
    for (let a = 0; a < d; a++) {
      c.mean[a] = this.mean[a] * unit[a];
      for (let b = 0; b < d; b++) c.cov[a * d + b] = this.cov[a * d + b] * unit[a] * unit[b];
    }
    this.last = Math.max(0, best);
    return c;
  }

  /** Remove the members of the latest candidate from the ring (their evidence is used up). */
  consumeMembers(): void {
    for (let t = 0; t < this.size; t++) {
      const i = this.slot(t);
      if (this.member[i] === 1) this.at[i] = -Infinity;
      this.member[i] = 0;
    }
    this.last = 0;
  }

  private rebuild(seed: number, radius: number, now: number, window: number, minCount: number, cut: number): void {
    const d = this.d;
    for (let t = 0; t < this.size; t++) {
      const i = this.slot(t);
      let q = 0;
      for (let a = 0; a < d; a++) {
        const v = this.z[i * d + a] - this.z[seed * d + a];
        q += v * v;
      }
      this.member[i] = this.at[i] > now - window && q < radius * radius ? 1 : 0;
    }
    let count = this.countMembers();
    for (let pass = 0; pass < 2 && count >= minCount; pass++) {
      if (!this.fitMembers()) break;
      for (let t = 0; t < this.size; t++) {
        const i = this.slot(t);
        this.member[i] = this.at[i] > now - window && this.mahal(i) < cut ? 1 : 0;
      }
      count = this.countMembers();
    }
  }

  private countMembers(): number {
    let c = 0;
    for (let t = 0; t < this.size; t++) c += this.member[this.slot(t)];
    return c;
  }

  /** Mean and covariance (reference units) of the marked members, floored, and their Cholesky factor. */
  private fitMembers(): boolean {
    const d = this.d;
    const mean = this.mean;
    const cov = this.cov;
    mean.fill(0);
    cov.fill(0);
    let c = 0;
    for (let t = 0; t < this.size; t++) {
      const i = this.slot(t);
      if (this.member[i] !== 1) continue;
      c++;
      for (let a = 0; a < d; a++) mean[a] += this.z[i * d + a];
    }
    if (c < 2) return false;
    for (let a = 0; a < d; a++) mean[a] /= c;
    for (let t = 0; t < this.size; t++) {
      const i = this.slot(t);
      if (this.member[i] !== 1) continue;
      for (let a = 0; a < d; a++) {
        const va = this.z[i * d + a] - mean[a];
        for (let b = 0; b <= a; b++) cov[a * d + b] += va * (this.z[i * d + b] - mean[b]);
      }
    }
    for (let a = 0; a < d; a++) {
      for (let b = 0; b <= a; b++) {
        const v = cov[a * d + b] / c + (a === b ? CLUSTER_FLOOR : 0);
        cov[a * d + b] = v;
        cov[b * d + a] = v;
      }
    }
    return choleskyLower(cov, 0, d, this.chol, 0, this.inv, 0);
  }

  private mahal(i: number): number {
    const d = this.d;
    for (let a = 0; a < d; a++) this.diff[a] = this.z[i * d + a] - this.mean[a];
    return mahalanobisSq(this.chol, 0, this.inv, 0, d, this.diff, this.y);
  }

  /** Profile LLR of the members (see the header); densities in reference units, converted by the caller's unit. */
  private llr(members: number, n: number): number {
    const d = this.d;
    const w = members / n;
    const lStay = Math.log1p(-w);
    const lw = Math.log(w);
    let logDet = 0;
    for (let a = 0; a < d; a++) logDet += 2 * Math.log(this.chol[a * d + a]);
    const c0 = -0.5 * d * Math.log(2 * Math.PI) - 0.5 * logDet - this.logUnit;
    let sum = (n - members) * lStay;
    for (let t = 0; t < this.size; t++) {
      const i = this.slot(t);
      if (this.member[i] !== 1) continue;
      const lr = lw + c0 - 0.5 * this.mahal(i) + this.surprise[i];
      // ln(e^lStay + e^lr), stably
      sum += lr > lStay ? lr + Math.log1p(Math.exp(lStay - lr)) : lStay + Math.log1p(Math.exp(lr - lStay));
    }
    return sum;
  }

  /** Σ ln unit_a of the latest search: converts densities in reference units to stream units. */
  private logUnit = 0;

  exportState(): VectorNoveltyState {
    return {
      xs: Array.from(this.xs),
      surprise: Array.from(this.surprise),
      at: Array.from(this.at, (v) => (v === -Infinity ? null : v)),
      ts: Array.from(this.ts),
      off: Array.from(this.off),
      head: this.head,
      size: this.size,
      since: this.since,
      last: this.last,
    };
  }

  importState(s: VectorNoveltyState): void {
    if (s.xs.length !== this.xs.length) throw new Error(`vector novelty: expected ${this.xs.length} ring values, got ${s.xs.length}`);
    this.xs.set(s.xs);
    this.surprise.set(s.surprise);
    this.at.set(s.at.map((v) => (v === null ? -Infinity : v)));
    this.ts.set(s.ts);
    this.off.set(s.off);
    this.head = s.head;
    this.size = s.size;
    this.since = s.since;
    this.last = s.last;
  }
}

export interface VectorNoveltyState {
  xs: number[];
  surprise: number[];
  /** null marks a consumed entry (−∞ is not JSON). */
  at: (number | null)[];
  ts: number[];
  off: number[];
  head: number;
  size: number;
  since: number;
  last: number;
}
