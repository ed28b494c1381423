/**
 * Runs a scenario: NDJSON lines {"ts":..,"stream":..,"value":..}, streams interleaved by event time (ties by
 * stream order), deterministic for a seed, plus the ground truth of what changed and where. Pure: no I/O.
 *
 * Each stream has its own generators for gaps, values and noise (outliers, bad lines), all seeded from the seed
 * and the stream's position, so a stream's values do not depend on the other streams or on noise settings.
 */
import { Random } from '../math/random.js';
import { cloneMixture, locationOf, mixtureLogPdf, sampleComponent, sampleMixture, withLocation, type ComponentSpec, type MixtureSpec } from './families.js';
import { BAD_LINE_EXPECTED, BAD_LINE_KINDS, type BadLineKind, type ChangeSpec, type Scenario, type StreamSpec } from './scenario.js';

export { mixtureLogPdf };

export type TruthKind = 'mode_emerged' | 'mode_vanished' | 'weight_shift' | 'location_shift';

export interface TruthChange {
  stream: string;
  kind: TruthKind;
  /** The scenario change that caused it. */
  change: 'appear' | 'vanish' | 'weights' | 'shift' | 'drift';
  /** Component index it concerns (in the list after the change for appear, before it for vanish). */
  component: number | null;
  /** Stream-local index of the first changed event. */
  eventIndex: number;
  /** 0-based line offset in the output of the first changed event (the offset a file source gives it). */
  offset: number;
  /** Event time of the first changed event, epoch ms (as written). */
  ts: number;
  /** For a drift: events over which it moves (post is the mixture at its end). */
  gradualOver: number | null;
  pre: MixtureSpec;
  post: MixtureSpec;
}

export interface StreamTruth {
  name: string;
  events: number;
  outliers: number;
  badLines: Record<BadLineKind, number>;
  initial: MixtureSpec;
  final: MixtureSpec;
}

export interface GroundTruth {
  scenario: string;
  seed: number;
  lines: number;
  events: number;
  badLines: number;
  outliers: number;
  /** What the decoder (or, for negative_value, the model) is expected to call each kind of bad line. */
  badLineExpectedRejection: Record<BadLineKind, string>;
  streams: StreamTruth[];
  changes: TruthChange[];
}

export interface SimRecord {
  /** The NDJSON line, no newline. */
  line: string;
  /** 0-based line offset in the output. */
  offset: number;
  stream: string;
  /** Event time as written (epoch ms, integer). */
  ts: number;
  /** The value as written; NaN for a bad line. */
  value: number;
  /** Stream-local event index (a bad line carries the index of the event it precedes). */
  eventIndex: number;
  outlier: boolean;
  bad: BadLineKind | null;
}

interface Drift {
  component: ComponentSpec;
  from: number;
  to: number;
  at: number;
  over: number;
}

class StreamRun {
  readonly spec: StreamSpec;
  readonly truth: StreamTruth;
  readonly gapRng: Random;
  readonly valueRng: Random;
  readonly noiseRng: Random;
  mixture: MixtureSpec;
  index = 0;
  /** Event time of the next event (exact, before rounding to integer ms). */
  t: number;
  private readonly changes: ChangeSpec[];
  private nextChange = 0;
  private drifts: Drift[] = [];
  private outliers: Extract<ChangeSpec, { kind: 'outliers' }>[] = [];
  private bads: Extract<ChangeSpec, { kind: 'badLines' }>[] = [];
  readonly prefix: string;
  private readonly digits: number;
  private readonly positive: boolean;
  pendingTruth: TruthChange[] = [];
  /** A bad line has been written for the current index; the event itself comes next. */
  badDone = false;

