/**
 * One stream's monitor: it owns a slow reference model (what is normal) and a fast current
 * model (what is happening), both stepwise-EM mixtures on the stream's scale, and the
 * detectors that compare events against the reference:
 *  - per reference component, CUSUMs of the exact mixture log-likelihood ratio for its weight
 *    going up, down, or to almost nothing, and for its location moving up or down by a set
 *    number of its sds (Page 1954; the ratio of two mixtures that differ in one component is
 *    1 + r_k (f'_k/f_k - 1) with r_k its responsibility; the CUSUMs multiply ratios, cusum-bank.ts);
 *  - a novelty grid for new modes (novelty-grid.ts), which gives birth to a component in the
 *    current model;
 *  - a fit CUSUM on the standardised surprise -log p_ref(y), for changes none of the others names.
 * The reference learns only while every statistic is quiet, so a change in progress does not
 * teach it; once a change has fired for long enough, the reference absorbs the current model.
 *
 * Everything depends on the events and their timestamps only (housekeeping runs every 256
 * accepted events, counted, never timed), so a replay and a resume from a checkpoint give the
 * same models and alerts. The per-event path allocates nothing.
 */
import { selectMixture1D, selectScaleAndMixture1D } from '../math/batch-em1d.js';
import { bhattacharyyaGaussian } from '../math/distances.js';
import { summarizeComponent, type Mixture1D } from '../math/mixture1d.js';
import type { ValueRejection } from '../math/reject.js';
import { checkValue, checkValueByCode, scaleCode, toModelByCode, type ScaleCode, type ScaleName } from '../math/scale.js';
import { OnlineMixture1D } from '../math/stepwise-em1d.js';
import type { AlertEvidence, AlertKind, ComponentView } from './alert.js';
import type { ActiveAlert, TransitionListener } from './alert-book.js';
import { AlertDesk } from './alert-desk.js';
import { fmt, pct } from './evidence-text.js';
import { SurpriseTracker, type SurpriseFields } from './surprise.js';
import { C_DN_A, C_DN_B, C_UP_A, C_UP_B, C_VA_A, C_VA_B, WEIGHT_CONSTS, setWeightAlternatives } from './weight-alternatives.js';
import { RatioCusums, ScoreCusums } from './cusum-bank.js';
import type { Monitor, MonitorPhase } from './monitor.js';
import { knownMixture, type MonitorConfig } from './monitor-config.js';
import { NoveltyGrid } from './novelty-grid.js';
import { MONITOR_STATE_VERSION, currentShiftFields, type ShiftFields } from './state-version.js';

/** The CUSUMs kept per reference component. */
const W_UP = 0;
const W_DOWN = 1;
const VANISH = 2;
const LOC_UP = 3;
const LOC_DOWN = 4;
const PER_COMPONENT = 5;
const STAT_NAMES = ['cusum_weight_up', 'cusum_weight_down', 'cusum_weight_vanish', 'cusum_location_up', 'cusum_location_down'];
const STAT_KINDS: AlertKind[] = ['weight_shift', 'weight_shift', 'mode_vanished', 'location_shift', 'location_shift'];

const HOUSEKEEPING_EVERY = 256;
/** Gain of the moving average of each component's responsibility (about the last 64 events). */
const RECENT_GAIN = 1 / 64;
const FIT_SLACK = 0.5;
const FIT_CLIP = 3;


export class StreamMonitor implements Monitor {
  readonly stream: string;
  readonly config: MonitorConfig;
  private phase: MonitorPhase = 'bootstrap';
  private scaleName: ScaleName;
  private boot: Float64Array | null;
  private bootCount = 0;
  private ref: OnlineMixture1D | null = null;
  private cur: OnlineMixture1D | null = null;
  private readonly shifts: RatioCusums;
  private readonly fit = new ScoreCusums(1);
  private readonly grid = new NoveltyGrid();
  private readonly consts: Float64Array;
  /** Per reference component: its mean and 1/sd on the model scale, as of the last housekeeping. */
  private readonly locConsts: Float64Array;
  /** e^(-λ²/2), the location alternatives' constant factor. */
  private readonly shiftPenalty: number = 0;
  /** The event in hand: its value (stream units), time and offset; its value on the model scale, and its surprise. */
  private evX = 0;
  private evTs = 0;
  private evOffset = 0;
  private evY = 0;
  private evSurprise = 0;
  /** Per reference component, a short moving average of its responsibility: what its weight is right now. */
  private readonly recentShare: Float64Array;
  private readonly surprise = new SurpriseTracker();
  private accepted = 0;
  private armedAt = 0;
  private lastTs = 0;
  private lastOffset = -1;
  private readonly desk: AlertDesk;
  /** The scale as a number: the per-event path compares numbers, not strings. */
  private scaleCode: ScaleCode = 0;

