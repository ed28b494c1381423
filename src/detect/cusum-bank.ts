/**
 * A bank of one-sided CUSUM statistics (Page 1954) on log-likelihood ratios,
 * S <- max(0, S + llr), each remembering where its current excursion began: the last time it
 * left zero is the natural estimate of when the change started, and is reported as the first
 * evidence. With the llr of a fixed alternative against the reference, the mean run length to
 * a false alarm is at least e^h for threshold h (Lorden 1971). Stored flat: no allocation.
 */
const S = 0;
const START_OFFSET = 1;
const START_TS = 2;
const STRIDE = 3;

export class CusumBank {
  readonly size: number;
  private readonly v: Float64Array;

  constructor(size: number) {
    this.size = size;
    this.v = new Float64Array(size * STRIDE);
  }

  /** Add one llr to statistic i; returns the new value. */
  step(i: number, llr: number, offset: number, ts: number): number {
    const o = i * STRIDE;
    const prev = this.v[o + S];
    let s = prev + llr;
    if (s <= 0) s = 0;
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
  startOffset(i: number): number {
    return this.v[i * STRIDE + START_OFFSET];
  }
  startTs(i: number): number {
    return this.v[i * STRIDE + START_TS];
  }
  /** Keep a statistic from growing without bound while its alert is active, so it can come back down. */
  cap(i: number, max: number): void {
    const o = i * STRIDE;
    if (this.v[o + S] > max) this.v[o + S] = max;
  }
  reset(i: number): void {
    this.v[i * STRIDE + S] = 0;
  }
  resetAll(): void {
    this.v.fill(0);
  }
  max(): number {
    let m = 0;
    for (let i = 0; i < this.size; i++) if (this.v[i * STRIDE] > m) m = this.v[i * STRIDE];
    return m;
  }
  exportState(): number[] {
    return Array.from(this.v);
  }
  importState(values: readonly number[]): void {
    if (values.length !== this.v.length) throw new Error(`cusum bank: expected ${this.v.length} values, got ${values.length}`);
    this.v.set(values);
  }
}
