/**
 * What the rest of modewatch reads from a stream's monitor, whether the stream carries numbers
 * (StreamMonitor) or small vectors (VectorStreamMonitor, seen through VectorMonitorView): the exporter, the
 * HTTP API and the web page depend on this, not on either class.
 */
import type { ScaleName } from '../math/scale.js';
import type { ComponentView } from './alert.js';
import type { ActiveAlert } from './alert-book.js';
import type { MonitorConfig } from './monitor-config.js';

export type MonitorPhase = 'bootstrap' | 'warmup' | 'armed';

/**
 * A univariate mixture as read-outs on its model scale, with stable ids: an OnlineMixture1D fits it;
 * a vector stream shows the marginal of its first axis.
 */
export interface ComponentModel {
  readonly k: number;
  id(j: number): number;
  weight(j: number): number;
  /** Mean and sd on the model scale. */
  mean(j: number): number;
  sd(j: number): number;
}

export interface Monitor {
  readonly stream: string;
  readonly config: MonitorConfig;
  readonly state: MonitorPhase;
  /** Scale of the read-outs (a vector stream's first axis is on the identity scale). */
  readonly scale: ScaleName;
  /** 1 for numbers; the vector's dimension otherwise (0 before the first event of a vector stream). */
  readonly dimension: number;
  readonly eventsAccepted: number;
  readonly lastEventTs: number;
  readonly reference: ComponentModel | null;
  readonly current: ComponentModel | null;
  views(model: ComponentModel | null): ComponentView[];
  shiftScore(): number;
  /** Log-likelihood per event of recent quiet events under the reference (nats, model scale), or null before it has one. */
  logLikelihoodPerEvent(): number | null;
  alerts(): ActiveAlert[];
  rebaseline(): void;
}