  constructor(stream: string, config: MonitorConfig, listener: TransitionListener) {
    this.stream = stream;
    this.config = config;
    this.scaleName = config.scale === 'auto' ? 'identity' : config.scale;
    this.scaleCode = scaleCode(this.scaleName);
    this.shifts = new RatioCusums(config.capacity * PER_COMPONENT);
    this.consts = new Float64Array(config.capacity * WEIGHT_CONSTS);
    this.recentShare = new Float64Array(config.capacity);
    this.locConsts = new Float64Array(2 * config.capacity);
    this.shiftPenalty = Math.exp(-0.5 * config.locationShiftSds * config.locationShiftSds);
    this.desk = new AlertDesk(stream, listener, config.capacity, PER_COMPONENT, config, this.shifts, this.fit, {
      kindOf: (i) => STAT_KINDS[i % PER_COMPONENT],
      componentOf: (i) => (this.ref as OnlineMixture1D).id(Math.floor(i / PER_COMPONENT)),
      isVanish: (i) => i % PER_COMPONENT === VANISH,
      // A mode has vanished only if it is (nearly) absent from the last events, not merely rarer: under a large
      // weight shift the vanish statistic, whose alternative is far from the truth, can cross on a short run of luck.
      vetoOpen: (i) => {
        const j = Math.floor(i / PER_COMPONENT);
        return i % PER_COMPONENT === VANISH && this.recentShare[j] > 2 * this.config.vanishFraction * (this.ref as OnlineMixture1D).weight(j);
      },
      shiftEvidence: (i, prev) => this.shiftEvidence(i, prev),
      models: () => ({ before: this.views(this.ref), after: this.views(this.cur) }),
      confirmBorn: (a) => {
        const cur = this.cur as OnlineMixture1D;
        const j = cur.indexOf(a.componentId ?? -1);
        if (j >= 0 && cur.weight(j) >= 0.5 * this.config.minNewModeWeight) return this.emergedEvidence(a.componentId ?? -1, a.evidence.value, a.evidence);
        if (j >= 0) cur.removeComponent(j);
        return null;
      },
    });
    this.boot = new Float64Array(config.bootstrapEvents);
    if (config.known !== null) this.startFromKnown();
  }

  get scale(): ScaleName {
    return this.scaleName;
  }
  get state(): MonitorPhase {
    return this.phase;
  }
  get eventsAccepted(): number {
    return this.accepted;
  }
  get reference(): OnlineMixture1D | null {
    return this.ref;
  }
  get current(): OnlineMixture1D | null {
    return this.cur;
  }
  get lastEventTs(): number {
    return this.lastTs;
  }
  alerts(): ActiveAlert[] {
    return this.desk.book.list();
  }

  /** Log-likelihood per event of recent quiet events under the reference (nats, model scale), or null before warm-up. */
  logLikelihoodPerEvent(): number | null {
    return this.phase === 'bootstrap' ? null : this.surprise.logLikelihoodPerEvent();
  }

  /** A stream of numbers has dimension 1. */
  readonly dimension = 1;

  /** Largest statistic over its threshold (>= 1 means some detector is over threshold). */
  shiftScore(): number {
    if (this.phase !== 'armed') return 0;
    const h = this.config.threshold;
    return Math.max(this.shifts.max() / h, this.grid.max() / h, this.fit.value(0) / this.config.fitThreshold);
  }

