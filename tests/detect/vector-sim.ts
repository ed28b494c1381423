/**
 * Invented 2-D scenarios for the vector monitor tests: each event is (latency-like ms, size-like bytes)
 * from Gaussian clusters with correlation, a regime that changes at a known event index.
 */
import { Random } from '../../src/math/random.js';

export interface Cluster {
  weight: number;
  mean: [number, number];
  sd: [number, number];
  rho: number;
}

export const FAST: Cluster = { weight: 0.7, mean: [40, 2000], sd: [5, 300], rho: 0.3 };
export const SLOW: Cluster = { weight: 0.3, mean: [180, 8000], sd: [25, 1200], rho: -0.2 };

/** Calls `emit(x, i)` for n events; clusters(i) gives the mixture in force at event i; outliers at rate `outliers`. */
export function simulate2d(n: number, seed: number, clusters: (i: number) => Cluster[], emit: (x: Float64Array, i: number) => void, outliers = 0): void {
  const rng = new Random(seed);
  const x = new Float64Array(2);
  for (let i = 0; i < n; i++) {
    if (outliers > 0 && rng.uniform() < outliers) {
      x[0] = 1 + 5000 * rng.uniform();
      x[1] = 1 + 100_000 * rng.uniform();
      emit(x, i);
      continue;
    }
    const cs = clusters(i);
    let u = rng.uniform();
    let c = cs[cs.length - 1];
    for (const k of cs) {
      u -= k.weight;
      if (u < 0) {
        c = k;
        break;
      }
    }
    const a = rng.normal();
    const b = rng.normal();
    x[0] = c.mean[0] + c.sd[0] * a;
    x[1] = c.mean[1] + c.sd[1] * (c.rho * a + Math.sqrt(1 - c.rho * c.rho) * b);
    emit(x, i);
  }
}
