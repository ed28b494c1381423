import { describe, expect, it } from 'vitest';
import { bhattacharyyaGaussian, klGaussian, klMixtureVariational, l2DistanceSquared } from '../../src/math/distances.js';

const mix = (w: number[], m: number[], s: number[]) => ({ k: w.length, weights: w, means: m, sds: s });

describe('distances, closed forms', () => {
  // Reference values computed with R 4.2.2 from the standard closed forms (issue figures).
  it('squared L2 between N(0,1) and N(2,1) is 0.3566358', () => {
    expect(l2DistanceSquared(mix([1], [0], [1]), mix([1], [2], [1]))).toBeCloseTo(0.3566358, 7);
  });
  it('squared L2 between 0.5·N(0,1)+0.5·N(3,1) and N(1.5,1) is 0.1165429', () => {
    expect(l2DistanceSquared(mix([0.5, 0.5], [0, 3], [1, 1]), mix([1], [1.5], [1]))).toBeCloseTo(0.1165429, 7);
  });
  it('Bhattacharyya N(0,1)–N(2,1) is 0.5 and N(0,1)–N(1,2²) is 0.1615718', () => {
    expect(bhattacharyyaGaussian(0, 1, 2, 1)).toBeCloseTo(0.5, 12);
    expect(bhattacharyyaGaussian(0, 1, 1, 2)).toBeCloseTo(0.1615718, 7);
  });
  it('L2 is symmetric and zero for equal mixtures', () => {
    const f = mix([0.3, 0.7], [0, 4], [1, 2]);
    const g = mix([0.6, 0.4], [1, 3], [0.5, 1]);
    expect(l2DistanceSquared(f, g)).toBeCloseTo(l2DistanceSquared(g, f), 14);
    expect(l2DistanceSquared(f, f)).toBeLessThan(1e-15);
  });
  it('KL between single Gaussians is the closed form, and the variational KL reduces to it', () => {
    // KL(N(0,1)‖N(1,2²)) = ln 2 + (1 + 1)/8 - 1/2 (standard formula).
    expect(klGaussian(0, 1, 1, 2)).toBeCloseTo(Math.log(2) + 2 / 8 - 0.5, 14);
    expect(klMixtureVariational(mix([1], [0], [1]), mix([1], [1], [2]))).toBeCloseTo(klGaussian(0, 1, 1, 2), 12);
  });
  it('variational KL is near the Monte Carlo KL for well-separated mixtures', () => {
    // For well-separated components the approximation is tight (Hershey & Olsen 2007, section 4).
    const f = mix([0.5, 0.5], [0, 10], [1, 1]);
    const g = mix([0.3, 0.7], [0, 10], [1, 1]);
    const exact = 0.5 * Math.log(0.5 / 0.3) + 0.5 * Math.log(0.5 / 0.7);
    expect(klMixtureVariational(f, g)).toBeCloseTo(exact, 6);
  });
});
