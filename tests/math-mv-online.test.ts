import { CholeskyDecomposition, Matrix } from 'ml-matrix';
import { describe, expect, it } from 'vitest';
import { Random } from '../src/math/random.js';
import { MvMixture, OnlineMvMixture, fitMvMixture, validateVector } from '../src/math/mv/index.js';
import { accumulate, accumulate4, weightedLogDensities, weightedLogDensities4 } from '../src/math/mv/online-kernels.js';

const D = 2;
// Invented 2-D, 3-component mixture with correlated, partly overlapping components.
const truth = MvMixture.fromParameters({
  weights: [0.5, 0.3, 0.2],
  means: [0, 0, 4, 1, 1, 5],
  covariances: [1, 0.5, 0.5, 1, 0.6, -0.2, -0.2, 0.8, 1.5, 0, 0, 0.7],
});

/** Largest weight gap and largest mean gap (in the reference's sd) after matching components by nearest mean. */
function gaps(m: MvMixture, ref: MvMixture): { dw: number; dm: number } {
  let dw = 0;
  let dm = 0;
  for (let j = 0; j < ref.k; j++) {
    const c = ref.meanOf(j);
    let best = 0;
    let bd = Infinity;
    for (let i = 0; i < m.k; i++) {
      const a = m.meanOf(i);
      const dd = (a[0] - c[0]) ** 2 + (a[1] - c[1]) ** 2;
      if (dd < bd) [bd, best] = [dd, i];
    }
    dw = Math.max(dw, Math.abs(m.weights[best] - ref.weights[j]));
    for (let i = 0; i < D; i++) dm = Math.max(dm, Math.abs(m.meanOf(best)[i] - c[i]) / ref.sdOf(j, i));
  }
  return { dw, dm };
}

describe('stepwise EM on a long stationary stream', () => {
  const n = 200_000;
  const data = truth.sampleMany(new Random(1), n);
  const batch = fitMvMixture(data, n, D, { k: 3, seed: 1, restarts: 2, tol: 1e-8, maxIterations: 2000 });
  const boot = fitMvMixture(data.subarray(0, 2000 * D), 2000, D, { k: 3, seed: 1, restarts: 3 });

  it('the batch fit recovers the invented truth (sanity of the yardstick)', () => {
    const g = gaps(batch.mixture, truth);
    expect(g.dw).toBeLessThan(0.01);
    expect(g.dm).toBeLessThan(0.05);
  });

  // Cappé & Moulines (2009), Thm 1: with Σγ = ∞ and Σγ² < ∞ (0.5 < α ≤ 1, γ_min = 0) stepwise EM
  // converges to a stationary point of the likelihood. The last iterate's noise scales like √γ_T,
  // so α = 0.9 (γ_T ≈ 1.7e-5 here) puts it well inside the tolerance.
  it('converges to the batch MLE on the same data (weights within 0.01, means within 0.05 sd)', () => {
    const o = OnlineMvMixture.fromMixture(boot.mixture, { alpha: 0.9, window: Infinity, initialCount: 2000 });
    for (let r = 0; r < n; r++) o.update(data.subarray(r * D, r * D + D));
    o.mStep();
    expect(o.eventsSeen).toBe(n);
    const g = gaps(o.mixture, batch.mixture);
    expect(g.dw).toBeLessThan(0.01);
    expect(g.dm).toBeLessThan(0.05);
  });

  // With the defaults (α = 0.6, window 5000) the model is a tracker: it averages over the last
  // ~1/γ_T ≈ 1500 events, so its last iterate fluctuates around the MLE by about that sample's
  // noise (a weight of 0.3 from 1500 soft counts: sd ≈ 0.012 before overlap). Within 0.04 / 0.2 sd.
  it('with default settings tracks the batch MLE within its window noise', () => {
    const o = OnlineMvMixture.fromMixture(boot.mixture, { initialCount: 2000 });
    for (let r = 0; r < n; r++) o.update(data.subarray(r * D, r * D + D));
    const g = gaps(o.mixture, batch.mixture);
    expect(g.dw).toBeLessThan(0.04);
    expect(g.dm).toBeLessThan(0.2);
  });
});

