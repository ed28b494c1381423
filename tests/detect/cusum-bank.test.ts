import { describe, expect, it } from 'vitest';
import { RatioCusums, ScoreCusums } from '../../src/detect/cusum-bank.js';
import { Random } from '../../src/math/random.js';

/** Page's CUSUM written out in its additive form (Page 1954, "Continuous inspection schemes", Biometrika 41). */
function pageCusum(xs: readonly number[]): { s: number[]; starts: number[] } {
  let s = 0;
  let start = -1;
  const out: number[] = [];
  const starts: number[] = [];
  xs.forEach((x, i) => {
    const next = Math.max(0, s + x);
    if (s === 0 && next > 0) start = i;
    s = next;
    out.push(s);
    starts.push(start);
  });
  return { s: out, starts };
}

describe('CUSUM banks', () => {
  // Log-likelihood ratios of a weight change on a two-component mixture: mostly small and negative, with
  // runs of positive ones (the change), and some far events (ratios near 0 and large).
  const rng = new Random(11);
  const llrs: number[] = [];
  for (let i = 0; i < 20_000; i++) {
    const drift = i > 8_000 && i < 9_000 ? 0.2 : -0.05;
    llrs.push(drift + 0.3 * rng.normal() + (rng.uniform() < 0.001 ? 8 * rng.normal() : 0));
  }

  it('the ratio form R <- max(1, R·Λ) is Page\'s CUSUM S <- max(0, S + ln Λ) with S = ln R', () => {
    const want = pageCusum(llrs);
    const bank = new RatioCusums(2);
    for (let i = 0; i < llrs.length; i++) {
      const r = bank.step(1, Math.exp(llrs[i]), i, 1000 * i);
      expect(Math.log(r)).toBeCloseTo(want.s[i], 9);
      expect(bank.value(1)).toBeCloseTo(want.s[i], 9);
      if (want.s[i] > 1e-9) {
        expect(bank.startOffset(1)).toBe(want.starts[i]);
        expect(bank.startTs(1)).toBe(1000 * want.starts[i]);
      }
    }
    expect(Math.max(...want.s)).toBeGreaterThan(18); // the run of positive llrs took it past a usual threshold
    expect(bank.value(0)).toBe(0); // an untouched statistic sits at its floor
    expect(bank.max()).toBeCloseTo(want.s[want.s.length - 1], 9);
  });

  it('the score form is the same recursion on the scores themselves', () => {
    const want = pageCusum(llrs);
    const bank = new ScoreCusums(1);
    llrs.forEach((x, i) => {
      expect(bank.step(0, x, i, i)).toBeCloseTo(want.s[i], 12);
      if (want.s[i] > 0) expect(bank.startOffset(0)).toBe(want.starts[i]);
    });
  });

  it('caps, resets and a ratio that is not a number leave the statistic at a defined value', () => {
    const bank = new RatioCusums(1);
    bank.step(0, Math.exp(30), 5, 50);
    bank.capRatio(0, Math.exp(20));
    expect(bank.value(0)).toBeCloseTo(20, 12);
    bank.step(0, Number.NaN, 6, 60);
    expect(bank.value(0)).toBe(0);
    bank.step(0, 3, 7, 70);
    expect(bank.startOffset(0)).toBe(7);
    bank.reset(0);
    expect(bank.value(0)).toBe(0);
  });
});
