/**
 * The fitting step of `modewatch fit`: checks the settings against the data, fits k = kMin..kMax components by
 * batch EM (src/math/batch-em1d.ts for one column, src/math/mv for several), chooses k by BIC (Schwarz 1978;
 * lower is better) and, for one column with `--scale auto`, the scale by the likelihood of the data in its own
 * units (every scale has the same parameter count, so that is also the lowest BIC).
 *
 * The report lists components sorted by the mean of their first dimension, in the data's units.
 */
import { Random } from '../math/random.js';
import { fitMixture1D, inDomain, type BatchFit } from '../math/batch-em1d.js';
import { fitMvMixture, MV_MAX_DIM, type MvFitResult } from '../math/mv/index.js';
import { logJacobian, toModel, type ScaleName } from '../math/scale.js';
import { LOG_SQRT_2PI } from '../math/normal.js';
import { FitInputError, tallySkip, type DataTable, type SkipTally } from './fit-read.js';

export type ScaleChoice = ScaleName | 'auto';

export interface FitSettings {
  kMin: number;
  kMax: number;
  scale: ScaleChoice;
  seed: number;
  restarts: number;
  /**
   * Stop EM when the mean log-likelihood per row changes by less than this. Candidates are compared at
   * max(tolerance, SCREEN_TOLERANCE); the chosen one is then refitted to `tolerance`.
   */
  tolerance: number;
  maxIterations: number;
  skipInvalid: boolean;
  /**
   * One column with more rows than this: k and the scale are chosen on a seeded random sample of this many rows,
   * and only the chosen fit runs on every row (0: screen on all rows).
   */
  screenRows: number;
}

export const FIT_DEFAULTS: FitSettings = {
  kMin: 1,
  kMax: 5,
  scale: 'auto',
  seed: 1,
  restarts: 5,
  tolerance: 1e-8,
  maxIterations: 1000,
  skipInvalid: false,
  screenRows: 20_000,
};

/**
 * Tolerance at which candidate k (and scales) are compared. EM creeps near an optimum, and over-fitted k creep
 * longest: screening at 1e-6 and refining only the winner made `fit` on Old Faithful waiting (scale auto, k 1..5)
 * five times faster than running every candidate to 1e-8 (1.2 s → 0.25 s), with the same chosen fit.
 */
export const SCREEN_TOLERANCE = 1e-6;

/** Largest k accepted; more components than this is not a mixture a person reads. */
export const K_LIMIT = 20;

export interface ComponentReport {
  weight: number;
  /** Per dimension, in the data's units (log scales: the log-normal component's mean). */
  mean: number[];
  /** Per dimension, in the data's units (log scales: the log-normal component's sd). */
  sd: number[];
  /** Full covariance, data units (vectors only). */
  cov?: number[][];
  /** One column: the median (= mean on identity) and half the central 68.27 % interval (= sd on identity). */
  location?: number;
  spread?: number;
  /** Log scales: mean and sd of log(x) (log1p: of log(1 + x)). */
  logMean?: number;
  logSd?: number;
}

export interface Candidate {
  k: number;
  logLikelihood: number;
  bic: number;
}

export interface FitReport {
  file: string;
  format: string;
  columns: string[];
  d: number;
  n: number;
  lines: number;
  blankLines: number;
  skipped: SkipTally;
  scale: ScaleName;
  /** With --scale auto (one column): the best fit on each admissible scale. */
  scaleComparison: { scale: ScaleName; k: number; logLikelihood: number; bic: number }[] | null;
  k: number;
  logLikelihood: number;
  bic: number;
  candidates: Candidate[];
  /** Sorted by the mean of the first dimension. */
  components: ComponentReport[];
  /** Things the user should know that changed what was done (capped k range, scales left out). */
  notes: string[];
  /** Values of the first column (for the histogram). */
  firstColumn: Float64Array;
  /** Density of the first column's marginal in data units: total, and weighted component j (sorted order). */
  marginalPdf: (x: number) => number;
  componentPdf: (j: number, x: number) => number;
}

export interface FitHooks {
  /** Called after each candidate fit: (fitsDone, fitsTotal). */
  onFit?: (done: number, total: number) => void;
}

const DOMAIN_TEXT: Record<ScaleName, string> = { identity: 'any finite number', log: 'x > 0', log1p: 'x > -1' };

