// The web page in a real browser: Debian's chromium driven by playwright-core 1.65 against the
// HTTP server on loopback. The overview lists the streams; a stream's page draws the fitted density
// and the component table; when a new far mode appears in the stream (invented data: a stationary
// two-mode latency stream, then a third mode at 4 % of the events), the page shows the alert in the
// timeline and a third component without a reload. Screenshots go to test-artifacts/.
import { mkdir, mkdtemp, rm } from 'node:fs/promises';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { chromium, type BrowserContext, type Page } from 'playwright-core';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import type { AlertTransition } from '../src/detect/alert.js';
import { monitorConfig } from '../src/detect/monitor-config.js';
import { HealthState } from '../src/export/daemon-health.js';
import { startHttpServer, type RunningHttpServer } from '../src/http/server.js';
import { EventSlot } from '../src/ingest/event.js';
import { Mixture1D } from '../src/math/mixture1d.js';
import { Random } from '../src/math/random.js';
import { StreamRegistry } from '../src/streams/stream-registry.js';

const ARTIFACTS = join(process.cwd(), 'test-artifacts');
const units: Record<string, string> = { checkout: 'milliseconds', 'upload size': 'bytes', 'room temperature': '' };
const transitions: AlertTransition[] = [];
const registry = new StreamRegistry({
  maxStreams: 100,
  // Default detection settings (1000 bootstrap events, 3000 warm-up events).
  resolve: (s) => ({ monitor: monitorConfig({ unit: units[s] ?? '' }) }),
  onAlert: (t) => transitions.push(t),
});
const health = new HealthState();
health.isReady = true;
const rng = new Random(2024);
const slot = new EventSlot();
const clock = new Map<string, number>();
function feed(stream: string, mix: Mixture1D, n: number): void {
  let ts = clock.get(stream) ?? Date.UTC(2025, 2, 3, 14, 0, 0);
  for (let i = 0; i < n; i++) {
    slot.stream = stream;
    slot.value = mix.sample(rng);
    slot.ts = ts;
    slot.offset++;
    registry.observe(slot);
    ts += 20;
  }
  clock.set(stream, ts);
}

// Invented streams: checkout latency (cache hits near 40 ms, database reads near 180 ms),
// upload sizes in bytes, and a symmetric temperature-like level without a unit.
const before = new Mixture1D('log', [0.8, 0.2], [Math.log(40), Math.log(180)], [0.18, 0.22]);
const after = new Mixture1D('log', [0.77, 0.19, 0.04], [Math.log(40), Math.log(180), Math.log(900)], [0.18, 0.22, 0.12]);

let server: RunningHttpServer;
let context: BrowserContext;
let profile: string;
const problems: string[] = [];

beforeAll(async () => {
  await mkdir(ARTIFACTS, { recursive: true });
  feed('checkout', before, 20_000);
  feed('upload size', new Mixture1D('log', [0.6, 0.4], [Math.log(3_000), Math.log(250_000)], [0.4, 0.3]), 8000);
  feed('room temperature', new Mixture1D('identity', [0.5, 0.5], [18, 23], [0.8, 0.8]), 8000);
  feed('just started', before, 50);
  server = await startHttpServer({ listen: { host: '127.0.0.1', port: 0 }, registry, health });
  profile = await mkdtemp(join(tmpdir(), 'modewatch-chromium-'));
  context = await chromium.launchPersistentContext(profile, {
    executablePath: '/usr/bin/chromium',
    headless: true,
    args: ['--headless', '--no-sandbox', '--disable-gpu', '--disable-quic', '--no-first-run', '--disable-background-networking', '--disable-component-update', '--disable-sync'],
    viewport: { width: 1280, height: 900 },
  });
});

afterAll(async () => {
  await context?.close();
  await server?.close();
  if (profile) await rm(profile, { recursive: true, force: true });
});

function watch(page: Page): void {
  page.on('pageerror', (e) => problems.push(`page error: ${e.message}`));
  page.on('console', (m) => {
    if (m.type() === 'error') problems.push(`console: ${m.text()}`);
  });
}

