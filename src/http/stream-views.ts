/**
 * The JSON the web API serves: a summary per stream for the overview, and a stream's detail
 * (histogram of recent values, fitted densities of the current and reference models on a grid,
 * component bands, alert timeline with evidence). Built on request from the registry; every
 * number a person reads is in the stream's own units.
 */
import type { AlertEvidence, AlertKind, AlertTransition, ComponentView } from '../detect/alert.js';
import type { StreamEntry } from '../streams/stream-registry.js';
import type { ComponentModel } from '../detect/monitor.js';
import { fromModel, toModel, type ScaleName } from '../math/scale.js';

export interface ActiveAlertView {
  key: string;
  kind: AlertKind;
  state: 'pending' | 'firing';
  componentId: number | null;
  /** Event time (epoch ms) when it went pending. */
  startsAt: number;
  evidence: AlertEvidence;
}

export interface StreamSummary {
  name: string;
  /** Declared unit of the values ('' if none). */
  unit: string;
  /** Scale the model works on: identity, log or log1p. */
  scale: ScaleName;
  state: 'bootstrap' | 'warmup' | 'armed';
  events: number;
  /** Event time of the last accepted event, epoch ms. */
  lastEventTs: number;
  shiftScore: number;
  /** Current (fast) model and reference (slow) model, sorted by location. */
  components: ComponentView[];
  reference: ComponentView[];
  alerts: ActiveAlertView[];
  /** The newest published transition, if any. */
  lastTransition: { kind: AlertKind; state: string; ts: number; summary: string } | null;
}

export interface Band {
  id: number;
  /** The component's central 68.27 % interval in stream units (location ± spread on the identity scale). */
  lo: number;
  hi: number;
  location: number;
}

export interface StreamDetail extends StreamSummary {
  /**
   * The axis the chart uses: the model scale. Histogram bins and grid points are uniform in
   * T(x) (x itself, log x or log(1+x)) and densities are per unit of T(x), so a log-normal
   * mixture draws as Gaussian bumps over a histogram of log x.
   */
  axis: ScaleName;
  histogram: { edges: number[]; counts: number[]; total: number };
  grid: { x: number[]; current: number[]; reference: number[] };
  bands: { current: Band[]; reference: Band[] };
  /** Published transitions, newest first. */
  history: AlertTransition[];
  rejected: number;
}

export function streamSummary(e: StreamEntry): StreamSummary {
  const m = e.monitor;
  const last = e.history.length > 0 ? e.history[e.history.length - 1] : null;
  return {
    name: e.name,
    unit: m.config.unit,
    scale: m.scale,
    state: m.state,
    events: m.eventsAccepted,
    lastEventTs: m.lastEventTs,
    shiftScore: m.shiftScore(),
    components: m.views(m.current),
    reference: m.views(m.reference),
    alerts: m.alerts().map((a) => ({ key: a.key, kind: a.kind, state: a.state, componentId: a.componentId, startsAt: a.startsAt, evidence: a.evidence })),
    lastTransition: last === null ? null : { kind: last.kind, state: last.state, ts: last.ts, summary: last.evidence.summary },
  };
}

const BINS = 40;
const GRID = 240;

export function streamDetail(e: StreamEntry): StreamDetail {
  const summary = streamSummary(e);
  const m = e.monitor;
  const scale = m.scale;
  const n = Math.min(e.recentCount, e.recent.length);
  const ys: number[] = [];
  for (let i = 0; i < n; i++) {
    const x = e.recent[i];
    if (scale === 'log' && !(x > 0)) continue;
    if (scale === 'log1p' && !(x > -1)) continue;
    const y = toModel(scale, x);
    if (Number.isFinite(y)) ys.push(y);
  }
  ys.sort((a, b) => a - b);
  const [lo, hi] = axisRange(ys, [m.current, m.reference]);
  const edgesY: number[] = [];
  for (let i = 0; i <= BINS; i++) edgesY.push(lo + ((hi - lo) * i) / BINS);
  const counts = new Array<number>(BINS).fill(0);
  let total = 0;
  for (const y of ys) {
    if (y < lo || y > hi) continue;
    counts[Math.min(BINS - 1, Math.floor(((y - lo) / (hi - lo)) * BINS))]++;
    total++;
  }
  const gx: number[] = [];
  const cur: number[] = [];
  const ref: number[] = [];
  for (let i = 0; i < GRID; i++) {
    const y = lo + ((hi - lo) * i) / (GRID - 1);
    gx.push(fromModel(scale, y));
    cur.push(densityOn(m.current, y));
    ref.push(densityOn(m.reference, y));
  }
  return {
    ...summary,
    axis: scale,
    histogram: { edges: edgesY.map((y) => fromModel(scale, y)), counts, total },
    grid: { x: gx, current: cur, reference: ref },
    bands: { current: bands(m.current, scale), reference: bands(m.reference, scale) },
    history: e.history.slice().reverse(),
    rejected: e.rejected,
  };
}

/** Mixture density on the model scale at y (Gaussians only; the background takes a negligible share). */
function densityOn(model: ComponentModel | null, y: number): number {
  if (model === null) return 0;
  let p = 0;
  for (let j = 0; j < model.k; j++) {
    const sd = model.sd(j);
    const z = (y - model.mean(j)) / sd;
    p += (model.weight(j) * Math.exp(-0.5 * z * z)) / (sd * Math.sqrt(2 * Math.PI));
  }
  return p;
}

function bands(model: ComponentModel | null, scale: ScaleName): Band[] {
  if (model === null) return [];
  const out: Band[] = [];
  for (let j = 0; j < model.k; j++) {
    const mu = model.mean(j);
    const sd = model.sd(j);
    out.push({ id: model.id(j), lo: fromModel(scale, mu - sd), hi: fromModel(scale, mu + sd), location: fromModel(scale, mu) });
  }
  return out.sort((a, b) => a.location - b.location);
}

/**
 * The chart's range on the model scale: the central 99 % of recent values (so one outlier does not
 * squash the picture) joined with every component's mean ± 3.5 sd, padded by 5 %.
 */
function axisRange(sortedYs: number[], models: (ComponentModel | null)[]): [number, number] {
  let lo = Infinity;
  let hi = -Infinity;
  if (sortedYs.length > 0) {
    lo = sortedYs[Math.floor(0.005 * (sortedYs.length - 1))];
    hi = sortedYs[Math.ceil(0.995 * (sortedYs.length - 1))];
  }
  for (const model of models) {
    if (model === null) continue;
    for (let j = 0; j < model.k; j++) {
      lo = Math.min(lo, model.mean(j) - 3.5 * model.sd(j));
      hi = Math.max(hi, model.mean(j) + 3.5 * model.sd(j));
    }
  }
  if (!Number.isFinite(lo) || !Number.isFinite(hi)) return [0, 1];
  if (hi - lo <= 0) {
    const w = Math.max(Math.abs(lo) * 0.1, 1e-9);
    return [lo - w, hi + w];
  }
  const pad = 0.05 * (hi - lo);
  return [lo - pad, hi + pad];
}
