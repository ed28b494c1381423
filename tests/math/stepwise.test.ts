import fc from 'fast-check';
import { describe, expect, it } from 'vitest';
import { fitMixture1D } from '../../src/math/batch-em1d.js';
import { Mixture1D } from '../../src/math/mixture1d.js';
import { Random } from '../../src/math/random.js';
import { checkValue } from '../../src/math/scale.js';
import { ModelDocumentError, mixtureFromJSON, mixtureToJSON, onlineFromJSON, onlineToJSON } from '../../src/math/serialize.js';
import { OnlineMixture1D } from '../../src/math/stepwise-em1d.js';

function sorted(m: Mixture1D) {
  return m.components().sort((a, b) => a.modelMean - b.modelMean);
}

describe('stepwise EM', () => {
  const truth = new Mixture1D('log', [0.8, 0.2], [Math.log(40), Math.log(180)], [0.3, 0.35]);
  const rng = new Random(11);
  const n = 200_000;
  const data = Float64Array.from({ length: n }, () => truth.sample(rng));

  it('on a long stationary stream converges to the batch MLE of the same data (weights ±0.01, means ±0.05 sd)', () => {
    const batch = fitMixture1D(data, 2, 'log', { seed: 2 });
    // Start from a deliberately poor guess; no forgetting floor, so the Robbins–Monro schedule converges
    // (Cappé & Moulines 2009, Theorem 1, needs Σγ = ∞ and Σγ² < ∞: α in (0.5, 1]).
    const start = new Mixture1D('log', [0.5, 0.5], [Math.log(30), Math.log(250)], [0.5, 0.5]);
    const online = OnlineMixture1D.fromMixture(start, { window: 1e12, alpha: 0.6 });
    for (let i = 0; i < n; i++) online.update(Math.log(data[i]), i);
    const b = sorted(batch.mixture);
    const o = sorted(online.toMixture());
    for (let j = 0; j < 2; j++) {
      expect(Math.abs(o[j].weight - b[j].weight)).toBeLessThan(0.01);
      expect(Math.abs(o[j].modelMean - b[j].modelMean)).toBeLessThan(0.05 * b[j].modelSd);
      expect(o[j].modelSd / b[j].modelSd).toBeCloseTo(1, 1);
    }
  });

  it('with a forgetting window follows a change of weights', () => {
    const m = OnlineMixture1D.fromMixture(truth, { window: 2000 });
    const after = new Mixture1D('log', [0.5, 0.5], [Math.log(40), Math.log(180)], [0.3, 0.35]);
    const r = new Random(3);
    for (let i = 0; i < 30_000; i++) m.update(Math.log(after.sample(r)), i);
    const c = sorted(m.toMixture());
    expect(c[0].weight).toBeCloseTo(0.5, 1);
  });

  it('is deterministic and independent of batching: the same events give bit-identical state', () => {
    const a = OnlineMixture1D.fromMixture(truth, { window: 500, halfLifeMs: 60_000 });
    const b = OnlineMixture1D.fromMixture(truth, { window: 500, halfLifeMs: 60_000 });
    for (let i = 0; i < 5000; i++) a.update(Math.log(data[i]), 1000 * i);
    // b is saved and restored every 777 events, as a checkpointing daemon would.
    let bb = b;
    for (let i = 0; i < 5000; i++) {
      bb.update(Math.log(data[i]), 1000 * i);
      if (i % 777 === 0) bb = onlineFromJSON(JSON.parse(JSON.stringify(onlineToJSON(bb))));
    }
    expect(onlineToJSON(bb)).toEqual(onlineToJSON(a));
  });

  it('a background component keeps scattered outliers from dragging the components', () => {
    const plain = OnlineMixture1D.fromMixture(truth, { window: 2000 });
    const robust = OnlineMixture1D.fromMixture(truth, { window: 2000, backgroundWeight: 0.002 });
    const r = new Random(9);
    for (let i = 0; i < 20_000; i++) {
      const x = i % 500 === 0 ? 1e6 * (1 + r.uniform()) : truth.sample(r);
      plain.update(Math.log(x), i);
      robust.update(Math.log(x), i);
    }
    const top = sorted(robust.toMixture())[1];
    expect(Math.abs(top.modelMean - Math.log(180))).toBeLessThan(0.05);
    expect(top.modelSd).toBeLessThan(0.45);
    expect(sorted(plain.toMixture())[1].modelSd).toBeGreaterThan(top.modelSd);
  });

  it('stable ids survive births, merges and removals', () => {
    const m = OnlineMixture1D.fromMixture(truth);
    const ids = [m.id(0), m.id(1)];
    const born = m.addComponent(Math.log(900), 0.2, 0.03);
    expect(born).toBeGreaterThan(Math.max(...ids));
    expect(m.weight(2)).toBeCloseTo(0.03, 10);
    m.removeComponent(0);
    expect(m.indexOf(ids[0])).toBe(-1);
    expect(m.indexOf(born)).toBe(1);
    m.mergeComponents(0, 1);
    expect(m.k).toBe(1);
    expect(m.id(0)).toBe(ids[1]);
    expect(m.weight(0)).toBeCloseTo(1, 12);
  });
});

