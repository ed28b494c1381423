/**
 * Banks of one-sided CUSUM statistics (Page 1954), S <- max(0, S + x), each remembering where its current
 * excursion began: the last time it left its floor is the natural estimate of when the change started, and is
 * reported as the first evidence. Stored flat: no allocation.
 *
 * Two forms of the same recursion:
 *  - ScoreCusums adds any score x (the fit statistic's standardised surprise);
 *  - RatioCusums takes the event's likelihood ratio Λ of an alternative against the reference, x = ln Λ, and
 *    keeps R = e^S: R <- max(1, R·Λ). Since ln is increasing this is the same statistic, without a logarithm
 *    per statistic per event (in V8 the five logarithms of a component cost a third of a stream monitor's time,
 *    measured). With the llr of a fixed alternative the mean run length to a false alarm is at least e^h for
 *    threshold h (Lorden 1971), so thresholds stay in log units and the hot path compares against e^h.
 */
const S = 0;
const START_OFFSET = 1;
const START_TS = 2;
const STRIDE = 3;

abstract class CusumStore {
  readonly size: number;
  protected readonly v: Float64Array;
  /** The statistic's floor in its stored form: 0 for S, 1 for R = e^S. */
  protected readonly floor: number;

  constructor(size: number, floor: number) {
    this.size = size;
    this.floor = floor;
    this.v = new Float64Array(size * STRIDE);
    this.resetAll();
  }

  startOffset(i: number): number {
    return this.v[i * STRIDE + START_OFFSET];
  }
  startTs(i: number): number {
    return this.v[i * STRIDE + START_TS];
  }
  reset(i: number): void {
    this.v[i * STRIDE + S] = this.floor;
  }
  resetAll(): void {
    this.v.fill(0);
    for (let i = 0; i < this.size; i++) this.v[i * STRIDE + S] = this.floor;
  }
  /** The stored form, three numbers per statistic: value (S, or R for ratios), start offset, start time. */
  exportState(): number[] {
    return Array.from(this.v);
  }
  importState(values: readonly number[]): void {
    if (values.length !== this.v.length) throw new Error(`cusum bank: expected ${this.v.length} values, got ${values.length}`);
    this.v.set(values);
  }
}

/** CUSUMs of arbitrary scores: S <- max(0, S + x). */
export class ScoreCusums extends CusumStore {
  constructor(size: number) {
    super(size, 0);
  }

  /** Add one score to statistic i; returns the new value. */
  step(i: number, x: number, offset: number, ts: number): number {
    const o = i * STRIDE;
    const prev = this.v[o + S];
    let s = prev + x;
    if (!(s > 0)) s = 0;
    else if (prev === 0) {
      this.v[o + START_OFFSET] = offset;
      this.v[o + START_TS] = ts;
    }
    this.v[o + S] = s;
    return s;
  }

  value(i: number): number {
    return this.v[i * STRIDE + S];
  }
}

/** CUSUMs of log-likelihood ratios, kept as R = e^S (see above). Values read out are S, in nats. */
export class RatioCusums extends CusumStore {
  constructor(size: number) {
    super(size, 1);
  }

  /** Multiply statistic i by one event's likelihood ratio; returns the new R = e^S. */
  step(i: number, ratio: number, offset: number, ts: number): number {
    const o = i * STRIDE;
    const prev = this.v[o + S];
    let r = prev * ratio;
    if (!(r > 1)) r = 1;
    else if (prev === 1) {
      this.v[o + START_OFFSET] = offset;
      this.v[o + START_TS] = ts;
    }
    this.v[o + S] = r;
    return r;
  }

  /** S = ln R, in nats. */
  value(i: number): number {
    return Math.log(this.v[i * STRIDE + S]);
  }
  /** Keep a statistic from growing without bound while its alert is active (maxRatio = e^max), so it can come back down. */
  capRatio(i: number, maxRatio: number): void {
    const o = i * STRIDE;
    if (this.v[o + S] > maxRatio) this.v[o + S] = maxRatio;
  }
  /** The largest S in the bank. */
  max(): number {
    let m = 1;
    for (let i = 0; i < this.size; i++) if (this.v[i * STRIDE] > m) m = this.v[i * STRIDE];
    return Math.log(m);
  }

  /** A bank saved as S (monitor state version 1) in the stored form R = e^S. */
  static fromSavedLogs(values: readonly number[]): number[] {
    return values.map((x, n) => (n % STRIDE === S ? Math.exp(x) : x));
  }
}
