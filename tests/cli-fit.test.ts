import { mkdtempSync, readFileSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { afterAll, afterEach, describe, expect, it, vi } from 'vitest';
import yargs from 'yargs';
import { fitCommand, runFit, type FitCommandOptions } from '../src/cli/fit-command.js';
import type { FitJson } from '../src/cli/fit-format.js';
import { Random } from '../src/math/random.js';

const FAITHFUL = 'tests/fixtures/old-faithful.csv'; // R datasets::faithful, 272 rows (tests/fixtures/README.md)
const dir = mkdtempSync(join(tmpdir(), 'modewatch-fit-'));
afterAll(() => rmSync(dir, { recursive: true, force: true }));

async function run(opts: FitCommandOptions): Promise<{ code: number; out: string; err: string }> {
  let out = '';
  let err = '';
  const code = await runFit(opts, { stdout: { write: (s: string) => (out += s) }, stderr: { write: (s: string) => (err += s) } });
  return { code, out, err };
}

async function runJson(opts: FitCommandOptions): Promise<FitJson> {
  const r = await run({ ...opts, json: true });
  expect(r.err).toBe('');
  expect(r.code).toBe(0);
  expect(r.out.trim().split('\n').length).toBe(1); // exactly one JSON object
  return JSON.parse(r.out) as FitJson;
}

function file(name: string, text: string): string {
  const p = join(dir, name);
  writeFileSync(p, text);
  return p;
}

const faithfulRows = readFileSync(FAITHFUL, 'utf8').trim().split('\n').slice(1).map((l) => l.split(',').map(Number));

describe('modewatch fit on Old Faithful', () => {
  // Reference: the two-component normal mixture MLE of the waiting times as R's mixtools::normalmixEM reports it
  // and scikit-learn 1.2.1 reproduces it: weights 0.3609/0.6391, means 54.615/80.091, sds 5.871/5.868, logL -1034.00.
  it('waiting on the identity scale: BIC chooses k = 2 with the published values', async () => {
    const j = await runJson({ file: FAITHFUL, columns: ['waiting'], scale: 'identity' });
    expect(j.k).toBe(2);
    expect(j.scale).toBe('identity');
    const [a, b] = j.components;
    expect(a.weight).toBeCloseTo(0.3609, 3);
    expect(b.weight).toBeCloseTo(0.6391, 3);
    expect(a.mean as number).toBeCloseTo(54.615, 2);
    expect(b.mean as number).toBeCloseTo(80.091, 2);
    expect(a.sd as number).toBeCloseTo(5.871, 2);
    expect(b.sd as number).toBeCloseTo(5.868, 2);
    expect(j.logLikelihood).toBeCloseTo(-1034.0, 1);
    expect(j.candidates.map((c) => c.k)).toEqual([1, 2, 3, 4, 5]);
    const bics = j.candidates.map((c) => c.bic);
    expect(Math.min(...bics)).toBe(j.bic);
    expect(j.candidates[1].bic).toBe(j.bic);
    // BIC = -2 logL + p ln n with p = 3k - 1 free parameters (Schwarz 1978).
    for (const c of j.candidates) expect(c.bic).toBeCloseTo(-2 * c.logLikelihood + (3 * c.k - 1) * Math.log(272), 6);
    expect(j.n).toBe(272);
    expect(j.skipped.total).toBe(0);
  });

  it('prints a readable table: every k tried, the chosen one marked, "lower BIC is better", components sorted', async () => {
    const r = await run({ file: FAITHFUL, columns: ['waiting'], scale: 'identity' });
    expect(r.code).toBe(0);
    expect(r.out).toContain('lower BIC is better');
    expect(r.out).toMatch(/\*\s+2\s+-1034\.00\s+\d+\.\d+\s+<- chosen/);
    for (const k of [1, 3, 4, 5]) expect(r.out).toMatch(new RegExp(`^\\s+${k}\\s+-\\d+\\.\\d+\\s+\\d+\\.\\d+$`, 'm'));
    const rows = [...r.out.matchAll(/^\s+([12])\s+(0\.\d{4})\s+([\d.]+)\s+([\d.]+)$/gm)].map((m) => m.slice(1).map(Number));
    expect(rows.length).toBe(2);
    expect(rows[0][2]).toBeCloseTo(54.615, 2);
    expect(rows[1][2]).toBeCloseTo(80.091, 2);
    expect(r.out).toContain('272 rows used, 273 lines read, 1 header, 0 skipped');
  });

  // Reference: tests/reference/sklearn-faithful-2d.json, scikit-learn 1.2.1 GaussianMixture(covariance_type='full',
  // tol=1e-6, reg_covar=1e-6, n_init=10), written by tests/reference/sklearn_faithful_2d.py.
  it('(eruptions, waiting) as a vector matches scikit-learn for k = 1..4 and chooses k = 2', async () => {
    const ref = JSON.parse(readFileSync('tests/reference/sklearn-faithful-2d.json', 'utf8')) as {
      fits: { k: number; weights: number[]; means: number[][]; covariances: number[][][]; meanLogLikelihood: number; bic: number }[];
    };
    const j = await runJson({ file: FAITHFUL, columns: ['eruptions', 'waiting'], kMin: 1, kMax: 4 });
    expect(j.k).toBe(2);
    expect(j.scale).toBe('identity');
    for (const c of j.candidates) {
      const r = ref.fits.find((f) => f.k === c.k);
      expect(r).toBeDefined();
      expect(c.bic).toBeCloseTo(r!.bic, 1);
      expect(c.logLikelihood / 272).toBeCloseTo(r!.meanLogLikelihood, 4);
    }
    const r2 = ref.fits[1];
    j.components.forEach((c, i) => {
      expect(c.weight).toBeCloseTo(r2.weights[i], 3);
      (c.mean as number[]).forEach((m, a) => expect(m).toBeCloseTo(r2.means[i][a], 2));
      c.cov!.forEach((row, a) => row.forEach((v, b) => expect(Math.abs(v - r2.covariances[i][a][b])).toBeLessThan(1e-3 * Math.max(1, Math.abs(r2.covariances[i][a][b])))));
      (c.sd as number[]).forEach((s, a) => expect(s).toBeCloseTo(Math.sqrt(r2.covariances[i][a][a]), 3));
    });
    // Sorted by the mean of the first column (eruptions).
    expect((j.components[0].mean as number[])[0]).toBeLessThan((j.components[1].mean as number[])[0]);
  });

  it('the vector table shows each column\'s mean and sd per component', async () => {
    const r = await run({ file: FAITHFUL, columns: ['eruptions,waiting'], kMax: 3 });
    expect(r.code).toBe(0);
    expect(r.out).toContain('(eruptions, waiting) as a 2-dimensional vector');
    expect(r.out).toMatch(/eruptions mean\s+eruptions sd\s+waiting mean\s+waiting sd/);
    expect(r.out).toMatch(/^\s+1\s+0\.3559\s+2\.036\d\s+0\.26\d+\s+54\.47\d\s+5\.80\d+$/m);
  });

  it('scale auto chooses by likelihood in the data\'s units among the admissible scales', async () => {
    const j = await runJson({ file: FAITHFUL, columns: ['waiting'], scale: 'auto' });
    expect(j.scaleComparison!.map((s) => s.scale)).toEqual(['identity', 'log', 'log1p']);
    const best = Math.max(...j.scaleComparison!.map((s) => s.logLikelihood));
    expect(j.logLikelihood).toBe(best);
    expect(j.scaleComparison!.find((s) => s.scale === 'identity')!.logLikelihood).toBeCloseTo(-1034.0, 1);
  });
});

describe('modewatch fit on invented latency data', () => {
  // Invented scenario: 1500 request latencies, a cache-served mode (median 40 ms) and a database mode (median 180 ms).
  const rng = new Random(42);
  const lat: number[] = [];
  for (let i = 0; i < 1500; i++) lat.push(i % 5 === 0 ? Math.exp(Math.log(180) + 0.3 * rng.normal()) : Math.exp(Math.log(40) + 0.2 * rng.normal()));
  const ndjson = file(
    'latency.ndjson',
    lat.map((v, i) => JSON.stringify({ ts: 1_700_000_000_000 + i, stream: 'checkout', timing: { total_ms: v } })).join('\n') + '\n',
  );

  it('reads a nested NDJSON field; scale auto prefers a log scale to identity for log-normal data', async () => {
    const j = await runJson({ file: ndjson, columns: ['timing.total_ms'], kMax: 3 });
    expect(j.k).toBe(2);
    expect(['log', 'log1p']).toContain(j.scale); // at medians of 40 ms and up, log and log1p differ by little
    const ll = Object.fromEntries(j.scaleComparison!.map((s) => [s.scale, s.logLikelihood]));
    expect(ll.identity).toBeLessThan(j.logLikelihood - 10);
  });

  it('on the log scale reports log-normal components in ms', async () => {
    const j = await runJson({ file: ndjson, columns: ['timing.total_ms'], scale: 'log', kMax: 4 });
    expect(j.scale).toBe('log');
    expect(j.k).toBe(2);
    const [fast, slow] = j.components;
    expect(fast.weight).toBeCloseTo(0.8, 1);
    expect(fast.location!).toBeGreaterThan(38);
    expect(fast.location!).toBeLessThan(42);
    expect(slow.location!).toBeGreaterThan(165);
    expect(slow.location!).toBeLessThan(195);
    // "mean" and "sd" are the log-normal component's, in ms: check against numerical integration of its density.
    for (const c of j.components) {
      const pdf = (x: number): number => Math.exp(-0.5 * ((Math.log(x) - c.logMean!) / c.logSd!) ** 2) / (x * c.logSd! * Math.sqrt(2 * Math.PI));
      let m1 = 0;
      let m2 = 0;
      const hi = Math.exp(c.logMean! + 10 * c.logSd!);
      const steps = 200_000;
      for (let i = 1; i <= steps; i++) {
        const x = (hi * (i - 0.5)) / steps;
        m1 += x * pdf(x) * (hi / steps);
        m2 += x * x * pdf(x) * (hi / steps);
      }
      expect(c.mean as number).toBeCloseTo(m1, 3);
      expect(c.sd as number).toBeCloseTo(Math.sqrt(m2 - m1 * m1), 3);
    }
  });

  it('the table for a log scale shows median, mean, sd and spread', async () => {
    const r = await run({ file: ndjson, columns: ['timing.total_ms'], scale: 'log', kMax: 3 });
    expect(r.code).toBe(0);
    expect(r.out).toContain('Scale: log (log-normal components');
    expect(r.out).toMatch(/location \(median\)\s+mean\s+sd\s+spread/);
  });
});

describe('--plot', () => {
  it('writes an SVG with one path per component plus the total, and bars that add up to the rows', async () => {
    const out = join(dir, 'waiting.svg');
    const r = await run({ file: FAITHFUL, columns: ['waiting'], scale: 'identity', plot: out });
    expect(r.code).toBe(0);
    expect(r.out).toContain(`Plot written to ${out}`);
    const svg = readFileSync(out, 'utf8');
    expect(svg.startsWith('<svg xmlns="http://www.w3.org/2000/svg"')).toBe(true);
    expect(svg.trimEnd().endsWith('</svg>')).toBe(true);
    expect([...svg.matchAll(/<path /g)].length).toBe(3);
    expect([...svg.matchAll(/data-role="total"/g)].length).toBe(1);
    const counts = [...svg.matchAll(/data-count="(\d+)"/g)].map((m) => Number(m[1]));
    expect(counts.reduce((s, c) => s + c, 0)).toBe(272);
    expect(svg).toMatch(/1: weight 0\.361, location 54\.6\d/);
    expect(svg).toContain('>waiting</text>');
    expect(svg).toContain('>density</text>');
  });

  it('refuses a plot name that is not .svg, and an unwritable path', async () => {
    let r = await run({ file: FAITHFUL, columns: ['waiting'], plot: join(dir, 'x.png') });
    expect(r.code).toBe(2);
    expect(r.err).toContain('--plot writes SVG');
    r = await run({ file: FAITHFUL, columns: ['waiting'], kMax: 2, plot: join(dir, 'no-such-dir', 'x.svg') });
    expect(r.code).toBe(2);
    expect(r.err).toContain('cannot write --plot');
    expect(r.err).toContain('ENOENT');
  });
});

describe('user errors: a message saying what and where, exit code 2', () => {
  const csv = (name: string, body: string): string => file(name, 'eruptions,waiting\n' + body);

  it('a wrong column name lists the columns that exist', async () => {
    const r = await run({ file: FAITHFUL, columns: ['wait'] });
    expect(r.code).toBe(2);
    expect(r.out).toBe('');
    expect(r.err).toBe(`modewatch fit: ${FAITHFUL}: no column named "wait"; the header has "eruptions", "waiting"\n`);
  });

  it('a file with several columns and no --column says which exist', async () => {
    const r = await run({ file: FAITHFUL });
    expect(r.code).toBe(2);
    expect(r.err).toContain('say which column to fit with --column NAME (columns: "eruptions", "waiting")');
  });

  it('a wrong NDJSON field lists the fields of the first record, dotted', async () => {
    const p = file('f.ndjson', '{"ts": 1, "timing": {"total_ms": 3, "db_ms": 1}}\n');
    const r = await run({ file: p, columns: ['timing.total'] });
    expect(r.code).toBe(2);
    expect(r.err).toContain('no field named "timing.total" on line 1');
    expect(r.err).toContain('"ts", "timing.total_ms", "timing.db_ms"');
  });

  it('an empty file, a blank file, a header without rows, a missing file', async () => {
    let r = await run({ file: file('empty.csv', ''), columns: ['x'] });
    expect(r.code).toBe(2);
    expect(r.err).toContain('empty.csv is empty');
    r = await run({ file: file('blank.csv', '\n\n  \n'), columns: ['x'] });
    expect(r.code).toBe(2);
    expect(r.err).toContain('only blank lines');
    r = await run({ file: csv('header.csv', ''), columns: ['waiting'] });
    expect(r.code).toBe(2);
    expect(r.err).toContain('no rows to fit (it has a header row but no data rows)');
    r = await run({ file: join(dir, 'nope.csv'), columns: ['waiting'] });
    expect(r.code).toBe(2);
    expect(r.err).toContain('nope.csv: no such file');
  });

  it('an unreadable line: its number and why', async () => {
    let r = await run({ file: csv('quote.csv', '3.6,79\n1.8,54\n"3.3,74\n'), columns: ['waiting'] });
    expect(r.code).toBe(2);
    expect(r.err).toContain('quote.csv, line 4: broken CSV quoting');
    r = await run({ file: csv('fields.csv', '3.6,79\n1.8,54,7\n'), columns: ['waiting'] });
    expect(r.err).toContain('fields.csv, line 3: 3 fields, the header has 2');
    const p = file('bad.ndjson', '{"v": 1}\n{"v": 2}\n{"v": 3,\n');
    r = await run({ file: p, columns: ['v'] });
    expect(r.code).toBe(2);
    expect(r.err).toMatch(/bad\.ndjson, line 3: not valid JSON \(.+\)/);
    r = await run({ file: file('arr.ndjson', '{"v": 1}\n[2]\n'), columns: ['v'] });
    expect(r.err).toContain('line 2: expected a JSON object, found an array');
    r = await run({ file: file('miss.ndjson', '{"v": 1}\n{"w": 2}\n'), columns: ['v'] });
    expect(r.err).toContain('miss.ndjson, line 2: no field "v"');
    expect(r.err).toContain('--skip-invalid');
  });

  it('non-numeric and non-finite values: line number and value', async () => {
    let r = await run({ file: csv('nan.csv', '3.6,79\n1.8,fast\n'), columns: ['waiting'] });
    expect(r.code).toBe(2);
    expect(r.err).toContain('nan.csv, line 3: waiting = "fast" is not a number');
    r = await run({ file: csv('inf.csv', '3.6,79\n1.8,54\n2,Infinity\n'), columns: ['waiting'] });
    expect(r.err).toContain('inf.csv, line 4: waiting = "Infinity" is not a finite number');
    r = await run({ file: csv('emptyval.csv', '3.6,79\n1.8,\n'), columns: ['waiting'] });
    expect(r.err).toContain('emptyval.csv, line 3: waiting = "" is not a number');
    r = await run({ file: file('big.ndjson', '{"v": 1}\n{"v": 1e999}\n'), columns: ['v'] });
    expect(r.err).toContain('big.ndjson, line 2: v = "Infinity" is not a finite number');
    r = await run({ file: file('null.ndjson', '{"v": 1}\n{"v": null}\n'), columns: ['v'] });
    expect(r.err).toContain('null.ndjson, line 2: v is null, not a number');
  });

  it("values outside the chosen scale's domain: line, value, how many, what to do", async () => {
    const body = Array.from({ length: 20 }, (_, i) => `1,${i === 5 ? 0 : 10 + i}`).join('\n') + '\n';
    const p = csv('zero.csv', body);
    const r = await run({ file: p, columns: ['waiting'], scale: 'log' });
    expect(r.code).toBe(2);
    expect(r.err).toContain("zero.csv, line 7: waiting = 0 is outside the log scale's domain (x > 0); 1 value in all. Use --scale log1p or identity");
    // auto leaves log out and says so; log1p admits 0.
    const j = await runJson({ file: p, columns: ['waiting'], kMax: 2 });
    expect(j.scaleComparison!.map((s) => s.scale)).toEqual(['identity', 'log1p']);
    expect(j.notes.join(' ')).toContain('scale log not tried');
  });

  it('an invalid k range, and other bad flags', async () => {
    const cases: [FitCommandOptions, string][] = [
      [{ file: FAITHFUL, columns: ['waiting'], kMin: 3, kMax: 2 }, 'k range is empty: --k-min 3 is above --k-max 2'],
      [{ file: FAITHFUL, columns: ['waiting'], kMin: 0 }, '--k-min must be an integer in 1..20, got 0'],
      [{ file: FAITHFUL, columns: ['waiting'], kMax: 2.5 }, '--k-max must be an integer in 1..20, got 2.5'],
      [{ file: FAITHFUL, columns: ['waiting'], tolerance: -1 }, '--tolerance must be a positive number'],
      [{ file: FAITHFUL, columns: ['waiting'], scale: 'sqrt' as never }, '--scale must be one of identity, log, log1p, auto'],
      [{ file: FAITHFUL, columns: ['eruptions', 'waiting'], scale: 'log' }, '--scale log applies to a single column'],
      [{ file: FAITHFUL, columns: ['waiting', 'waiting'] }, '--column names a column twice'],
    ];
    for (const [opts, message] of cases) {
      const r = await run(opts);
      expect(r.code, message).toBe(2);
      expect(r.err).toContain(message);
    }
    const r = await run({ file: csv('three.csv', '1,1\n2,2\n3,3\n'), columns: ['waiting'], kMin: 4, kMax: 5 });
    expect(r.err).toContain('--k-min 4 needs at least 4 rows');
  });

  it('caps k at the row count and says so', async () => {
    const j = await runJson({ file: csv('four.csv', '1,1\n2,2\n3,30\n4,31\n'), columns: ['waiting'], scale: 'identity' });
    expect(j.candidates.map((c) => c.k)).toEqual([1, 2, 3, 4]);
    expect(j.notes).toContain('k range capped at 4: there are only 4 rows');
  });
});

describe('--skip-invalid: bad lines are left out and counted, never silently', () => {
  it('counts each reason with the first line it happened on', async () => {
    const lines = faithfulRows.map(([e, w]) => `${e},${w}`);
    lines.splice(10, 0, '2.0,abc'); // line 12 of the file
    lines.splice(20, 0, '"broken'); // line 22
    lines.splice(30, 0, '2.0,NaN'); // line 32
    const p = file('dirty.csv', 'eruptions,waiting\n' + lines.join('\n') + '\n\n');
    const j = await runJson({ file: p, columns: ['waiting'], scale: 'identity', skipInvalid: true });
    expect(j.n).toBe(272);
    expect(j.skipped.total).toBe(3);
    expect(j.skipped.byReason).toEqual({
      not_a_number: { count: 1, firstLine: 12 },
      broken_line: { count: 1, firstLine: 22 },
      not_finite: { count: 1, firstLine: 32 },
    });
    expect(j.components[0].mean as number).toBeCloseTo(54.615, 2);
    const r = await run({ file: p, columns: ['waiting'], scale: 'identity', skipInvalid: true });
    expect(r.out).toContain('272 rows used, 277 lines read, 1 header, 1 blank, 3 skipped');
    expect(r.out).toContain('skipped, value is not a number: 1 (first on line 12: 2.0,abc)');
  });

  it("with an explicit log scale, values outside its domain are skipped and counted", async () => {
    const p = file('neg.csv', 'x\n' + [5, 6, -1, 7, 8, 0, 9, 10, 11, 12].join('\n') + '\n');
    const j = await runJson({ file: p, scale: 'log', kMax: 1, skipInvalid: true });
    expect(j.n).toBe(8);
    expect(j.skipped.byReason).toEqual({ out_of_domain: { count: 2, firstLine: 4 } });
  });

  it('a file where every line is bad is still an error', async () => {
    const r = await run({ file: file('allbad.csv', 'x\na\nb\n'), skipInvalid: true });
    expect(r.code).toBe(2);
    expect(r.err).toContain('all 2 data lines were skipped as invalid');
  });
});

describe('the yargs command module', () => {
  const writes: string[] = [];
  afterEach(() => {
    vi.restoreAllMocks();
    writes.length = 0;
    process.exitCode = undefined;
  });

  it('parses the flags and runs the fit', async () => {
    vi.spyOn(process.stdout, 'write').mockImplementation((s: string | Uint8Array) => (writes.push(String(s)), true));
    await yargs(['fit', FAITHFUL, '-c', 'waiting', '--k', '2', '--scale', 'identity', '--json']).command(fitCommand).strict().parseAsync();
    const j = JSON.parse(writes.join('')) as FitJson;
    expect(j.k).toBe(2);
    expect(j.candidates.map((c) => c.k)).toEqual([2]);
    expect(j.components[1].mean as number).toBeCloseTo(80.091, 2);
    expect(process.exitCode).toBeUndefined();
  });

  it('sets exit code 2 and prints to stderr on a user error', async () => {
    vi.spyOn(process.stderr, 'write').mockImplementation((s: string | Uint8Array) => (writes.push(String(s)), true));
    await yargs(['fit', FAITHFUL, '--column', 'nope']).command(fitCommand).strict().parseAsync();
    expect(process.exitCode).toBe(2);
    expect(writes.join('')).toContain('no column named "nope"');
  });
});