  /** Feed one value (stream units) at event time ts (ms) from input position offset. Returns a rejection reason or null. */
  observe(x: number, ts: number, offset: number): ValueRejection | null {
    this.evX = x;
    this.evTs = ts;
    this.evOffset = offset;
    return this.observeHeld();
  }

  /**
   * observe() for an event held in an object (the daemon's shared EventSlot): its doubles go to the monitor
   * through fields, not call arguments, which V8 boxes (allocates) per call when it does not inline the callee.
   */
  observeEvent(e: { readonly value: number; readonly ts: number; readonly offset: number }): ValueRejection | null {
    this.evX = e.value;
    this.evTs = e.ts;
    this.evOffset = e.offset;
    return this.observeHeld();
  }

  /** The event in evX/evTs/evOffset. */
  private observeHeld(): ValueRejection | null {
    const x = this.evX;
    const ts = this.evTs;
    const offset = this.evOffset;
    if (this.phase === 'bootstrap') {
      if (!Number.isFinite(x)) return 'not_finite';
      if (this.config.scale !== 'auto') {
        const r = checkValue(this.config.scale, x);
        if (r !== null) return r;
      }
      (this.boot as Float64Array)[this.bootCount++] = x;
      this.accepted++;
      this.lastTs = ts;
      this.lastOffset = offset;
      if (this.bootCount === this.config.bootstrapEvents) this.bootstrap();
      return null;
    }
    const rej = checkValueByCode(this.scaleCode, x);
    if (rej !== null) return rej;
    const y = toModelByCode(this.scaleCode, x);
    const ref = this.ref as OnlineMixture1D;
    const cur = this.cur as OnlineMixture1D;
    this.accepted++;
    this.lastTs = ts;
    this.lastOffset = offset;

    ref.evaluate(y);
    cur.evaluate(y);
    const surprise = -ref.lastLogDensity;
    let quiet = true;
    if (this.phase === 'armed') {
      // Doubles reach detect through fields, as they reached this method.
      this.evY = y;
      this.evSurprise = surprise;
      quiet = this.detect(ref);
    }
    else if (this.accepted >= this.config.warmupEvents) this.arm();
    else this.learnStructure(y, offset, ts);

    if (quiet && this.config.known === null) ref.learn(ts);
    if (quiet) this.surprise.learn(surprise, this.config.referenceWindow);
    cur.learn(ts);
    if (this.accepted % HOUSEKEEPING_EVERY === 0) this.housekeeping(ts, offset, quiet);
    return null;
  }

  /** Declare the current state normal: the reference takes the current model and every alert resolves. */
  rebaseline(): void {
    if (this.phase === 'bootstrap') return;
    this.absorb(this.lastTs, this.lastOffset, 'rebaselined');
  }

  // ---- detection (per event) ----

