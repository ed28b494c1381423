/**
 * Alerts: what a stream monitor says when its population changed, with evidence.
 * This file is the contract between detection and every sink (log, webhook,
 * Alertmanager API, Kafka topic). Sinks depend on it; it depends on nothing.
 */

export type AlertKind = 'mode_emerged' | 'mode_vanished' | 'weight_shift' | 'location_shift' | 'poor_fit';
export const ALERT_KINDS: readonly AlertKind[] = [
  'mode_emerged',
  'mode_vanished',
  'weight_shift',
  'location_shift',
  'poor_fit',
];

/** pending: the statistic crossed its threshold; firing: it held; resolved: it went away or was absorbed. */
export type AlertState = 'pending' | 'firing' | 'resolved';

/** One component as an operator reads it, in the stream's own units. */
export interface ComponentView {
  /** Stable id for the component's whole life (used as a metric label). */
  id: number;
  weight: number;
  /** Median of the component in the stream's units (equals the mean on the identity scale). */
  location: number;
  /** Half the width of the component's central 68.27 % interval, in the stream's units (= sd on identity). */
  spread: number;
  /** Mean on the stream's own units (for log scales, exp(mu + s^2/2)); for vectors the first dimension. */
  mean: number;
}

export interface AlertEvidence {
  /** Name of the statistic, e.g. "cusum_weight_up". */
  statistic: string;
  /** Value of the statistic at the decision. */
  value: number;
  threshold: number;
  /** Component the alert is about, if any (stable id). */
  componentId: number | null;
  /** Reference (what is normal) and current (what is happening) components at the decision. */
  before: ComponentView[];
  after: ComponentView[];
  /** Event time (epoch ms) and input offset of the first evidence: where the statistic last left zero. */
  firstEvidenceTs: number;
  firstEvidenceOffset: number;
  /** Free text an operator can read, e.g. "a new mode near 912 ms carries 2.6 % of events". */
  summary: string;
}

export interface AlertTransition {
  /** Stable key: `${stream}/${kind}/${componentId ?? '-'}`. */
  key: string;
  stream: string;
  kind: AlertKind;
  state: AlertState;
  /** Event time (epoch ms) of the event that caused this transition. */
  ts: number;
  /** Input offset (source position) of that event. */
  offset: number;
  /** When the alert first went pending (event time, epoch ms). */
  startsAt: number;
  /** Set when state is resolved. */
  endsAt: number | null;
  /** Why it resolved: the change went away, or the reference absorbed it, or an operator re-baselined. */
  resolution: 'recovered' | 'absorbed' | 'rebaselined' | null;
  evidence: AlertEvidence;
}

/**
 * Where alert transitions go. Implementations must never block the caller: they queue
 * (bounded), deliver in the background and count what they drop or fail.
 */
export interface AlertSink {
  readonly name: string;
  /** Called synchronously from event processing: must return at once. */
  publish(transition: AlertTransition): void;
  /** Deliver what is queued, then release resources. */
  close(): Promise<void>;
}
