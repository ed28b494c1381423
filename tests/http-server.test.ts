// The daemon's HTTP endpoint on loopback: routes, status codes, readiness, the JSON API, basic
// auth from an exporter web-config file (bcrypt hashes by bcryptjs 3.0.3), TLS with a certificate
// made by openssl, a path prefix from the external URL, and bad input that must not crash it.
import { execFileSync } from 'node:child_process';
import { writeFile } from 'node:fs/promises';
import { request as httpsRequest } from 'node:https';
import { connect } from 'node:net';
import { join } from 'node:path';
import bcrypt from 'bcryptjs';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { monitorConfig } from '../src/detect/monitor-config.js';
import { HealthState } from '../src/export/daemon-health.js';
import { METRICS } from '../src/export/metric-names.js';
import { startHttpServer, streamPageUrl, type RunningHttpServer } from '../src/http/server.js';
import type { StreamDetail, StreamSummary } from '../src/http/stream-views.js';
import { loadWebConfig } from '../src/http/web-config.js';
import { EventSlot } from '../src/ingest/event.js';
import { Mixture1D } from '../src/math/mixture1d.js';
import { Random } from '../src/math/random.js';
import { StreamRegistry } from '../src/streams/stream-registry.js';
import { tempDir } from './support/prometheus-tools.js';

const ODD = 'checkout/latency ?#%"x';
const units: Record<string, string> = { [ODD]: 'milliseconds', sizes: 'bytes' };
const registry = new StreamRegistry({
  maxStreams: 10,
  resolve: (s) => ({ monitor: monitorConfig({ unit: units[s] ?? '', bootstrapEvents: 300, warmupEvents: 600 }) }),
  onAlert: () => {},
});
// Invented data: a latency-like stream with a fast and a slow mode, a size-like stream, and one still bootstrapping.
const latency = new Mixture1D('log', [0.8, 0.2], [Math.log(40), Math.log(180)], [0.15, 0.2]);
const sizes = new Mixture1D('log', [0.6, 0.4], [Math.log(2_000), Math.log(60_000)], [0.3, 0.3]);
const rng = new Random(21);
const slot = new EventSlot();
function feed(stream: string, mix: Mixture1D, n: number): void {
  for (let i = 0; i < n; i++) {
    slot.stream = stream;
    slot.value = mix.sample(rng);
    slot.ts = 1.7e12 + i * 100;
    slot.offset = i;
    registry.observe(slot);
  }
}
feed(ODD, latency, 2000);
feed('sizes', sizes, 2000);
feed('young', latency, 20);

const health = new HealthState();
health.reason = 'restoring state of 2 partitions';
let dir: { path: string; remove(): Promise<void> };
const servers: RunningHttpServer[] = [];
let plain: RunningHttpServer;

beforeAll(async () => {
  dir = await tempDir('http');
  plain = await startHttpServer({ listen: { host: '127.0.0.1', port: 0 }, registry, health });
  servers.push(plain);
});
afterAll(async () => {
  for (const s of servers) await s.close();
  await dir?.remove();
});

