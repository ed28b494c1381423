// Delivery engine and HTTP/log sinks against a real HTTP server on 127.0.0.1 (node:http).
import { once } from 'node:events';
import { createServer, type IncomingMessage, type Server } from 'node:http';
import type { AddressInfo } from 'node:net';
import { PassThrough } from 'node:stream';
import { pino } from 'pino';
import { afterEach, describe, expect, it } from 'vitest';
import type { AlertTransition } from '../src/detect/alert.js';
import { AlertmanagerSink, type PostableAlert, componentTable } from '../src/alerting/alertmanager-sink.js';
import { backoffDelay, DeliveryQueue } from '../src/alerting/delivery-queue.js';
import { FanoutSink } from '../src/alerting/fanout.js';
import { LogSink } from '../src/alerting/log-sink.js';
import { WebhookSink } from '../src/alerting/webhook-sink.js';
import { sampleTransition } from './support/alert-fixture.js';

function transition(over: Partial<AlertTransition> = {}): AlertTransition {
  return sampleTransition(over);
}

interface Seen {
  at: number;
  method: string;
  url: string;
  headers: IncomingMessage['headers'];
  body: string;
}

type Reply = { status: number; body?: string } | 'hang';

class TestServer {
  readonly seen: Seen[] = [];
  private hung: (() => void)[] = [];
  constructor(
    readonly server: Server,
    readonly url: string,
  ) {}
  static async start(reply: (n: number, s: Seen) => Reply | Promise<Reply>): Promise<TestServer> {
    let t: TestServer | null = null;
    const server = createServer(async (req, res) => {
      const chunks: Buffer[] = [];
      for await (const c of req) chunks.push(c as Buffer);
      const s: Seen = {
        at: performance.now(),
        method: req.method ?? '',
        url: req.url ?? '',
        headers: req.headers,
        body: Buffer.concat(chunks).toString('utf8'),
      };
      t!.seen.push(s);
      const r = await reply(t!.seen.length, s);
      if (r === 'hang') {
        await new Promise<void>((resolve) => t!.hung.push(resolve));
        res.writeHead(200).end();
        return;
      }
      res.writeHead(r.status, { 'content-type': 'text/plain' }).end(r.body ?? '');
    });
    server.listen(0, '127.0.0.1');
    await once(server, 'listening');
    const port = (server.address() as AddressInfo).port;
    t = new TestServer(server, `http://127.0.0.1:${port}`);
    servers.push(t);
    return t;
  }
  release(): void {
    for (const r of this.hung.splice(0)) r();
  }
  async stop(): Promise<void> {
    this.release();
    this.server.closeAllConnections();
    this.server.close();
  }
}

const servers: TestServer[] = [];
const closers: (() => Promise<void>)[] = [];
afterEach(async () => {
  for (const c of closers.splice(0)) await c();
  for (const s of servers.splice(0)) await s.stop();
});

async function until(cond: () => boolean, timeoutMs = 5000): Promise<void> {
  const end = Date.now() + timeoutMs;
  while (!cond()) {
    if (Date.now() > end) throw new Error('condition not met in time');
    await new Promise((r) => setTimeout(r, 5));
  }
}

describe('backoff schedule', () => {
  it('doubles per attempt, is capped, and keeps half of the step fixed (equal jitter)', () => {
    expect(backoffDelay(1, 100, 10_000, 0)).toBe(50);
    expect(backoffDelay(1, 100, 10_000, 0.999999)).toBeCloseTo(100, 3);
    expect(backoffDelay(3, 100, 10_000, 0)).toBe(200);
    expect(backoffDelay(20, 100, 10_000, 0)).toBe(5000);
    expect(backoffDelay(20, 100, 10_000, 0.5)).toBe(7500);
  });
});

