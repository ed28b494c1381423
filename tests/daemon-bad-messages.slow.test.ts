/**
 * Bad messages mixed into a topic on a real broker: every one is refused with a reason, counted by reason on
 * /metrics (modewatch_rejected_events_total{reason}) and in the checkpoint's per-partition counters, and copied to
 * the dead-letter topic with a modewatch-reason header; every good one is modelled; the daemon stays up and ready.
 * The expected reason of each kind follows the decoder's documented rejection order (src/ingest/message-decoder.ts:
 * oversized, missing value, unparseable, time, stream, value) and the log scale's domain (values > 0).
 */
import { mkdtemp, rm } from 'node:fs/promises';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { DLQ_HEADERS } from '../src/ingest/dead-letter.js';
import { Random } from '../src/math/random.js';
import { buildScenario } from '../src/simulate/suite.js';
import {
  DaemonProcess,
  consumeAll,
  createTopic,
  eventsTotal,
  eventValue,
  httpGet,
  loadCheckpointDir,
  metricValue,
  produce,
  simulatedEvents,
  waitFor,
  writeDaemonConfig,
  type OutRecord,
} from './support/daemon-harness.js';
import { freePort, useSharedBroker } from './support/kafka-broker.js';

const broker = useSharedBroker();
const MAX_BYTES = 4096;
const T = Date.UTC(2026, 0, 5);

/** Each kind of bad message, with the reason it must be refused for. */
const BAD_KINDS: { name: string; reason: string; make(rng: Random): OutRecord }[] = [
  {
    name: 'random bytes',
    reason: 'unparseable',
    make: (rng) => ({ key: 'checkout', value: Buffer.from([0xff, 0xfe, ...Array.from({ length: 40 }, () => rng.int(256))]) }),
  },
  { name: 'the text NaN', reason: 'unparseable', make: () => ({ key: 'checkout', value: 'NaN' }) },
  { name: 'a bare JSON number', reason: 'unparseable', make: () => ({ key: 'search', value: '42.5' }) },
  { name: 'value is a string', reason: 'wrong_type', make: () => ({ key: 'checkout', value: JSON.stringify({ ts: T, value: 'fast' }) }) },
  { name: 'value is an object', reason: 'wrong_type', make: () => ({ key: 'search', value: JSON.stringify({ ts: T, value: { ms: 3 } }) }) },
  { name: 'value is infinite', reason: 'not_finite', make: () => ({ key: 'search', value: `{"ts":${T},"value":1e400}` }) },
  { name: 'negative value on a log scale', reason: 'out_of_domain', make: () => ({ key: 'checkout', value: JSON.stringify({ ts: T, value: -5 }) }) },
  { name: 'zero on a log scale', reason: 'out_of_domain', make: () => ({ key: 'search', value: JSON.stringify({ ts: T, value: 0 }) }) },
  {
    name: 'payload over maxBytes',
    reason: 'oversized',
    make: () => ({ key: 'checkout', value: JSON.stringify({ ts: T, value: 12, pad: 'x'.repeat(3 * MAX_BYTES) }) }),
  },
  { name: 'no value field', reason: 'missing_field', make: () => ({ key: 'checkout', value: JSON.stringify({ ts: T }) }) },
  { name: 'no time field', reason: 'missing_field', make: () => ({ key: 'search', value: JSON.stringify({ value: 12 }) }) },
  { name: 'time not a time', reason: 'bad_timestamp', make: () => ({ key: 'search', value: JSON.stringify({ ts: 'yesterday', value: 12 }) }) },
  { name: 'no key', reason: 'missing_stream', make: () => ({ key: null, value: JSON.stringify({ ts: T, value: 12 }) }) },
  { name: 'tombstone (null value)', reason: 'missing_field', make: () => ({ key: 'checkout', value: null }) },
];
const PER_KIND = 15;

let dir = '';
let child: DaemonProcess | null = null;
beforeAll(async () => {
  dir = await mkdtemp(join(tmpdir(), 'modewatch-bad-'));
});
afterAll(async () => {
  await child?.dispose();
  await rm(dir, { recursive: true, force: true });
});

