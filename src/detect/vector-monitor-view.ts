/**
 * A vector stream's monitor as a Monitor (src/detect/monitor.ts): read-outs are the marginal of the first axis,
 * so dashboards, the API and the web page treat every stream alike; vectorViews() gives the full vectors.
 */
import type { MvMixture } from '../math/mv/index.js';
import type { ComponentView } from './alert.js';
import type { ActiveAlert } from './alert-book.js';
import type { ComponentModel, Monitor, MonitorPhase } from './monitor.js';
import type { MonitorConfig } from './monitor-config.js';
import type { VectorStreamMonitor, VectorComponentView } from './vector-monitor.js';

/** The first-axis marginal of a multivariate mixture, with the monitor's stable ids. */
class FirstAxis implements ComponentModel {
  constructor(
    private readonly m: MvMixture,
    private readonly ids: readonly ComponentView[],
  ) {}
  get k(): number {
    return this.m.k;
  }
  id(j: number): number {
    return this.ids[j].id;
  }
  weight(j: number): number {
    return this.m.weights[j];
  }
  mean(j: number): number {
    return this.m.center[0] + this.m.frameMeans[j * this.m.d] * this.m.scale[0];
  }
  sd(j: number): number {
    return this.m.sdOf(j, 0);
  }
}

export class VectorMonitorView implements Monitor {
  readonly scale = 'identity' as const;

  constructor(readonly inner: VectorStreamMonitor) {}

  get stream(): string {
    return this.inner.stream;
  }
  get config(): MonitorConfig {
    return this.inner.config;
  }
  get state(): MonitorPhase {
    return this.inner.state;
  }
  get dimension(): number {
    return this.inner.dimension;
  }
  get eventsAccepted(): number {
    return this.inner.eventsAccepted;
  }
  get lastEventTs(): number {
    return this.inner.lastEventTs;
  }
  get reference(): ComponentModel | null {
    return this.marginal(this.inner.reference);
  }
  get current(): ComponentModel | null {
    return this.marginal(this.inner.current);
  }
  private marginal(m: MvMixture | null): ComponentModel | null {
    if (m === null) return null;
    // Ids in the mixture's own component order (views() sorts by location, so look them up per index).
    const byIndex = this.inner.idsInOrder(m).map((id) => ({ id }) as ComponentView);
    return new FirstAxis(m, byIndex);
  }
  views(model: ComponentModel | null): ComponentView[] {
    if (model === null) return [];
    const out: ComponentView[] = [];
    for (let j = 0; j < model.k; j++) {
      const loc = model.mean(j);
      out.push({ id: model.id(j), weight: model.weight(j), location: loc, spread: model.sd(j), mean: loc });
    }
    return out.sort((a, b) => a.location - b.location);
  }
  vectorViews(which: 'reference' | 'current'): VectorComponentView[] {
    return this.inner.vectorViews(which === 'reference' ? this.inner.reference : this.inner.current);
  }
  shiftScore(): number {
    return this.inner.shiftScore();
  }
  logLikelihoodPerEvent(): number | null {
    return this.inner.logLikelihoodPerEvent();
  }
  alerts(): ActiveAlert[] {
    return this.inner.alerts();
  }
  rebaseline(): void {
    this.inner.rebaseline();
  }
}
