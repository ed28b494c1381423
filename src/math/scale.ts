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

/** A scale as a small number, for per-event paths that should not compare strings: 0 identity, 1 log, 2 log1p. */
export type ScaleCode = 0 | 1 | 2;
export function scaleCode(scale: ScaleName): ScaleCode {
  return scale === 'identity' ? 0 : scale === 'log' ? 1 : 2;
}

/** y = T(x). The caller has checked the domain. */
export function toModel(scale: ScaleName, x: number): number {
  return toModelByCode(scaleCode(scale), x);
}
export function toModelByCode(code: ScaleCode, x: number): number {
  return code === 0 ? x : code === 1 ? Math.log(x) : Math.log1p(x);
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
  return checkValueByCode(scaleCode(scale), x);
}
export function checkValueByCode(code: ScaleCode, x: number): ValueRejection | null {
  if (!(x - x === 0)) return 'not_finite'; // NaN and ±Infinity
  if (code !== 0 && !(x > (code === 1 ? 0 : -1))) return 'out_of_domain';
  return null;
}