  /** Runs every detector on the event in evY/evSurprise/evTs/evOffset; true when every statistic is below half its threshold. */
  private detect(ref: OnlineMixture1D): boolean {
    const cfg = this.config;
    const h = cfg.threshold;
    const y = this.evY;
    const ts = this.evTs;
    const offset = this.evOffset;
    const k = ref.k;
    let rG = 0;
    for (let j = 0; j < k; j++) rG += ref.responsibility(j);
    const lambda = cfg.locationShiftSds;
    const shiftPenalty = this.shiftPenalty;
    const cs = this.consts;
    const loc = this.locConsts;
    const share = this.recentShare;
    const desk = this.desk;
    const rt = desk.ratios;
    desk.beginEvent(this.accepted);
    desk.eventTs = ts;
    desk.eventOffset = offset;
    for (let j = 0; j < k; j++) {
      const r = ref.responsibility(j);
      share[j] += RECENT_GAIN * (r - share[j]);
      const c = j * WEIGHT_CONSTS;
      // Location and sd of the reference as of the last housekeeping (at most 256 events old, and fixed while an
      // alert is active): the statistic still uses only what was known before the event.
      let lz = lambda * (y - loc[2 * j]) * loc[2 * j + 1];
      if (r < 1e-12 && rG > 1 - 1e-9 && lz < 13 && lz > -13) {
        // The event is plainly another component's: every weight ratio is its constant b for "not this one"
        // (within 1e-9), and the location ratio is 1 (r·e^|λz| < 1e-6). Most events take this path in
        // well-separated mixtures.
        rt[W_UP] = cs[c + C_UP_B];
        rt[W_DOWN] = cs[c + C_DN_B];
        rt[VANISH] = cs[c + C_VA_B];
        rt[LOC_UP] = 1;
        rt[LOC_DOWN] = 1;
      } else {
        const rOther = rG - r;
        rt[W_UP] = 1 + r * (cs[c + C_UP_A] - 1) + rOther * (cs[c + C_UP_B] - 1);
        rt[W_DOWN] = 1 + r * (cs[c + C_DN_A] - 1) + rOther * (cs[c + C_DN_B] - 1);
        rt[VANISH] = 1 + r * (cs[c + C_VA_A] - 1) + rOther * (cs[c + C_VA_B] - 1);
        // Location: f'(y)/f(y) = exp(±λz - λ²/2) for a shift of ±λ sd; clamp so far events cannot overflow.
        if (lz > 50) lz = 50;
        else if (lz < -50) lz = -50;
        const e = Math.exp(lz);
        rt[LOC_UP] = 1 + r * (e * shiftPenalty - 1);
        rt[LOC_DOWN] = 1 + r * (shiftPenalty / e - 1);
      }
      desk.stepShifts(j * PER_COMPONENT, PER_COMPONENT);
    }
    // Fit: standardised surprise, clipped so one wild event cannot decide alone.
    const fitStat = this.fit.step(0, this.surprise.standardized(this.evSurprise, FIT_CLIP) - FIT_SLACK, offset, ts);
    if (fitStat >= cfg.fitThreshold && this.desk.book.get(this.desk.book.key('poor_fit', null)) === undefined) this.desk.openFit(this.accepted, ts);

    const bin = this.grid.step(y, offset, ts, h);
    if (bin >= 0) this.onNovelty(bin, ts, offset);

    if (this.desk.pendingCount > 0) this.desk.confirm(this.accepted, ts, offset);
    return desk.shiftsQuiet() && fitStat < 0.5 * cfg.fitThreshold && desk.book.size === 0;
  }

  // ---- alerts (rare: allocation is fine here) ----

  private onNovelty(bin: number, ts: number, offset: number): void {
    const cand = this.grid.candidate(bin);
    const ref = this.ref as OnlineMixture1D;
    const cur = this.cur as OnlineMixture1D;
    this.grid.clear(bin);
    // Too little excess to be a mode worth an alert: a misfit of the reference's tail, or a short burst.
    if (cand.excess < 0.5 * this.config.minNewModeWeight) return;
    // Not new if a component born earlier already sits there (a mode in the making). While the stream
    // has an active alert the reference is frozen against a changed stream, so a candidate must also be
    // unexplained by the current model.
    const busy = this.desk.book.size > 0;
    for (let j = 0; j < cur.k; j++) {
      const near = Math.abs(cand.mean - cur.mean(j)) / cur.sd(j);
      if (near < (busy ? 3 : ref.indexOf(cur.id(j)) < 0 ? 2 : 0)) return;
    }
    // Inside a reference component it is that component gaining weight, which the weight CUSUMs judge.
    // A reference component the current model had lost comes back under its own id, without an alert.
    for (let j = 0; j < ref.k; j++) {
      if (Math.abs(cand.mean - ref.mean(j)) < 1.5 * ref.sd(j)) {
        if (cur.indexOf(ref.id(j)) < 0) cur.addComponent(ref.mean(j), ref.sd(j), cand.weight, ref.id(j));
        return;
      }
    }
    // Beside a reference component whose location statistic is already rising toward it, the excess is that
    // component moving (a drift), which the location CUSUMs judge, not a new mode.
    const half = 0.75 * this.config.threshold;
    for (let j = 0; j < ref.k; j++) {
      const dz = (cand.mean - ref.mean(j)) / ref.sd(j);
      if (Math.abs(dz) >= 3) continue;
      if (this.shifts.value(j * PER_COMPONENT + (dz > 0 ? LOC_UP : LOC_DOWN)) >= half) return;
    }
    const id = cur.addComponent(cand.mean, cand.sd, cand.excess);
    if (id < 0) return; // at capacity
    this.desk.openBorn(id, this.accepted, ts, this.emergedEvidence(id, cand.statistic), cand.firstTs, cand.firstOffset);
    void offset;
  }

