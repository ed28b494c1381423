import type { ValueRejection } from '../reject.js';

/**
 * Caller contract for multivariate models: check every event with this before `update` or
 * `logpdf`, count the rejection by its reason, and drop the event. The models themselves do
 * not repeat the check on the hot path beyond a guard that throws on a broken contract.
 */
export function validateVector(x: ArrayLike<number>, d: number): Extract<ValueRejection, 'not_finite' | 'wrong_dimension'> | null {
  if (x.length !== d) return 'wrong_dimension';
  for (let i = 0; i < d; i++) {
    const v = x[i];
    if (typeof v !== 'number' || !Number.isFinite(v)) return 'not_finite';
  }
  return null;
}
