/**
 * The alert life cycle that both monitors share: which statistic owns which alert, pending -> firing after the
 * confirmation period, resolution with hysteresis, suppression of secondary alerts while one is active, and the
 * precedence of a vanishing mode over a weight decrease. The monitors supply what differs between them (the
 * meaning of each statistic and the evidence) through DeskHooks.
 */
import type { AlertEvidence, AlertKind, ComponentView } from './alert.js';
import { AlertBook, type ActiveAlert, type TransitionListener } from './alert-book.js';
import type { RatioCusums, ScoreCusums } from './cusum-bank.js';
import type { MonitorConfig } from './monitor-config.js';

/** Alert sources that are not a shift statistic's index. */
export const SOURCE_FIT = -1;
export const SOURCE_BORN = -2;

/** owned[i]: 0 free, 1 an alert owns statistic i, 2 it crossed while suppressed. */
const FREE = 0;
const OWNED = 1;
const SUPPRESSED = 2;

export interface DeskHooks {
  /** Alert kind and stable component id of shift statistic i. */
  kindOf(i: number): AlertKind;
  componentOf(i: number): number;
  /** A vanish statistic is exempt from suppression and supersedes a pending weight shift of its component. */
  isVanish(i: number): boolean;
  /** A veto at the crossing (the statistic restarts): e.g. a vanish the component's recent share contradicts. */
  vetoOpen(i: number): boolean;
  shiftEvidence(i: number, prev?: AlertEvidence): AlertEvidence;
  /** The components now: reference (before) and current (after), as operators read them. */
  models(): { before: ComponentView[]; after: ComponentView[] };
  /** A born component's alert at its confirmation: the evidence to fire with, or null to drop it. */
  confirmBorn(a: ActiveAlert): AlertEvidence | null;
}

export class AlertDesk {
  readonly book: AlertBook;
  readonly owned: Uint8Array;
  pendingCount = 0;
  private readonly h: number;
  /** e^(h/4), e^(h/2), e^h and e^(2h): the shift statistics are kept as ratios R = e^S (cusum-bank.ts). */
  private readonly quarterRatio: number;
  private readonly halfRatio: number;
  private readonly hRatio: number;
  private readonly capRatio: number;

  constructor(
    stream: string,
    listener: TransitionListener,
    /** Shift statistics: perComponent for each of up to `components` reference components, in that order. */
    components: number,
    perComponent: number,
    private readonly config: MonitorConfig,
    private readonly shifts: RatioCusums,
    private readonly fit: ScoreCusums,
    private readonly hooks: DeskHooks,
  ) {
    this.book = new AlertBook(stream, listener);
    this.owned = new Uint8Array(components * perComponent);
    this.ratios = new Float64Array(perComponent);
    this.h = config.threshold;
    this.halfRatio = Math.exp(0.5 * config.threshold);
    this.quarterRatio = Math.exp(0.25 * config.threshold);
    this.hRatio = Math.exp(config.threshold);
    this.capRatio = Math.exp(2 * config.threshold);
  }

  /**
   * The event being stepped, set by the monitor once per event: fields, not arguments, because V8 boxes (allocates)
   * the double arguments of a call it does not inline.
   */
  eventTs = 0;
  eventOffset = 0;
  eventCount = 0;
  /** The largest shift statistic stepped since beginEvent, as a ratio R = e^S. */
  maxRatio = 1;
  /** Where the monitor writes one component's likelihood ratios for stepShifts. */
  readonly ratios: Float64Array;

  /** A new event, the monitor's eventCount-th accepted: set eventTs and eventOffset too, then step. */
  beginEvent(eventCount: number): void {
    this.eventCount = eventCount;
    this.maxRatio = 1;
  }

  /** Whether every shift statistic stepped since beginEvent is below half its threshold. */
  shiftsQuiet(): boolean {
    return this.maxRatio < this.halfRatio;
  }