describe('routes', () => {
  it('answers liveness always and readiness only when ready, with the reason', async () => {
    expect((await fetch(`${plain.url}/healthz`)).status).toBe(200);
    const notReady = await fetch(`${plain.url}/readyz`);
    expect(notReady.status).toBe(503);
    expect(await notReady.text()).toContain('restoring state of 2 partitions');
    health.isReady = true;
    const ready = await fetch(`${plain.url}/readyz`);
    expect(ready.status).toBe(200);
    health.isReady = false;
  });

  it('serves /metrics in the text format 0.0.4, compressed when asked', async () => {
    const res = await fetch(`${plain.url}/metrics`, { headers: { 'Accept-Encoding': 'gzip' } });
    expect(res.status).toBe(200);
    expect(res.headers.get('content-type')).toBe('text/plain; version=0.0.4; charset=utf-8');
    expect(res.headers.get('content-encoding')).toBe('gzip');
    const body = await res.text(); // fetch (undici) inflates it
    expect(body).toContain(`# TYPE ${METRICS.componentWeight} gauge`);
    expect(body).toContain(`${METRICS.componentLocation}_seconds{stream="checkout/latency ?#%\\"x"`);
    expect(body).toContain(`${METRICS.componentLocation}_bytes{stream="sizes"`);
    expect(body).toContain(`${METRICS.ready} 0`);
  });

  it('lists streams as JSON, filtered by part of the name', async () => {
    const res = await fetch(`${plain.url}/api/streams`);
    expect(res.headers.get('content-type')).toContain('application/json');
    const data = (await res.json()) as { total: number; matched: number; streams: StreamSummary[] };
    expect(data.total).toBe(3);
    expect(data.streams.map((s) => s.name).sort()).toEqual([ODD, 'sizes', 'young'].sort());
    const odd = data.streams.find((s) => s.name === ODD)!;
    expect(odd.unit).toBe('milliseconds');
    expect(odd.state).toBe('armed');
    expect(odd.components.length).toBeGreaterThanOrEqual(2);
    expect(odd.reference.length).toBeGreaterThanOrEqual(2);
    expect(odd.events).toBe(2000);
    const young = data.streams.find((s) => s.name === 'young')!;
    expect(young.state).toBe('bootstrap');
    expect(young.components).toEqual([]);
    const filtered = (await (await fetch(`${plain.url}/api/streams?q=SIZ&limit=5`)).json()) as { matched: number; streams: StreamSummary[] };
    expect(filtered.matched).toBe(1);
    expect(filtered.streams[0].name).toBe('sizes');
  });

  it('gives a stream detail with histogram, density grid and bands in stream units', async () => {
    const res = await fetch(`${plain.url}/api/streams/${encodeURIComponent(ODD)}`);
    expect(res.status).toBe(200);
    const d = (await res.json()) as StreamDetail;
    expect(d.name).toBe(ODD);
    expect(d.axis).toBe(registry.get(ODD)!.monitor.scale);
    expect(d.histogram.edges.length).toBe(d.histogram.counts.length + 1);
    expect(d.histogram.counts.reduce((a, b) => a + b, 0)).toBe(d.histogram.total);
    expect(d.histogram.total).toBeGreaterThan(200); // of the 256 recent values, the central 99 %+ are in range
    expect(d.grid.x.length).toBe(d.grid.current.length);
    expect(Math.max(...d.grid.current)).toBeGreaterThan(0);
    expect(Math.max(...d.grid.reference)).toBeGreaterThan(0);
    for (const b of d.bands.current) {
      expect(b.lo).toBeLessThan(b.location);
      expect(b.hi).toBeGreaterThan(b.location);
    }
    // The fast mode near 40 ms is in the stream's own units (milliseconds), not converted.
    const locs = d.components.map((c) => c.location).sort((a, b) => a - b);
    expect(locs[0]).toBeGreaterThan(30);
    expect(locs[0]).toBeLessThan(50);
  });

  it('answers 404 for an unknown path, an unknown stream and an unreadable name', async () => {
    expect((await fetch(`${plain.url}/nothing`)).status).toBe(404);
    expect((await fetch(`${plain.url}/api/streams/nope`)).status).toBe(404);
    expect((await fetch(`${plain.url}/api/streams/%E0%A4%A`)).status).toBe(404);
    expect((await fetch(`${plain.url}/api/streams/a/b/c`)).status).toBe(404);
  });

  it('answers 405 with Allow for a wrong method', async () => {
    const del = await fetch(`${plain.url}/metrics`, { method: 'DELETE' });
    expect(del.status).toBe(405);
    expect(del.headers.get('allow')).toBe('GET, HEAD');
    const get = await fetch(`${plain.url}/api/streams/sizes/rebaseline`);
    expect(get.status).toBe(405);
    expect(get.headers.get('allow')).toBe('POST');
    const head = await fetch(`${plain.url}/healthz`, { method: 'HEAD' });
    expect(head.status).toBe(200);
  });

  it('re-baselines a stream on POST, refuses cross-site requests, large bodies and bootstrapping streams', async () => {
    const url = `${plain.url}/api/streams/sizes/rebaseline`;
    expect((await fetch(url, { method: 'POST', headers: { Origin: 'https://elsewhere.example' } })).status).toBe(403);
    expect((await fetch(url, { method: 'POST', body: 'x'.repeat(10_000) })).status).toBe(413);
    expect((await fetch(`${plain.url}/api/streams/young/rebaseline`, { method: 'POST' })).status).toBe(409);
    expect((await fetch(`${plain.url}/api/streams/nope/rebaseline`, { method: 'POST' })).status).toBe(404);
    const m = registry.get('sizes')!.monitor;
    const before = m.reference!;
    const ok = await fetch(url, { method: 'POST', headers: { Origin: new URL(plain.url).origin } });
    expect(ok.status).toBe(202);
    expect(m.reference).not.toBe(before); // the reference was replaced by the current model
    for (let j = 0; j < m.reference!.k; j++) expect(m.reference!.weight(j)).toBeCloseTo(m.current!.weight(idx(m.current!, m.reference!.id(j))), 12);
  });

  it('serves the page shell and its assets with a strict content security policy', async () => {
    for (const p of ['/', `/streams/${encodeURIComponent(ODD)}`]) {
      const res = await fetch(`${plain.url}${p}`);
      expect(res.status).toBe(200);
      expect(res.headers.get('content-type')).toContain('text/html');
      expect(res.headers.get('content-security-policy')).toContain("script-src 'self'");
      expect(await res.text()).toContain('/assets/app.js');
    }
    const js = await fetch(`${plain.url}/assets/app.js`);
    expect(js.headers.get('content-type')).toContain('javascript');
    expect(await js.text()).toContain('densityChart');
    expect((await fetch(`${plain.url}/assets/app.css`)).status).toBe(200);
  });

  it('survives garbage on the socket and keeps answering', async () => {
    const reply = await new Promise<string>((resolve, reject) => {
      const { port } = new URL(plain.url);
      const sock = connect(Number(port), '127.0.0.1', () => sock.write('NOT HTTP AT ALL\r\n\r\n'));
      let out = '';
      sock.on('data', (d) => (out += d.toString()));
      sock.on('end', () => resolve(out));
      sock.on('error', reject);
      sock.setTimeout(5000, () => sock.destroy(new Error('timeout')));
    });
    expect(reply).toMatch(/^HTTP\/1\.1 400/);
    expect((await fetch(`${plain.url}/healthz`)).status).toBe(200);
  });
});