describe('webhook sink over HTTP', () => {
  it('POSTs the transition JSON with the bearer token, 2xx = delivered', async () => {
    const srv = await TestServer.start(() => ({ status: 204 }));
    const sink = new WebhookSink({ url: `${srv.url}/hook`, bearerToken: 's3cret' });
    closers.push(() => sink.close());
    const t = transition();
    sink.publish(t);
    await until(() => sink.stats().delivered === 1);
    expect(srv.seen).toHaveLength(1);
    expect(srv.seen[0].method).toBe('POST');
    expect(srv.seen[0].url).toBe('/hook');
    expect(srv.seen[0].headers.authorization).toBe('Bearer s3cret');
    expect(srv.seen[0].headers['content-type']).toBe('application/json');
    expect(JSON.parse(srv.seen[0].body)).toEqual(t);
    expect(sink.stats()).toEqual({ delivered: 1, failed: 0, dropped: 0, queueLength: 0 });
  });

  it('retries 503 with growing waits, then delivers', async () => {
    const srv = await TestServer.start((n) => (n <= 2 ? { status: 503 } : { status: 200 }));
    const sink = new WebhookSink({
      url: srv.url,
      delivery: { baseDelayMs: 60, maxDelayMs: 10_000, maxAttempts: 5 },
    });
    closers.push(() => sink.close());
    sink.publish(transition());
    await until(() => sink.stats().delivered === 1);
    expect(srv.seen).toHaveLength(3);
    // Equal jitter: wait n is at least half of base·2^(n-1): >= 30 ms, then >= 60 ms.
    const gap1 = srv.seen[1].at - srv.seen[0].at;
    const gap2 = srv.seen[2].at - srv.seen[1].at;
    expect(gap1).toBeGreaterThanOrEqual(28);
    expect(gap2).toBeGreaterThanOrEqual(58);
    expect(sink.stats().failed).toBe(0);
  });

  it('gives up after maxAttempts and counts a failure; a 400 is not retried', async () => {
    const srv = await TestServer.start((_n, s) => (s.url === '/bad' ? { status: 400 } : { status: 500 }));
    const always500 = new WebhookSink({ url: `${srv.url}/down`, delivery: { baseDelayMs: 5, maxAttempts: 3 } });
    const refuses = new WebhookSink({ url: `${srv.url}/bad`, name: 'bad', delivery: { baseDelayMs: 5, maxAttempts: 3 } });
    closers.push(() => always500.close(), () => refuses.close());
    always500.publish(transition());
    refuses.publish(transition());
    await until(() => always500.stats().failed === 1 && refuses.stats().failed === 1);
    expect(srv.seen.filter((s) => s.url === '/down')).toHaveLength(3);
    expect(srv.seen.filter((s) => s.url === '/bad')).toHaveLength(1);
    expect(always500.stats().delivered).toBe(0);
  });

  it('an unreachable receiver is retried and then counted as failed', async () => {
    const srv = await TestServer.start(() => ({ status: 200 }));
    const deadUrl = srv.url;
    await srv.stop();
    servers.length = 0;
    const sink = new WebhookSink({ url: deadUrl, delivery: { baseDelayMs: 5, maxAttempts: 2 } });
    closers.push(() => sink.close());
    sink.publish(transition());
    await until(() => sink.stats().failed === 1);
  });
});

