/**
 * How `modewatch fit` shows its result: a table for people, one JSON object for programs, an SVG picture.
 */
import { renderMixtureSvg, type MixtureCurve } from '../report/mixture-svg.js';
import { SKIP_REASON_TEXT, type SkipReason } from './fit-read.js';
import type { FitReport } from './fit-model.js';

/** The --json document (documented in the command's --help). */
export interface FitJson {
  k: number;
  scale: string;
  logLikelihood: number;
  bic: number;
  components: {
    weight: number;
    mean: number | number[];
    sd: number | number[];
    cov?: number[][];
    location?: number;
    spread?: number;
    logMean?: number;
    logSd?: number;
  }[];
  candidates: { k: number; logLikelihood: number; bic: number }[];
  columns: string[];
  n: number;
  skipped: { total: number; byReason: Record<string, { count: number; firstLine: number }> };
  scaleComparison?: { scale: string; k: number; logLikelihood: number; bic: number }[];
  notes: string[];
}

export function fitJson(r: FitReport): FitJson {
  const byReason: FitJson['skipped']['byReason'] = {};
  for (const [reason, v] of Object.entries(r.skipped.byReason)) if (v !== undefined) byReason[reason] = { count: v.count, firstLine: v.firstLine };
  const doc: FitJson = {
    k: r.k,
    scale: r.scale,
    logLikelihood: r.logLikelihood,
    bic: r.bic,
    components: r.components.map((c) => {
      if (r.d === 1) {
        const o: FitJson['components'][number] = { weight: c.weight, mean: c.mean[0], sd: c.sd[0], location: c.location, spread: c.spread };
        if (c.logMean !== undefined) {
          o.logMean = c.logMean;
          o.logSd = c.logSd;
        }
        return o;
      }
      return { weight: c.weight, mean: c.mean, sd: c.sd, cov: c.cov };
    }),
    candidates: r.candidates.map((c) => ({ k: c.k, logLikelihood: c.logLikelihood, bic: c.bic })),
    columns: r.columns,
    n: r.n,
    skipped: { total: r.skipped.total, byReason },
    notes: r.notes,
  };
  if (r.scaleComparison !== null) doc.scaleComparison = r.scaleComparison;
  return doc;
}

/** Significant digits that keep small differences (BIC 2096.1 vs 2101.3) visible without noise. */
function num(v: number, digits = 5): string {
  if (!Number.isFinite(v)) return String(v);
  const a = Math.abs(v);
  if (a !== 0 && (a >= 1e7 || a < 1e-3)) return v.toExponential(3);
  const decimals = a === 0 ? 0 : Math.max(0, Math.min(6, digits - 1 - Math.floor(Math.log10(a))));
  return v.toFixed(decimals);
}

function table(rows: string[][], rightAlign: boolean[]): string[] {
  const widths = rows[0].map((_, c) => Math.max(...rows.map((r) => (r[c] ?? '').length)));
  return rows.map((r) =>
    r
      .map((cell, c) => (rightAlign[c] ? cell.padStart(widths[c]) : cell.padEnd(widths[c])))
      .join('  ')
      .trimEnd(),
  );
}

