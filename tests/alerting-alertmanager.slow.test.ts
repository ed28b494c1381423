// The Alertmanager sink against a real Alertmanager (Debian prometheus-alertmanager 0.25,
// API v2 as in its api/v2/openapi.yaml) on loopback: a pushed alert shows up with its labels
// and annotations, and after the resolved transition it is no longer active.
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import type { AlertTransition } from '../src/detect/alert.js';
import { AlertmanagerSink, type PostableAlert } from '../src/alerting/alertmanager-sink.js';
import { DeliveryQueue } from '../src/alerting/delivery-queue.js';
import { postJson } from '../src/alerting/http-post.js';
import { sampleTransition } from './support/alert-fixture.js';
import { startAlertmanager, type RunningServer } from './support/prometheus-tools.js';

interface GettableAlert {
  labels: Record<string, string>;
  annotations: Record<string, string>;
  startsAt: string;
  endsAt: string;
  generatorURL?: string;
  status: { state: string };
}

function transition(state: AlertTransition['state'], now: number): AlertTransition {
  return sampleTransition(
    {
      state,
      ts: now,
      offset: 5000,
      startsAt: now - 60_000,
      endsAt: state === 'resolved' ? now : null,
      resolution: state === 'resolved' ? 'recovered' : null,
    },
    { firstEvidenceTs: now - 79_000, firstEvidenceOffset: 4100 },
  );
}

async function alerts(am: RunningServer): Promise<GettableAlert[]> {
  const res = await fetch(`${am.url}/api/v2/alerts?active=true`, { signal: AbortSignal.timeout(5000) });
  expect(res.status).toBe(200);
  return (await res.json()) as GettableAlert[];
}

async function poll<T>(fn: () => Promise<T>, ok: (v: T) => boolean, timeoutMs = 10_000): Promise<T> {
  const end = Date.now() + timeoutMs;
  for (;;) {
    const v = await fn();
    if (ok(v) || Date.now() > end) return v;
    await new Promise((r) => setTimeout(r, 100));
  }
}

describe('alertmanager sink with a real Alertmanager', () => {
  let am: RunningServer;
  let second: RunningServer;
  beforeAll(async () => {
    am = await startAlertmanager();
    second = await startAlertmanager();
  });
  afterAll(async () => {
    await am?.stop();
    await second?.stop();
  });

  it('a firing alert appears with labels and annotations on every Alertmanager; resolved, it is gone', async () => {
    const sink = new AlertmanagerSink({
      urls: [am.url, `${second.url}/`],
      externalUrl: 'http://127.0.0.1:9471',
      severity: 'ticket',
      delivery: { baseDelayMs: 50, closeTimeoutMs: 2000 },
    });
    try {
      const now = Date.now();
      sink.publish(transition('pending', now - 1000));
      sink.publish(transition('firing', now));
      for (const server of [am, second]) {
        const got = await poll(
          () => alerts(server),
          (a) => a.length === 1,
        );
        expect(got).toHaveLength(1);
        const a = got[0];
        expect(a.labels).toEqual({
          alertname: 'modewatch_mode_emerged',
          stream: 'checkout',
          kind: 'mode_emerged',
          component: '2',
          severity: 'ticket',
        });
        expect(a.status.state).toBe('active');
        expect(a.annotations.summary).toContain('912 ms');
        expect(a.annotations.statistic).toBe('novelty_cusum');
        expect(a.annotations.value).toBe('14.2');
        expect(a.annotations.threshold).toBe('9.5');
        expect(a.annotations.before).toBe('#0 w=0.8 loc=40 spread=6; #1 w=0.2 loc=180 spread=25');
        expect(a.annotations.after).toContain('#2 w=0.026 loc=912 spread=80');
        expect(a.annotations.first_evidence).toBe(new Date(now - 79_000).toISOString());
        expect(Date.parse(a.startsAt)).toBe(now - 60_000);
        expect(a.generatorURL).toBe('http://127.0.0.1:9471/streams/checkout');
      }
      expect(sink.stats().failed).toBe(0);

      sink.publish(transition('resolved', Date.now()));
      for (const server of [am, second]) {
        const left = await poll(
          () => alerts(server),
          (a) => a.length === 0,
        );
        expect(left).toEqual([]);
      }
      expect(sink.activeCount()).toBe(0);
    } finally {
      await sink.close();
    }
    expect(sink.stats()).toMatchObject({ failed: 0, dropped: 0, queueLength: 0, delivered: 4 });
  });

  it('an alert Alertmanager refuses (HTTP 400) fails at once instead of being retried', async () => {
    // Alertmanager validates every alert; an empty label set is refused with 400.
    const shaper = new AlertmanagerSink({ urls: [am.url] });
    const good = shaper.toPostable(transition('firing', Date.now()));
    await shaper.close();
    const q = new DeliveryQueue<PostableAlert>(
      (batch, signal) => postJson(`${am.url}/api/v2/alerts`, batch, {}, signal),
      { name: 'probe', maxAttempts: 5, baseDelayMs: 2000 },
    );
    const t0 = Date.now();
    q.push({ ...good, labels: {} });
    q.push(good);
    await q.close();
    // A retry would have waited >= 1 s (half the 2 s base); both settled well before that.
    expect(Date.now() - t0).toBeLessThan(1000);
    expect(q.stats()).toMatchObject({ failed: 1, delivered: 1 });
  });
});
