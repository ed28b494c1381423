/**
 * The demo as a new user runs it: `modewatch demo` (the built CLI, no Kafka) prints where to look; Debian's chromium
 * driven by playwright-core opens that page; the invented shop's new slow checkout mode and its alert appear; Ctrl-C
 * (SIGINT) stops the demo cleanly. A screenshot is kept in test-artifacts/.
 */
import { spawn, type ChildProcess } from 'node:child_process';
import { existsSync } from 'node:fs';
import { mkdir, mkdtemp, rm } from 'node:fs/promises';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { once } from 'node:events';
import { chromium, type BrowserContext } from 'playwright-core';
import { afterAll, describe, expect, it } from 'vitest';

const REPO = join(import.meta.dirname, '..');
const CLI = join(REPO, 'dist', 'cli', 'main.js');
const ARTIFACTS = join(REPO, 'test-artifacts');

describe('modewatch demo', () => {
  let demo: ChildProcess | undefined;
  let context: BrowserContext | undefined;
  let profile = '';
  afterAll(async () => {
    await context?.close();
    if (demo && demo.exitCode === null) demo.kill('SIGKILL');
    if (profile) await rm(profile, { recursive: true, force: true });
  });

  it('prints where to look, shows the new mode and its alert in the browser, and stops on Ctrl-C', async () => {
    expect(existsSync(CLI), `${CLI} is missing: npm test builds it first`).toBe(true);
    // Twenty times faster than a person would watch it: the new mode comes about 1 s after start.
    demo = spawn(process.execPath, [CLI, 'demo', '--speed', '20', '--http-listen', '127.0.0.1:0'], { cwd: REPO, stdio: ['ignore', 'pipe', 'pipe'] });
    let out = '';
    demo.stdout!.on('data', (d: Buffer) => (out += d.toString()));
    demo.stderr!.on('data', (d: Buffer) => (out += d.toString()));
    const deadline = Date.now() + 30_000;
    let url = '';
    while (!url && Date.now() < deadline) {
      url = /web page: (http:\/\/127\.0\.0\.1:\d+)\//.exec(out)?.[1] ?? '';
      if (!url) await new Promise((r) => setTimeout(r, 100));
    }
    expect(url, out).not.toBe('');
    expect(out).toContain('invented');
    expect(out).toMatch(/metrics: +http:\/\/127\.0\.0\.1:\d+\/metrics/);

    await mkdir(ARTIFACTS, { recursive: true });
    profile = await mkdtemp(join(tmpdir(), 'modewatch-demo-chromium-'));
    context = await chromium.launchPersistentContext(profile, {
      executablePath: '/usr/bin/chromium',
      headless: true,
      args: ['--headless', '--no-sandbox', '--disable-gpu', '--disable-quic', '--no-first-run', '--disable-background-networking', '--disable-component-update', '--disable-sync'],
      viewport: { width: 1280, height: 900 },
    });
    const page = await context.newPage();
    const errors: string[] = [];
    page.on('console', (m) => {
      if (m.type() === 'error') errors.push(m.text());
    });
    await page.goto(`${url}/`);
    await page.waitForSelector('#streams tbody tr[data-stream="checkout-latency-ms"]', { timeout: 15_000 });
    const names = await page.$$eval('#streams tbody tr', (rows) => rows.map((r) => r.getAttribute('data-stream')));
    expect(new Set(names)).toEqual(new Set(['checkout-latency-ms', 'search-latency-ms', 'response-bytes']));

    await page.goto(`${url}/streams/checkout-latency-ms`);
    await page.waitForSelector('#density-chart path.density-current', { timeout: 15_000 });
    // The invented degraded replica: a slow mode near 900 ms with about 4 % of requests.
    await page.waitForSelector('#timeline li[data-kind="mode_emerged"]', { timeout: 60_000 });
    const item = (await page.textContent('#timeline li[data-kind="mode_emerged"]')) ?? '';
    expect(item).toContain('New mode');
    expect(item).toMatch(/a new mode near \d+/);
    await page.waitForFunction(() => document.querySelectorAll('#components tbody tr').length === 3, undefined, { timeout: 15_000 });
    const locs = await page.$$eval('#components tbody tr td:nth-child(3)', (tds) => tds.map((t) => Number(t.textContent)));
    expect(Math.max(...locs)).toBeGreaterThan(700);
    expect(Math.max(...locs)).toBeLessThan(1200);
    await page.screenshot({ path: join(ARTIFACTS, 'demo-checkout.png'), fullPage: true });
    expect(errors).toEqual([]);
    expect(out).toMatch(/FIRING +mode_emerged +checkout-latency-ms/);

    demo.kill('SIGINT');
    const [code] = (await Promise.race([once(demo, 'exit'), new Promise((_, rej) => setTimeout(() => rej(new Error('demo did not stop on SIGINT')), 15_000))])) as [number | null];
    expect(code).toBe(0);
    expect(out).toMatch(/stopped after \d+ records/);
  });
});