  /**
   * One CUSUM step for statistics base .. base+count-1, with the event's likelihood ratios this.ratios[0 .. count)
   * (the statistics are ratios R = e^S, cusum-bank.ts); then, for a statistic near the threshold or owned by an
   * alert, afterStep. The bank's step has this one call site, so V8 inlines it here.
   */
  stepShifts(base: number, count: number): void {
    const bank = this.shifts;
    const ratios = this.ratios;
    for (let s = 0; s < count; s++) {
      const i = base + s;
      const r = bank.step(i, ratios[s], this.eventOffset, this.eventTs);
      if (r > this.maxRatio) this.maxRatio = r;
      if (r >= this.quarterRatio || this.owned[i] !== FREE) this.afterStep(i, r, this.eventCount, this.eventTs, this.eventOffset);
    }
  }

  /** After statistic i reached R = e^S: open an alert on a crossing (S >= h); resolve (S below h/4) or cap (S at 2h) an owned one. */
  private afterStep(i: number, ratio: number, eventCount: number, ts: number, offset: number): void {
    const o = this.owned[i];
    if (o !== FREE) {
      // Capped so that it can come back down when the change goes away.
      if (ratio < this.quarterRatio) {
        if (o === OWNED) this.resolveOwned(i, ts, offset);
        else this.owned[i] = FREE;
      } else this.shifts.capRatio(i, this.capRatio);
    } else if (ratio >= this.hRatio) this.openShift(i, eventCount, ts);
  }

  private openShift(i: number, eventCount: number, ts: number): void {
    const hk = this.hooks;
    const kind = hk.kindOf(i);
    const id = hk.componentOf(i);
    const vanish = hk.isVanish(i);
    // Suppressed: another statistic already owns the alert, or the stream has an active alert and further shifts
    // are mostly its consequences (the reference is frozen against a changed stream); a vanishing mode still counts.
    if (this.book.get(this.book.key(kind, id)) !== undefined || (!vanish && this.book.size > 0)) {
      this.owned[i] = SUPPRESSED;
      return;
    }
    if (hk.vetoOpen(i)) {
      this.shifts.reset(i);
      return;
    }
    if (vanish) {
      const ws = this.book.get(this.book.key('weight_shift', id));
      if (ws !== undefined && ws.state === 'pending') {
        this.owned[ws.source] = FREE;
        this.pendingCount--;
        this.book.cancel(ws);
      }
    }
    this.owned[i] = OWNED;
    this.pendingCount++;
    this.book.open(kind, id, i, eventCount, ts, hk.shiftEvidence(i));
  }

  private resolveOwned(i: number, ts: number, offset: number): void {
    this.owned[i] = FREE;
    for (const a of this.book.list()) {
      if (a.source !== i) continue;
      if (a.state === 'pending') {
        this.pendingCount--;
        this.book.cancel(a);
      } else this.book.resolve(a, ts, offset, 'recovered', this.hooks.shiftEvidence(i, a.evidence));
    }
  }

  /** The fit statistic crossed: poor_fit, unless another alert already explains the misfit. */
  openFit(eventCount: number, ts: number): void {
    if (this.book.size > 0) return;
    this.pendingCount++;
    this.book.open('poor_fit', null, SOURCE_FIT, eventCount, ts, this.fitEvidence());
  }

  /** A component was born: mode_emerged goes pending, its start at the first evidence. */
  openBorn(id: number, eventCount: number, ts: number, evidence: AlertEvidence, firstTs: number, firstOffset: number): void {
    const a = this.book.open('mode_emerged', id, SOURCE_BORN, eventCount, ts, evidence);
    a.evidence.firstEvidenceOffset = firstOffset;
    a.evidence.firstEvidenceTs = firstTs;
    a.startsAt = firstTs;
    this.pendingCount++;
  }

