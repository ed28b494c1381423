/**
 * A fitted mixture drawn over the data's histogram, as a standalone SVG document (a string; no I/O, no DOM).
 * Used by `modewatch fit --plot` and meant for the stream page as well.
 *
 * @example
 * renderMixtureSvg({
 *   title: 'waiting: 2 components', xLabel: 'waiting',
 *   values: waiting,                                   // or histogram: { edges, counts }
 *   curves: [
 *     { label: 'mixture', role: 'total', fn: (x) => mixture.pdf(x) },
 *     { label: 'component 1: weight 0.36, location 54.6', fn: (x) => 0.36 * normalPdf(x, 54.6, 5.9) },
 *   ],
 * });
 *
 * Conventions (what a caller must know):
 * - Curves are densities per unit of x, each component already multiplied by its weight, so that they add up to
 *   the total. Give a function (`fn`, sampled at `samples` points over the x range) or `points` [x, density].
 * - Bars are drawn as densities too: count / (N · bin width), N = the histogram's total count (plus values the
 *   axis cannot show), so bars and curves share one y axis.
 * - `logX`: the x axis is log10. Bars are then equal in log10(x) and everything is shown as density per decade
 *   (per unit of log10 x) — f(x)·x·ln 10 for a curve — so areas still read as probabilities. Values ≤ 0 cannot
 *   be placed and are counted in `data-hidden` and in a note under the plot.
 * - Machine-readable hooks for tests and the web page: the root has data-n (histogram total) and data-hidden;
 *   each bar is a <rect class="bar" data-count data-lo data-hi>; each curve is exactly one
 *   <path class="curve" data-role="total|component" data-label>; nothing else in the document is a <path>.
 *
 * Colours: the Okabe–Ito palette (Okabe & Ito 2008, "Color Universal Design"), distinguishable with the common
 * colour-vision deficiencies; components are dashed (patterns change after six colours) over the solid black total.
 */
import { linearTicks, logTicks, tickLabel } from './axis.js';
import { histogramOf, type Histogram } from './histogram.js';

export type { Histogram } from './histogram.js';

export interface MixtureCurve {
  label: string;
  /** 'total' is drawn thick and black; 'component' (default) thinner, in colour. */
  role?: 'total' | 'component';
  fn?: (x: number) => number;
  points?: ReadonlyArray<readonly [number, number]>;
}

export interface MixtureSvgOptions {
  title: string;
  /** Words for the x axis: the column name (and unit, if known). */
  xLabel: string;
  /** Default "density" ("density per decade of x" on a log axis). */
  yLabel?: string;
  /** A second, smaller line under the title. */
  subtitle?: string;
  /** Raw values: a histogram is built from them (Freedman–Diaconis bins). Ignored when `histogram` is given. */
  values?: ArrayLike<number>;
  histogram?: Histogram;
  /** Number of bins when built from `values`. */
  bins?: number;
  curves: readonly MixtureCurve[];
  logX?: boolean;
  /** Data range to show; default the histogram's edges (or the points' x range). Required when there is neither. */
  xRange?: readonly [number, number];
  width?: number;
  height?: number;
  /** Points per function curve. Default 400. */
  samples?: number;
}

/** Okabe–Ito: black for the total, then orange, sky blue, bluish green, blue, vermillion, reddish purple
 * (yellow #F0E442 left out: too faint on white). */
export const OKABE_ITO = {
  black: '#000000',
  orange: '#E69F00',
  skyBlue: '#56B4E9',
  bluishGreen: '#009E73',
  yellow: '#F0E442',
  blue: '#0072B2',
  vermillion: '#D55E00',
  reddishPurple: '#CC79A7',
} as const;
const COMPONENT_COLOURS = [OKABE_ITO.orange, OKABE_ITO.skyBlue, OKABE_ITO.bluishGreen, OKABE_ITO.blue, OKABE_ITO.vermillion, OKABE_ITO.reddishPurple];
const DASHES = ['7 4', '2 3', '10 3 2 3', '4 4'];
const BAR_FILL = '#D9D9D9';
const INK = '#333333';

