/**
 * The scale a stream is modelled on. Latencies and sizes are positive and right-skewed:
 * a Gaussian mixture on log(x) (a log-normal mixture) fits them far better than one on x.
 * log1p admits zeros (queue waits of 0 ms). The model works on y = T(x); everything an
 * operator reads is mapped back to x.
 */
import type { ValueRejection } from './reject.js';

export type ScaleName = 'identity' | 'log' | 'log1p';
export const SCALE_NAMES: readonly ScaleName[] = ['identity', 'log', 'log1p'];

export function isScaleName(s: string): s is ScaleName {
  return s === 'identity' || s === 'log' || s === 'log1p';
}

/** y = T(x). The caller has checked the domain. */
export function toModel(scale: ScaleName, x: number): number {
  return scale === 'identity' ? x : scale === 'log' ? Math.log(x) : Math.log1p(x);
}

/** x = T⁻¹(y). */
export function fromModel(scale: ScaleName, y: number): number {
  return scale === 'identity' ? y : scale === 'log' ? Math.exp(y) : Math.expm1(y);
}

/** log |dy/dx| at x: the Jacobian term that turns a density on y into a density on x. */
export function logJacobian(scale: ScaleName, x: number): number {
  return scale === 'identity' ? 0 : scale === 'log' ? -Math.log(x) : -Math.log1p(x);
}

/** Why x cannot be modelled on this scale, or null if it can. NaN and ±Infinity never reach a model. */
export function checkValue(scale: ScaleName, x: number): ValueRejection | null {
  if (!Number.isFinite(x)) return 'not_finite';
  if (scale === 'log' && !(x > 0)) return 'out_of_domain';
  if (scale === 'log1p' && !(x > -1)) return 'out_of_domain';
  return null;
}
