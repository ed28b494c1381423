import { describe, expect, it } from 'vitest';
import { Mixture1D } from '../../src/math/mixture1d.js';
import { Random } from '../../src/math/random.js';
import { expNonPositive } from '../../src/math/exp.js';
import { OnlineMixture1D, type OnlineMixture1DState } from '../../src/math/stepwise-em1d.js';

// The fast paths of the stepwise update (src/bench/engine.ts measures them) must give the results of the plain
// formulas up to floating-point rounding.

const f64 = new Float64Array(1);
const i64 = new BigInt64Array(f64.buffer);
function ulpDistance(a: number, b: number): number {
  f64[0] = a;
  const x = i64[0];
  f64[0] = b;
  return Number(x > i64[0] ? x - i64[0] : i64[0] - x); // same sign here (both >= 0)
}

describe('expNonPositive (table-driven exp, Tang 1989)', () => {
  it('is within 1 ulp of Math.exp over [-745, 0] (V8 Math.exp: fdlibm e_exp.c, error < 1 ulp)', () => {
    const rng = new Random(5);
    let worst = 0;
    let differ = 0;
    const n = 200_000;
    for (let i = 0; i < n; i++) {
      // Half the points where Gaussian kernels live (|x| < 40), half over the whole range down to underflow.
      const x = i % 2 === 0 ? -40 * rng.uniform() : -745 * rng.uniform();
      const d = ulpDistance(expNonPositive(x), Math.exp(x));
      if (d > worst) worst = d;
      if (d > 0) differ++;
    }
    expect(worst).toBeLessThanOrEqual(1);
    expect(differ / n).toBeLessThan(0.2); // most results are the same bits
  });

  it('has the exact values at the ends and passes NaN through', () => {
    expect(expNonPositive(0)).toBe(1);
    expect(expNonPositive(-0)).toBe(1);
    expect(expNonPositive(-Infinity)).toBe(0);
    expect(expNonPositive(-746)).toBe(0);
    expect(Number.isNaN(expNonPositive(Number.NaN))).toBe(true);
    expect(expNonPositive(-Math.LN2 * 10)).toBeCloseTo(2 ** -10, 17);
    expect(expNonPositive(1)).toBe(Math.exp(1)); // above 0 it defers to Math.exp
  });
});

/** The stepwise update written plainly (Math.exp, sd = √v, 1/(2v), Math.pow schedule), on an exported state. */
function plainUpdates(s: OnlineMixture1DState, ys: Float64Array): { s0: number[]; mu: number[]; variance: number[] } {
  const k = s.s0.length;
  const s0 = [...s.s0];
  const mu = [...s.mu];
  const v = [...s.variance];
  const o = s.options;
  const floor = o.sdFloorFraction ** 2;
  let t = s.t;
  const r = new Array<number>(k).fill(0);
  for (const y of ys) {
    const z = (y - s.center) / s.unit;
    let sum = 0;
    for (const x of s0) sum += x;
    let total = 0;
    for (let j = 0; j < k; j++) {
      const vf = Math.max(v[j], floor);
      r[j] = (s0[j] / sum / Math.sqrt(2 * Math.PI * vf)) * Math.exp(-((z - mu[j]) ** 2) / (2 * vf));
      total += r[j];
    }
    t++;
    const gamma = Math.min(1, Math.max(Math.pow(t + o.t0, -o.alpha), 1 / o.window));
    for (let j = 0; j < k; j++) {
      const g = (gamma * r[j]) / total;
      const next = (1 - gamma) * s0[j] + g;
      const f = g / next;
      const d = z - mu[j];
      mu[j] += f * d;
      v[j] = (1 - f) * (v[j] + f * d * d);
      s0[j] = next;
    }
  }
  return { s0, mu, variance: v };
}

describe('stepwise update fast path', () => {
  const truth = new Mixture1D('identity', [0.4, 0.3, 0.2, 0.1], [0, 6, 13, 25], [1, 1.5, 2, 3]);
  const rng = new Random(21);
  const ys = Float64Array.from({ length: 50_000 }, () => truth.sample(rng));

  for (const alpha of [1, 0.6]) {
    it(`agrees with the plain formulas to rounding after 50k events (alpha = ${alpha})`, () => {
      const start = new Mixture1D('identity', [0.25, 0.25, 0.25, 0.25], [1, 5, 15, 20], [2, 2, 2, 2]);
      const model = OnlineMixture1D.fromMixture(start, { alpha, window: 2000 });
      const plain = plainUpdates(model.exportState(), ys);
      for (let i = 0; i < ys.length; i++) model.update(ys[i], i);
      const fast = model.exportState();
      for (let j = 0; j < 4; j++) {
        expect(Math.abs(fast.s0[j] - plain.s0[j])).toBeLessThan(1e-9);
        expect(Math.abs(fast.mu[j] - plain.mu[j])).toBeLessThan(1e-9);
        expect(Math.abs(fast.variance[j] / plain.variance[j] - 1)).toBeLessThan(1e-9);
      }
    });
  }

  it('update(y, ts) and evaluate(y) then learn(ts) give the same bits (half-life and background on)', () => {
    const opts = { window: 500, halfLifeMs: 30_000, backgroundWeight: 0.01 };
    const a = OnlineMixture1D.fromMixture(truth, opts);
    const b = OnlineMixture1D.fromMixture(truth, opts);
    for (let i = 0; i < 20_000; i++) {
      const y = i % 997 === 0 ? 1e9 : ys[i]; // a few far outliers take the log-domain path
      a.update(y, 250 * i);
      b.evaluate(y);
      expect(b.responsibility(0)).toBe(a.responsibility(0));
      b.learn(250 * i);
    }
    expect(b.exportState()).toEqual(a.exportState());
    for (let j = 0; j < 4; j++) expect(b.sd(j)).toBe(a.sd(j));
  });
});
