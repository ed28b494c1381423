import { readFileSync } from 'node:fs';
import { describe, expect, it } from 'vitest';
import { selectMixture1D, fitMixture1D } from '../../src/math/batch-em1d.js';

/** Old Faithful waiting times: R datasets::faithful (tests/fixtures/README.md has the attribution). */
export function faithful(): { eruptions: number[]; waiting: number[] } {
  const lines = readFileSync(new URL('../fixtures/old-faithful.csv', import.meta.url), 'utf8').trim().split('\n').slice(1);
  const eruptions: number[] = [];
  const waiting: number[] = [];
  for (const l of lines) {
    const [e, w] = l.split(',').map(Number);
    eruptions.push(e);
    waiting.push(w);
  }
  return { eruptions, waiting };
}

describe('batch EM on Old Faithful waiting times', () => {
  const { waiting } = faithful();

  it('has the 272 rows of R datasets::faithful', () => {
    expect(waiting.length).toBe(272);
  });

  // Reference: the two-component normal mixture MLE as R's mixtools::normalmixEM reports it for this data and
  // scikit-learn 1.2.1 reproduces it: weights 0.3609/0.6391, means 54.615/80.091, sds 5.871/5.868, logL -1034.00.
  it('matches the published two-component MLE', () => {
    const fit = fitMixture1D(waiting, 2, 'identity', { seed: 7, tol: 1e-10 });
    const c = fit.mixture.components().sort((a, b) => a.mean - b.mean);
    expect(c[0].weight).toBeCloseTo(0.3609, 3);
    expect(c[1].weight).toBeCloseTo(0.6391, 3);
    expect(c[0].mean).toBeCloseTo(54.615, 2);
    expect(c[1].mean).toBeCloseTo(80.091, 2);
    expect(c[0].spread).toBeCloseTo(5.871, 2);
    expect(c[1].spread).toBeCloseTo(5.868, 2);
    expect(fit.logLikelihood).toBeCloseTo(-1034.0, 1);
    expect(fit.converged).toBe(true);
  });

  it('BIC (lower is better) chooses k = 2 among 1..4', () => {
    const sel = selectMixture1D(waiting, 'identity', 1, 4, { seed: 3 });
    expect(sel.best.mixture.k).toBe(2);
    expect(sel.candidates.map((c) => c.k)).toEqual([1, 2, 3, 4]);
    const bics = sel.candidates.map((c) => c.bic);
    expect(Math.min(...bics)).toBe(bics[1]);
  });

  it('stopping at the first rise of BIC fits k = 1..3 only and chooses the same model', () => {
    const full = selectMixture1D(waiting, 'identity', 1, 4, { seed: 3 });
    const elbow = selectMixture1D(waiting, 'identity', 1, 4, { seed: 3, stopAtFirstRise: true });
    expect(elbow.candidates.map((c) => c.k)).toEqual([1, 2, 3]);
    expect(elbow.candidates).toEqual(full.candidates.slice(0, 3));
    expect(elbow.best.mixture).toEqual(full.best.mixture);
  });
});
