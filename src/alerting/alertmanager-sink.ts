/**
 * Alertmanager sink: pushes alerts to one or more Alertmanagers through the v2 API
 * (POST /api/v2/alerts, body: an array of postable alerts with labels, annotations,
 * startsAt, endsAt, generatorURL — Alertmanager's OpenAPI spec, api/v2/openapi.yaml).
 *
 * - Only firing alerts are sent (Alertmanager has no "pending"); a resolved transition is
 *   sent with endsAt = the resolve time and then forgotten. A resolution of an alert that
 *   was only ever pending here is not sent.
 * - Firing alerts are re-sent every `resendIntervalMs` with endsAt pushed ahead by
 *   `endsAtFactor` intervals, the way Prometheus itself keeps alerts alive; if modewatch
 *   dies, Alertmanager resolves them on its own soon after (common practice).
 * - Each Alertmanager URL has its own queue, so one that is down does not hold up another.
 * - Times: startsAt/endsAt come from event time, clamped to the wall clock so that events
 *   stamped in the future cannot produce an alert Alertmanager refuses (endsAt < startsAt).
 */
import { streamPageUrl } from '../http/links.js';
import type { AlertKind, AlertSink, AlertTransition, ComponentView } from '../detect/alert.js';
import { DeliveryQueue, type DeliveryOptions, type ObservableSink, type SinkStats } from './delivery-queue.js';
import { postJson } from './http-post.js';
import { checkHttpUrl } from './webhook-sink.js';

/** One element of the POST /api/v2/alerts body. */
export interface PostableAlert {
  labels: Record<string, string>;
  annotations: Record<string, string>;
  startsAt: string;
  endsAt: string;
  generatorURL?: string;
}

export interface AlertmanagerSinkOptions {
  /** Alertmanager base URLs (e.g. http://alertmanager:9093, with its route prefix if any). */
  urls: string[];
  /** Severity label for every kind (default "warning"), overridable per kind. */
  severity?: string;
  severityByKind?: Partial<Record<AlertKind, string>>;
  /** Extra labels on every alert (e.g. team, environment). */
  labels?: Record<string, string>;
  /** modewatch's own external URL; alerts link to the stream's page there. */
  externalUrl?: string;
  /** Re-send period for firing alerts (default 60 s). */
  resendIntervalMs?: number;
  /** A firing alert's endsAt is now + endsAtFactor · resendIntervalMs (default 4). */
  endsAtFactor?: number;
  name?: string;
  delivery?: Omit<DeliveryOptions, 'name'>;
  /** Wall clock (epoch ms); injectable for tests. */
  now?: () => number;
}

const LABEL_NAME = /^[a-zA-Z_][a-zA-Z0-9_]*$/; // Prometheus data model, label names

/** `modewatch_mode_emerged` etc.: the alertname for a kind. */
export function alertName(kind: AlertKind): string {
  return `modewatch_${kind}`;
}

/** Short human number: 4 significant digits, no exponent for everyday magnitudes. */
export function fmt(x: number): string {
  if (!Number.isFinite(x)) return String(x);
  if (x === 0) return '0';
  const a = Math.abs(x);
  if (a >= 1e-3 && a < 1e9) return String(Number(x.toPrecision(4)));
  return x.toExponential(3);
}

/** Components as one line: `#0 w=0.8 loc=40.1 spread=5.2; #1 ...` (stream units). */
export function componentTable(components: readonly ComponentView[]): string {
  if (components.length === 0) return '(none)';
  return components
    .map((c) => `#${c.id} w=${fmt(c.weight)} loc=${fmt(c.location)} spread=${fmt(c.spread)}`)
    .join('; ');
}

export function alertmanagerEndpoint(base: string): string {
  const b = checkHttpUrl(base, 'alertmanager url');
  if (/\/api\/v2\/alerts\/?$/.test(new URL(b).pathname)) return b;
  return new URL('api/v2/alerts', b.endsWith('/') ? b : `${b}/`).toString();
}

export class AlertmanagerSink implements AlertSink, ObservableSink {
  readonly name: string;
  private readonly queues: DeliveryQueue<PostableAlert>[];
  private readonly firing = new Map<string, AlertTransition>();
  private readonly pendingOnly = new Set<string>();
  private readonly timer: NodeJS.Timeout;
  private readonly resendIntervalMs: number;
  private readonly endsAtFactor: number;
  private readonly now: () => number;
  private readonly extraLabels: Record<string, string>;

