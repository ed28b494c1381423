/**
 * Engine benchmark: `npm run bench` prints one JSON line per figure, {"bench", "value", "unit"}.
 *
 * - 1-D stepwise update, K = 4 (OnlineMixture1D.update, and the evaluate + learn pair the stream
 *   monitor calls), best and median of several timed passes over pre-generated events;
 * - 4-D stepwise update, K = 4 (benchMvStepwise in mv-bench.ts);
 * - an allocation check: heap growth and garbage collections over 1M updates;
 * - the daemon thread's per-event path on packed batches: read, decode, route and model (pipeline-bench.ts);
 * - the batch fit of 100k 1-D points, k = 1..4 by BIC, beside scikit-learn's GaussianMixture on the
 *   same data, tolerance, n_init and max_iter (tests/reference/sklearn_bench.py), with the ratio.
 *
 * The machine may be shared and noisy: compare figures from the same run, not across runs.
 * Environment: BENCH_QUICK=1 for a short run (fewer passes).
 */
import { spawnSync } from 'node:child_process';
import { mkdtempSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { fileURLToPath } from 'node:url';
import { selectMixture1D } from '../math/batch-em1d.js';
import { Mixture1D } from '../math/mixture1d.js';
import { Random } from '../math/random.js';
import { OnlineMixture1D } from '../math/stepwise-em1d.js';
import { benchMvStepwise, type BenchFigure } from './mv-bench.js';
import { collectionsDuring } from './gc.js';
import { benchPipeline } from './pipeline-bench.js';

const QUICK = process.env.BENCH_QUICK === '1';

/** An invented 4-component 1-D mixture (overlapping neighbours, unequal weights and spreads). */
export function truth1D(): Mixture1D {
  return new Mixture1D('identity', [0.4, 0.3, 0.2, 0.1], [0, 6, 13, 25], [1, 1.5, 2, 3]);
}

export function sample1D(n: number, seed: number): Float64Array {
  const m = truth1D();
  const rng = new Random(seed);
  const out = new Float64Array(n);
  for (let i = 0; i < n; i++) out[i] = m.sample(rng);
  return out;
}

function emit(f: BenchFigure & { [extra: string]: unknown }): void {
  console.log(JSON.stringify(f));
}

function median(xs: number[]): number {
  const s = [...xs].sort((a, b) => a - b);
  const h = s.length >> 1;
  return s.length % 2 ? s[h] : 0.5 * (s[h - 1] + s[h]);
}

function seconds(t0: bigint): number {
  return Number(process.hrtime.bigint() - t0) / 1e9;
}

/** One pass of update() over the data; returns a value read from the model so the work cannot be dropped. */
function passUpdate(model: OnlineMixture1D, data: Float64Array, tBase: number): number {
  for (let i = 0; i < data.length; i++) model.update(data[i], tBase + i);
  return model.weight(0);
}

/** The stream monitor's path: evaluate (detectors read the E-step), then learn. */
function passEvaluateLearn(model: OnlineMixture1D, data: Float64Array, tBase: number): number {
  let acc = 0;
  for (let i = 0; i < data.length; i++) {
    model.evaluate(data[i]);
    acc += model.responsibility(0);
    model.learn(tBase + i);
  }
  return acc;
}

function benchStepwise1D(): void {
  const n = 1_000_000;
  const data = sample1D(n, 11);
  const rounds = QUICK ? 3 : 7;
  const cases: [string, (m: OnlineMixture1D, d: Float64Array, t: number) => number][] = [
    ['stepwise_update_1d_k4', passUpdate],
    ['stepwise_evaluate_learn_1d_k4', passEvaluateLearn],
  ];
  for (const [name, pass] of cases) {
    const model = OnlineMixture1D.fromMixture(truth1D(), { window: 5000 });
    let sink = pass(model, data, 0); // warm-up (JIT)
    const rates: number[] = [];
    for (let r = 0; r < rounds; r++) {
      const t0 = process.hrtime.bigint();
      sink += pass(model, data, (r + 1) * n);
      rates.push(n / seconds(t0));
    }
    if (!Number.isFinite(sink)) throw new Error('stepwise bench: model went non-finite');
    emit({ bench: `${name}_best`, value: Math.round(Math.max(...rates)), unit: 'events/s' });
    emit({ bench: `${name}_median`, value: Math.round(median(rates)), unit: 'events/s', rounds });
  }
}

/** 1M updates: heap growth and garbage collections while they run (both should be ~0: the path allocates nothing). */
async function benchAllocation(): Promise<void> {
  const n = 1_000_000;
  const data = sample1D(n, 12);
  const model = OnlineMixture1D.fromMixture(truth1D(), { window: 5000 });
  passUpdate(model, data.subarray(0, 100_000), 0); // warm-up: let the JIT settle first
  await new Promise((r) => setTimeout(r, 50));
  const before = process.memoryUsage().heapUsed;
  const { result: after, collections: gcs } = await collectionsDuring(() => {
    passUpdate(model, data, 100_000);
    return process.memoryUsage().heapUsed;
  });
  emit({ bench: 'stepwise_update_1d_1m_heap_growth', value: after - before, unit: 'bytes' });
  emit({ bench: 'stepwise_update_1d_1m_gc_count', value: gcs, unit: 'collections' });
}

interface SklearnResult {
  seconds: number;
  bics: number[];
  chosen_k: number;
  iterations: number[];
  converged: boolean[];
  sklearn_version: string;
  numpy_version: string;
}

function runSklearn(x: Float64Array, tol: number, nInit: number, maxIter: number, repeats: number): SklearnResult | string {
  // The first interpreter that imports sklearn: BENCH_PYTHON, the python3 on PATH, then Debian's.
  const candidates = [process.env.BENCH_PYTHON, 'python3', '/usr/bin/python3'].filter((c): c is string => !!c);
  const python = candidates.find((c) => spawnSync(c, ['-c', 'import sklearn'], { encoding: 'utf8' }).status === 0);
  if (python === undefined) {
    return `no python3 with scikit-learn among ${candidates.join(', ')} (Debian: apt-get install python3-sklearn)`;
  }
  const dir = mkdtempSync(join(tmpdir(), 'modewatch-bench-'));
  try {
    const file = join(dir, 'x.f64');
    const le = new Float64Array(x); // Node runs little-endian on every supported platform; the script reads <f8
    writeFileSync(file, new Uint8Array(le.buffer));
    const script = fileURLToPath(new URL('../../tests/reference/sklearn_bench.py', import.meta.url));
    // One thread for NumPy's BLAS, as our fit runs on one core.
    const env = { ...process.env, OMP_NUM_THREADS: '1', OPENBLAS_NUM_THREADS: '1', MKL_NUM_THREADS: '1' };
    const r = spawnSync(python, [script, file, String(tol), String(nInit), String(maxIter), String(repeats)], {
      encoding: 'utf8',
      env,
      timeout: 600_000,
    });
    if (r.status !== 0) return `sklearn_bench.py failed (status ${r.status}): ${(r.stderr || String(r.error)).trim().slice(-400)}`;
    return JSON.parse(r.stdout.trim().split('\n').pop() ?? '{}') as SklearnResult;
  } finally {
    rmSync(dir, { recursive: true, force: true });
  }
}

function benchBatch(): void {
  const n = 100_000;
  const x = sample1D(n, 13);
  const tol = Number(process.env.BENCH_TOL ?? 1e-6);
  const restarts = 4;
  const maxIter = 500;
  const repeats = QUICK ? 1 : 3;
  let best = Infinity;
  let sel = selectMixture1D(x, 'identity', 1, 4, { tol, restarts, maxIter });
  for (let r = 0; r < repeats; r++) {
    const t0 = process.hrtime.bigint();
    sel = selectMixture1D(x, 'identity', 1, 4, { tol, restarts, maxIter });
    best = Math.min(best, seconds(t0));
  }
  const oursK = sel.best.mixture.k;
  emit({
    bench: 'batch_fit_100k_k1to4',
    value: best,
    unit: 's',
    tol,
    restarts,
    maxIter,
    chosenK: oursK,
    bics: sel.candidates.map((c) => c.bic),
  });
  const sk = runSklearn(x, tol, restarts, maxIter, repeats);
  if (typeof sk === 'string') {
    console.log(JSON.stringify({ bench: 'batch_fit_100k_sklearn', skipped: sk }));
    return;
  }
  emit({
    bench: 'batch_fit_100k_sklearn',
    value: sk.seconds,
    unit: 's',
    sklearnVersion: sk.sklearn_version,
    chosenK: sk.chosen_k,
    bics: sk.bics,
    iterations: sk.iterations,
  });
  emit({
    bench: 'batch_fit_100k_vs_sklearn_ratio',
    value: sk.seconds / best,
    unit: 'x (sklearn time / ours; > 1: ours is faster)',
    sameK: sk.chosen_k === oursK,
  });
}

async function main(): Promise<void> {
  const only = process.argv[2];
  if (!only || only === 'stepwise') benchStepwise1D();
  if (!only || only === 'mv') for (const f of benchMvStepwise()) emit({ ...f });
  if (!only || only === 'alloc') await benchAllocation();
  if (!only || only === 'pipeline') for (const f of await benchPipeline()) emit({ ...f });
  if (!only || only === 'batch') benchBatch();
}

if (import.meta.url === `file://${process.argv[1]}`) {
  main().catch((e: unknown) => {
    console.error(e);
    process.exitCode = 1;
  });
}