export function escapeXml(s: string): string {
  return s.replace(/[&<>"']/g, (c) => ({ '&': '&amp;', '<': '&lt;', '>': '&gt;', '"': '&quot;', "'": '&#39;' })[c] as string);
}

/** Coordinates with 2 decimals: plenty on screen, short files. */
function f(v: number): string {
  return (Math.round(v * 100) / 100).toString();
}

export function renderMixtureSvg(o: MixtureSvgOptions): string {
  const width = o.width ?? 760;
  const height = o.height ?? 440;
  const logX = o.logX === true;
  const samples = Math.max(16, Math.floor(o.samples ?? 400));

  // Histogram and the total count the bar densities are relative to.
  let hist: { edges: ArrayLike<number>; counts: ArrayLike<number> } | null = null;
  let hidden = 0;
  if (o.histogram !== undefined) {
    if (o.histogram.edges.length !== o.histogram.counts.length + 1) throw new RangeError('histogram: edges must have one more entry than counts');
    hist = o.histogram;
  } else if (o.values !== undefined && o.values.length > 0) {
    const h = histogramOf(o.values, { bins: o.bins, logX });
    hist = h;
    hidden = h.hidden;
  }
  let histTotal = 0;
  if (hist !== null) for (let i = 0; i < hist.counts.length; i++) histTotal += hist.counts[i];
  const densityTotal = histTotal + hidden;

  // x range.
  let x0 = Infinity;
  let x1 = -Infinity;
  if (o.xRange !== undefined) [x0, x1] = o.xRange;
  else {
    if (hist !== null && hist.edges.length > 1) {
      x0 = hist.edges[0];
      x1 = hist.edges[hist.edges.length - 1];
    }
    for (const c of o.curves) for (const [px] of c.points ?? []) if (Number.isFinite(px) && (!logX || px > 0)) ((x0 = Math.min(x0, px)), (x1 = Math.max(x1, px)));
    // A margin of 5 % each side, so that the curves' tails beyond the outermost values show.
    if (x1 > x0 && Number.isFinite(x0) && Number.isFinite(x1)) {
      if (logX && x0 > 0) {
        const m = (Math.log10(x1) - Math.log10(x0)) * 0.05;
        x0 = 10 ** (Math.log10(x0) - m);
        x1 = 10 ** (Math.log10(x1) + m);
      } else if (!logX) {
        const m = (x1 - x0) * 0.05;
        x0 -= m;
        x1 += m;
      }
    }
  }
  if (!(x1 > x0) || !Number.isFinite(x0) || !Number.isFinite(x1)) {
    const mid = Number.isFinite(x0) ? x0 : logX ? 1 : 0;
    x0 = logX ? mid / 2 : mid - 1;
    x1 = logX ? mid * 2 : mid + 1;
  }
  if (logX && !(x0 > 0)) throw new RangeError('a log x axis needs a positive range');
  const tx = (x: number): number => (logX ? Math.log10(x) : x);
  const t0 = tx(x0);
  const t1 = tx(x1);
  // What is drawn on the y axis for a density f at x.
  const yOf = (x: number, density: number): number => (logX ? density * x * Math.LN10 : density);

  // Curves as (x, y) arrays.
  const curveData = o.curves.map((c) => {
    const pts: [number, number][] = [];
    if (c.points !== undefined) {
      for (const [px, py] of c.points) if (px >= x0 && px <= x1) pts.push([px, yOf(px, py)]);
    } else if (c.fn !== undefined) {
      for (let i = 0; i < samples; i++) {
        const t = t0 + ((t1 - t0) * i) / (samples - 1);
        const x = logX ? 10 ** t : t;
        pts.push([x, yOf(x, c.fn(x))]);
      }
    }
    return { curve: c, pts };
  });

  // Bars as densities.
  const bars: { lo: number; hi: number; count: number; y: number }[] = [];
  if (hist !== null && densityTotal > 0) {
    for (let i = 0; i < hist.counts.length; i++) {
      const lo = hist.edges[i];
      const hi = hist.edges[i + 1];
      const w = tx(hi) - tx(lo);
      const count = hist.counts[i];
      if (count > 0 && w > 0) bars.push({ lo, hi, count, y: count / (densityTotal * w) });
    }
  }

  let yMax = 0;
  for (const b of bars) yMax = Math.max(yMax, b.y);
  for (const { pts } of curveData) for (const [, y] of pts) if (Number.isFinite(y)) yMax = Math.max(yMax, y);
  if (!(yMax > 0)) yMax = 1;
  const yTicks = linearTicks(0, yMax * 1.08, 5);
  const yTop = Math.max(yMax * 1.08, yTicks[yTicks.length - 1] ?? 0);

  // Layout: title, plot box, axis labels, legend box to the right of the plot (it never hides the data).
  const legendItems = (hist !== null ? 1 : 0) + o.curves.length;
  const legendWidth = Math.min(300, Math.max(170, 7 * Math.max(...o.curves.map((c) => c.label.length), 20) + 36));
  const left = 72;
  const right = legendWidth + 28;
  const top = o.subtitle !== undefined ? 64 : 48;
  const bottom = 58 + (hidden > 0 ? 16 : 0);
  const pw = Math.max(120, width - left - right);
  const ph = Math.max(100, height - top - bottom);
  const sx = (x: number): number => left + ((tx(x) - t0) / (t1 - t0)) * pw;
  const sy = (y: number): number => top + ph - (Math.max(0, Math.min(y, yTop)) / yTop) * ph;

  const out: string[] = [];
  out.push(
    `<svg xmlns="http://www.w3.org/2000/svg" width="${width}" height="${height}" viewBox="0 0 ${width} ${height}" role="img" ` +
      `font-family="system-ui, -apple-system, 'Segoe UI', Helvetica, Arial, sans-serif" font-size="12" ` +
      `data-n="${histTotal}" data-hidden="${hidden}" data-log-x="${logX}">`,
  );
  out.push(`<title>${escapeXml(o.title)}</title>`);
  out.push(`<rect x="0" y="0" width="${width}" height="${height}" fill="#FFFFFF"/>`);
  out.push(`<text x="${left}" y="24" font-size="16" font-weight="600" fill="${INK}">${escapeXml(o.title)}</text>`);
  if (o.subtitle !== undefined) out.push(`<text x="${left}" y="44" fill="#555555">${escapeXml(o.subtitle)}</text>`);

  // Grid and ticks.
  out.push('<g class="grid" stroke="#EEEEEE" stroke-width="1">');
  for (const v of yTicks) out.push(`<line x1="${left}" x2="${f(left + pw)}" y1="${f(sy(v))}" y2="${f(sy(v))}"/>`);
  out.push('</g>');

  out.push(`<g class="bars" fill="${BAR_FILL}" stroke="#FFFFFF" stroke-width="0.5">`);
  for (const b of bars) {
    const xa = sx(Math.max(b.lo, x0));
    const xb = sx(Math.min(b.hi, x1));
    if (!(xb > xa)) continue;
    out.push(
      `<rect class="bar" x="${f(xa)}" y="${f(sy(b.y))}" width="${f(xb - xa)}" height="${f(top + ph - sy(b.y))}" ` +
        `data-count="${b.count}" data-lo="${b.lo}" data-hi="${b.hi}"/>`,
    );
  }
  out.push('</g>');

  let ci = 0;
  const styles = curveData.map(({ curve }) => {
    if (curve.role === 'total') return { colour: OKABE_ITO.black, widthPx: 2.5, dash: '' };
    const s = { colour: COMPONENT_COLOURS[ci % COMPONENT_COLOURS.length], widthPx: 2, dash: DASHES[Math.floor(ci / COMPONENT_COLOURS.length) % DASHES.length] };
    ci++;
    return s;
  });
  // The total first, components on top: where one component carries the whole density the two curves coincide,
  // and a dashed colour line over the black one keeps both visible.
  const drawOrder = curveData.map((_, i) => i).sort((a, b) => Number(curveData[b].curve.role === 'total') - Number(curveData[a].curve.role === 'total'));
  out.push('<g class="curves" fill="none" stroke-linejoin="round" stroke-linecap="round">');
  for (const i of drawOrder) {
    const { curve, pts } = curveData[i];
    const st = styles[i];
    let d = '';
    let pen = false;
    for (const [x, y] of pts) {
      if (!Number.isFinite(y) || !Number.isFinite(x) || (logX && !(x > 0))) {
        pen = false;
        continue;
      }
      d += `${pen ? 'L' : 'M'}${f(sx(x))} ${f(sy(y))}`;
      pen = true;
    }
    out.push(
      `<path class="curve" data-role="${curve.role ?? 'component'}" data-label="${escapeXml(curve.label)}" d="${d === '' ? `M${left} ${f(top + ph)}` : d}" ` +
        `stroke="${st.colour}" stroke-width="${st.widthPx}"${st.dash !== '' ? ` stroke-dasharray="${st.dash}"` : ''}/>`,
    );
  }
  out.push('</g>');

  // Axes.
  const xTicks = logX ? logTicks(x0, x1) : linearTicks(x0, x1, 7);
  out.push(`<g class="axes" stroke="${INK}" stroke-width="1" fill="none">`);
  out.push(`<line x1="${left}" y1="${f(top + ph)}" x2="${f(left + pw)}" y2="${f(top + ph)}"/>`);
  out.push(`<line x1="${left}" y1="${top}" x2="${left}" y2="${f(top + ph)}"/>`);
  for (const v of xTicks) out.push(`<line x1="${f(sx(v))}" x2="${f(sx(v))}" y1="${f(top + ph)}" y2="${f(top + ph + 5)}"/>`);
  for (const v of yTicks) out.push(`<line x1="${left - 5}" x2="${left}" y1="${f(sy(v))}" y2="${f(sy(v))}"/>`);
  out.push('</g>');
  out.push(`<g class="tick-labels" fill="${INK}">`);
  for (const v of xTicks) out.push(`<text x="${f(sx(v))}" y="${f(top + ph + 18)}" text-anchor="middle">${escapeXml(tickLabel(v))}</text>`);
  for (const v of yTicks) out.push(`<text x="${left - 8}" y="${f(sy(v) + 4)}" text-anchor="end">${escapeXml(tickLabel(v))}</text>`);
  out.push('</g>');
  const xLabel = logX ? `${o.xLabel} (log scale)` : o.xLabel;
  const yLabel = o.yLabel ?? (logX ? `density per decade of ${o.xLabel}` : 'density');
  out.push(`<text class="axis-label" x="${f(left + pw / 2)}" y="${f(top + ph + 40)}" text-anchor="middle" font-size="13" fill="${INK}">${escapeXml(xLabel)}</text>`);
  out.push(
    `<text class="axis-label" x="18" y="${f(top + ph / 2)}" text-anchor="middle" font-size="13" fill="${INK}" transform="rotate(-90 18 ${f(top + ph / 2)})">${escapeXml(yLabel)}</text>`,
  );
  if (hidden > 0)
    out.push(`<text x="${left}" y="${f(height - 8)}" fill="#555555">${hidden} value${hidden === 1 ? '' : 's'} not shown (≤ 0 or not finite on this axis)</text>`);

  // Legend.
  const lx = left + pw + 20;
  const ly = top;
  const rowH = 20;
  out.push(`<g class="legend" transform="translate(${f(lx)} ${ly})">`);
  out.push(`<rect x="0" y="0" width="${legendWidth}" height="${legendItems * rowH + 12}" fill="#FFFFFF" stroke="#CCCCCC"/>`);
  let row = 0;
  if (hist !== null) {
    const y = 6 + row * rowH;
    out.push(`<rect x="10" y="${y + 4}" width="22" height="10" fill="${BAR_FILL}"/>`);
    out.push(`<text x="40" y="${y + 13}" fill="${INK}">data (n = ${histTotal + hidden})</text>`);
    row++;
  }
  for (let i = 0; i < curveData.length; i++) {
    const y = 6 + row * rowH;
    const st = styles[i];
    out.push(
      `<line x1="10" x2="32" y1="${y + 9}" y2="${y + 9}" stroke="${st.colour}" stroke-width="${st.widthPx}"${st.dash !== '' ? ` stroke-dasharray="${st.dash}"` : ''}/>`,
    );
    out.push(`<text x="40" y="${y + 13}" fill="${INK}">${escapeXml(curveData[i].curve.label)}</text>`);
    row++;
  }
  out.push('</g>');
  out.push('</svg>');
  return out.join('\n') + '\n';
}