  /** Pending alerts whose confirmation period has passed fire if their statistic held, or are dropped. */
  confirm(eventCount: number, ts: number, offset: number): void {
    if (this.pendingCount === 0) return;
    for (const a of this.book.list()) {
      if (a.state !== 'pending' || eventCount - a.pendingAt < this.config.confirmEvents) continue;
      this.pendingCount--;
      if (a.source >= 0) {
        if (this.shifts.value(a.source) >= this.h) this.book.fire(a, eventCount, ts, offset, this.hooks.shiftEvidence(a.source, a.evidence));
        else {
          this.owned[a.source] = FREE;
          this.book.cancel(a);
        }
      } else if (a.source === SOURCE_FIT) {
        if (this.fit.value(0) >= this.config.fitThreshold) this.book.fire(a, eventCount, ts, offset, this.fitEvidence(a.evidence));
        else this.book.cancel(a);
      } else {
        const ev = this.hooks.confirmBorn(a);
        if (ev !== null) this.book.fire(a, eventCount, ts, offset, ev);
        else this.book.cancel(a);
      }
    }
  }

  /** A born component went away (pruned): its alert resolves as recovered. */
  resolveBorn(id: number, ts: number, offset: number, evidence: (prev: AlertEvidence) => AlertEvidence): void {
    const a = this.book.get(this.book.key('mode_emerged', id));
    if (a === undefined) return;
    if (a.state === 'pending') this.pendingCount--;
    this.book.resolve(a, ts, offset, 'recovered', evidence(a.evidence));
  }

  /** Everything resolves at once (the reference absorbed the change, or an operator re-baselined); pending ones are dropped. */
  resolveAll(ts: number, offset: number, resolution: 'absorbed' | 'rebaselined', evidence: (a: ActiveAlert) => AlertEvidence): void {
    for (const a of this.book.list()) {
      if (a.state === 'pending') this.book.cancel(a);
      else this.book.resolve(a, ts, offset, resolution, evidence(a));
    }
    this.pendingCount = 0;
  }

  /** The first firing alert that has fired for long enough to be absorbed, if any. */
  dueForAbsorb(eventCount: number, ts: number): boolean {
    for (const a of this.book.list()) {
      if (a.state !== 'firing') continue;
      if (eventCount - a.firingAt >= this.config.absorbAfterEvents) return true;
      if (this.config.absorbAfterMs > 0 && ts - a.firingTs >= this.config.absorbAfterMs) return true;
    }
    return false;
  }

  /** An alert's evidence, with the components before (reference) and after (current) as they are now. */
  evidence(statistic: string, value: number, threshold: number, componentId: number | null, firstTs: number, firstOffset: number, summary: string): AlertEvidence {
    const { before, after } = this.hooks.models();
    return { statistic, value, threshold, componentId, before, after, firstEvidenceTs: firstTs, firstEvidenceOffset: firstOffset, summary };
  }

  /** Evidence of shift statistic i; its first evidence is where its excursion began (kept from `prev` once alerting). */
  statisticEvidence(i: number, statistic: string, componentId: number, summary: string, prev?: AlertEvidence): AlertEvidence {
    const firstTs = prev ? prev.firstEvidenceTs : this.shifts.startTs(i);
    const firstOffset = prev ? prev.firstEvidenceOffset : this.shifts.startOffset(i);
    return this.evidence(statistic, this.shifts.value(i), this.h, componentId, firstTs, firstOffset, summary);
  }

  fitEvidence(prev?: AlertEvidence): AlertEvidence {
    return this.evidence(
      'cusum_surprise',
      this.fit.value(0),
      this.config.fitThreshold,
      null,
      prev ? prev.firstEvidenceTs : this.fit.startTs(0),
      prev ? prev.firstEvidenceOffset : this.fit.startOffset(0),
      'events are less likely under the reference than usual, and no single component change explains it',
    );
  }

  /** Statistics restart (new reference): nothing is owned any more. */
  releaseAll(): void {
    this.owned.fill(FREE);
  }

  exportState(): { owned: number[]; pendingCount: number; alerts: ActiveAlert[] } {
    return { owned: Array.from(this.owned), pendingCount: this.pendingCount, alerts: this.book.exportState() };
  }

  importState(s: { owned: readonly number[]; pendingCount: number; alerts: ActiveAlert[] }): void {
    if (s.owned.length !== this.owned.length) throw new Error(`alert desk: expected ${this.owned.length} owner flags, got ${s.owned.length}`);
    this.owned.set(s.owned);
    this.pendingCount = s.pendingCount;
    this.book.importState(s.alerts);
  }
}