  constructor(spec: StreamSpec, seed: number, k: number) {
    this.spec = spec;
    // Distinct, well-mixed seeds per stream and purpose (Random seeds through splitmix32).
    const base = (seed >>> 0) ^ Math.imul(k + 1, 0x9e3779b1);
    this.gapRng = new Random(base ^ 0x1111);
    this.valueRng = new Random(base ^ 0x2222);
    this.noiseRng = new Random(base ^ 0x3333);
    this.mixture = cloneMixture(spec.initial);
    this.changes = spec.changes.slice().sort((a, b) => a.at - b.at);
    this.t = spec.start;
    this.prefix = `,"stream":${JSON.stringify(spec.name)},"value":`;
    this.digits = spec.digits ?? 7;
    this.positive = spec.initial.components.every((c) => c.family !== 'normal');
    const bad = {} as Record<BadLineKind, number>;
    for (const b of BAD_LINE_KINDS) bad[b] = 0;
    this.truth = { name: spec.name, events: 0, outliers: 0, badLines: bad, initial: cloneMixture(spec.initial), final: cloneMixture(spec.initial) };
  }

  done(): boolean {
    return this.index >= this.spec.count;
  }

  /** Applies the changes scheduled at the current index; queues their truth entries. */
  applyChanges(): void {
    const i = this.index;
    while (this.nextChange < this.changes.length && this.changes[this.nextChange].at === i) {
      const c = this.changes[this.nextChange++];
      const pre = cloneMixture(this.mixture);
      const m = this.mixture;
      let kind: TruthKind | null = null;
      let component: number | null = null;
      let over: number | null = null;
      switch (c.kind) {
        case 'appear':
          for (let k = 0; k < m.weights.length; k++) m.weights[k] *= 1 - c.weight;
          m.weights.push(c.weight);
          m.components.push({ ...c.component });
          kind = 'mode_emerged';
          component = m.components.length - 1;
          break;
        case 'vanish': {
          m.weights.splice(c.component, 1);
          const removed = m.components.splice(c.component, 1)[0];
          this.drifts = this.drifts.filter((d) => d.component !== removed);
          const s = m.weights.reduce((a, b) => a + b, 0);
          for (let k = 0; k < m.weights.length; k++) m.weights[k] /= s;
          kind = 'mode_vanished';
          component = c.component;
          break;
        }
        case 'weights': {
          const s = c.weights.reduce((a, b) => a + b, 0);
          for (let k = 0; k < m.weights.length; k++) m.weights[k] = c.weights[k] / s;
          kind = 'weight_shift';
          break;
        }
        case 'shift':
          m.components[c.component] = withLocation(m.components[c.component], c.to);
          kind = 'location_shift';
          component = c.component;
          break;
        case 'drift': {
          const comp = m.components[c.component];
          this.drifts.push({ component: comp, from: locationOf(comp), to: c.to, at: c.at, over: c.over });
          kind = 'location_shift';
          component = c.component;
          over = c.over;
          break;
        }
        case 'outliers':
          this.outliers.push(c);
          break;
        case 'badLines':
          this.bads.push(c);
          break;
      }
      if (kind !== null && c.kind !== 'outliers' && c.kind !== 'badLines') {
        const post = cloneMixture(m);
        if (c.kind === 'drift') post.components[c.component] = withLocation(post.components[c.component], c.to);
        this.pendingTruth.push({
          stream: this.spec.name,
          kind,
          change: c.kind,
          component,
          eventIndex: i,
          offset: -1,
          ts: 0,
          gradualOver: over,
          pre,
          post,
        });
      }
    }
    // Gradual moves: the location for event i is from + (to - from) * (i - at + 1) / over.
    if (this.drifts.length > 0) {
      for (const d of this.drifts) {
        const k = this.mixture.components.indexOf(d.component);
        if (k < 0) continue;
        const f = Math.min(1, (i - d.at + 1) / d.over);
        const moved = withLocation(this.mixture.components[k], d.from + (d.to - d.from) * f);
        this.mixture.components[k] = moved;
        d.component = moved;
      }
      this.drifts = this.drifts.filter((d) => i - d.at + 1 < d.over);
    }
    this.outliers = this.outliers.filter((o) => i < o.until);
    this.bads = this.bads.filter((b) => i < b.until);
  }