  // ---- evidence ----

  views(model: OnlineMixture1D | null): ComponentView[] {
    if (model === null) return [];
    const out: ComponentView[] = [];
    for (let j = 0; j < model.k; j++) {
      const s = summarizeComponent(this.scaleName, model.weight(j), model.mean(j), model.sd(j));
      out.push({ id: model.id(j), weight: s.weight, location: s.location, spread: s.spread, mean: s.mean });
    }
    return out.sort((a, b) => a.location - b.location);
  }

  private shiftEvidence(i: number, prev?: AlertEvidence): AlertEvidence {
    const ref = this.ref as OnlineMixture1D;
    const j = Math.floor(i / PER_COMPONENT);
    const type = i % PER_COMPONENT;
    const id = ref.id(j);
    const before = summarizeComponent(this.scaleName, ref.weight(j), ref.mean(j), ref.sd(j));
    const cur = this.cur as OnlineMixture1D;
    const cj = cur.indexOf(id);
    const after = cj >= 0 ? summarizeComponent(this.scaleName, cur.weight(cj), cur.mean(cj), cur.sd(cj)) : null;
    const loc = fmt(before.location);
    let summary: string;
    if (type === VANISH) summary = `the mode near ${loc} (weight ${pct(before.weight)}) is vanishing${after ? `: now ${pct(after.weight)}` : ''}`;
    else if (type === W_UP || type === W_DOWN) {
      summary = `the mode near ${loc} ${type === W_UP ? 'gains' : 'loses'} weight: ${pct(before.weight)} -> ${after ? pct(after.weight) : 'gone'}`;
    } else summary = `the mode near ${loc} moves ${type === LOC_UP ? 'up' : 'down'}${after ? `: location ${loc} -> ${fmt(after.location)}` : ''}`;
    return this.desk.statisticEvidence(i, STAT_NAMES[type], id, summary, prev);
  }

  private emergedEvidence(id: number, statistic: number, prev?: AlertEvidence): AlertEvidence {
    const cur = this.cur as OnlineMixture1D;
    const j = cur.indexOf(id);
    const s = j >= 0 ? summarizeComponent(this.scaleName, cur.weight(j), cur.mean(j), cur.sd(j)) : null;
    // Right after its birth the weight is the excess seen since the first evidence: a small, selected sample, so say so.
    const summary = s ? `a new mode near ${fmt(s.location)} carries about ${pct(s.weight)} of events (early estimate; the current model refines it)` : 'a new mode appeared';
    return this.desk.evidence('novelty_excess', statistic, this.config.threshold, id, prev ? prev.firstEvidenceTs : this.lastTs, prev ? prev.firstEvidenceOffset : this.lastOffset, summary);
  }

  // ---- lifecycle ----

  private bootstrap(): void {
    const cfg = this.config;
    const data = (this.boot as Float64Array).subarray(0, this.bootCount);
    // Stop at the BIC elbow: warm-up (learnStructure) still adds a component for a region the fit explains badly.
    const opts = { seed: cfg.seed, restarts: 3, tol: 1e-5, stopAtFirstRise: true };
    let mixture: Mixture1D;
    if (cfg.scale === 'auto') {
      const sel = selectScaleAndMixture1D(data, ['identity', 'log', 'log1p'], 1, cfg.maxComponents, opts);
      mixture = sel.best.mixture;
      this.scaleName = sel.scale;
      this.scaleCode = scaleCode(sel.scale);
    } else {
      mixture = selectMixture1D(data, cfg.scale, 1, cfg.maxComponents, opts).best.mixture;
    }
    this.boot = null;
    this.ref = OnlineMixture1D.fromMixture(mixture, this.modelOptions(cfg.referenceWindow, cfg.referenceHalfLifeMs), this.bootCount);
    this.cur = OnlineMixture1D.fromMixture(mixture, this.modelOptions(cfg.currentWindow, cfg.currentHalfLifeMs), this.bootCount);
    this.phase = 'warmup';
    this.grid.configure(this.ref, cfg.minNewModeWeight);
    if (this.accepted >= cfg.warmupEvents) this.arm();
  }

