/**
 * Histograms for the reports. Bin count: the larger of the Freedman–Diaconis rule (width 2·IQR·n^(-1/3);
 * Freedman & Diaconis 1981) and Sturges' rule (log2 n + 1), as numpy's "auto" bins do, bounded to 10..80 bins
 * so that two modes show as two humps and the picture stays readable.
 * On a log axis the bins are equal in log10(x).
 */

export interface Histogram {
  /** Bin edges, ascending; bin i is [edges[i], edges[i+1]) and the last bin is closed on the right. */
  edges: ArrayLike<number>;
  counts: ArrayLike<number>;
}

export interface HistogramResult extends Histogram {
  edges: Float64Array;
  counts: Float64Array;
  /** Values that could not be placed: not finite, or ≤ 0 on a log axis. */
  hidden: number;
}

const MIN_BINS = 10;
const MAX_BINS = 80;

export function histogramOf(values: ArrayLike<number>, options: { bins?: number; logX?: boolean } = {}): HistogramResult {
  const logX = options.logX === true;
  const t: number[] = [];
  let hidden = 0;
  for (let i = 0; i < values.length; i++) {
    const v = values[i];
    if (!Number.isFinite(v) || (logX && !(v > 0))) hidden++;
    else t.push(logX ? Math.log10(v) : v);
  }
  if (t.length === 0) return { edges: new Float64Array(0), counts: new Float64Array(0), hidden };
  t.sort((a, b) => a - b);
  let lo = t[0];
  let hi = t[t.length - 1];
  if (hi === lo) {
    const pad = lo === 0 ? 0.5 : Math.abs(lo) * 0.05;
    lo -= pad;
    hi += pad;
  }
  let bins = options.bins;
  if (bins === undefined || !(bins >= 1)) {
    const q = (p: number): number => t[Math.min(t.length - 1, Math.floor(p * (t.length - 1)))];
    const iqr = q(0.75) - q(0.25);
    const sturges = Math.ceil(Math.log2(t.length)) + 1;
    bins = iqr > 0 ? Math.max(sturges, Math.ceil((hi - lo) / (2 * iqr * t.length ** (-1 / 3)))) : sturges;
    bins = Math.min(MAX_BINS, Math.max(MIN_BINS, bins));
  }
  bins = Math.floor(bins);
  const width = (hi - lo) / bins;
  const edges = new Float64Array(bins + 1);
  for (let i = 0; i <= bins; i++) edges[i] = logX ? 10 ** (lo + i * width) : lo + i * width;
  const counts = new Float64Array(bins);
  for (const v of t) {
    let b = Math.floor((v - lo) / width);
    if (b >= bins) b = bins - 1;
    if (b < 0) b = 0;
    counts[b]++;
  }
  return { edges, counts, hidden };
}