describe('delivery queue bounds', () => {
  it('drops the oldest waiting items when full and never blocks publish()', async () => {
    const srv = await TestServer.start((n) => (n === 1 ? 'hang' : { status: 200 }));
    const sink = new WebhookSink({ url: srv.url, delivery: { capacity: 3 } });
    closers.push(() => sink.close());
    sink.publish(transition({ offset: 0 }));
    await until(() => srv.seen.length === 1);
    const t0 = performance.now();
    for (let i = 1; i < 10; i++) sink.publish(transition({ offset: i }));
    const spent = performance.now() - t0;
    expect(spent).toBeLessThan(50); // nine pushes behind a hung receiver return at once
    // Item 0 is in flight; items 1..9 competed for 3 places: the newest three stay.
    expect(sink.stats()).toMatchObject({ dropped: 6, queueLength: 4, delivered: 0 });
    srv.release();
    await until(() => sink.stats().delivered === 4);
    const offsets = srv.seen.map((s) => (JSON.parse(s.body) as AlertTransition).offset);
    expect(offsets).toEqual([0, 7, 8, 9]);
    expect(sink.stats().queueLength).toBe(0);
  });

  it('close() delivers what is queued', async () => {
    const srv = await TestServer.start(() => ({ status: 200 }));
    const sink = new WebhookSink({ url: srv.url });
    for (let i = 0; i < 5; i++) sink.publish(transition({ offset: i }));
    await sink.close();
    expect(sink.stats().delivered).toBe(5);
    expect(srv.seen).toHaveLength(5);
    sink.publish(transition());
    expect(sink.stats().dropped).toBe(1); // after close nothing is accepted
  });

  it('close() returns within its bound when the receiver hangs, counting the rest as dropped', async () => {
    const srv = await TestServer.start(() => 'hang');
    const sink = new WebhookSink({ url: srv.url, delivery: { closeTimeoutMs: 200 } });
    for (let i = 0; i < 4; i++) sink.publish(transition({ offset: i }));
    await until(() => srv.seen.length === 1);
    const t0 = performance.now();
    await sink.close();
    const spent = performance.now() - t0;
    expect(spent).toBeGreaterThanOrEqual(190);
    expect(spent).toBeLessThan(1500);
    expect(sink.stats()).toEqual({ delivered: 0, failed: 0, dropped: 4, queueLength: 0 });
  });

  it('aborts an attempt that takes longer than attemptTimeoutMs and retries it', async () => {
    const srv = await TestServer.start(() => 'hang');
    const sink = new WebhookSink({ url: srv.url, delivery: { attemptTimeoutMs: 100, maxAttempts: 2, baseDelayMs: 10 } });
    closers.push(() => sink.close());
    sink.publish(transition());
    await until(() => sink.stats().failed === 1, 3000);
    expect(srv.seen).toHaveLength(2);
  });

  it('batches up to maxBatch items per delivery, in order', async () => {
    const batches: number[][] = [];
    let release: () => void = () => {};
    const gate = new Promise<void>((r) => (release = r));
    const q = new DeliveryQueue<number>(
      async (batch) => {
        batches.push([...batch]);
        await gate;
      },
      { name: 'test', maxBatch: 3 },
    );
    for (let i = 0; i < 7; i++) q.push(i);
    release();
    await q.close();
    expect(batches.flat()).toEqual([0, 1, 2, 3, 4, 5, 6]);
    expect(batches[0]).toEqual([0, 1, 2]); // pushed in one synchronous run: the first batch is full
    expect(Math.max(...batches.map((b) => b.length))).toBeLessThanOrEqual(3);
    expect(q.stats().delivered).toBe(7);
  });

  it('rejects nonsense options with the option named', () => {
    expect(() => new DeliveryQueue<number>(async () => {}, { name: 'x', capacity: 0 })).toThrow(/capacity/);
    expect(() => new WebhookSink({ url: 'ftp://example.invalid/' })).toThrow(/http or https/);
  });
});

describe('alertmanager sink against a local HTTP receiver', () => {
  it('sends firing alerts with labels and evidence, re-sends them, and sends the resolution once', async () => {
    const srv = await TestServer.start(() => ({ status: 200 }));
    const sink = new AlertmanagerSink({
      urls: [srv.url],
      resendIntervalMs: 80,
      externalUrl: 'http://modewatch.example:9471',
      labels: { team: 'payments' },
      severityByKind: { mode_emerged: 'page' },
    });
    closers.push(() => sink.close());
    sink.publish(transition({ state: 'pending' }));
    sink.publish(transition());
    await until(() => srv.seen.length >= 3, 3000); // first send + at least two re-sends
    const first = JSON.parse(srv.seen[0].body) as PostableAlert[];
    expect(srv.seen[0].url).toBe('/api/v2/alerts');
    expect(first).toHaveLength(1);
    expect(first[0].labels).toEqual({
      alertname: 'modewatch_mode_emerged',
      stream: 'checkout',
      kind: 'mode_emerged',
      component: '2',
      severity: 'page',
      team: 'payments',
    });
    expect(first[0].annotations.after).toBe(componentTable(transition().evidence.after));
    expect(first[0].annotations.after).toContain('#2 w=0.026 loc=912 spread=80');
    expect(first[0].annotations.first_evidence).toBe('2023-11-14T22:14:01.000Z');
    expect(first[0].generatorURL).toBe('http://modewatch.example:9471/streams/checkout');
    expect(Date.parse(first[0].endsAt)).toBeGreaterThan(Date.now());
    expect(sink.activeCount()).toBe(1);

    sink.publish(transition({ state: 'resolved', endsAt: 1_700_000_500_000, resolution: 'absorbed' }));
    const n = srv.seen.length;
    await until(() => srv.seen.some((s, i) => i >= n - 1 && s.body.includes('"resolution":"absorbed"')));
    const settled = srv.seen.length;
    await new Promise((r) => setTimeout(r, 250)); // three re-send periods: nothing more may come
    expect(srv.seen.length).toBe(settled);
    const last = JSON.parse(srv.seen[settled - 1].body) as PostableAlert[];
    expect(last[0].endsAt).toBe(new Date(1_700_000_500_000).toISOString());
    expect(sink.activeCount()).toBe(0);
  });

  it('does not send an alert that only went pending and resolved', async () => {
    const srv = await TestServer.start(() => ({ status: 200 }));
    const sink = new AlertmanagerSink({ urls: [srv.url], resendIntervalMs: 50 });
    sink.publish(transition({ state: 'pending' }));
    sink.publish(transition({ state: 'resolved', endsAt: 1_700_000_070_000, resolution: 'recovered' }));
    await new Promise((r) => setTimeout(r, 150));
    await sink.close();
    expect(srv.seen).toHaveLength(0);
  });

  it('one Alertmanager down does not keep alerts from the other', async () => {
    const up = await TestServer.start(() => ({ status: 200 }));
    const down = await TestServer.start(() => ({ status: 503 }));
    const sink = new AlertmanagerSink({
      urls: [down.url, up.url],
      delivery: { baseDelayMs: 20, maxAttempts: 3, closeTimeoutMs: 1000 },
    });
    closers.push(() => sink.close());
    sink.publish(transition());
    await until(() => up.seen.length === 1, 1000);
    await until(() => sink.stats().failed === 1);
    expect(sink.stats()).toMatchObject({ delivered: 1, failed: 1 });
  });
});

