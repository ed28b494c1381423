/**
 * Distances between Gaussians and between Gaussian mixtures on the model scale.
 * - Squared L2 distance ∫(f-g)² in closed form: ∫N(x;a,s²)N(x;b,t²)dx = N(a-b; 0, s²+t²).
 * - Bhattacharyya distance between two Gaussians (Bhattacharyya 1943; Kailath 1967).
 * - KL divergence between mixtures by the variational approximation of Hershey & Olsen (2007),
 *   "Approximating the Kullback Leibler divergence between Gaussian mixture models".
 */
import { LOG_SQRT_2PI } from './normal.js';

/** A mixture as plain arrays (weights, means, sds) on one scale. */
export interface GaussianMixtureLike {
  k: number;
  weights: ArrayLike<number>;
  means: ArrayLike<number>;
  sds: ArrayLike<number>;
}

function gaussOverlap(m1: number, s1: number, m2: number, s2: number): number {
  const v = s1 * s1 + s2 * s2;
  const d = m1 - m2;
  return Math.exp(-0.5 * (d * d) / v - 0.5 * Math.log(v) - LOG_SQRT_2PI);
}

function crossTerm(f: GaussianMixtureLike, g: GaussianMixtureLike): number {
  let s = 0;
  for (let i = 0; i < f.k; i++) {
    for (let j = 0; j < g.k; j++) s += f.weights[i] * g.weights[j] * gaussOverlap(f.means[i], f.sds[i], g.means[j], g.sds[j]);
  }
  return s;
}

/** ∫ (f(x) - g(x))² dx, exact. */
export function l2DistanceSquared(f: GaussianMixtureLike, g: GaussianMixtureLike): number {
  return Math.max(0, crossTerm(f, f) + crossTerm(g, g) - 2 * crossTerm(f, g));
}

/** Bhattacharyya distance between N(m1, s1²) and N(m2, s2²): (m1-m2)²/(4(s1²+s2²)) + ½ ln((s1²+s2²)/(2 s1 s2)). */
export function bhattacharyyaGaussian(m1: number, s1: number, m2: number, s2: number): number {
  const v = s1 * s1 + s2 * s2;
  const d = m1 - m2;
  return (d * d) / (4 * v) + 0.5 * Math.log(v / (2 * s1 * s2));
}

/** KL(N(m1,s1²) ‖ N(m2,s2²)). */
export function klGaussian(m1: number, s1: number, m2: number, s2: number): number {
  const d = m1 - m2;
  return Math.log(s2 / s1) + (s1 * s1 + d * d) / (2 * s2 * s2) - 0.5;
}

/** Variational approximation of KL(f ‖ g) between mixtures (Hershey & Olsen 2007, eq. 20). */
export function klMixtureVariational(f: GaussianMixtureLike, g: GaussianMixtureLike): number {
  let total = 0;
  for (let a = 0; a < f.k; a++) {
    if (f.weights[a] <= 0) continue;
    let num = 0;
    for (let a2 = 0; a2 < f.k; a2++) num += f.weights[a2] * Math.exp(-klGaussian(f.means[a], f.sds[a], f.means[a2], f.sds[a2]));
    let den = 0;
    for (let b = 0; b < g.k; b++) den += g.weights[b] * Math.exp(-klGaussian(f.means[a], f.sds[a], g.means[b], g.sds[b]));
    total += f.weights[a] * (Math.log(num) - Math.log(den));
  }
  return total;
}
