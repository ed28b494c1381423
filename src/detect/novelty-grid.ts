/**
 * Finds a new mode: a persistent excess of events in one region of the model scale that the
 * reference does not explain. The axis is cut into bins around the reference (plus two open
 * tail bins) and, at a second level, pairs of bins, so that a mode narrower or wider than one
 * bin is still caught. Each bin runs a CUSUM for "its rate rose from p to p + Δ"
 * (Page 1954): a hit adds ln(q/p), a miss ln((1-q)/(1-p)), q = p + Δ, Δ = max(δ, (ρ-1)p): δ is
 * the smallest new mode of interest (its share in one bin) and ρ keeps a mere misfit of the
 * reference's shape (up to a factor ρ) from looking new. p includes the background weight,
 * so scattered outliers are expected and do not accumulate.
 *
 * Misses are applied lazily (a bin untouched for m events loses m times the miss term, floored at
 * zero, which is exactly what m separate steps would do), so an event costs O(1) whatever the number of bins.
 */
import { standardNormalCdf } from '../math/normal.js';
import type { OnlineMixture1D } from '../math/stepwise-em1d.js';

const S = 0;
const LAST = 1;
const START_OFFSET = 2;
const START_TS = 3;
const N = 4;
const SUM = 5;
const DECAY = 6;
const LLR = 7;
const START_COUNT = 8;
/** Expected share of events in the bin under the reference. */
const P = 9;
const F = 10;

/** Inner bins at level one (two open tail bins are added). */
const MAX_BINS = 40;
/** Share of a new mode that falls into one bin (about ±0.5 sd of it), and into a pair. */
const SHARE_L1 = 0.3;
const SHARE_L2 = 0.5;
const RATIO = 4;

export interface NoveltyCandidate {
  /** Mean of the hits since the excursion began, on the model scale. */
  mean: number;
  /** Suggested sd on the model scale. */
  sd: number;
  /** Share of events that fell in the bin since the excursion began. */
  weight: number;
  /** That share minus what the reference expects there: the evidence of something new. */
  excess: number;
  statistic: number;
  firstOffset: number;
  firstTs: number;
}

export class NoveltyGrid {
  private readonly v = new Float64Array((MAX_BINS + 2 + Math.ceil((MAX_BINS + 2) / 2)) * F);
  private lo = 0;
  private width = 1;
  private inner = 0; // number of inner bins in use
  private level2Base = 0; // first bin index of level two
  private count = 0; // events seen by the grid (its clock for lazy decay)

  /** Lay the bins over the reference and compute each bin's expected rate. Statistics restart. */
  configure(ref: OnlineMixture1D, minNewModeWeight: number): void {
    let lo = Infinity;
    let hi = -Infinity;
    let minSd = Infinity;
    for (let j = 0; j < ref.k; j++) {
      lo = Math.min(lo, ref.mean(j) - 4 * ref.sd(j));
      hi = Math.max(hi, ref.mean(j) + 4 * ref.sd(j));
      minSd = Math.min(minSd, ref.sd(j));
    }
    const span = hi - lo;
    lo -= 0.4 * span;
    hi += 0.4 * span;
    const inner = Math.max(8, Math.min(MAX_BINS, Math.ceil((hi - lo) / minSd)));
    this.lo = lo;
    this.width = (hi - lo) / inner;
    this.inner = inner;
    this.level2Base = inner + 2;
    this.v.fill(0);
    this.count = 0;
    this.refreshRates(ref, minNewModeWeight);
  }

