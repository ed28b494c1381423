import fc from 'fast-check';
import { CholeskyDecomposition, Matrix } from 'ml-matrix';
import { describe, expect, it } from 'vitest';
import { MvMixture, OnlineMvMixture, fitMvMixture } from '../src/math/mv/index.js';

/** A finite double of magnitude 1e-300 … 1e300 (or zero), either sign. */
const magnitude = fc
  .tuple(fc.boolean(), fc.double({ min: 1, max: 9.999, noNaN: true }), fc.integer({ min: -300, max: 299 }), fc.boolean())
  .map(([neg, m, e, zero]) => (zero ? 0 : (neg ? -1 : 1) * m * 10 ** e));

/** n rows of d values built from a few distinct vectors repeated, in any order. */
const dataset = fc.integer({ min: 1, max: 4 }).chain((d) =>
  fc
    .tuple(
      fc.array(fc.array(magnitude, { minLength: d, maxLength: d }), { minLength: 1, maxLength: 5 }),
      fc.array(fc.nat(), { minLength: 1, maxLength: 40 }),
      fc.integer({ min: 1, max: 3 }),
    )
    .map(([distinct, picks, k]) => {
      const n = picks.length;
      const data = new Float64Array(n * d);
      picks.forEach((p, r) => data.set(distinct[p % distinct.length], r * d));
      return { d, n, k: Math.min(k, n), data };
    }),
);

/** The invariants every model must keep whatever it is fed. */
function checkHealthy(m: MvMixture): void {
  const { k, d } = m;
  let s = 0;
  for (let j = 0; j < k; j++) {
    expect(Number.isFinite(m.weights[j])).toBe(true);
    expect(m.weights[j]).toBeGreaterThanOrEqual(0);
    s += m.weights[j];
    const S = new Matrix(d, d);
    for (let a = 0; a < d; a++)
      for (let b = 0; b < d; b++) {
        const v = m.frameCovariances[j * d * d + a * d + b];
        expect(Number.isFinite(v)).toBe(true);
        S.set(a, b, v);
      }
    // Positive definite by an independent factorisation (ml-matrix 6.15.1 CholeskyDecomposition).
    expect(new CholeskyDecomposition(S).isPositiveDefinite()).toBe(true);
    expect(Number.isFinite(m.frameLogDet[j])).toBe(true);
    for (let i = 0; i < d; i++) {
      expect(Number.isFinite(m.meanOf(j)[i])).toBe(true);
      expect(Number.isFinite(m.sdOf(j, i))).toBe(true);
      expect(m.sdOf(j, i)).toBeGreaterThan(0);
    }
  }
  expect(Math.abs(s - 1)).toBeLessThan(1e-12);
}

describe('multivariate mixtures stay healthy on any data', () => {
  it('batch EM: repeated vectors, magnitudes 1e-300 … 1e300, any order', () => {
    fc.assert(
      fc.property(dataset, ({ d, n, k, data }) => {
        const fit = fitMvMixture(data, n, d, { k, restarts: 2, maxIterations: 30, seed: 1 });
        checkHealthy(fit.mixture);
        expect(Number.isFinite(fit.logLikelihood)).toBe(true);
        expect(Number.isFinite(fit.bic)).toBe(true);
        for (let r = 0; r < n; r++) expect(Number.isFinite(fit.mixture.logpdf(data.subarray(r * d, r * d + d)))).toBe(true);
      }),
      { numRuns: 150, seed: 20240501 },
    );
  });

  it('stepwise EM: the same data streamed in any order, plus events far outside the fit', () => {
    fc.assert(
      fc.property(dataset, fc.array(fc.nat(), { minLength: 1, maxLength: 300 }), magnitude, ({ d, n, k, data }, order, far) => {
        const fit = fitMvMixture(data, n, d, { k, restarts: 1, maxIterations: 20, seed: 2 });
        const o = OnlineMvMixture.fromMixture(fit.mixture, { miniBatch: 4, window: 50 });
        const x = new Float64Array(d);
        for (const p of order) {
          const r = p % n;
          o.update(data.subarray(r * d, r * d + d));
        }
        x.fill(far);
        o.update(x);
        x.fill(-1.7e308);
        o.update(x);
        o.mStep();
        checkHealthy(o.mixture);
        for (const v of o.statScatter) expect(Number.isFinite(v)).toBe(true);
        expect(Number.isFinite(o.mixture.logpdf(data.subarray(0, d)))).toBe(true);
      }),
      { numRuns: 150, seed: 20240502 },
    );
  });
});
