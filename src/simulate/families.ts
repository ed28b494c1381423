/**
 * The distribution families scenario streams are drawn from, with sampling, closed-form log densities and
 * moments (the standard formulas, e.g. Johnson, Kotz & Balakrishnan, "Continuous Univariate Distributions").
 * Each family has one "location" parameter that `shift` and `drift` changes move:
 * normal: mean; lognormal: meanlog; gamma: scale; pareto: scale (xm).
 */
import type { Random } from '../math/random.js';

export type ComponentSpec =
  | { family: 'normal'; mean: number; sd: number }
  | { family: 'lognormal'; meanlog: number; sdlog: number }
  | { family: 'gamma'; shape: number; scale: number }
  | { family: 'pareto'; scale: number; shape: number };

export type FamilyName = ComponentSpec['family'];
export const FAMILIES: readonly FamilyName[] = ['normal', 'lognormal', 'gamma', 'pareto'];

export interface MixtureSpec {
  weights: number[];
  components: ComponentSpec[];
}

const LN_SQRT_2PI = 0.5 * Math.log(2 * Math.PI);

/** Lanczos approximation of ln Γ(x), x > 0 (g = 7, n = 9 coefficients; relative error ~1e-15). */
export function lgamma(x: number): number {
  if (x < 0.5) return Math.log(Math.PI / Math.abs(Math.sin(Math.PI * x))) - lgamma(1 - x);
  const c = [
    0.99999999999980993, 676.5203681218851, -1259.1392167224028, 771.32342877765313, -176.61502916214059,
    12.507343278686905, -0.13857109526572012, 9.9843695780195716e-6, 1.5056327351493116e-7,
  ];
  const z = x - 1;
  let a = c[0];
  const t = z + 7.5;
  for (let i = 1; i < 9; i++) a += c[i] / (z + i);
  return LN_SQRT_2PI + (z + 0.5) * Math.log(t) - t + Math.log(a);
}

export function sampleComponent(c: ComponentSpec, rng: Random): number {
  switch (c.family) {
    case 'normal':
      return c.mean + c.sd * rng.normal();
    case 'lognormal':
      return Math.exp(c.meanlog + c.sdlog * rng.normal());
    case 'gamma':
      return c.scale * rng.gamma(c.shape);
    case 'pareto':
      // Inverse CDF: F(x) = 1 - (xm/x)^alpha.
      return c.scale * Math.pow(1 - rng.uniform(), -1 / c.shape);
  }
}

export function componentLogPdf(c: ComponentSpec, x: number): number {
  switch (c.family) {
    case 'normal': {
      const z = (x - c.mean) / c.sd;
      return -0.5 * z * z - Math.log(c.sd) - LN_SQRT_2PI;
    }
    case 'lognormal': {
      if (!(x > 0)) return -Infinity;
      const lx = Math.log(x);
      const z = (lx - c.meanlog) / c.sdlog;
      return -0.5 * z * z - Math.log(c.sdlog) - LN_SQRT_2PI - lx;
    }
    case 'gamma':
      if (!(x > 0)) return -Infinity;
      return (c.shape - 1) * Math.log(x) - x / c.scale - lgamma(c.shape) - c.shape * Math.log(c.scale);
    case 'pareto':
      if (!(x >= c.scale)) return -Infinity;
      return Math.log(c.shape) + c.shape * Math.log(c.scale) - (c.shape + 1) * Math.log(x);
  }
}

/** Mean (Infinity for a Pareto with shape <= 1). */
export function componentMean(c: ComponentSpec): number {
  switch (c.family) {
    case 'normal':
      return c.mean;
    case 'lognormal':
      return Math.exp(c.meanlog + (c.sdlog * c.sdlog) / 2);
    case 'gamma':
      return c.shape * c.scale;
    case 'pareto':
      return c.shape > 1 ? (c.shape * c.scale) / (c.shape - 1) : Infinity;
  }
}

/** Variance (Infinity for a Pareto with shape <= 2). */
export function componentVariance(c: ComponentSpec): number {
  switch (c.family) {
    case 'normal':
      return c.sd * c.sd;
    case 'lognormal': {
      const s2 = c.sdlog * c.sdlog;
      return (Math.exp(s2) - 1) * Math.exp(2 * c.meanlog + s2);
    }
    case 'gamma':
      return c.shape * c.scale * c.scale;
    case 'pareto':
      return c.shape > 2 ? (c.scale * c.scale * c.shape) / ((c.shape - 1) * (c.shape - 1) * (c.shape - 2)) : Infinity;
  }
}

export function locationOf(c: ComponentSpec): number {
  switch (c.family) {
    case 'normal':
      return c.mean;
    case 'lognormal':
      return c.meanlog;
    case 'gamma':
    case 'pareto':
      return c.scale;
  }
}

export function withLocation(c: ComponentSpec, loc: number): ComponentSpec {
  switch (c.family) {
    case 'normal':
      return { ...c, mean: loc };
    case 'lognormal':
      return { ...c, meanlog: loc };
    case 'gamma':
    case 'pareto':
      return { ...c, scale: loc };
  }
}

/** True when the family only produces positive values (so a negative value is out of its domain). */
export function positiveSupport(c: ComponentSpec): boolean {
  return c.family !== 'normal';
}

/** log Σ_k w_k p_k(x), computed with the log-sum-exp shift so that tails do not underflow. */
export function mixtureLogPdf(m: MixtureSpec, x: number): number {
  let max = -Infinity;
  const n = m.components.length;
  const terms = new Array<number>(n);
  for (let k = 0; k < n; k++) {
    const t = m.weights[k] > 0 ? Math.log(m.weights[k]) + componentLogPdf(m.components[k], x) : -Infinity;
    terms[k] = t;
    if (t > max) max = t;
  }
  if (max === -Infinity) return -Infinity;
  let s = 0;
  for (let k = 0; k < n; k++) s += Math.exp(terms[k] - max);
  return max + Math.log(s);
}

/** Draws the component index by its weight, then a value from it. */
export function sampleMixture(m: MixtureSpec, rng: Random): number {
  let u = rng.uniform();
  const n = m.weights.length;
  for (let k = 0; k < n - 1; k++) {
    u -= m.weights[k];
    if (u < 0) return sampleComponent(m.components[k], rng);
  }
  return sampleComponent(m.components[n - 1], rng);
}

/** Deep copy (scenario state is changed in place; truth snapshots must not follow). */
export function cloneMixture(m: MixtureSpec): MixtureSpec {
  return { weights: m.weights.slice(), components: m.components.map((c) => ({ ...c })) };
}