export function checkSettings(s: FitSettings): void {
  const intIn = (name: string, v: number, lo: number, hi: number): void => {
    if (!Number.isInteger(v) || v < lo || v > hi) throw new FitInputError(`${name} must be an integer in ${lo}..${hi}, got ${v}`);
  };
  intIn('--k-min', s.kMin, 1, K_LIMIT);
  intIn('--k-max', s.kMax, 1, K_LIMIT);
  if (s.kMax < s.kMin) throw new FitInputError(`k range is empty: --k-min ${s.kMin} is above --k-max ${s.kMax}`);
  intIn('--seed', s.seed, 0, 0xffffffff);
  intIn('--restarts', s.restarts, 1, 1000);
  intIn('--max-iterations', s.maxIterations, 1, 1_000_000);
  intIn('--screen-rows', s.screenRows, 0, 1_000_000_000);
  if (!(s.tolerance > 0) || !Number.isFinite(s.tolerance)) throw new FitInputError(`--tolerance must be a positive number, got ${s.tolerance}`);
}

export function fitTable(table: DataTable, s: FitSettings, hooks: FitHooks = {}): FitReport {
  checkSettings(s);
  const notes: string[] = [];
  const skipped: SkipTally = { total: table.skipped.total, byReason: { ...table.skipped.byReason } };
  if (table.d > MV_MAX_DIM) throw new FitInputError(`at most ${MV_MAX_DIM} columns can be fitted as a vector, got ${table.d}`);
  if (table.d > 1 && s.scale !== 'auto' && s.scale !== 'identity')
    throw new FitInputError(`--scale ${s.scale} applies to a single column; ${table.d} columns are fitted as a vector on the identity scale`);

  let x = table.data;
  let n = table.n;
  // An explicit log scale: every value must lie in its domain (or be skipped and counted with --skip-invalid).
  if (table.d === 1 && (s.scale === 'log' || s.scale === 'log1p')) {
    const scale = s.scale;
    const bad: number[] = [];
    for (let i = 0; i < n; i++) if (!inDomain([x[i]], scale)) bad.push(i);
    if (bad.length > 0) {
      const i0 = bad[0];
      if (!s.skipInvalid) {
        const other = scale === 'log' && x.every((v) => v > -1) ? 'log1p or identity' : 'identity';
        throw new FitInputError(
          `${table.file}, line ${table.lineOf[i0]}: ${table.columns[0]} = ${x[i0]} is outside the ${scale} scale's domain (${DOMAIN_TEXT[scale]}); ` +
            `${bad.length} value${bad.length === 1 ? '' : 's'} in all. Use --scale ${other}, or --skip-invalid to leave them out (counted)`,
        );
      }
      const keep = new Float64Array(n - bad.length);
      let m = 0;
      let b = 0;
      for (let i = 0; i < n; i++) {
        if (b < bad.length && bad[b] === i) {
          tallySkip(skipped, 'out_of_domain', table.lineOf[i], `${table.columns[0]} = ${x[i]}`);
          b++;
          continue;
        }
        keep[m++] = x[i];
      }
      if (m === 0) throw new FitInputError(`${table.file}: every value of ${table.columns[0]} is outside the ${scale} scale's domain (${DOMAIN_TEXT[scale]})`);
      x = keep;
      n = m;
    }
  }

  if (s.kMin > n) throw new FitInputError(`--k-min ${s.kMin} needs at least ${s.kMin} rows; ${table.file} has ${n}`);
  const kMax = Math.min(s.kMax, n);
  if (kMax < s.kMax) notes.push(`k range capped at ${kMax}: there are only ${n} rows`);

  if (table.d === 1) return fitOneColumn(table, x, n, s, kMax, skipped, notes, hooks);
  return fitVector(table, s, kMax, skipped, notes, hooks);
}