  /** The malformed line to write before the current event, or null. */
  maybeBadLine(tsOut: number): { line: string; kind: BadLineKind } | null {
    for (const b of this.bads) {
      if (this.index < b.at) continue;
      if (this.noiseRng.uniform() >= b.fraction) continue;
      const kinds = b.kinds ?? BAD_LINE_KINDS.filter((k) => k !== 'negative_value' || this.positive);
      const kind = kinds[this.noiseRng.int(kinds.length)];
      this.truth.badLines[kind]++;
      const head = `{"ts":${tsOut}${this.prefix}`;
      switch (kind) {
        case 'not_json':
          return { kind, line: head.slice(0, head.length - 3) };
        case 'nan_string':
          return { kind, line: `${head}"NaN"}` };
        case 'missing_value':
          return { kind, line: `{"ts":${tsOut},"stream":${JSON.stringify(this.spec.name)}}` };
        case 'wrong_type':
          return { kind, line: `${head}true}` };
        case 'negative_value':
          return { kind, line: `${head}-${this.format(Math.abs(sampleMixture(this.mixture, this.noiseRng)))}}` };
      }
    }
    return null;
  }

  /** Draws the current event's value (outlier or mixture), rounded as written. */
  drawValue(): { value: number; outlier: boolean } {
    for (const o of this.outliers) {
      if (this.index < o.at) continue;
      if (this.noiseRng.uniform() < o.fraction) {
        this.truth.outliers++;
        return { value: this.round(sampleComponent(o.component, this.noiseRng)), outlier: true };
      }
    }
    return { value: this.round(sampleMixture(this.mixture, this.valueRng)), outlier: false };
  }

  round(x: number): number {
    return Number(x.toPrecision(this.digits));
  }

  format(x: number): string {
    return String(this.round(x));
  }

  advanceTime(): void {
    const gap = this.spec.gaps === 'fixed' ? 1000 / this.spec.rate : (1000 / this.spec.rate) * this.gapRng.exponential();
    this.t += gap;
  }
}

export interface SimulationRun {
  /** Iterates the output lines once (a second call starts again from the seed). */
  records(): Generator<SimRecord, void, void>;
  /** Ground truth; complete once records() has been iterated to the end. */
  truth(): GroundTruth;
}

export function simulate(scenario: Scenario, seed: number): SimulationRun {
  let truth: GroundTruth | null = null;
  function* records(): Generator<SimRecord, void, void> {
    const runs = scenario.streams.map((s, k) => new StreamRun(s, seed, k));
    const changes: TruthChange[] = [];
    let offset = 0;
    let events = 0;
    let bad = 0;
    for (;;) {
      // Few streams per scenario: a linear scan for the earliest beats a heap.
      let r: StreamRun | null = null;
      for (const s of runs) if (!s.done() && (r === null || s.t < r.t)) r = s;
      if (r === null) break;
      const ts = Math.floor(r.t);
      if (!r.badDone) {
        r.applyChanges();
        const b = r.maybeBadLine(ts);
        if (b !== null) {
          r.badDone = true;
          bad++;
          yield { line: b.line, offset: offset++, stream: r.spec.name, ts, value: NaN, eventIndex: r.index, outlier: false, bad: b.kind };
          continue;
        }
      }
      r.badDone = false;
      for (const t of r.pendingTruth) {
        t.offset = offset;
        t.ts = ts;
        changes.push(t);
      }
      r.pendingTruth = [];
      const { value, outlier } = r.drawValue();
      const rec: SimRecord = {
        line: `{"ts":${ts}${r.prefix}${value}}`,
        offset: offset++,
        stream: r.spec.name,
        ts,
        value,
        eventIndex: r.index,
        outlier,
        bad: null,
      };
      r.index++;
      r.truth.events++;
      events++;
      r.advanceTime();
      yield rec;
    }
    for (const r of runs) r.truth.final = cloneMixture(r.mixture);
    truth = {
      scenario: scenario.name,
      seed,
      lines: offset,
      events,
      badLines: bad,
      outliers: runs.reduce((a, r) => a + r.truth.outliers, 0),
      badLineExpectedRejection: { ...BAD_LINE_EXPECTED },
      streams: runs.map((r) => r.truth),
      changes,
    };
  }
  return {
    records,
    truth(): GroundTruth {
      if (truth === null) throw new Error('ground truth is known only after all records have been generated');
      return truth;
    },
  };
}
