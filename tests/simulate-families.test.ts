import { createRequire } from 'node:module';
import { describe, expect, it } from 'vitest';
import { Random } from '../src/math/random.js';
import {
  componentLogPdf,
  componentMean,
  componentVariance,
  lgamma,
  mixtureLogPdf,
  sampleComponent,
  sampleMixture,
  type ComponentSpec,
  type MixtureSpec,
} from '../src/simulate/families.js';

// jstat 1.9.6 (npm), a general-purpose statistics library, is the reference for densities and chi-square quantiles.
interface JStatLike {
  normal: { pdf(x: number, mean: number, sd: number): number };
  lognormal: { pdf(x: number, mu: number, sigma: number): number };
  gamma: { pdf(x: number, shape: number, scale: number): number };
  pareto: { pdf(x: number, scale: number, shape: number): number };
  chisquare: { inv(p: number, dof: number): number };
  gammaln(x: number): number;
}
const { jStat } = createRequire(import.meta.url)('jstat') as { jStat: JStatLike };

const specs: ComponentSpec[] = [
  { family: 'normal', mean: -3, sd: 2 },
  { family: 'lognormal', meanlog: Math.log(40), sdlog: 0.25 },
  { family: 'gamma', shape: 2.5, scale: 3 },
  { family: 'gamma', shape: 0.6, scale: 10 },
  { family: 'pareto', scale: 20, shape: 5 },
];

function reference(c: ComponentSpec, x: number): number {
  switch (c.family) {
    case 'normal':
      return jStat.normal.pdf(x, c.mean, c.sd);
    case 'lognormal':
      return jStat.lognormal.pdf(x, c.meanlog, c.sdlog);
    case 'gamma':
      return jStat.gamma.pdf(x, c.shape, c.scale);
    case 'pareto':
      return jStat.pareto.pdf(x, c.scale, c.shape);
  }
}

