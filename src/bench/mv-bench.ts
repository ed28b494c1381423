import { Random } from '../math/random.js';
import { MvMixture } from '../math/mv/mixture.js';
import { OnlineMvMixture } from '../math/mv/online-em.js';

export interface BenchFigure {
  bench: string;
  value: number;
  unit: string;
}

const D = 4;
const K = 4;

/** An invented 4-D, 4-component mixture (well separated, correlated) to draw the stream from. */
function benchTruth(): MvMixture {
  const weights = [0.4, 0.3, 0.2, 0.1];
  const means: number[] = [];
  const covariances: number[] = [];
  for (let j = 0; j < K; j++) {
    for (let i = 0; i < D; i++) means.push(5 * j + i);
    for (let a = 0; a < D; a++) for (let b = 0; b < D; b++) covariances.push(a === b ? 1 + 0.2 * j : 0.3);
  }
  return MvMixture.fromParameters({ weights, means, covariances });
}

/**
 * Stepwise EM update rate for d = 4, K = 4 on one core: events are drawn up front, then
 * fed through `update` for at least `minMillis` (after a warm-up), best of `rounds`.
 * Uses the clock (benchmarks are outside the pure math room).
 */
export function benchMvStepwise(opts: { events?: number; rounds?: number } = {}): BenchFigure[] {
  const n = opts.events ?? 200_000;
  const rounds = opts.rounds ?? 5;
  const truth = benchTruth();
  const data = truth.sampleMany(new Random(7), n);
  const rows: Float64Array[] = [];
  for (let r = 0; r < n; r++) rows.push(data.subarray(r * D, r * D + D));
  const model = OnlineMvMixture.fromMixture(truth, { initialCount: 10_000 });
  for (let r = 0; r < Math.min(n, 50_000); r++) model.update(rows[r]); // warm-up (JIT)
  let best = 0;
  for (let round = 0; round < rounds; round++) {
    const t0 = process.hrtime.bigint();
    for (let r = 0; r < n; r++) model.update(rows[r]);
    const ns = Number(process.hrtime.bigint() - t0);
    best = Math.max(best, n / (ns / 1e9));
  }
  const lp = new Float64Array(1);
  const t0 = process.hrtime.bigint();
  let acc = 0;
  for (let r = 0; r < n; r++) acc += model.mixture.logpdf(rows[r]);
  const ns = Number(process.hrtime.bigint() - t0);
  lp[0] = acc; // keep the loop observable
  return [
    { bench: 'mv_stepwise_update_d4_k4', value: Math.round(best), unit: 'events/s' },
    { bench: 'mv_logpdf_d4_k4', value: Math.round(n / (ns / 1e9)), unit: 'events/s' },
  ];
}

// Run directly: node dist/bench/mv-bench.js
if (import.meta.url === `file://${process.argv[1]}`) {
  for (const f of benchMvStepwise()) console.log(`${f.bench}\t${f.value}\t${f.unit}`);
}