describe('stepwise EM guards', () => {
  it('a component fed one repeated value keeps a positive-definite covariance at the floor', () => {
    const o = OnlineMvMixture.fromMixture(truth, { miniBatch: 4 });
    for (let r = 0; r < 50_000; r++) o.update([4, 1]);
    const m = o.mixture;
    for (let j = 0; j < m.k; j++) {
      const S = new Matrix(D, D);
      for (let a = 0; a < D; a++) for (let b = 0; b < D; b++) S.set(a, b, m.covarianceOf(j)[a * D + b]);
      expect(new CholeskyDecomposition(S).isPositiveDefinite()).toBe(true); // ml-matrix 6.15.1
      for (let i = 0; i < D; i++) expect(m.frameCovariances[j * D * D + i * D + i]).toBeGreaterThanOrEqual(m.regCovar);
    }
    expect(Number.isFinite(m.logpdf([4, 1]))).toBe(true);
    expect(m.weights.reduce((a, b) => a + b, 0)).toBeCloseTo(1, 12);
  });

  it('the schedule is γ_t = max((t + t0)^-α, 1/W)', () => {
    const o = OnlineMvMixture.fromMixture(truth, { alpha: 0.6, t0: 2, window: 100 });
    expect(o.nextGamma()).toBeCloseTo(3 ** -0.6, 15);
    for (let r = 0; r < 5000; r++) o.update([0, 0]);
    expect(o.nextGamma()).toBe(1 / 100);
    expect(() => OnlineMvMixture.fromMixture(truth, { alpha: 0.5 })).toThrow(/alpha/);
    expect(() => OnlineMvMixture.fromMixture(truth, { miniBatch: 0 })).toThrow(/miniBatch/);
  });

  it('M-steps happen every miniBatch events; statistics every event', () => {
    const o = OnlineMvMixture.fromMixture(truth, { miniBatch: 16 });
    const before = Float64Array.from(o.mixture.frameMeans);
    const stats = Float64Array.from(o.statMean);
    for (let r = 0; r < 15; r++) o.update([10, 10]);
    expect(Array.from(o.mixture.frameMeans)).toEqual(Array.from(before));
    expect(Array.from(o.statMean)).not.toEqual(Array.from(stats));
    expect(o.pendingEvents).toBe(15);
    o.update([10, 10]);
    expect(o.pendingEvents).toBe(0);
    expect(Array.from(o.mixture.frameMeans)).not.toEqual(Array.from(before));
  });

  it('the same events give the same model however they are split (no hidden clock or batch boundary)', () => {
    const xs = truth.sampleMany(new Random(4), 1000);
    const a = OnlineMvMixture.fromMixture(truth);
    const b = OnlineMvMixture.fromMixture(truth);
    for (let r = 0; r < 1000; r++) a.update(xs.subarray(r * D, r * D + D));
    for (let r = 0; r < 1000; r++) b.update([xs[r * D], xs[r * D + 1]]);
    expect(Array.from(b.statScatter)).toEqual(Array.from(a.statScatter));
  });
});

describe('caller contract: validateVector before update', () => {
  it('names the reason', () => {
    expect(validateVector([1, 2], 2)).toBeNull();
    expect(validateVector([1, 2, 3], 2)).toBe('wrong_dimension');
    expect(validateVector([1], 2)).toBe('wrong_dimension');
    expect(validateVector([1, NaN], 2)).toBe('not_finite');
    expect(validateVector([Infinity, 1], 2)).toBe('not_finite');
  });

  it('update refuses a broken contract instead of corrupting the state', () => {
    const o = OnlineMvMixture.fromMixture(truth);
    const stats = Array.from(o.statScatter);
    expect(() => o.update([1, 2, 3])).toThrow(/dimension is 2/);
    expect(() => o.update([1, NaN])).toThrow(/not finite/);
    expect(() => o.update([-Infinity, 1])).toThrow(/not finite/);
    expect(Array.from(o.statScatter)).toEqual(stats);
    expect(o.eventsSeen).toBe(0);
  });
});

describe('hot-path kernels', () => {
  it('the unrolled d = 4 kernels give the same bits as the generic ones', () => {
    const rng = new Random(12);
    const k = 3;
    const d = 4;
    const covs: number[] = [];
    const means: number[] = [];
    for (let j = 0; j < k; j++) {
      for (let i = 0; i < d; i++) means.push(rng.normal() * 3);
      for (let a = 0; a < d; a++) for (let b = 0; b < d; b++) covs.push(a === b ? 1 + j : 0.3 / (1 + Math.abs(a - b)));
    }
    const m = MvMixture.fromParameters({ weights: [0.2, 0.3, 0.5], means, covariances: covs });
    const w1 = new Float64Array([0.2, 0.3, 0.5]);
    const w2 = Float64Array.from(w1);
    const mean1 = Float64Array.from(m.frameMeans);
    const mean2 = Float64Array.from(m.frameMeans);
    const sc1 = new Float64Array(k * 10).map(() => rng.uniform());
    const sc2 = Float64Array.from(sc1);
    for (let t = 0; t < 500; t++) {
      const z = Float64Array.from({ length: d }, () => rng.normal() * 4);
      const a = new Float64Array(k);
      const b = new Float64Array(k);
      const ma = weightedLogDensities(d, k, z, m.frameMeans, m.frameChol, m.frameInvDiag, m.logConst, new Float64Array(d), a);
      const mb = weightedLogDensities4(k, z, m.frameMeans, m.frameChol, m.frameInvDiag, m.logConst, b);
      expect(mb).toBe(ma);
      expect(Array.from(b)).toEqual(Array.from(a));
      const resp = Float64Array.from([rng.uniform(), rng.uniform(), 0]);
      accumulate(d, k, z, resp, 0.01, 0.99, w1, mean1, sc1, new Float64Array(d));
      accumulate4(k, z, resp, 0.01, 0.99, w2, mean2, sc2);
    }
    expect(Array.from(w2)).toEqual(Array.from(w1));
    expect(Array.from(mean2)).toEqual(Array.from(mean1));
    expect(Array.from(sc2)).toEqual(Array.from(sc1));
  });
});