describe('families: closed forms', () => {
  it('log densities match jstat 1.9.6', () => {
    for (const c of specs) {
      const m = componentMean(c);
      const sd = Math.sqrt(componentVariance(c));
      for (const f of [0.05, 0.3, 0.9, 1.7, 3]) {
        const x = c.family === 'normal' ? m + (f - 1) * 2 * sd : c.family === 'pareto' ? c.scale * (1 + f) : m * f;
        expect(componentLogPdf(c, x)).toBeCloseTo(Math.log(reference(c, x)), 9);
      }
    }
    expect(componentLogPdf({ family: 'pareto', scale: 20, shape: 5 }, 19.99)).toBe(-Infinity);
    expect(componentLogPdf({ family: 'lognormal', meanlog: 0, sdlog: 1 }, -1)).toBe(-Infinity);
  });

  it('ln Γ matches jstat 1.9.6 gammaln', () => {
    for (const x of [0.1, 0.5, 1, 1.5, 2, 3.7, 10, 171.3]) {
      const r = jStat.gammaln(x);
      expect(Math.abs(lgamma(x) - r)).toBeLessThan(1e-12 * Math.max(1, Math.abs(r)));
    }
  });

  it('moments of samples agree with the standard formulas (Johnson, Kotz & Balakrishnan)', () => {
    // normal: mean mu, var sd^2; lognormal: mean exp(mu + s^2/2), var (exp(s^2) - 1) exp(2 mu + s^2);
    // gamma: mean k theta, var k theta^2; pareto: mean alpha xm / (alpha - 1), var xm^2 alpha / ((alpha - 1)^2 (alpha - 2)).
    expect(componentMean({ family: 'gamma', shape: 2.5, scale: 3 })).toBeCloseTo(7.5, 12);
    expect(componentVariance({ family: 'pareto', scale: 20, shape: 5 })).toBeCloseTo((400 * 5) / (16 * 3), 10);
    const n = 200_000;
    for (const [k, c] of specs.entries()) {
      const rng = new Random(100 + k);
      let s = 0;
      let s2 = 0;
      for (let i = 0; i < n; i++) {
        const x = sampleComponent(c, rng);
        s += x;
        s2 += x * x;
      }
      const mean = s / n;
      const variance = s2 / n - mean * mean;
      const m = componentMean(c);
      const v = componentVariance(c);
      // Standard error of the mean is sqrt(v / n); 5 of them is a false-failure rate below 1e-6.
      expect(Math.abs(mean - m)).toBeLessThan(5 * Math.sqrt(v / n));
      expect(variance / v).toBeGreaterThan(0.95);
      expect(variance / v).toBeLessThan(1.05);
    }
  });

  it('the sample histogram follows the density (chi-square test at the 0.999 quantile)', () => {
    const mix: MixtureSpec = {
      weights: [0.6, 0.35, 0.05],
      components: [
        { family: 'gamma', shape: 8, scale: 60 },
        { family: 'lognormal', meanlog: Math.log(4000), sdlog: 0.3 },
        { family: 'pareto', scale: 20_000, shape: 2.5 },
      ],
    };
    const n = 100_000;
    const rng = new Random(5);
    // Bins equal on the log scale over [100, 1e6), plus the two tails.
    const bins = 30;
    const lo = Math.log(100);
    const hi = Math.log(1e6);
    const counts = new Array<number>(bins + 2).fill(0);
    for (let i = 0; i < n; i++) {
      const x = sampleMixture(mix, rng);
      const b = Math.floor(((Math.log(x) - lo) / (hi - lo)) * bins);
      counts[b < 0 ? 0 : b >= bins ? bins + 1 : b + 1]++;
    }
    // Expected mass per bin: integrate exp(logpdf) on the log scale with Simpson's rule.
    const mass = (a: number, b: number): number => {
      const steps = 200;
      const h = (b - a) / steps;
      let sum = 0;
      for (let j = 0; j <= steps; j++) {
        const u = a + j * h;
        const w = j === 0 || j === steps ? 1 : j % 2 === 1 ? 4 : 2;
        sum += w * Math.exp(mixtureLogPdf(mix, Math.exp(u)) + u);
      }
      return (sum * h) / 3;
    };
    const expected = [mass(Math.log(1e-3), lo)];
    for (let b = 0; b < bins; b++) expected.push(mass(lo + ((hi - lo) * b) / bins, lo + ((hi - lo) * (b + 1)) / bins));
    expected.push(mass(hi, Math.log(1e12)));
    expect(expected.reduce((a, b) => a + b, 0)).toBeCloseTo(1, 4);
    let chi2 = 0;
    let dof = -1;
    for (let b = 0; b < counts.length; b++) {
      const e = expected[b] * n;
      if (e < 5) continue;
      chi2 += ((counts[b] - e) * (counts[b] - e)) / e;
      dof++;
    }
    expect(dof).toBeGreaterThan(20);
    expect(chi2).toBeLessThan(jStat.chisquare.inv(0.999, dof));
  });

  it('mixtureLogPdf is the log of the weighted sum, and survives far tails', () => {
    const mix: MixtureSpec = { weights: [0.8, 0.2], components: [{ family: 'normal', mean: 0, sd: 1 }, { family: 'normal', mean: 5, sd: 0.5 }] };
    for (const x of [-2, 0, 2.5, 5, 7]) {
      const direct = Math.log(0.8 * jStat.normal.pdf(x, 0, 1) + 0.2 * jStat.normal.pdf(x, 5, 0.5));
      expect(mixtureLogPdf(mix, x)).toBeCloseTo(direct, 10);
    }
    // Far out, both densities underflow to 0 but the log-sum-exp value is finite: the wider component dominates,
    // log 0.8 + log N(60; 0, 1) (the other term is e^-4250 times smaller).
    expect(Math.exp(componentLogPdf({ family: 'normal', mean: 0, sd: 1 }, 60))).toBe(0);
    expect(mixtureLogPdf(mix, 60)).toBeCloseTo(Math.log(0.8) + componentLogPdf({ family: 'normal', mean: 0, sd: 1 }, 60), 8);
    expect(mixtureLogPdf({ weights: [1], components: [{ family: 'pareto', scale: 1, shape: 2 }] }, 0.5)).toBe(-Infinity);
  });
});
