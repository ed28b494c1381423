/**
 * The working frame of a multivariate mixture: z = (x − center) / scale per coordinate.
 *
 * Why: second moments of data at 1e300 overflow (1e600), and sums of x·xᵀ far from the
 * origin lose every digit to cancellation. All statistics are therefore kept in a frame
 * centred on the data and scaled to its spread. Scales are powers of two, so converting
 * between frame and stream units multiplies exactly (no rounding) whenever the result is
 * representable. The covariance floor (reg_covar) is applied in this frame, which makes it
 * relative to the data's spread rather than absolute.
 */

/** Largest |z| coordinate the models accept; beyond it an event is clamped (winsorised) so that
 * squares and sums of squares over d ≤ 8 coordinates stay finite: (2·2^400)² · 8 ≪ 2^1023. */
export const FRAME_CLAMP = 2 ** 400;

/** Largest distance from the centre, in stream units, an event keeps before it is clamped:
 * keeps a component's location and spread in stream units finite (2·2^1000 < 2^1024). */
export const STREAM_CLAMP = 2 ** 1000;

/** Per-coordinate clamp on |z|: the smaller of FRAME_CLAMP and STREAM_CLAMP / scale. */
export function frameClamp(scale: number): number {
  return Math.min(FRAME_CLAMP, STREAM_CLAMP / scale);
}

/** Bounds for the exponent of a frame scale, inside the normal double range with margin. */
const MIN_EXP = -1000;
const MAX_EXP = 1000;

/** Relative resolution given to a coordinate whose sample has no spread at all (one repeated value). */
const DEGENERATE_RELATIVE_SPREAD_EXP = -26;

export interface Frame {
  readonly center: Float64Array;
  readonly scale: Float64Array;
}

/** Nearest power of two to a positive finite v, clamped to the supported exponent range. */
export function powerOfTwoNear(v: number): number {
  if (!(v > 0) || !Number.isFinite(v)) return 1;
  let e = Math.round(Math.log2(v));
  if (e < MIN_EXP) e = MIN_EXP;
  if (e > MAX_EXP) e = MAX_EXP;
  return 2 ** e;
}

/**
 * Frame for n rows of d finite values (row-major): centre at the mid-range (computed as
 * min/2 + max/2, which cannot overflow), scale the power of two nearest the root mean square
 * deviation from that centre. Every intermediate stays finite for any finite input.
 */
export function frameFromData(data: Float64Array, n: number, d: number): Frame {
  const center = new Float64Array(d);
  const scale = new Float64Array(d);
  for (let i = 0; i < d; i++) {
    let lo = Infinity;
    let hi = -Infinity;
    for (let r = 0; r < n; r++) {
      const v = data[r * d + i];
      if (v < lo) lo = v;
      if (v > hi) hi = v;
    }
    const c = lo / 2 + hi / 2;
    const half = hi / 2 - lo / 2;
    center[i] = c;
    if (!(half > 0)) {
      // One repeated value: give it a spread relative to its magnitude (or 1 at zero).
      scale[i] = c === 0 ? 1 : powerOfTwoNear(Math.abs(c)) * 2 ** DEGENERATE_RELATIVE_SPREAD_EXP;
      if (scale[i] === 0) scale[i] = 2 ** MIN_EXP;
      continue;
    }
    const pre = 2 ** Math.max(MIN_EXP, Math.min(MAX_EXP, Math.floor(Math.log2(half))));
    let ss = 0;
    for (let r = 0; r < n; r++) {
      const z = (data[r * d + i] - c) / pre; // |z| < 2 by construction
      ss += z * z;
    }
    const rms = Math.sqrt(ss / n) * pre;
    scale[i] = powerOfTwoNear(rms > 0 ? rms : half);
  }
  return { center, scale };
}