function fitOneColumn(
  table: DataTable,
  x: Float64Array,
  n: number,
  s: FitSettings,
  kMax: number,
  skipped: SkipTally,
  notes: string[],
  hooks: FitHooks,
): FitReport {
  let scales: ScaleName[];
  if (s.scale === 'auto') {
    scales = (['identity', 'log', 'log1p'] as const).filter((sc) => inDomain(x, sc));
    const left = (['log', 'log1p'] as const).filter((sc) => !scales.includes(sc));
    if (left.length > 0) notes.push(`scale ${left.join(' and ')} not tried: some values are outside ${left.length > 1 ? 'their domains' : 'its domain'} (${left.map((sc) => DOMAIN_TEXT[sc]).join(', ')})`);
  } else scales = [s.scale];
  const screening = s.screenRows > 0 && n > s.screenRows && s.screenRows >= kMax;
  const xs = screening ? sampleRows(x, s.screenRows, s.seed) : x;
  if (screening) notes.push(`k${s.scale === 'auto' ? ' and the scale were' : ' was'} chosen on a random ${s.screenRows} of the ${n} rows (the candidates table); the chosen fit uses every row (--screen-rows 0 screens on all)`);
  const total = scales.length * (kMax - s.kMin + 1) + (screening ? 1 : 0);
  let done = 0;
  const opts = { seed: s.seed, restarts: s.restarts, tol: Math.max(s.tolerance, SCREEN_TOLERANCE), maxIter: s.maxIterations };
  let chosen: { scale: ScaleName; best: BatchFit; candidates: Candidate[] } | null = null;
  const comparison: NonNullable<FitReport['scaleComparison']> = [];
  for (const scale of scales) {
    let best: BatchFit | null = null;
    const candidates: Candidate[] = [];
    for (let k = s.kMin; k <= kMax; k++) {
      const fit = fitMixture1D(xs, k, scale, opts);
      candidates.push({ k, logLikelihood: fit.logLikelihood, bic: fit.bic });
      if (best === null || fit.bic < best.bic) best = fit;
      hooks.onFit?.(++done, total);
    }
    if (best === null) throw new Error('unreachable: empty k range');
    comparison.push({ scale, k: best.mixture.k, logLikelihood: best.logLikelihood, bic: best.bic });
    if (chosen === null || best.bic < chosen.best.bic) chosen = { scale, best, candidates };
  }
  if (chosen === null) throw new Error('unreachable: no scale');
  if (screening) {
    chosen.best = fitMixture1D(x, chosen.best.mixture.k, chosen.scale, { ...opts, tol: s.tolerance });
    hooks.onFit?.(++done, total);
  } else if (s.tolerance < opts.tol) {
    // Refine the winner; keep whichever of the two is the better optimum.
    const fine = fitMixture1D(x, chosen.best.mixture.k, chosen.scale, { ...opts, tol: s.tolerance });
    if (fine.logLikelihood >= chosen.best.logLikelihood) {
      chosen.best = fine;
      const c = chosen.candidates.find((cc) => cc.k === fine.mixture.k) as Candidate;
      c.logLikelihood = fine.logLikelihood;
      c.bic = fine.bic;
      const sc = comparison.find((cc) => cc.scale === chosen!.scale) as (typeof comparison)[number];
      sc.logLikelihood = fine.logLikelihood;
      sc.bic = fine.bic;
    }
  }
  const m = chosen.best.mixture;
  const scale = chosen.scale;
  const order = Array.from({ length: m.k }, (_, j) => j);
  const comps = order.map((j) => oneColumnComponent(scale, m.weights[j], m.means[j], m.sds[j]));
  order.sort((a, b) => comps[a].mean[0] - comps[b].mean[0]);
  const componentPdf = (j: number, v: number): number => {
    const i = order[j];
    if (scale === 'log' && !(v > 0)) return 0;
    if (scale === 'log1p' && !(v > -1)) return 0;
    const y = toModel(scale, v);
    const z = (y - m.means[i]) / m.sds[i];
    return m.weights[i] * Math.exp(-0.5 * z * z - Math.log(m.sds[i]) - LOG_SQRT_2PI + logJacobian(scale, v));
  };
  return {
    file: table.file,
    format: table.format,
    columns: table.columns,
    d: 1,
    n,
    lines: table.lines,
    blankLines: table.blankLines,
    skipped,
    scale,
    scaleComparison: s.scale === 'auto' ? comparison : null,
    k: m.k,
    logLikelihood: chosen.best.logLikelihood,
    bic: chosen.best.bic,
    candidates: chosen.candidates,
    components: order.map((j) => comps[j]),
    notes,
    firstColumn: x,
    marginalPdf: (v) => m.pdf(v),
    componentPdf,
  };
}