  /**
   * During warm-up, a region the bootstrap fit explains badly (a heavy tail, a mode too small for the first
   * batch) gets a component in both models, silently: it is part of what is normal.
   */
  private learnStructure(y: number, offset: number, ts: number): void {
    if (this.config.known !== null) return;
    // Half the alert threshold: a silent birth costs only a component, and it should catch what the batch fit missed.
    const bin = this.grid.step(y, offset, ts, 0.5 * this.config.threshold);
    if (bin < 0) return;
    const cand = this.grid.candidate(bin);
    this.grid.clear(bin);
    if (cand.excess < 0.25 * this.config.minNewModeWeight) return;
    const ref = this.ref as OnlineMixture1D;
    const cur = this.cur as OnlineMixture1D;
    // Only a region well away from every component: a bump in the flank of one is its shape, weakly identified.
    for (let j = 0; j < ref.k; j++) if (Math.abs(cand.mean - ref.mean(j)) < 3 * ref.sd(j)) return;
    const id = ref.addComponent(cand.mean, cand.sd, cand.excess);
    if (id > 0) cur.addComponent(cand.mean, cand.sd, cand.excess, id);
    this.grid.configure(ref, this.config.minNewModeWeight);
  }

  private startFromKnown(): void {
    const m = knownMixture(this.config.known ?? []);
    this.scaleName = m.scale;
    this.scaleCode = scaleCode(this.scaleName);
    this.boot = null;
    this.ref = OnlineMixture1D.fromMixture(m, this.modelOptions(this.config.referenceWindow, this.config.referenceHalfLifeMs), 1e9);
    this.cur = OnlineMixture1D.fromMixture(m, this.modelOptions(this.config.currentWindow, this.config.currentHalfLifeMs), 0);
    this.phase = 'warmup';
  }

  private modelOptions(window: number, halfLifeMs: number) {
    // α = 1 makes the step 1/(t + t0) until it reaches 1/window: a running average of everything seen, then a
    // window. A smaller α forgets far faster than the window says for millions of events (γ_t = t^-α > 1/W).
    return { alpha: 1, window, halfLifeMs, backgroundWeight: this.config.outlierWeight, capacity: this.config.capacity };
  }

  private arm(): void {
    this.phase = 'armed';
    this.armedAt = this.accepted;
    this.resetDetectors();
  }

  private resetDetectors(): void {
    const ref = this.ref as OnlineMixture1D;
    this.shifts.resetAll();
    this.desk.releaseAll();
    this.fit.resetAll();
    this.grid.configure(ref, this.config.minNewModeWeight);
    this.computeConsts();
    for (let j = 0; j < ref.k; j++) this.recentShare[j] = ref.weight(j);
  }

  private computeConsts(): void {
    const ref = this.ref as OnlineMixture1D;
    const cfg = this.config;
    for (let j = 0; j < ref.k; j++) {
      setWeightAlternatives(this.consts, j * WEIGHT_CONSTS, ref.weight(j), cfg);
      this.locConsts[2 * j] = ref.mean(j);
      this.locConsts[2 * j + 1] = 1 / ref.sd(j);
    }
  }


  private housekeeping(ts: number, offset: number, quiet: boolean): void {
    const cfg = this.config;
    const cur = this.cur as OnlineMixture1D;
    // Prune components of the current model whose weight is negligible (a reference component keeps its id for a return).
    const pruneBelow = Math.min(0.002, cfg.minNewModeWeight / 5);
    for (let j = cur.k - 1; j >= 0 && cur.k > 1; j--) {
      if (cur.weight(j) < pruneBelow) {
        const id = cur.id(j);
        cur.removeComponent(j);
        this.desk.resolveBorn(id, ts, offset, (prev) => this.emergedEvidence(id, 0, prev));
      }
    }
    // Merge components of the current model that have come to overlap.
    for (let a = 0; a < cur.k; a++) {
      for (let b = a + 1; b < cur.k; b++) {
        if (bhattacharyyaGaussian(cur.mean(a), cur.sd(a), cur.mean(b), cur.sd(b)) < 0.02) {
          cur.mergeComponents(cur.id(a) < cur.id(b) ? a : b, cur.id(a) < cur.id(b) ? b : a);
          b = cur.k;
          a = cur.k;
        }
      }
    }
    if (this.phase !== 'armed') return;
    if (quiet && cfg.known === null) {
      this.computeConsts();
      this.grid.refreshRates(this.ref as OnlineMixture1D, cfg.minNewModeWeight);
    }
    // Absorb a change that has been firing long enough: it is the new normal.
    if (this.desk.dueForAbsorb(this.accepted, ts)) this.absorb(ts, offset, 'absorbed');
  }