describe('daemon with bad messages in its topic', () => {
  it('counts every bad message by reason, dead-letters it with the reason, models every good one, stays ready', async (ctx) => {
    const { brokers } = broker.get(ctx);
    const tag = `${process.pid}-${Date.now()}`;
    const topic = `bad-events-${tag}`;
    const dlq = `bad-dead-letters-${tag}`;

    // Good records from two invented stationary streams; bad ones inserted at seeded random places.
    const checkout = buildScenario('latency-stationary', { events: 4000 }).streams[0];
    const good = simulatedEvents({ name: 'bad-input', description: 'Invented: two stationary latency streams.', streams: [{ ...checkout, name: 'checkout' }, { ...checkout, name: 'search', rate: 150 }] }, 3);
    const rng = new Random(99);
    const bad: { rec: OutRecord; reason: string; kind: string }[] = [];
    for (const k of BAD_KINDS) for (let i = 0; i < PER_KIND; i++) bad.push({ rec: k.make(rng), reason: k.reason, kind: k.name });
    const slots = new Map<number, { rec: OutRecord; reason: string; kind: string }[]>();
    for (const b of bad) {
      const at = rng.int(good.length);
      slots.set(at, [...(slots.get(at) ?? []), b]);
    }
    const records: OutRecord[] = [];
    const badAt = new Map<number, { reason: string; kind: string }>(); // Kafka offset -> expected reason
    for (let i = 0; i < good.length; i++) {
      for (const b of slots.get(i) ?? []) {
        badAt.set(records.length, b);
        records.push(b.rec);
      }
      records.push({ key: good[i].key, value: eventValue(good[i]) });
    }
    const expectedByReason: Record<string, number> = {};
    for (const b of bad) expectedByReason[b.reason] = (expectedByReason[b.reason] ?? 0) + 1;

    await createTopic(brokers, topic, 1);
    await produce(brokers, topic, records);

    const port = await freePort();
    const base = `http://127.0.0.1:${port}`;
    const stateDir = join(dir, 'state');
    const configPath = await writeDaemonConfig(dir, { brokers, topic, groupId: `bad-${tag}`, httpPort: port, checkpointDir: stateDir, everyEvents: 2000, deadLetterTopic: dlq, maxBytes: MAX_BYTES });
    child = DaemonProcess.spawn(configPath, join(dir, 'daemon.log'));
    const c = child;
    try {
      await waitFor(`events_total = ${good.length}`, async () => {
        if (!c.alive) throw new Error('the daemon exited');
        return (await eventsTotal(base)) === good.length;
      }, 120_000);
      // Rejections are counted in the same batch pass as acceptances; wait for the last of them too.
      const scrape = await waitFor('every rejection on /metrics', async () => {
        const r = await httpGet(`${base}/metrics`);
        if (r === null) return undefined;
        const sum = Object.keys(expectedByReason).reduce((a, reason) => a + (metricValue(r.text, 'modewatch_rejected_events_total', { reason }) ?? 0), 0);
        return sum === bad.length ? r.text : undefined;
      }, 30_000);
      for (const [reason, n] of Object.entries(expectedByReason)) expect({ reason, n: metricValue(scrape, 'modewatch_rejected_events_total', { reason }) }).toEqual({ reason, n });
      expect(metricValue(scrape, 'modewatch_events_total')).toBe(good.length);
      expect(metricValue(scrape, 'modewatch_streams')).toBe(2);

      // Alive and ready after all of it.
      expect(c.alive).toBe(true);
      expect((await httpGet(`${base}/healthz`))?.status).toBe(200);
      expect((await httpGet(`${base}/readyz`))?.status).toBe(200);

      // Every bad record in the dead-letter topic, with its reason and where it came from; nothing else.
      const dead = await consumeAll(brokers, dlq, bad.length, 30_000);
      const got = new Map<number, string>();
      for (const m of dead) {
        const h = (name: string) => m.headers?.[name]?.toString();
        expect(h(DLQ_HEADERS.topic)).toBe(topic);
        expect(h(DLQ_HEADERS.partition)).toBe('0');
        const offset = Number(h(DLQ_HEADERS.offset));
        expect(got.has(offset)).toBe(false);
        got.set(offset, h(DLQ_HEADERS.reason) ?? '');
        // The record itself, as it came.
        const sent = records[offset];
        expect(m.key === null ? null : m.key.toString('utf8')).toBe(sent.key);
        if (sent.value === null) expect(m.value).toBeNull();
        else expect(Buffer.compare(m.value ?? Buffer.alloc(0), Buffer.from(sent.value))).toBe(0);
      }
      const wanted = new Map([...badAt].map(([o, b]) => [o, b.reason]));
      expect(new Map([...got].sort((a, b) => a[0] - b[0]))).toEqual(new Map([...wanted].sort((a, b) => a[0] - b[0])));

      // The clean stop's checkpoint carries the same counts.
      expect(await c.signal('SIGTERM')).toEqual({ code: 0, signal: null });
    } catch (e) {
      console.error(`daemon output tail:\n${c.tail.slice(-4000)}`);
      throw e;
    }
    const cp = await loadCheckpointDir(stateDir);
    const counts: Record<string, number> = { accepted: good.length };
    for (const [reason, n] of Object.entries(expectedByReason)) counts[`rejected:${reason}`] = n;
    expect(cp.counters).toEqual({ [`${topic}-0`]: counts });
    expect(cp.positions).toEqual({ [`${topic}-0`]: records.length });
    expect([...cp.monitors.keys()].sort()).toEqual([`${topic}:checkout`, `${topic}:search`]);
    expect([...cp.monitors.values()].reduce((a, m) => a + m.accepted, 0)).toBe(good.length);
  });
});