/** A seeded random sample of m values without replacement (partial Fisher–Yates). */
function sampleRows(x: Float64Array, m: number, seed: number): Float64Array {
  const idx = Int32Array.from({ length: x.length }, (_, i) => i);
  const rng = new Random(seed ^ 0x5eed);
  const out = new Float64Array(m);
  for (let i = 0; i < m; i++) {
    const j = i + rng.int(x.length - i);
    const t = idx[i];
    idx[i] = idx[j];
    idx[j] = t;
    out[i] = x[idx[i]];
  }
  return out;
}

/** A one-column component in data units; for log scales the log-normal's mean and sd (Johnson, Kotz & Balakrishnan 1994, ch. 14). */
function oneColumnComponent(scale: ScaleName, weight: number, mu: number, sd: number): ComponentReport {
  if (scale === 'identity') return { weight, mean: [mu], sd: [sd], location: mu, spread: sd };
  const lnMean = Math.exp(mu + 0.5 * sd * sd);
  const lnSd = lnMean * Math.sqrt(Math.expm1(sd * sd));
  const shift = scale === 'log1p' ? 1 : 0;
  const median = scale === 'log' ? Math.exp(mu) : Math.expm1(mu);
  const spread = 0.5 * (Math.exp(mu + sd) - Math.exp(mu - sd));
  return { weight, mean: [lnMean - shift], sd: [lnSd], location: median, spread, logMean: mu, logSd: sd };
}

function fitVector(table: DataTable, s: FitSettings, kMax: number, skipped: SkipTally, notes: string[], hooks: FitHooks): FitReport {
  const { n, d, data } = table;
  const total = kMax - s.kMin + 1;
  let best: MvFitResult | null = null;
  const candidates: Candidate[] = [];
  const opts = { restarts: s.restarts, seed: s.seed, tol: Math.max(s.tolerance, SCREEN_TOLERANCE), maxIterations: s.maxIterations };
  for (let k = s.kMin; k <= kMax; k++) {
    const fit = fitMvMixture(data, n, d, { ...opts, k });
    candidates.push({ k, logLikelihood: fit.logLikelihood, bic: fit.bic });
    if (best === null || fit.bic < best.bic) best = fit;
    hooks.onFit?.(k - s.kMin + 1, total);
  }
  if (best === null) throw new Error('unreachable: empty k range');
  if (s.tolerance < opts.tol) {
    const fine = fitMvMixture(data, n, d, { ...opts, k: best.k, tol: s.tolerance });
    if (fine.logLikelihood >= best.logLikelihood) {
      best = fine;
      const c = candidates.find((cc) => cc.k === fine.k) as Candidate;
      c.logLikelihood = fine.logLikelihood;
      c.bic = fine.bic;
    }
  }
  const m = best.mixture;
  const comps: ComponentReport[] = [];
  for (let j = 0; j < m.k; j++) {
    const mean = Array.from(m.meanOf(j));
    const covFlat = m.covarianceOf(j);
    const cov: number[][] = [];
    for (let a = 0; a < d; a++) cov.push(Array.from(covFlat.subarray(a * d, (a + 1) * d)));
    const sd = mean.map((_, i) => m.sdOf(j, i));
    comps.push({ weight: m.weights[j], mean, sd, cov });
  }
  const order = comps.map((_, j) => j).sort((a, b) => comps[a].mean[0] - comps[b].mean[0]);
  const sorted = order.map((j) => comps[j]);
  const firstColumn = new Float64Array(n);
  for (let i = 0; i < n; i++) firstColumn[i] = data[i * d];
  // The marginal of a Gaussian mixture in one coordinate is the mixture of the components' marginals.
  const componentPdf = (j: number, v: number): number => {
    const c = sorted[j];
    const z = (v - c.mean[0]) / c.sd[0];
    return c.weight * Math.exp(-0.5 * z * z - Math.log(c.sd[0]) - LOG_SQRT_2PI);
  };
  return {
    file: table.file,
    format: table.format,
    columns: table.columns,
    d,
    n,
    lines: table.lines,
    blankLines: table.blankLines,
    skipped,
    scale: 'identity',
    scaleComparison: null,
    k: m.k,
    logLikelihood: best.logLikelihood,
    bic: best.bic,
    candidates,
    components: sorted,
    notes,
    firstColumn,
    marginalPdf: (v) => {
      let p = 0;
      for (let j = 0; j < sorted.length; j++) p += componentPdf(j, v);
      return p;
    },
    componentPdf,
  };
}
