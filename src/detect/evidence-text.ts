/** Numbers as alert summaries print them. */

export function pct(w: number): string {
  return `${(100 * w).toFixed(1)} %`;
}

/** Four significant digits; exponent form for very large or very small magnitudes. */
export function fmt(x: number): string {
  return Math.abs(x) >= 1e5 || (Math.abs(x) < 1e-3 && x !== 0) ? x.toExponential(3) : Number(x.toPrecision(4)).toString();
}
