import { describe, expect, it } from 'vitest';
// jstat 1.9.6 (npm), a general-purpose statistics library, is the reference for pdf, cdf and quantile.
import jStatPkg from 'jstat';
import { Mixture1D, summarizeComponent } from '../../src/math/mixture1d.js';
import { standardNormalCdf, standardNormalQuantile } from '../../src/math/normal.js';
import { Random } from '../../src/math/random.js';

const { jStat } = jStatPkg as unknown as { jStat: JStatLike };
interface JStatLike {
  normal: { pdf(x: number, m: number, s: number): number; cdf(x: number, m: number, s: number): number; inv(p: number, m: number, s: number): number };
  lognormal: { pdf(x: number, m: number, s: number): number; cdf(x: number, m: number, s: number): number; inv(p: number, m: number, s: number): number };
}

describe('univariate mixture against jstat 1.9.6', () => {
  it('normal component pdf, cdf and quantile agree', () => {
    const m = new Mixture1D('identity', [1], [3], [2]);
    for (const x of [-5, -1, 0, 2.5, 3, 7, 11]) {
      expect(m.pdf(x)).toBeCloseTo(jStat.normal.pdf(x, 3, 2), 12);
      expect(m.cdf(x)).toBeCloseTo(jStat.normal.cdf(x, 3, 2), 7);
    }
    for (const p of [0.001, 0.05, 0.3, 0.5, 0.9, 0.999]) {
      expect(m.quantile(p)).toBeCloseTo(jStat.normal.inv(p, 3, 2), 6);
    }
  });

  it('a log-scale component is a log-normal in the stream units', () => {
    const m = new Mixture1D('log', [1], [Math.log(40)], [0.3]);
    for (const x of [10, 30, 40, 55, 120]) {
      expect(m.pdf(x)).toBeCloseTo(jStat.lognormal.pdf(x, Math.log(40), 0.3), 12);
      expect(m.cdf(x)).toBeCloseTo(jStat.lognormal.cdf(x, Math.log(40), 0.3), 7);
    }
    for (const p of [0.01, 0.5, 0.99]) expect(m.quantile(p) / jStat.lognormal.inv(p, Math.log(40), 0.3)).toBeCloseTo(1, 6);
  });

  it('mixture cdf is the weighted sum and quantile inverts it', () => {
    const m = new Mixture1D('log1p', [0.7, 0.3], [Math.log1p(40), Math.log1p(180)], [0.25, 0.4]);
    for (const p of [0.01, 0.2, 0.5, 0.71, 0.95]) expect(m.cdf(m.quantile(p))).toBeCloseTo(p, 10);
    const x = 100;
    const expected = 0.7 * jStat.normal.cdf(Math.log1p(x), Math.log1p(40), 0.25) + 0.3 * jStat.normal.cdf(Math.log1p(x), Math.log1p(180), 0.4);
    expect(m.cdf(x)).toBeCloseTo(expected, 7);
  });

  it('density integrates to one in the stream units (Jacobian included)', () => {
    const m = new Mixture1D('log', [0.8, 0.2], [Math.log(40), Math.log(180)], [0.3, 0.35]);
    let s = 0;
    const h = 0.01;
    for (let x = h / 2; x < 3000; x += h) s += m.pdf(x) * h;
    expect(s).toBeCloseTo(1, 4);
  });

  it('standard normal tails are accurate (values from memory of the normal table: Φ(-5) ≈ 2.8665e-7)', () => {
    expect(standardNormalCdf(-5) / 2.866515718791939e-7).toBeCloseTo(1, 9);
    expect(standardNormalQuantile(standardNormalCdf(-8))).toBeCloseTo(-8, 8);
  });

  it('sampling follows the mixture (Kolmogorov–Smirnov distance small)', () => {
    const m = new Mixture1D('log', [0.8, 0.2], [Math.log(40), Math.log(180)], [0.3, 0.35]);
    const rng = new Random(5);
    const n = 20000;
    const xs = Float64Array.from({ length: n }, () => m.sample(rng)).sort();
    let d = 0;
    for (let i = 0; i < n; i++) d = Math.max(d, Math.abs(m.cdf(xs[i]) - (i + 0.5) / n));
    // 1.36/√n is the 5 % critical value of the KS statistic (common practice).
    expect(d).toBeLessThan(1.36 / Math.sqrt(n));
  });

  it('summaries read in the stream units: median and half the central 68 % interval', () => {
    const s = summarizeComponent('log', 0.5, Math.log(100), 0.2);
    expect(s.location).toBeCloseTo(100, 10);
    expect(s.spread).toBeCloseTo(0.5 * (100 * Math.exp(0.2) - 100 * Math.exp(-0.2)), 10);
    expect(s.mean).toBeCloseTo(100 * Math.exp(0.02), 10);
  });
});