describe('fanout', () => {
  it('a sink that throws or hangs does not keep the transition from the others', async () => {
    const hung = await TestServer.start(() => 'hang');
    const ok = await TestServer.start(() => ({ status: 200 }));
    const broken = {
      name: 'broken',
      publish(): void {
        throw new Error('bug in a sink');
      },
      async close(): Promise<void> {},
    };
    const fan = new FanoutSink([
      broken,
      new WebhookSink({ url: hung.url, name: 'slow', delivery: { closeTimeoutMs: 100 } }),
      new WebhookSink({ url: ok.url, name: 'fine' }),
    ]);
    closers.push(() => fan.close());
    fan.publish(transition());
    // The server sees the request before the client has read the answer: wait for the delivery to be counted.
    await until(() => ok.seen.length === 1 && fan.stats().get('fine')?.delivered === 1, 5000);
    const stats = fan.stats();
    expect(stats.get('broken')?.failed).toBe(1);
    expect(stats.get('slow')?.queueLength).toBe(1);
    expect(stats.get('fine')?.delivered).toBe(1);
  });

  it('refuses two sinks with one name (their metric series would collide)', () => {
    const a = new LogSink({ stream: new PassThrough() });
    expect(() => new FanoutSink([a, new LogSink({ stream: new PassThrough() })])).toThrow(/named "log"/);
  });
});

describe('log sink', () => {
  it('writes one JSON line per transition to a stream', () => {
    const out = new PassThrough();
    const sink = new LogSink({ stream: out });
    sink.publish(transition());
    sink.publish(transition({ state: 'resolved', endsAt: 1_700_000_070_000, resolution: 'recovered' }));
    const lines = String(out.read()).trim().split('\n');
    expect(lines).toHaveLength(2);
    const rec = JSON.parse(lines[1]) as { msg: string; alert: AlertTransition };
    expect(rec.alert.state).toBe('resolved');
    expect(rec.msg).toContain('checkout mode_emerged');
    expect(sink.stats().delivered).toBe(2);
  });

  it('takes a pino logger (pino 10) as the structured logger', async () => {
    const out = new PassThrough();
    const sink = new LogSink({ logger: pino({ base: null }, out) });
    sink.publish(transition());
    await new Promise((r) => setImmediate(r));
    const rec = JSON.parse(String(out.read()).trim()) as { level: number; alert: AlertTransition };
    expect(rec.level).toBe(30); // pino's "info"
    expect(rec.alert).toEqual(transition());
  });

  it('drops and counts lines when the stream stops draining', () => {
    const out = new PassThrough({ highWaterMark: 16 }); // nobody reads it
    const sink = new LogSink({ stream: out, maxBufferedBytes: 4096 });
    for (let i = 0; i < 100; i++) sink.publish(transition());
    const s = sink.stats();
    expect(s.dropped).toBeGreaterThan(0);
    expect(s.delivered + s.dropped).toBe(100);
    expect(out.writableLength).toBeLessThan(4096 + 4096);
  });
});