  constructor(private readonly options: AlertmanagerSinkOptions) {
    if (!Array.isArray(options.urls) || options.urls.length === 0) {
      throw new TypeError('alertmanager sink: urls must list at least one Alertmanager URL');
    }
    this.name = options.name ?? 'alertmanager';
    this.resendIntervalMs = options.resendIntervalMs ?? 60_000;
    if (!(this.resendIntervalMs > 0)) throw new RangeError('alertmanager sink: resendIntervalMs must be > 0');
    this.endsAtFactor = options.endsAtFactor ?? 4;
    if (!(this.endsAtFactor >= 1)) throw new RangeError('alertmanager sink: endsAtFactor must be >= 1');
    this.now = options.now ?? Date.now;
    this.extraLabels = { ...options.labels };
    for (const k of Object.keys(this.extraLabels)) {
      if (!LABEL_NAME.test(k)) throw new TypeError(`alertmanager sink: label name ${JSON.stringify(k)} is not valid`);
    }
    if (options.externalUrl) checkHttpUrl(options.externalUrl, 'alertmanager sink externalUrl');
    this.queues = options.urls.map((u) => {
      const endpoint = alertmanagerEndpoint(u);
      return new DeliveryQueue<PostableAlert>((batch, signal) => postJson(endpoint, batch, {}, signal), {
        capacity: 5000,
        maxBatch: 64,
        ...options.delivery,
        name: this.name,
      });
    });
    this.timer = setInterval(() => this.resend(), this.resendIntervalMs);
    this.timer.unref();
  }

  publish(t: AlertTransition): void {
    switch (t.state) {
      case 'pending':
        if (!this.firing.has(t.key)) this.pendingOnly.add(t.key);
        return;
      case 'firing':
        this.pendingOnly.delete(t.key);
        this.firing.set(t.key, t);
        this.enqueue(this.toPostable(t));
        return;
      case 'resolved': {
        const wasPendingOnly = this.pendingOnly.delete(t.key) && !this.firing.has(t.key);
        this.firing.delete(t.key);
        if (!wasPendingOnly) this.enqueue(this.toPostable(t));
        return;
      }
    }
  }

  /** Alerts currently kept alive by re-sending. */
  activeCount(): number {
    return this.firing.size;
  }

  stats(): SinkStats {
    const s: SinkStats = { delivered: 0, failed: 0, dropped: 0, queueLength: 0 };
    for (const q of this.queues) {
      const x = q.stats();
      s.delivered += x.delivered;
      s.failed += x.failed;
      s.dropped += x.dropped;
      s.queueLength += x.queueLength;
    }
    return s;
  }

  async close(): Promise<void> {
    clearInterval(this.timer);
    await Promise.allSettled(this.queues.map((q) => q.close()));
  }

  /** Build the postable alert for a transition (exported behaviour, tested directly). */
  toPostable(t: AlertTransition): PostableAlert {
    const now = this.now();
    let startsAt: number;
    let endsAt: number;
    if (t.state === 'resolved') {
      endsAt = Math.min(t.endsAt ?? t.ts, now);
      startsAt = Math.min(t.startsAt, endsAt);
    } else {
      startsAt = Math.min(t.startsAt, now);
      endsAt = now + this.endsAtFactor * this.resendIntervalMs;
    }
    const severity = this.options.severityByKind?.[t.kind] ?? this.options.severity ?? 'warning';
    const labels: Record<string, string> = {
      ...this.extraLabels,
      alertname: alertName(t.kind),
      stream: t.stream,
      kind: t.kind,
      severity,
    };
    if (t.evidence.componentId !== null) labels.component = String(t.evidence.componentId);
    const e = t.evidence;
    const annotations: Record<string, string> = {
      summary: e.summary,
      statistic: e.statistic,
      value: fmt(e.value),
      threshold: fmt(e.threshold),
      before: componentTable(e.before),
      after: componentTable(e.after),
      first_evidence: Number.isFinite(e.firstEvidenceTs) ? new Date(e.firstEvidenceTs).toISOString() : 'unknown',
      first_evidence_offset: String(e.firstEvidenceOffset),
    };
    if (t.resolution) annotations.resolution = t.resolution;
    const alert: PostableAlert = {
      labels,
      annotations,
      startsAt: new Date(startsAt).toISOString(),
      endsAt: new Date(endsAt).toISOString(),
    };
    if (this.options.externalUrl) alert.generatorURL = streamPageUrl(this.options.externalUrl, t.stream);
    return alert;
  }

  private enqueue(a: PostableAlert): void {
    for (const q of this.queues) q.push(a);
  }

  private resend(): void {
    for (const t of this.firing.values()) this.enqueue(this.toPostable(t));
  }
}