describe('web configuration', () => {
  it('asks for basic auth (RFC 7617) except on the probes', async () => {
    const hash = bcrypt.hashSync('s3cret', 4);
    const file = join(dir.path, 'web.yml');
    await writeFile(file, `basic_auth_users:\n  prom: ${hash}\nhttp_server_config:\n  headers:\n    X-Frame-Options: deny\n`);
    const server = await startHttpServer({ listen: { host: '127.0.0.1', port: 0 }, registry, health, webConfig: await loadWebConfig(file) });
    servers.push(server);
    const none = await fetch(`${server.url}/metrics`);
    expect(none.status).toBe(401);
    expect(none.headers.get('www-authenticate')).toMatch(/^Basic realm="modewatch"/);
    const auth = (u: string, p: string) => ({ Authorization: `Basic ${Buffer.from(`${u}:${p}`).toString('base64')}` });
    expect((await fetch(`${server.url}/metrics`, { headers: auth('prom', 'wrong') })).status).toBe(401);
    expect((await fetch(`${server.url}/metrics`, { headers: auth('nobody', 's3cret') })).status).toBe(401);
    expect((await fetch(`${server.url}/nothing`)).status).toBe(401); // unknown paths do not leak past the login
    const ok = await fetch(`${server.url}/metrics`, { headers: auth('prom', 's3cret') });
    expect(ok.status).toBe(200);
    expect(ok.headers.get('x-frame-options')).toBe('deny');
    expect((await fetch(`${server.url}/api/streams/sizes`, { headers: auth('prom', 's3cret') })).status).toBe(200);
    expect((await fetch(`${server.url}/healthz`)).status).toBe(200);
    expect((await fetch(`${server.url}/readyz`)).status).toBe(503);
  });

  it('serves HTTPS with the certificate of the web config', async () => {
    execFileSync('openssl', [
      'req', '-x509', '-newkey', 'ec', '-pkeyopt', 'ec_paramgen_curve:prime256v1', '-nodes',
      '-keyout', 'server.key', '-out', 'server.crt', '-days', '2', '-subj', '/CN=localhost',
      '-addext', 'subjectAltName=IP:127.0.0.1',
    ], { cwd: dir.path, stdio: 'pipe' });
    const file = join(dir.path, 'tls.yml');
    await writeFile(file, 'tls_server_config:\n  cert_file: server.crt\n  key_file: server.key\n');
    const cfg = await loadWebConfig(file);
    const server = await startHttpServer({ listen: { host: '127.0.0.1', port: 0 }, registry, health, webConfig: cfg });
    servers.push(server);
    expect(server.url).toMatch(/^https:\/\/127\.0\.0\.1:\d+$/);
    const status = await new Promise<number>((resolve, reject) => {
      const req = httpsRequest(`${server.url}/healthz`, { ca: cfg.tls!.cert }, (res) => {
        res.resume();
        resolve(res.statusCode ?? 0);
      });
      req.on('error', reject);
      req.end();
    });
    expect(status).toBe(200);
  });

  it('serves every route under the path of the external URL', async () => {
    const server = await startHttpServer({ listen: { host: '127.0.0.1', port: 0 }, registry, health, externalUrl: 'https://ops.example/modewatch/' });
    servers.push(server);
    expect(server.url).toMatch(/\/modewatch$/);
    expect((await fetch(`${server.url}/metrics`)).status).toBe(200);
    expect((await fetch(`${server.url}/api/streams/sizes`)).status).toBe(200);
    const page = await (await fetch(`${server.url}/`)).text();
    expect(page).toContain('src="/modewatch/assets/app.js"');
    expect((await fetch(new URL('/metrics', server.url))).status).toBe(404);
    // The page's origin behind the proxy may re-baseline; another origin may not.
    const rb = `${server.url}/api/streams/sizes/rebaseline`;
    expect((await fetch(rb, { method: 'POST', headers: { Origin: 'https://ops.example' } })).status).toBe(202);
    expect((await fetch(rb, { method: 'POST', headers: { Origin: 'https://evil.example' } })).status).toBe(403);
    expect(streamPageUrl('https://ops.example/modewatch/', ODD)).toBe('https://ops.example/modewatch/streams/checkout%2Flatency%20%3F%23%25%22x');
  });
});

/** Index of the component with this stable id. */
function idx(model: { k: number; id(j: number): number }, id: number): number {
  for (let j = 0; j < model.k; j++) if (model.id(j) === id) return j;
  return -1;
}
