import fc from 'fast-check';
import { describe, expect, it } from 'vitest';
import { Random } from '../src/math/random.js';
import {
  MvFormatError,
  MvMixture,
  OnlineMvMixture,
  mvFromJSON,
  mvMixtureFromJSON,
  mvToJSON,
  onlineMvFromJSON,
} from '../src/math/mv/index.js';

const truth = MvMixture.fromParameters({
  weights: [0.6, 0.4],
  means: [0, 3, 5, -2, 1, 0],
  covariances: [1, 0.2, 0, 0.2, 2, 0.1, 0, 0.1, 0.5, 0.3, 0, 0, 0, 0.3, 0, 0, 0, 0.3],
});

/** Every field as raw 64-bit patterns, so that −0 ≠ 0 and any changed bit shows. */
function bits(a: Float64Array): string {
  return Buffer.from(a.buffer, a.byteOffset, a.byteLength).toString('hex');
}
function mixtureBits(m: MvMixture): string[] {
  return [m.weights, m.center, m.scale, m.frameMeans, m.frameCovariances, m.frameChol, m.frameInvDiag, m.frameLogDet, m.logConst].map(bits);
}
const viaText = (doc: unknown): unknown => JSON.parse(JSON.stringify(doc));

describe('mvToJSON / mvFromJSON round trip', () => {
  it('JSON numbers carry every finite double exactly (ECMA-262 Number::toString), −0 as "-0"', () => {
    fc.assert(
      fc.property(fc.double({ noNaN: true, noDefaultInfinity: true }), (v) => {
        const m = truth.clone();
        m.frameMeans[1] = v;
        const back = mvMixtureFromJSON(viaText(mvToJSON(m)));
        expect(Object.is(back.frameMeans[1], v)).toBe(true);
      }),
      { numRuns: 2000, seed: 5 },
    );
    const m = truth.clone();
    m.frameMeans[0] = -0;
    const doc = mvToJSON(m);
    expect(doc.frameMeans[0]).toBe('-0');
    expect(Object.is(mvMixtureFromJSON(viaText(doc)).frameMeans[0], -0)).toBe(true);
  });

  it('a mixture round-trips bit for bit, cached factors included', () => {
    const back = mvFromJSON(viaText(mvToJSON(truth)));
    expect(back).toBeInstanceOf(MvMixture);
    expect(mixtureBits(back as MvMixture)).toEqual(mixtureBits(truth));
  });

  it('an online model round-trips bit for bit mid mini-batch and then evolves identically', () => {
    const o = OnlineMvMixture.fromMixture(truth, { miniBatch: 16, window: 300, initialCount: 100 });
    const xs = truth.sampleMany(new Random(3), 4000);
    for (let r = 0; r < 2005; r++) o.update(xs.subarray(r * 3, r * 3 + 3)); // 2005 = not a multiple of 16
    const doc = viaText(mvToJSON(o));
    const back = mvFromJSON(doc) as OnlineMvMixture;
    expect(back).toBeInstanceOf(OnlineMvMixture);
    expect(back.eventsSeen).toBe(2005);
    expect(back.pendingEvents).toBe(2005 % 16);
    expect(back.stepCount).toBe(o.stepCount);
    expect(back.settings).toEqual(o.settings);
    expect([bits(back.statWeight), bits(back.statMean), bits(back.statScatter)]).toEqual([
      bits(o.statWeight),
      bits(o.statMean),
      bits(o.statScatter),
    ]);
    expect(mixtureBits(back.mixture)).toEqual(mixtureBits(o.mixture));
    expect(JSON.stringify(mvToJSON(back))).toBe(JSON.stringify(doc));
    for (let r = 2005; r < 4000; r++) {
      o.update(xs.subarray(r * 3, r * 3 + 3));
      back.update(xs.subarray(r * 3, r * 3 + 3));
    }
    expect(bits(back.statScatter)).toBe(bits(o.statScatter));
    expect(mixtureBits(back.mixture)).toEqual(mixtureBits(o.mixture));
  });
});

describe('bad documents are rejected with a message naming the problem', () => {
  const good = (): Record<string, unknown> => viaText(mvToJSON(OnlineMvMixture.fromMixture(truth))) as Record<string, unknown>;
  const goodMix = (): Record<string, unknown> => viaText(mvToJSON(truth)) as Record<string, unknown>;

  const cases: [string, () => unknown, RegExp][] = [
    ['not an object', () => 42, /format is absent/],
    ['another format', () => ({ ...goodMix(), format: 'something-else' }), /format is "something-else"/],
    ['another version', () => ({ ...goodMix(), version: 2 }), /version is 2; this build reads version 1 only/],
    ['missing field', () => { const d = goodMix(); delete d.scale; return d; }, /scale is missing/],
    ['weights of the wrong length', () => ({ ...goodMix(), weights: [1] }), /weights has 1 entries, expected 2/],
    ['covariances of the wrong shape', () => ({ ...goodMix(), frameCovariances: [1, 2, 3] }), /frameCovariances has 3 entries, expected 18/],
    ['a string for a number', () => ({ ...goodMix(), center: [0, 'x', 1] }), /center\[1\] must be a finite number, got "x"/],
    ['null (a non-finite value as JSON writes it)', () => ({ ...goodMix(), frameMeans: [null, 0, 0, 0, 0, 0] }), /frameMeans\[0\] must be a finite number/],
    ['dimension beyond 8', () => ({ ...goodMix(), d: 9 }), /d must be an integer in 1\.\.8/],
    ['a negative weight', () => ({ ...goodMix(), weights: [-0.1, 1.1] }), /weights\[0\] is negative/],
    ['a zero scale', () => ({ ...goodMix(), scale: [1, 0, 1] }), /scale\[1\] must be > 0/],
    ['online: wrong statistics shape', () => { const d = good(); (d.stats as Record<string, unknown>).scatter = [1]; return d; }, /stats\.scatter has 1 entries, expected 12/],
    ['online: nested mixture of another version', () => { const d = good(); (d.mixture as Record<string, unknown>).version = 0; return d; }, /mixture\.version is 0/],
    ['online: k disagrees with the mixture', () => ({ ...good(), k: 3 }), /mixture has k = 2, d = 3 but the document says k = 3/],
    ['online: alpha out of range', () => { const d = good(); (d.settings as Record<string, unknown>).alpha = 0.4; return d; }, /settings\.alpha must satisfy/],
    ['online: sinceMStep beyond the mini-batch', () => ({ ...good(), sinceMStep: 16 }), /sinceMStep must be an integer in 0\.\.15/],
  ];
  for (const [name, make, message] of cases) {
    it(name, () => {
      let err: unknown;
      try {
        mvFromJSON(make());
      } catch (e) {
        err = e;
      }
      expect(err).toBeInstanceOf(MvFormatError);
      expect((err as Error).message).toMatch(message);
    });
  }

  it('a state holding a non-finite value is refused on the way out, not written as null', () => {
    const m = truth.clone();
    m.frameCovariances[4] = Infinity;
    expect(() => mvToJSON(m)).toThrow(/frameCovariances\[4\]: value Infinity is not finite/);
  });

  it('asking for one kind and getting the other is refused', () => {
    expect(() => onlineMvFromJSON(goodMix())).toThrow(/format is "modewatch\/mv-mixture", expected "modewatch\/mv-online"/);
    expect(() => mvMixtureFromJSON(good())).toThrow(/expected "modewatch\/mv-mixture"/);
  });
});