export function fitText(r: FitReport, plotFile?: string): string {
  const L: string[] = [];
  const what = r.d === 1 ? r.columns[0] : `(${r.columns.join(', ')}) as a ${r.d}-dimensional vector`;
  L.push(`Mixture fit of ${what} in ${r.file}`);
  const counted = [`${r.n} rows used`, `${r.lines} lines read`];
  if (r.format === 'csv') counted.push('1 header');
  if (r.blankLines > 0) counted.push(`${r.blankLines} blank`);
  counted.push(`${r.skipped.total} skipped`);
  L.push(counted.join(', '));
  for (const [reason, v] of Object.entries(r.skipped.byReason)) {
    if (v === undefined) continue;
    L.push(`  skipped, ${SKIP_REASON_TEXT[reason as SkipReason]}: ${v.count} (first on line ${v.firstLine}: ${v.example})`);
  }
  const scaleWords: Record<string, string> = {
    identity: 'identity (Gaussian components on x)',
    log: 'log (log-normal components: Gaussian on log x)',
    log1p: 'log1p (Gaussian components on log(1 + x))',
  };
  L.push(`Scale: ${scaleWords[r.scale]}${r.scaleComparison !== null ? ', chosen by likelihood in the data\'s units' : ''}`);
  if (r.scaleComparison !== null && r.scaleComparison.length > 1) {
    for (const s of r.scaleComparison)
      L.push(`  ${s.scale === r.scale ? '*' : ' '} ${s.scale.padEnd(8)}  best k = ${s.k}  log-likelihood ${num(s.logLikelihood, 6)}  BIC ${num(s.bic, 6)}`);
  }
  for (const note of r.notes) L.push(`Note: ${note}`);
  L.push('');
  L.push('Components tried (BIC = -2 log-likelihood + parameters × ln n; lower BIC is better):');
  const cand = [['', 'k', 'log-likelihood', 'BIC', '']];
  for (const c of r.candidates) cand.push([c.k === r.k ? '*' : '', String(c.k), num(c.logLikelihood, 6), num(c.bic, 6), c.k === r.k ? '<- chosen' : '']);
  L.push(...table(cand, [false, true, true, true, false]).map((s) => '  ' + s));
  L.push('');
  L.push(`Chosen: ${r.k} component${r.k === 1 ? '' : 's'}, sorted by ${r.d === 1 ? 'mean' : `mean of ${r.columns[0]}`}`);
  let rows: string[][];
  let right: boolean[];
  if (r.d === 1 && r.scale === 'identity') {
    rows = [['#', 'weight', 'location (mean)', 'spread (sd)']];
    r.components.forEach((c, i) => rows.push([String(i + 1), c.weight.toFixed(4), num(c.mean[0]), num(c.sd[0])]));
    right = [true, true, true, true];
  } else if (r.d === 1) {
    rows = [['#', 'weight', 'location (median)', 'mean', 'sd', 'spread (68% half-width)']];
    r.components.forEach((c, i) =>
      rows.push([String(i + 1), c.weight.toFixed(4), num(c.location as number), num(c.mean[0]), num(c.sd[0]), num(c.spread as number)]),
    );
    right = [true, true, true, true, true, true];
  } else {
    rows = [['#', 'weight', ...r.columns.flatMap((name) => [`${name} mean`, `${name} sd`])]];
    r.components.forEach((c, i) => rows.push([String(i + 1), c.weight.toFixed(4), ...c.mean.flatMap((m, a) => [num(m), num(c.sd[a])])]));
    right = rows[0].map(() => true);
  }
  L.push(...table(rows, right).map((s) => '  ' + s));
  if (r.d > 1) {
    L.push('  (full covariances: --json)');
  }
  L.push(`Log-likelihood ${num(r.logLikelihood, 6)}, BIC ${num(r.bic, 6)}, n = ${r.n}`);
  if (plotFile !== undefined) L.push(`Plot written to ${plotFile}`);
  return L.join('\n') + '\n';
}

/** The --plot picture: the first column's histogram with the fitted (marginal) density and its weighted components. */
export function fitSvg(r: FitReport): string {
  const positive = r.firstColumn.every((v) => v > 0);
  const logX = (r.scale === 'log' || r.scale === 'log1p') && positive;
  const curves: MixtureCurve[] = [{ label: `mixture, ${r.k} component${r.k === 1 ? '' : 's'}`, role: 'total', fn: r.marginalPdf }];
  r.components.forEach((c, j) => {
    const loc = r.d === 1 ? (c.location as number) : c.mean[0];
    curves.push({
      label: `${j + 1}: weight ${c.weight.toFixed(3)}, ${r.d === 1 && r.scale !== 'identity' ? 'median' : 'location'} ${num(loc, 4)}`,
      role: 'component',
      fn: (x) => r.componentPdf(j, x),
    });
  });
  const name = r.columns[0];
  const marginal = r.d > 1 ? ` (marginal of ${r.columns.join(', ')})` : '';
  return renderMixtureSvg({
    title: `${name}: ${r.k}-component mixture${marginal}`,
    subtitle: `${r.file}, n = ${r.n}, scale ${r.scale}, BIC ${num(r.bic, 6)} (lower is better)`,
    xLabel: name,
    values: r.firstColumn,
    curves,
    logX,
  });
}
