/**
 * The alternatives of the weight CUSUMs, shared by the 1-D and the vector monitor. For a component of
 * weight w whose weight becomes w' (the others scaled by (1-w')/(1-w)), the mixture likelihood ratio of an
 * event is exactly 1 + r(a-1) + r_other(b-1), with r the component's responsibility, r_other the other
 * components', a = w'/w and b = (1-w')/(1-w). Three alternatives: up, down, and vanished (w' = w·vanishFraction).
 */
import type { MonitorConfig } from './monitor-config.js';

export const C_UP_A = 0;
export const C_UP_B = 1;
export const C_DN_A = 2;
export const C_DN_B = 3;
export const C_VA_A = 4;
export const C_VA_B = 5;
/** Numbers per component. b of each alternative is also its ratio for an event that is plainly another component's. */
export const WEIGHT_CONSTS = 6;

/** Fill out[at .. at+WEIGHT_CONSTS) for a component of reference weight `weight`. */
export function setWeightAlternatives(out: Float64Array, at: number, weight: number, cfg: MonitorConfig): void {
  const w = Math.min(Math.max(weight, 1e-9), 1 - 1e-9);
  const delta = Math.max(cfg.weightShiftAbsolute, cfg.weightShiftRelative * Math.min(w, 1 - w));
  const up = Math.min(w + delta, 0.5 * (w + 1));
  const down = Math.max(w - delta, 0.5 * w);
  const van = w * cfg.vanishFraction;
  out[at + C_UP_A] = up / w;
  out[at + C_UP_B] = (1 - up) / (1 - w);
  out[at + C_DN_A] = down / w;
  out[at + C_DN_B] = (1 - down) / (1 - w);
  out[at + C_VA_A] = van / w;
  out[at + C_VA_B] = (1 - van) / (1 - w);
}