describe('web page', () => {
  it('lists the streams on the overview, with sparklines', async () => {
    const page = await context.newPage();
    watch(page);
    await page.goto(`${server.url}/`);
    await page.waitForSelector('#streams tbody tr[data-stream="checkout"]', { timeout: 15_000 });
    const names = await page.$$eval('#streams tbody tr', (rows) => rows.map((r) => r.getAttribute('data-stream')));
    expect(new Set(names)).toEqual(new Set(['checkout', 'upload size', 'room temperature', 'just started']));
    expect(await page.textContent('h1')).toBe('Streams');
    // Wait for a second refresh so the sparklines have two points.
    await page.waitForFunction(() => (document.getElementById('live')?.textContent ?? '').startsWith('updated'), undefined, { timeout: 10_000 });
    await page.waitForTimeout(2500);
    const spark = await page.$$eval('#streams tr[data-stream="checkout"] svg.spark path', (ps) => ps.map((p) => p.getAttribute('d') ?? ''));
    expect(spark.length).toBe(2); // two components
    expect(spark.every((d) => (d.match(/L/g) ?? []).length >= 1)).toBe(true);
    const label = await page.getAttribute('#streams tr[data-stream="checkout"] svg.spark', 'aria-label');
    expect(label).toMatch(/component \d+ \d+\.\d %/);
    await page.screenshot({ path: join(ARTIFACTS, 'web-overview.png'), fullPage: true });
    await page.close();
  });

  it('draws the density over the histogram and the component table, then shows a new mode and its alert live', async () => {
    const page = await context.newPage();
    watch(page);
    await page.goto(`${server.url}/streams/checkout`);
    await page.waitForSelector('#density-chart path.density-current', { timeout: 15_000 });
    const d = (await page.getAttribute('#density-chart path.density-current', 'd')) ?? '';
    expect((d.match(/L/g) ?? []).length).toBeGreaterThan(100); // a curve on the 240-point grid
    const ys = [...d.matchAll(/[ML][\d.]+ ([\d.]+)/g)].map((m) => Number(m[1]));
    expect(Math.max(...ys) - Math.min(...ys)).toBeGreaterThan(50); // not flat: the peaks rise well above the axis
    expect(await page.$$eval('#density-chart g.histogram rect', (r) => r.length)).toBeGreaterThan(10);
    expect(await page.getAttribute('#density-chart', 'role')).toBe('img');
    expect(await page.getAttribute('#density-chart', 'aria-label')).toContain('current model');
    expect(await page.$$eval('#components tbody tr', (r) => r.length)).toBe(2);
    expect(await page.$$eval('#components thead th[scope="col"]', (r) => r.map((x) => x.textContent))).toContain('Location');
    expect(await page.textContent('#timeline')).toContain('No alert has fired');

    // The change: a slow third mode at 4 % of the traffic.
    feed('checkout', after, 25_000);
    const fired = transitions.filter((t) => t.stream === 'checkout' && t.kind === 'mode_emerged' && t.state === 'firing');
    expect(fired.length).toBeGreaterThan(0);

    await page.waitForFunction(() => document.querySelectorAll('#components tbody tr').length === 3, undefined, { timeout: 10_000 });
    await page.waitForSelector('#timeline li[data-kind="mode_emerged"]', { timeout: 10_000 });
    const item = (await page.textContent('#timeline li[data-kind="mode_emerged"]')) ?? '';
    expect(item).toContain('New mode');
    expect(item).toContain('firing');
    expect(item).toContain(fired[0].evidence.summary);
    // The new component is marked as not in the reference, with its weight near 4 %.
    const cells = await page.$$eval('#components tbody tr:has-text("new: not in the reference") td', (tds) => tds.map((t) => t.textContent ?? ''));
    const w = Number(/^(\d+\.\d) %$/.exec(cells[0])?.[1]); // first cell: weight in the current model
    expect(w).toBeGreaterThan(1.5);
    expect(w).toBeLessThan(8);
    expect(await page.$$eval('#density-chart g.band', (g) => g.length)).toBe(3);
    // Open the evidence of the alert: statistic, threshold and the before/after tables.
    await page.click('#timeline li[data-kind="mode_emerged"] summary');
    const ev = (await page.textContent('#timeline li[data-kind="mode_emerged"] details')) ?? '';
    expect(ev).toContain(fired[0].evidence.statistic);
    expect(ev).toContain('Before: reference model');
    expect(ev).toContain('After: current model');
    // The open evidence survives the next refresh.
    await page.waitForTimeout(2500);
    expect(await page.$eval('#timeline li[data-kind="mode_emerged"] details', (e) => (e as HTMLDetailsElement).open)).toBe(true);
    await page.screenshot({ path: join(ARTIFACTS, 'web-stream-page.png'), fullPage: true });
    await page.close();
    expect(problems).toEqual([]);
  });

  it('shows a stream without a model and an unknown stream in words', async () => {
    const page = await context.newPage();
    watch(page);
    await page.goto(`${server.url}/streams/${encodeURIComponent('just started')}`);
    await page.waitForSelector('text=No model yet', { timeout: 10_000 });
    await page.goto(`${server.url}/streams/nope`);
    await page.waitForSelector('text=No stream of this name', { timeout: 10_000 });
    await page.close();
    // The 404 of the API call shows in the console as a failed resource load; nothing else may.
    expect(problems.filter((p) => !/404/.test(p))).toEqual([]);
  });
});