describe('property tests (fast-check)', () => {
  const magnitudes = fc.oneof(
    fc.double({ min: 1e-300, max: 1e-290, noNaN: true }),
    fc.double({ min: -1e300, max: 1e300, noNaN: true, noDefaultInfinity: true }),
    fc.constantFrom(0, 1, -1, 1e300, -1e300, 5e-324),
  );

  it('whatever the order and magnitude of the input, parameters stay finite and weights sum to 1', () => {
    fc.assert(
      fc.property(fc.array(magnitudes, { minLength: 3, maxLength: 200 }), fc.integer({ min: 1, max: 3 }), (xs, k) => {
        const fit = fitMixture1D(xs, Math.min(k, xs.length), 'identity', { restarts: 1, maxIter: 50 });
        const m = OnlineMixture1D.fromMixture(fit.mixture, { window: 50, backgroundWeight: 0.001 });
        for (let i = 0; i < xs.length; i++) m.update(xs[xs.length - 1 - i], i);
        for (let rep = 0; rep < 100; rep++) m.update(xs[0], 1000 + rep); // a repeated identical value
        let s = 0;
        for (let j = 0; j < m.k; j++) {
          expect(Number.isFinite(m.mean(j))).toBe(true);
          expect(m.sd(j)).toBeGreaterThan(0);
          expect(Number.isFinite(m.sd(j))).toBe(true);
          s += m.weight(j);
        }
        expect(s).toBeCloseTo(1, 9);
        expect(Number.isFinite(fit.logLikelihood)).toBe(true);
      }),
      { numRuns: Number(process.env.PROPERTY_RUNS ?? 150) },
    );
  });

  it('a stream of one repeated value does not collapse a component to zero spread', () => {
    const m = OnlineMixture1D.fromMixture(new Mixture1D('identity', [1], [5], [1]), { window: 100 });
    for (let i = 0; i < 10_000; i++) m.update(5, i);
    expect(m.sd(0)).toBeGreaterThan(0);
    expect(Number.isFinite(m.logpdfModel(5))).toBe(true);
  });
});

describe('bad input and documents', () => {
  it('NaN, ±Infinity and values outside the scale domain are rejected with a typed reason', () => {
    expect(checkValue('identity', Number.NaN)).toBe('not_finite');
    expect(checkValue('identity', Infinity)).toBe('not_finite');
    expect(checkValue('log', -Infinity)).toBe('not_finite');
    expect(checkValue('log', 0)).toBe('out_of_domain');
    expect(checkValue('log', -3)).toBe('out_of_domain');
    expect(checkValue('log1p', -1)).toBe('out_of_domain');
    expect(checkValue('log1p', 0)).toBeNull();
    expect(checkValue('identity', -1e300)).toBeNull();
  });

  it('mixture documents round-trip bit for bit', () => {
    const m = new Mixture1D('log', [0.1 + 0.2, 0.7], [Math.PI, Math.E], [1 / 3, 5e-324 + 0.1]);
    const back = mixtureFromJSON(JSON.parse(JSON.stringify(mixtureToJSON(m))));
    for (let j = 0; j < 2; j++) {
      expect(Object.is(back.weights[j], m.weights[j])).toBe(true);
      expect(Object.is(back.means[j], m.means[j])).toBe(true);
      expect(Object.is(back.sds[j], m.sds[j])).toBe(true);
    }
  });

  it('documents of another version or shape are refused with a clear error', () => {
    const doc = mixtureToJSON(new Mixture1D('identity', [1], [0], [1])) as Record<string, unknown>;
    expect(() => mixtureFromJSON({ ...doc, version: 2 })).toThrow(/version 2 is not supported/);
    expect(() => mixtureFromJSON({ ...doc, format: 'other' })).toThrow(ModelDocumentError);
    expect(() => mixtureFromJSON({ ...doc, means: [0, 1] })).toThrow(/"means" must have 1 entries/);
    expect(() => mixtureFromJSON({ ...doc, scale: 'sqrt' })).toThrow(/"scale"/);
    expect(() => onlineFromJSON({ format: 'modewatch/online-mixture1d', version: 1 })).toThrow(/options/);
  });
});

describe('regressions found by the property tests', () => {
  it('denormal data whose spread underflows still fits ([0, 0, 5e-324])', () => {
    const fit = fitMixture1D([0, 0, 5e-324], 1, 'identity', { restarts: 1 });
    expect(Number.isFinite(fit.logLikelihood)).toBe(true);
    expect(Number.isFinite(fit.mixture.means[0])).toBe(true);
    expect(fit.mixture.sds[0]).toBeGreaterThan(0);
    const m = OnlineMixture1D.fromMixture(fit.mixture, { window: 50 });
    for (const x of [0, 5e-324, 0, 0]) m.update(x, 0);
    expect(m.sd(0)).toBeGreaterThan(0);
    expect(Number.isFinite(m.mean(0))).toBe(true);
  });
});
