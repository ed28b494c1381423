/**
 * Axis helpers for the SVG reports: "nice" tick values (steps of 1, 2 or 5 times a power of ten, common practice)
 * on linear axes, decades (and 2, 5 within them when the range is short) on log axes, and short tick labels.
 */

/** Tick values covering [lo, hi] with about `target` steps of 1, 2 or 5 × 10^e. */
export function linearTicks(lo: number, hi: number, target = 6): number[] {
  if (!(hi > lo) || !Number.isFinite(lo) || !Number.isFinite(hi)) return Number.isFinite(lo) ? [lo] : [];
  const raw = (hi - lo) / Math.max(1, target);
  const mag = 10 ** Math.floor(Math.log10(raw));
  const norm = raw / mag;
  const step = (norm < 1.5 ? 1 : norm < 3 ? 2 : norm < 7 ? 5 : 10) * mag;
  const out: number[] = [];
  const first = Math.ceil(lo / step - 1e-9);
  for (let i = first; i * step <= hi + step * 1e-9 && out.length < 100; i++) out.push(cleanFloat(i * step));
  return out;
}

/** Ticks on a log10 axis over [lo, hi] (both > 0). */
export function logTicks(lo: number, hi: number): number[] {
  if (!(lo > 0) || !(hi > lo)) return lo > 0 ? [lo] : [];
  // Less than a decade: evenly spaced round numbers read better than 1-2-5 marks that may not occur at all.
  if (hi / lo < 10) return linearTicks(lo, hi, 6).filter((v) => v > 0);
  const e0 = Math.floor(Math.log10(lo));
  const e1 = Math.ceil(Math.log10(hi));
  const decades = Math.log10(hi) - Math.log10(lo);
  const mults = decades < 3.5 ? [1, 2, 5] : [1];
  const every = decades > 10 ? Math.ceil(decades / 8) : 1;
  const out: number[] = [];
  for (let e = e0; e <= e1; e++) {
    if ((e - e0) % every !== 0) continue;
    for (const m of mults) {
      const v = cleanFloat(m * 10 ** e);
      if (v >= lo * (1 - 1e-12) && v <= hi * (1 + 1e-12)) out.push(v);
    }
  }
  return out;
}

/** Removes binary noise such as 0.30000000000000004. */
function cleanFloat(v: number): number {
  return v === 0 ? 0 : Number(v.toPrecision(12));
}

/** A short label: at most 4 significant digits, exponent form for very large or small magnitudes. */
export function tickLabel(v: number): string {
  if (v === 0) return '0';
  const a = Math.abs(v);
  if (a >= 1e6 || a < 1e-4) {
    const [m, e] = v.toExponential(2).split('e');
    return `${Number(m)}e${Number(e)}`;
  }
  return String(Number(v.toPrecision(4)));
}
