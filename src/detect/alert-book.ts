/**
 * The alerts of one stream and their states: pending (a statistic crossed its threshold) ->
 * firing (it held for the confirmation period) -> resolved (it came back down, or the
 * reference absorbed the change, or an operator re-baselined). A pending alert that does not
 * hold is dropped without a trace; only firing and resolved transitions are published.
 */
import type { AlertEvidence, AlertKind, AlertTransition } from './alert.js';

export interface ActiveAlert {
  key: string;
  kind: AlertKind;
  componentId: number | null;
  state: 'pending' | 'firing';
  /** Where the statistic lives: a CUSUM index, a born component, or the fit statistic. */
  source: number;
  /** Accepted-event count and event time when it went pending / firing. */
  pendingAt: number;
  startsAt: number;
  firingAt: number;
  firingTs: number;
  evidence: AlertEvidence;
}

export type TransitionListener = (t: AlertTransition) => void;

export class AlertBook {
  private readonly alerts = new Map<string, ActiveAlert>();

  constructor(
    readonly stream: string,
    private readonly listener: TransitionListener,
  ) {}

  get size(): number {
    return this.alerts.size;
  }

  key(kind: AlertKind, componentId: number | null): string {
    return `${this.stream}/${kind}/${componentId ?? '-'}`;
  }

  get(key: string): ActiveAlert | undefined {
    return this.alerts.get(key);
  }

  list(): ActiveAlert[] {
    return [...this.alerts.values()];
  }

  open(kind: AlertKind, componentId: number | null, source: number, eventCount: number, ts: number, evidence: AlertEvidence): ActiveAlert {
    const key = this.key(kind, componentId);
    const a: ActiveAlert = { key, kind, componentId, state: 'pending', source, pendingAt: eventCount, startsAt: ts, firingAt: -1, firingTs: -1, evidence };
    this.alerts.set(key, a);
    return a;
  }

  fire(a: ActiveAlert, eventCount: number, ts: number, offset: number, evidence: AlertEvidence): void {
    a.state = 'firing';
    a.firingAt = eventCount;
    a.firingTs = ts;
    a.evidence = evidence;
    this.listener(this.transition(a, 'firing', ts, offset, null, null));
  }

  /** Drop a pending alert that did not hold (no transition is published). */
  cancel(a: ActiveAlert): void {
    this.alerts.delete(a.key);
  }

  resolve(a: ActiveAlert, ts: number, offset: number, resolution: 'recovered' | 'absorbed' | 'rebaselined', evidence: AlertEvidence): void {
    this.alerts.delete(a.key);
    if (a.state !== 'firing') return;
    this.listener(this.transition({ ...a, evidence }, 'resolved', ts, offset, ts, resolution));
  }

  private transition(
    a: ActiveAlert,
    state: 'firing' | 'resolved',
    ts: number,
    offset: number,
    endsAt: number | null,
    resolution: AlertTransition['resolution'],
  ): AlertTransition {
    return { key: a.key, stream: this.stream, kind: a.kind, state, ts, offset, startsAt: a.startsAt, endsAt, resolution, evidence: a.evidence };
  }

  exportState(): ActiveAlert[] {
    return this.list().map((a) => ({ ...a }));
  }

  importState(alerts: ActiveAlert[]): void {
    this.alerts.clear();
    for (const a of alerts) this.alerts.set(a.key, { ...a });
  }
}