  private absorb(ts: number, offset: number, resolution: 'absorbed' | 'rebaselined'): void {
    const cur = this.cur as OnlineMixture1D;
    const refOpts = this.modelOptions(this.config.referenceWindow, this.config.referenceHalfLifeMs);
    const state = cur.exportState();
    this.ref = OnlineMixture1D.importState({ ...state, options: { ...state.options, ...refOpts }, t: Math.max(state.t, this.accepted) });
    this.desk.resolveAll(ts, offset, resolution, (a) => ({ ...a.evidence, before: this.views(this.ref), after: this.views(this.cur) }));
    if (this.phase === 'armed') this.resetDetectors();
  }

  // ---- state ----

  exportState(): MonitorState {
    return {
      version: MONITOR_STATE_VERSION,
      stream: this.stream,
      phase: this.phase,
      scale: this.scaleName,
      boot: this.boot === null ? null : Array.from(this.boot.subarray(0, this.bootCount)),
      ref: this.ref === null ? null : this.ref.exportState(),
      cur: this.cur === null ? null : this.cur.exportState(),
      shifts: this.shifts.exportState(),
      fit: this.fit.exportState(),
      grid: this.grid.exportState(),
      consts: Array.from(this.consts),
      recentShare: Array.from(this.recentShare),
      locConsts: Array.from(this.locConsts),
      ...this.surprise.exportFields(),
      accepted: this.accepted,
      armedAt: this.armedAt,
      lastTs: this.lastTs,
      lastOffset: this.lastOffset,
      ...this.desk.exportState(),
    };
  }

  static importState(s: MonitorState, config: MonitorConfig, listener: TransitionListener): StreamMonitor {
    const { shifts, consts } = currentShiftFields(s, 'monitor');
    const m = new StreamMonitor(s.stream, { ...config, known: null }, listener);
    (m as { config: MonitorConfig }).config = config;
    m.phase = s.phase;
    m.scaleName = s.scale;
    m.scaleCode = scaleCode(s.scale);
    if (s.boot !== null) {
      m.boot = new Float64Array(config.bootstrapEvents);
      m.boot.set(s.boot);
      m.bootCount = s.boot.length;
    } else m.boot = null;
    m.ref = s.ref === null ? null : OnlineMixture1D.importState(s.ref);
    m.cur = s.cur === null ? null : OnlineMixture1D.importState(s.cur);
    m.shifts.importState(shifts);
    m.fit.importState(s.fit);
    m.grid.importState(s.grid);
    m.consts.set(consts);
    m.recentShare.set(s.recentShare);
    m.locConsts.set(s.locConsts);
    m.surprise.importFields(s);
    m.accepted = s.accepted;
    m.armedAt = s.armedAt;
    m.lastTs = s.lastTs;
    m.lastOffset = s.lastOffset;
    m.desk.importState(s);
    return m;
  }
}

export interface MonitorState extends SurpriseFields, ShiftFields {
  stream: string;
  phase: MonitorPhase;
  scale: ScaleName;
  boot: number[] | null;
  ref: ReturnType<OnlineMixture1D['exportState']> | null;
  cur: ReturnType<OnlineMixture1D['exportState']> | null;
  owned: number[];
  fit: number[];
  grid: ReturnType<NoveltyGrid['exportState']>;
  recentShare: number[];
  locConsts: number[];
  accepted: number;
  armedAt: number;
  lastTs: number;
  lastOffset: number;
  pendingCount: number;
  alerts: ActiveAlert[];
}