  /** Recompute expected rates from the reference (which moves slowly); statistics are kept. */
  refreshRates(ref: OnlineMixture1D, minNewModeWeight: number): void {
    const eps = ref.backgroundWeight;
    const binProb = (a: number, b: number): number => {
      let p = 0;
      for (let j = 0; j < ref.k; j++) {
        const m = ref.mean(j);
        const s = ref.sd(j);
        p += ref.weight(j) * (standardNormalCdf((b - m) / s) - standardNormalCdf((a - m) / s));
      }
      return (1 - eps) * p + eps * (ref.backgroundCdf(b) - ref.backgroundCdf(a));
    };
    // Bernoulli CUSUM per bin: a hit adds ln(q/p), a miss ln((1-q)/(1-p)) with q = p + Δ (kept below 1).
    const setBin = (i: number, p: number, share: number) => {
      const pp = Math.min(Math.max(p, 1e-12), 0.999);
      this.v[i * F + P] = pp;
      const q = Math.min(pp + Math.max(minNewModeWeight * share, (RATIO - 1) * pp), 0.5 * (1 + pp));
      this.v[i * F + DECAY] = -Math.log((1 - q) / (1 - pp));
      this.v[i * F + LLR] = Math.log(q / pp);
    };
    // Level one: bin 0 is the lower tail (-∞, lo), bins 1..inner cover [lo + (i-1)w, lo + iw), inner+1 the upper tail.
    const last = this.inner + 1;
    const lower = (i: number) => (i === 0 ? -Infinity : this.lo + (i - 1) * this.width);
    const upper = (i: number) => (i >= last ? Infinity : this.lo + i * this.width);
    for (let i = 0; i <= last; i++) setBin(i, binProb(lower(i), upper(i)), SHARE_L1);
    // Level two: pairs of level-one bins (2k, 2k+1).
    const pairs = Math.ceil((last + 1) / 2);
    for (let k = 0; k < pairs; k++) setBin(this.level2Base + k, binProb(lower(2 * k), upper(Math.min(2 * k + 1, last))), SHARE_L2);
  }

  /** Feed one value (model scale). Returns the index of a bin whose statistic reached h, or -1. */
  step(y: number, offset: number, ts: number, h: number): number {
    this.count++;
    let i = Math.floor((y - this.lo) / this.width) + 1;
    if (!(i >= 0)) i = 0; // also catches NaN-free -Infinity results
    else if (i > this.inner + 1) i = this.inner + 1;
    const a = this.hit(i, y, offset, ts);
    const b = this.hit(this.level2Base + (i >> 1), y, offset, ts);
    if (a >= h) return i;
    if (b >= h) return this.level2Base + (i >> 1);
    return -1;
  }

  private hit(bin: number, y: number, offset: number, ts: number): number {
    const v = this.v;
    const o = bin * F;
    let s = v[o + S] - v[o + DECAY] * (this.count - 1 - v[o + LAST]);
    if (s <= 0) {
      s = 0;
      v[o + START_OFFSET] = offset;
      v[o + START_TS] = ts;
      v[o + N] = 0;
      v[o + SUM] = 0;
      v[o + START_COUNT] = this.count;
    }
    s += v[o + LLR];
    v[o + S] = s;
    v[o + LAST] = this.count;
    v[o + N] += 1;
    v[o + SUM] += y;
    return s;
  }

  /** Current value of a bin's statistic (decay applied). */
  value(bin: number): number {
    const o = bin * F;
    return Math.max(0, this.v[o + S] - this.v[o + DECAY] * (this.count - this.v[o + LAST]));
  }

  /** Largest statistic over all bins. */
  max(): number {
    let m = 0;
    for (let b = 0; b < this.level2Base + Math.ceil((this.inner + 2) / 2); b++) m = Math.max(m, this.value(b));
    return m;
  }

  candidate(bin: number): NoveltyCandidate {
    const o = bin * F;
    const n = this.v[o + N];
    const age = this.count - this.v[o + START_COUNT] + 1;
    const level2 = bin >= this.level2Base;
    return {
      mean: this.v[o + SUM] / Math.max(1, n),
      sd: (level2 ? 1 : 0.5) * this.width,
      weight: Math.min(0.5, n / Math.max(1, age)),
      excess: Math.max(0, n / Math.max(1, age) - this.v[o + P]),
      statistic: this.value(bin),
      firstOffset: this.v[o + START_OFFSET],
      firstTs: this.v[o + START_TS],
    };
  }

  clear(bin: number): void {
    this.v[bin * F + S] = 0;
  }

  clearAll(): void {
    for (let b = 0; b * F < this.v.length; b++) this.v[b * F + S] = 0;
  }

  exportState(): { lo: number; width: number; inner: number; count: number; values: number[] } {
    return { lo: this.lo, width: this.width, inner: this.inner, count: this.count, values: Array.from(this.v) };
  }

  importState(s: { lo: number; width: number; inner: number; count: number; values: number[] }): void {
    if (s.values.length !== this.v.length) throw new Error('novelty grid: state has the wrong size');
    this.lo = s.lo;
    this.width = s.width;
    this.inner = s.inner;
    this.level2Base = s.inner + 2;
    this.count = s.count;
    this.v.set(s.values);
  }
}
