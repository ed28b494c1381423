/**
 * One vector stream's monitor (d ≤ 8, e.g. latency and payload size of the same request): the
 * multivariate counterpart of StreamMonitor, with the same design. A slow reference model (what
 * is normal) and a fast current model (what is happening), both full-covariance stepwise-EM
 * mixtures (OnlineMvMixture), and detectors that compare each event with the reference, using
 * the reference's responsibilities r_k computed once per event:
 *  - per reference component, CUSUMs (Page 1954) of the exact mixture log-likelihood ratio for its
 *    weight going up, down or almost to nothing: ln(1 + r_k(a − 1) + (r_G − r_k)(b − 1)), a = w'/w,
 *    b = (1 − w')/(1 − w), r_G the share of the Gaussians (the rest is the background);
 *  - per reference component and axis i, CUSUMs for its mean moving up or down by λ sd of that
 *    axis (2·d per component; derivation at `locationTerms`);
 *  - a fit CUSUM on the standardised surprise −ln p_ref(x), for changes none of the others names;
 *  - new modes: a ring of badly explained events and a cluster-vs-reference likelihood-ratio test
 *    (vector-novelty.ts), which gives birth to a component in the current model.
 * The reference learns only while every statistic is below half its threshold and no alert is
 * active; once a change has fired long enough, the reference absorbs the current model.
 *
 * Outliers: a fixed heavy-tailed background (a product of Cauchy densities, 8 bootstrap spreads
 * wide per axis) with weight `outlierWeight` takes events far from every component, so a single
 * wild event moves no CUSUM and teaches neither model (events the background explains better
 * than the Gaussians are not learned).
 *
 * MonitorConfig keys for vectors: bootstrapEvents, warmupEvents, maxComponents, capacity,
 * referenceWindow, currentWindow, outlierWeight, threshold, fitThreshold, minNewModeWeight,
 * weightShiftAbsolute, weightShiftRelative, locationShiftSds (λ, per axis in that axis' sd),
 * vanishFraction, confirmEvents, absorbAfterEvents, absorbAfterMs and seed apply as for scalars;
 * currentWindow is also the window W of the new-mode test. Not applicable: scale (vectors are
 * modelled in their own units), unit (read-outs are in stream units), referenceHalfLifeMs and
 * currentHalfLifeMs (OnlineMvMixture forgets by event count only), known (no declared vector
 * components): they are ignored.
 *
 * Processing depends on the events and their timestamps only (housekeeping every 256 accepted
 * events, counted), so a replay and a resume from exportState give the same models and alerts.
 * After the first event fixes the dimension, the per-event path allocates nothing.
 */
import { MV_MAX_DIM, MvMixture, OnlineMvMixture, mvToJSON, onlineMvFromJSON, selectMvMixture, type OnlineMvDocument } from '../math/mv/index.js';
import type { AlertEvidence, AlertKind, ComponentView } from './alert.js';
import type { ActiveAlert, TransitionListener } from './alert-book.js';
import { AlertDesk } from './alert-desk.js';
import { fmt, pct } from './evidence-text.js';
import { SurpriseTracker, type SurpriseFields } from './surprise.js';
import { C_DN_A, C_DN_B, C_UP_A, C_UP_B, C_VA_A, C_VA_B, WEIGHT_CONSTS, setWeightAlternatives } from './weight-alternatives.js';
import { RatioCusums, ScoreCusums } from './cusum-bank.js';
import { MONITOR_STATE_VERSION, currentShiftFields, type ShiftFields } from './state-version.js';
import type { MonitorConfig } from './monitor-config.js';
import { bhattacharyya, mahalanobis2, withComponent, withMerged, withSettings, withoutComponent } from './vector-model-edit.js';
import { VectorNovelty, type VectorCandidate, type VectorNoveltyState } from './vector-novelty.js';

/** Statistics per reference component: weight up, down, vanish, then up/down per axis. */
const W_UP = 0;
const W_DOWN = 1;
const VANISH = 2;
const LOC = 3;
const PER_COMPONENT = LOC + 2 * MV_MAX_DIM;



const HOUSEKEEPING_EVERY = 256;
const FIT_SLACK = 0.5;
const FIT_CLIP = 3;
/** An event is "badly explained" when its surprise exceeds the quiet mean by this many sds (or the background takes it). */
const TAG_SDS = 4;
/** Surprise observations needed before the surprise tag is trusted. */
const TAG_MIN_COUNT = 256;

export type VectorMonitorPhase = 'bootstrap' | 'warmup' | 'armed';

/** A component with its full mean vector and per-axis sds, stream units. */
export interface VectorComponentView {
  id: number;
  weight: number;
  mean: number[];
  sd: number[];
}

export class VectorStreamMonitor {
  readonly stream: string;
  readonly config: MonitorConfig;
  private phase: VectorMonitorPhase = 'bootstrap';
  private d = 0;
  private boot: Float64Array | null = null;
  private bootCount = 0;
  private ref: OnlineMvMixture | null = null;
  private cur: OnlineMvMixture | null = null;
  private readonly refIds: Int32Array;
  private readonly curIds: Int32Array;
  private nextId = 1;
  private readonly shifts: RatioCusums;
  private readonly fit = new ScoreCusums(1);
  private novelty: VectorNovelty | null = null;
  private readonly consts: Float64Array;
  /** The event in hand, for detect: the Gaussians' share, its surprises, time and offset. */
  private evRG = 0;
  private evSurprise = 0;
  private evNovelSurprise = 0;
  private evTs = 0;
  private evOffset = 0;
  /** Per component and axis: √C_ii and the location penalty λ²·C_ii·(C⁻¹)_ii/2 (working frame). */
  private readonly locSd: Float64Array;
  private readonly locPen: Float64Array;
  /** Per axis: the smallest reference sd (unit of the new-mode test). */
  private unit = new Float64Array(0);
  /** Background: Cauchy centre and scale per axis, and Σ −ln(π s_i). */
  private bgCenter = new Float64Array(0);
  private bgScale = new Float64Array(0);
  private bgConst = 0;
  private readonly surprise = new SurpriseTracker();
  private accepted = 0;
  private lastTs = 0;
  private lastOffset = -1;
  private readonly desk: AlertDesk;
  // scratch (sized at the first event)
  private xv = new Float64Array(0);
  private resp = new Float64Array(0);
  private z = new Float64Array(0);
  private work = new Float64Array(0);
  private u = new Float64Array(0);

  constructor(stream: string, config: MonitorConfig, listener: TransitionListener) {
    this.stream = stream;
    this.config = config;
    this.refIds = new Int32Array(config.capacity);
    this.curIds = new Int32Array(config.capacity);
    this.shifts = new RatioCusums(config.capacity * PER_COMPONENT);
    this.consts = new Float64Array(config.capacity * WEIGHT_CONSTS);
    this.locSd = new Float64Array(config.capacity * MV_MAX_DIM);
    this.locPen = new Float64Array(config.capacity * MV_MAX_DIM);
    this.desk = new AlertDesk(stream, listener, config.capacity, PER_COMPONENT, config, this.shifts, this.fit, {
      kindOf: (i) => statKind(i % PER_COMPONENT),
      componentOf: (i) => this.refIds[Math.floor(i / PER_COMPONENT)],
      isVanish: (i) => i % PER_COMPONENT === VANISH,
      vetoOpen: () => false,
      shiftEvidence: (i, prev) => this.shiftEvidence(i, prev),
      models: () => ({ before: this.views(this.reference), after: this.views(this.current) }),
      confirmBorn: (a) => {
        const cur = this.cur as OnlineMvMixture;
        const j = indexOf(this.curIds, cur.k, a.componentId ?? -1);
        if (j >= 0 && cur.mixture.weights[j] >= 0.5 * this.config.minNewModeWeight) return this.emergedEvidence(a.componentId ?? -1, a.evidence.value, a.evidence);
        if (j >= 0 && cur.k > 1) this.removeCurrent(j);
        return null;
      },
    });
  }

  /** Dimension fixed by the first event (0 before it). */
  get dimension(): number {
    return this.d;
  }
  get state(): VectorMonitorPhase {
    return this.phase;
  }
  get eventsAccepted(): number {
    return this.accepted;
  }
  get lastEventTs(): number {
    return this.lastTs;
  }
  /** The reference mixture (parameters of its latest M-step), or null before bootstrap. */
  get reference(): MvMixture | null {
    return this.ref === null ? null : this.ref.mixture;
  }
  get current(): MvMixture | null {
    return this.cur === null ? null : this.cur.mixture;
  }
  alerts(): ActiveAlert[] {
    return this.desk.book.list();
  }

  /** Largest statistic over its threshold (>= 1 means some detector is over threshold). */
  shiftScore(): number {
    if (this.phase !== 'armed') return 0;
    const h = this.config.threshold;
    return Math.max(this.shifts.max() / h, (this.novelty?.statistic ?? 0) / h, this.fit.value(0) / this.config.fitThreshold);
  }

  /**
   * Feed one vector x[0..dim) (stream units) at event time ts (ms) from input position offset.
   * The first event fixes the dimension; later events of another dimension are rejected.
   */
  observeVector(x: Float64Array, dim: number, ts: number, offset: number): 'not_finite' | 'wrong_dimension' | null {
    this.evTs = ts;
    this.evOffset = offset;
    return this.observeHeld(x, dim);
  }

  /**
   * observeVector() for an event held in an object (the daemon's shared EventSlot): its time goes to the monitor
   * through a field, not a call argument, which V8 boxes (allocates) per call when it does not inline the callee.
   */
  observeEvent(e: { readonly vector: Float64Array; readonly dim: number; readonly ts: number; readonly offset: number }): 'not_finite' | 'wrong_dimension' | null {
    this.evTs = e.ts;
    this.evOffset = e.offset;
    return this.observeHeld(e.vector, e.dim);
  }

  /** The event x[0..dim) at evTs, evOffset. */
  private observeHeld(x: Float64Array, dim: number): 'not_finite' | 'wrong_dimension' | null {
    const ts = this.evTs;
    const offset = this.evOffset;
    if (!Number.isInteger(dim) || dim < 1 || dim > MV_MAX_DIM || dim > x.length) return 'wrong_dimension';
    if (this.d === 0) this.setDimension(dim);
    else if (dim !== this.d) return 'wrong_dimension';
    const d = this.d;
    for (let i = 0; i < d; i++) if (!Number.isFinite(x[i])) return 'not_finite';
    this.accepted++;
    this.lastTs = ts;
    this.lastOffset = offset;
    if (this.phase === 'bootstrap') {
      const boot = this.boot as Float64Array;
      for (let i = 0; i < d; i++) boot[this.bootCount * d + i] = x[i];
      this.bootCount++;
      if (this.bootCount === this.config.bootstrapEvents) this.bootstrap();
      return null;
    }
    const xv = this.xv;
    for (let i = 0; i < d; i++) xv[i] = x[i];
    const ref = this.ref as OnlineMvMixture;

    // Reference responsibilities once per event, with the background.
    const eps = this.config.outlierWeight;
    const logG = ref.mixture.responsibilities(xv, this.resp);
    const logP = this.withBackground(logG);
    const rG = eps > 0 ? Math.exp(Math.log1p(-eps) + logG - logP) : 1;
    const surprise = -logP;
    // The current model's view: a new mode must be unexplained by what is normal AND by what is happening.
    const curBefore = this.cur as OnlineMvMixture;
    const curLogP = this.withBackground(curBefore.mixture.logpdf(xv));
    const novelSurprise = Math.min(surprise, -curLogP);

    let quiet = true;
    if (this.phase === 'armed') {
      // Doubles reach detect through fields: V8 boxes the double arguments of a call it does not inline.
      this.evRG = rG;
      this.evSurprise = surprise;
      this.evNovelSurprise = novelSurprise;
      quiet = this.detect(ref);
    }
    else if (this.accepted >= this.config.warmupEvents) this.arm();
    else this.learnStructure(novelSurprise, ts, offset);

    if (quiet && rG > 0.5) (this.ref as OnlineMvMixture).update(xv);
    if (quiet) this.surprise.learn(surprise, this.config.referenceWindow);
    const cur = this.cur as OnlineMvMixture; // a birth may have replaced it
    if (cur === curBefore ? this.gaussiansWin(curLogP, xv) : this.gaussiansWin(this.withBackground(cur.mixture.logpdf(xv)), xv)) cur.update(xv);
    if (this.accepted % HOUSEKEEPING_EVERY === 0) this.housekeeping(ts, offset, quiet);
    return null;
  }

  /** Declare the current state normal: the reference takes the current model and every alert resolves. */
  rebaseline(): void {
    if (this.phase === 'bootstrap') return;
    this.absorb(this.lastTs, this.lastOffset, 'rebaselined');
  }

  // ---- detection (per event) ----

  /** Runs every detector on the event in xv (rG, surprises, time and offset in the ev* fields); true when quiet. */
  private detect(ref: OnlineMvMixture): boolean {
    const cfg = this.config;
    const h = cfg.threshold;
    const k = ref.k;
    const d = this.d;
    const cs = this.consts;
    const resp = this.resp;
    const rG = this.evRG;
    const ts = this.evTs;
    const offset = this.evOffset;
    const desk = this.desk;
    const rt = desk.ratios;
    desk.beginEvent(this.accepted);
    desk.eventTs = ts;
    desk.eventOffset = offset;
    ref.mixture.toFrame(this.xv, this.z);
    for (let j = 0; j < k; j++) {
      const r = rG * resp[j];
      const c = j * WEIGHT_CONSTS;
      const rOther = rG - r;
      this.locationTerms(ref.mixture, j);
      const u = this.u;
      let far = false;
      for (let i = 0; i < d; i++) if (u[i] >= 13 || u[i] <= -13) far = true;
      if (r < 1e-12 && rG > 1 - 1e-9 && !far) {
        // The event is plainly another component's: each weight ratio is its constant for "not this one"
        // (within 1e-9) and each location ratio is 1 (r·e^|λz| < 1e-6). Most events take this path.
        rt[W_UP] = cs[c + C_UP_B];
        rt[W_DOWN] = cs[c + C_DN_B];
        rt[VANISH] = cs[c + C_VA_B];
        for (let i = 0; i < 2 * d; i++) rt[LOC + i] = 1;
      } else {
        rt[W_UP] = 1 + r * (cs[c + C_UP_A] - 1) + rOther * (cs[c + C_UP_B] - 1);
        rt[W_DOWN] = 1 + r * (cs[c + C_DN_A] - 1) + rOther * (cs[c + C_DN_B] - 1);
        rt[VANISH] = 1 + r * (cs[c + C_VA_A] - 1) + rOther * (cs[c + C_VA_B] - 1);
        for (let i = 0; i < d; i++) {
          let lz = u[i];
          if (lz > 50) lz = 50;
          else if (lz < -50) lz = -50;
          const pen = this.locPen[j * MV_MAX_DIM + i];
          rt[LOC + 2 * i] = 1 + r * (Math.exp(lz - pen) - 1);
          rt[LOC + 2 * i + 1] = 1 + r * (Math.exp(-lz - pen) - 1);
        }
      }
      desk.stepShifts(j * PER_COMPONENT, LOC + 2 * d);
    }
    // Fit: standardised surprise, clipped so one wild event cannot decide alone.
    const fitStat = this.fit.step(0, this.surprise.standardized(this.evSurprise, FIT_CLIP) - FIT_SLACK, offset, ts);
    if (fitStat >= cfg.fitThreshold && this.desk.book.get(this.desk.book.key('poor_fit', null)) === undefined) this.desk.openFit(this.accepted, ts);

    const cand = this.tagAndSearch(this.evNovelSurprise, ts, offset);
    if (cand !== null && cand.statistic >= h) this.onNovelty(cand, ts);

    if (this.desk.pendingCount > 0) this.desk.confirm(this.accepted, ts, offset);
    return desk.shiftsQuiet() && fitStat < 0.5 * cfg.fitThreshold && desk.book.size === 0;
  }

  /**
   * Location terms of component j for the event in this.z (working frame), into this.u[i] = λ·(Σ⁻¹(x−μ))_i·σ_i.
   *
   * Derivation. For one Gaussian, a mean shift δ changes the log density by
   *   ln N(x; μ+δ, Σ) − ln N(x; μ, Σ) = −½(x−μ−δ)ᵀΣ⁻¹(x−μ−δ) + ½(x−μ)ᵀΣ⁻¹(x−μ) = δᵀΣ⁻¹(x−μ) − ½ δᵀΣ⁻¹δ.
   * With δ = ±λ σ_i e_i (λ sd of axis i, σ_i² = Σ_ii):
   *   ln f'_k/f_k = ±λ σ_i (Σ⁻¹(x−μ))_i − ½ λ² σ_i² (Σ⁻¹)_ii.
   * The mixture changes in component k only, so p'(x)/p(x) = 1 + r_k (f'_k/f_k − 1) with r_k the
   * responsibility of k under the reference (background included): the CUSUM takes this ratio. The expected
   * llr under no change is ≤ 0; KL per event of component k is ½λ²σ_i²(Σ⁻¹)_ii ≥ ½λ² (correlation raises it).
   * In the frame z = D⁻¹(x − c) (D = diag(scale)), Σ = D C D, so Σ⁻¹(x−μ) = D⁻¹C⁻¹(z−m) and
   * σ_i (Σ⁻¹(x−μ))_i = √C_ii (C⁻¹(z−m))_i, σ_i²(Σ⁻¹)_ii = C_ii (C⁻¹)_ii: the scale cancels. C⁻¹(z−m) costs
   * a forward and a back substitution with the cached Cholesky factor L (C = L Lᵀ).
   */
  private locationTerms(m: MvMixture, j: number): void {
    const d = this.d;
    const L = m.frameChol;
    const inv = m.frameInvDiag;
    const lo = j * d * d;
    const mo = j * d;
    const y = this.work;
    const u = this.u;
    for (let i = 0; i < d; i++) {
      let s = this.z[i] - m.frameMeans[mo + i];
      for (let q = 0; q < i; q++) s -= L[lo + i * d + q] * y[q];
      y[i] = s * inv[mo + i];
    }
    for (let i = d - 1; i >= 0; i--) {
      let s = y[i];
      for (let q = i + 1; q < d; q++) s -= L[lo + q * d + i] * u[q];
      u[i] = s * inv[mo + i];
    }
    const lambda = this.config.locationShiftSds;
    for (let i = 0; i < d; i++) u[i] = lambda * u[i] * this.locSd[j * MV_MAX_DIM + i];
  }

  /**
   * Keep a badly explained event and, if enough recent ones are kept, look for a cluster. `surprise` is the
   * smaller of −ln p_ref(x) and −ln p_cur(x): an event is tagged when both models explain it badly (its
   * surprise is TAG_SDS quiet sds above the quiet mean, or the background is likelier than the Gaussians).
   */
  private tagAndSearch(surprise: number, ts: number, offset: number): VectorCandidate | null {
    const byBackground = this.config.outlierWeight > 0 && surprise > -this.bgLogOdds();
    const tagged = byBackground || (this.surprise.count >= TAG_MIN_COUNT && surprise > this.surprise.mean + TAG_SDS * Math.sqrt(this.surprise.variance));
    if (!tagged) return null;
    const nov = this.novelty as VectorNovelty;
    nov.push(this.xv, surprise, this.accepted, ts, offset);
    return nov.search(this.accepted, this.config.currentWindow, this.minCount(), this.unit);
  }

  private minCount(): number {
    return Math.max(8, 2 * this.d + 2);
  }

  // ---- alerts (rare: allocation is fine here) ----

  private onNovelty(cand: VectorCandidate, ts: number): void {
    const ref = this.ref as OnlineMvMixture;
    const nov = this.novelty as VectorNovelty;
    const busy = this.desk.book.size > 0;
    // Not new if a component born earlier already sits there (a mode in the making); while the stream has
    // an active alert the reference is frozen against a changed stream, so a candidate must also be
    // unexplained by the current model.
    let cur = this.cur as OnlineMvMixture;
    for (let j = 0; j < cur.k; j++) {
      const near = mahalanobis2(cur.mixture, j, cand.mean);
      const radius = busy ? 3 : indexOf(this.refIds, ref.k, this.curIds[j]) < 0 ? 2 : 0;
      if (near < radius * radius) return nov.consumeMembers();
    }
    for (let j = 0; j < ref.k; j++) {
      const near = mahalanobis2(ref.mixture, j, cand.mean);
      // A component whose location is shifting leaves a cluster of its events just beside it: that is its shift.
      const shifting = this.desk.book.list().some((a) => a.kind === 'location_shift' && a.componentId === this.refIds[j]);
      if (shifting && near < 16) return nov.consumeMembers();
      // Inside a reference component it is that component gaining weight, which the weight CUSUMs judge.
      // A reference component the current model had lost comes back under its own id, without an alert.
      if (near < 1.5 * 1.5) {
        if (indexOf(this.curIds, cur.k, this.refIds[j]) < 0 && cur.k < this.config.capacity) {
          this.cur = withComponent(cur, ref.mixture.meanOf(j), ref.mixture.covarianceOf(j), Math.max(cand.weight, this.config.minNewModeWeight));
          this.curIds[cur.k] = this.refIds[j];
        }
        return nov.consumeMembers();
      }
    }
    if (cur.k >= this.config.capacity) return nov.consumeMembers();
    const id = this.nextId++;
    cur = withComponent(cur, cand.mean, cand.cov, Math.max(cand.weight, this.config.minNewModeWeight));
    this.curIds[cur.k - 1] = id;
    this.cur = cur;
    this.desk.openBorn(id, this.accepted, ts, this.emergedEvidence(id, cand.statistic), cand.firstTs, cand.firstOffset);
    nov.consumeMembers();
  }

  // ---- read-outs and evidence ----

  /**
   * Components of the reference or current mixture (as returned by `reference`/`current`) as an
   * operator reads them: location, spread and mean of the FIRST axis, so dashboards stay uniform
   * with scalar streams. Sorted by location. A mixture that is neither gets ids 1..k.
   */
  views(model: MvMixture | null): ComponentView[] {
    if (model === null) return [];
    const ids = this.idsOf(model);
    const out: ComponentView[] = [];
    for (let j = 0; j < model.k; j++) {
      const loc = model.center[0] + model.frameMeans[j * model.d] * model.scale[0];
      out.push({ id: ids === null ? j + 1 : ids[j], weight: model.weights[j], location: loc, spread: model.sdOf(j, 0), mean: loc });
    }
    return out.sort((a, b) => a.location - b.location);
  }

  /** Full mean vectors and per-axis sds (stream units), in the same order as `views`. */
  vectorViews(model: MvMixture | null): VectorComponentView[] {
    if (model === null) return [];
    const ids = this.idsOf(model);
    const out: VectorComponentView[] = [];
    for (let j = 0; j < model.k; j++) {
      const sd: number[] = [];
      for (let i = 0; i < model.d; i++) sd.push(model.sdOf(j, i));
      out.push({ id: ids === null ? j + 1 : ids[j], weight: model.weights[j], mean: Array.from(model.meanOf(j)), sd });
    }
    return out.sort((a, b) => a.mean[0] - b.mean[0]);
  }

  /** Stable ids of the reference's or current mixture's components, in the mixture's own order (1..k for another mixture). */
  idsInOrder(model: MvMixture): number[] {
    const ids = this.idsOf(model);
    return Array.from({ length: model.k }, (_, j) => (ids === null ? j + 1 : ids[j]));
  }

  /** Log-likelihood per event of recent quiet events under the reference (nats), or null before warm-up. */
  logLikelihoodPerEvent(): number | null {
    return this.phase === 'bootstrap' ? null : this.surprise.logLikelihoodPerEvent();
  }

  private idsOf(model: MvMixture): Int32Array | null {
    if (this.ref !== null && model === this.ref.mixture) return this.refIds;
    if (this.cur !== null && model === this.cur.mixture) return this.curIds;
    return null;
  }

  private shiftEvidence(i: number, prev?: AlertEvidence): AlertEvidence {
    const ref = this.ref as OnlineMvMixture;
    const cur = this.cur as OnlineMvMixture;
    const j = Math.floor(i / PER_COMPONENT);
    const type = i % PER_COMPONENT;
    const id = this.refIds[j];
    const w = ref.mixture.weights[j];
    const cj = indexOf(this.curIds, cur.k, id);
    const wAfter = cj >= 0 ? cur.mixture.weights[cj] : null;
    const loc = vec(ref.mixture.meanOf(j));
    let summary: string;
    if (type === VANISH) summary = `the mode near ${loc} (weight ${pct(w)}) is vanishing${wAfter !== null ? `: now ${pct(wAfter)}` : ''}`;
    else if (type === W_UP || type === W_DOWN) {
      summary = `the mode near ${loc} ${type === W_UP ? 'gains' : 'loses'} weight: ${pct(w)} -> ${wAfter !== null ? pct(wAfter) : 'gone'}`;
    } else {
      const axis = (type - LOC) >> 1;
      const up = (type - LOC) % 2 === 0;
      summary = `the mode near ${loc} moves ${up ? 'up' : 'down'} along axis ${axis}${cj >= 0 ? `: now near ${vec(cur.mixture.meanOf(cj))}` : ''}`;
    }
    return this.desk.statisticEvidence(i, statName(type), id, summary, prev);
  }

  private emergedEvidence(id: number, statistic: number, prev?: AlertEvidence): AlertEvidence {
    const cur = this.cur as OnlineMvMixture;
    const j = indexOf(this.curIds, cur.k, id);
    const summary = j >= 0 ? `a new mode near ${vec(cur.mixture.meanOf(j))} carries ${pct(cur.mixture.weights[j])} of events` : 'a new mode appeared';
    return this.desk.evidence('novelty_cluster_llr', statistic, this.config.threshold, id, prev ? prev.firstEvidenceTs : this.lastTs, prev ? prev.firstEvidenceOffset : this.lastOffset, summary);
  }

  // ---- lifecycle ----

  private setDimension(d: number): void {
    this.d = d;
    this.boot = new Float64Array(this.config.bootstrapEvents * d);
    this.xv = new Float64Array(d);
    this.z = new Float64Array(d);
    this.work = new Float64Array(d);
    this.u = new Float64Array(d);
    this.resp = new Float64Array(this.config.capacity);
    this.unit = new Float64Array(d);
    this.bgCenter = new Float64Array(d);
    this.bgScale = new Float64Array(d);
    this.novelty = new VectorNovelty(d);
  }

  private bootstrap(): void {
    const cfg = this.config;
    const d = this.d;
    const n = this.bootCount;
    const data = this.boot as Float64Array;
    const best = selectMvMixture(data, n, d, { kMin: 1, kMax: cfg.maxComponents, seed: cfg.seed, restarts: 3, tol: 1e-4 }).best.mixture;
    this.boot = null;
    // A bootstrap component holding fewer than half the smallest new mode of interest sits on a handful of
    // outliers (BIC can afford one when they are far out): the background is their model, so it goes.
    let fit = best;
    for (let j = fit.k - 1; j >= 0 && fit.k > 1; j--) if (fit.weights[j] < 0.5 * cfg.minNewModeWeight) fit = dropComponent(fit, j);
    this.ref = OnlineMvMixture.fromMixture(fit, { alpha: 1, window: cfg.referenceWindow, initialCount: n });
    this.cur = OnlineMvMixture.fromMixture(fit, { alpha: 1, window: cfg.currentWindow, initialCount: n });
    for (let j = 0; j < fit.k; j++) {
      this.refIds[j] = this.nextId;
      this.curIds[j] = this.nextId++;
    }
    // Background: centred between the components, eight spreads wide per axis (as the scalar models' background).
    let c = 0;
    for (let i = 0; i < d; i++) {
      let lo = Infinity;
      let hi = -Infinity;
      let maxSd = 0;
      for (let j = 0; j < fit.k; j++) {
        const m = fit.center[i] + fit.frameMeans[j * d + i] * fit.scale[i];
        lo = Math.min(lo, m);
        hi = Math.max(hi, m);
        maxSd = Math.max(maxSd, fit.sdOf(j, i));
      }
      this.bgCenter[i] = 0.5 * (lo + hi);
      const s = 8 * Math.max(0.5 * (hi - lo), maxSd);
      this.bgScale[i] = s > 0 && Number.isFinite(s) ? s : 1;
      c -= Math.log(Math.PI * this.bgScale[i]);
    }
    this.bgConst = c;
    this.phase = 'warmup';
    this.resetDetectors();
    if (this.accepted >= cfg.warmupEvents) this.arm();
  }

  /**
   * During warm-up, a cluster the bootstrap fit explains badly (a mode too small for the first batch)
   * gets a component in both models, silently: it is part of what is normal.
   */
  private learnStructure(surprise: number, ts: number, offset: number): void {
    const cand = this.tagAndSearch(surprise, ts, offset);
    if (cand === null || cand.statistic < this.config.threshold) return;
    const nov = this.novelty as VectorNovelty;
    const ref = this.ref as OnlineMvMixture;
    const cur = this.cur as OnlineMvMixture;
    for (let j = 0; j < ref.k; j++) if (mahalanobis2(ref.mixture, j, cand.mean) < 4) return nov.consumeMembers();
    if (ref.k >= this.config.capacity || cur.k >= this.config.capacity) return nov.consumeMembers();
    const w = Math.max(cand.weight, this.config.minNewModeWeight);
    const id = this.nextId++;
    this.ref = withComponent(ref, cand.mean, cand.cov, w);
    this.refIds[ref.k] = id;
    this.cur = withComponent(cur, cand.mean, cand.cov, w);
    this.curIds[cur.k] = id;
    nov.consumeMembers();
    this.computeConsts();
  }

  private arm(): void {
    this.phase = 'armed';
    this.resetDetectors();
  }

  private resetDetectors(): void {
    this.shifts.resetAll();
    this.desk.releaseAll();
    this.fit.resetAll();
    (this.novelty as VectorNovelty).clear(this.accepted);
    this.computeConsts();
  }

  private computeConsts(): void {
    const ref = this.ref as OnlineMvMixture;
    const cfg = this.config;
    const m = ref.mixture;
    const d = this.d;
    const lambda = cfg.locationShiftSds;
    this.unit.fill(Infinity);
    for (let j = 0; j < ref.k; j++) {
      setWeightAlternatives(this.consts, j * WEIGHT_CONSTS, m.weights[j], cfg);
      // Location: √C_ii and ½λ²C_ii(C⁻¹)_ii, with (C⁻¹)_ii = |L⁻¹e_i|² by forward substitution.
      const lo = j * d * d;
      const L = m.frameChol;
      const y = this.work;
      for (let i = 0; i < d; i++) {
        let q = 0;
        for (let r = 0; r < d; r++) {
          let s = r === i ? 1 : 0;
          for (let t = 0; t < r; t++) s -= L[lo + r * d + t] * y[t];
          y[r] = s * m.frameInvDiag[j * d + r];
          q += y[r] * y[r];
        }
        const cii = m.frameCovariances[lo + i * d + i];
        this.locSd[j * MV_MAX_DIM + i] = Math.sqrt(cii);
        this.locPen[j * MV_MAX_DIM + i] = 0.5 * lambda * lambda * cii * q;
        this.unit[i] = Math.min(this.unit[i], m.sdOf(j, i));
      }
    }
    for (let i = 0; i < d; i++) if (!(this.unit[i] > 0) || !Number.isFinite(this.unit[i])) this.unit[i] = 1;
  }

  private bgLogPdf(x: Float64Array): number {
    let s = this.bgConst;
    for (let i = 0; i < this.d; i++) {
      const t = (x[i] - this.bgCenter[i]) / this.bgScale[i];
      s -= Math.log1p(t * t);
    }
    return s;
  }

  /** ln((1 − ε)·e^logG + ε·g(x)) for the Gaussian part's log density logG at this.xv. */
  private withBackground(logG: number): number {
    const eps = this.config.outlierWeight;
    if (eps === 0) return logG;
    const a = Math.log1p(-eps) + logG;
    const b = Math.log(eps) + this.bgLogPdf(this.xv);
    return a > b ? a + Math.log1p(Math.exp(b - a)) : b + Math.log1p(Math.exp(a - b));
  }

  /** Whether the Gaussians explain x better than the background, given logP = ln p(x) with the background. */
  private gaussiansWin(logP: number, x: Float64Array): boolean {
    const eps = this.config.outlierWeight;
    return eps === 0 || Math.log(eps) + this.bgLogPdf(x) < logP - Math.LN2;
  }

  /**
   * −ln of the density at which the background takes half of an event: surprise above it means the background is
   * likelier than the Gaussians. Since p = (1−ε)p_G + ε g, the background wins when ε g > p/2, i.e. −ln p > −ln(2 ε g).
   */
  private bgLogOdds(): number {
    return Math.log(2 * this.config.outlierWeight) + this.bgLogPdf(this.xv);
  }


  private removeCurrent(j: number): void {
    const cur = this.cur as OnlineMvMixture;
    this.cur = withoutComponent(cur, j);
    this.curIds.copyWithin(j, j + 1, cur.k);
  }

  private housekeeping(ts: number, offset: number, quiet: boolean): void {
    const cfg = this.config;
    // Prune components of the current model whose weight is negligible (a reference component keeps its id for a return).
    const pruneBelow = Math.min(0.002, cfg.minNewModeWeight / 5);
    for (let j = (this.cur as OnlineMvMixture).k - 1; j >= 0 && (this.cur as OnlineMvMixture).k > 1; j--) {
      if ((this.cur as OnlineMvMixture).mixture.weights[j] < pruneBelow) {
        const id = this.curIds[j];
        this.removeCurrent(j);
        this.desk.resolveBorn(id, ts, offset, (prev) => this.emergedEvidence(id, 0, prev));
      }
    }
    // Merge components of the current model that have come to overlap (one merge per pass).
    const cur = this.cur as OnlineMvMixture;
    merge: for (let a = 0; a < cur.k; a++) {
      for (let b = a + 1; b < cur.k; b++) {
        if (bhattacharyya(cur.mixture, a, b) < 0.02) {
          const keepA = this.curIds[a] < this.curIds[b];
          const id = keepA ? this.curIds[a] : this.curIds[b];
          this.cur = withMerged(cur, a, b);
          this.curIds.copyWithin(b, b + 1, cur.k);
          this.curIds[a] = id;
          break merge;
        }
      }
    }
    if (this.phase !== 'armed') return;
    if (quiet) this.computeConsts();
    // Absorb a change that has been firing long enough: it is the new normal.
    if (this.desk.dueForAbsorb(this.accepted, ts)) this.absorb(ts, offset, 'absorbed');
  }

  private absorb(ts: number, offset: number, resolution: 'absorbed' | 'rebaselined'): void {
    const cur = this.cur as OnlineMvMixture;
    const ref = this.ref as OnlineMvMixture;
    this.ref = withSettings(cur, { ...cur.settings, gammaMin: ref.settings.gammaMin }, Math.max(cur.stepCount, this.accepted));
    this.refIds.set(this.curIds);
    this.desk.resolveAll(ts, offset, resolution, (a) => ({ ...a.evidence, before: this.views(this.reference), after: this.views(this.current) }));
    if (this.phase === 'armed') this.resetDetectors();
    else this.computeConsts();
  }

  // ---- state ----

  exportState(): VectorMonitorState {
    return {
      version: MONITOR_STATE_VERSION,
      stream: this.stream,
      phase: this.phase,
      d: this.d,
      boot: this.boot === null ? null : Array.from(this.boot.subarray(0, this.bootCount * this.d)),
      ref: this.ref === null ? null : mvToJSON(this.ref),
      cur: this.cur === null ? null : mvToJSON(this.cur),
      refIds: Array.from(this.refIds),
      curIds: Array.from(this.curIds),
      nextId: this.nextId,
      shifts: this.shifts.exportState(),
      fit: this.fit.exportState(),
      novelty: this.novelty === null ? null : this.novelty.exportState(),
      consts: Array.from(this.consts),
      locSd: Array.from(this.locSd),
      locPen: Array.from(this.locPen),
      unit: Array.from(this.unit),
      bgCenter: Array.from(this.bgCenter),
      bgScale: Array.from(this.bgScale),
      bgConst: this.bgConst,
      ...this.surprise.exportFields(),
      accepted: this.accepted,
      lastTs: this.lastTs,
      lastOffset: this.lastOffset,
      ...this.desk.exportState(),
    };
  }

  static importState(s: VectorMonitorState, config: MonitorConfig, listener: TransitionListener): VectorStreamMonitor {
    const { shifts, consts } = currentShiftFields(s, 'vector monitor');
    const m = new VectorStreamMonitor(s.stream, config, listener);
    m.phase = s.phase;
    if (s.d > 0) m.setDimension(s.d);
    if (s.boot !== null) {
      if (m.boot !== null) m.boot.set(s.boot);
      m.bootCount = s.d > 0 ? s.boot.length / s.d : 0;
    } else m.boot = null;
    m.ref = s.ref === null ? null : onlineMvFromJSON(s.ref);
    m.cur = s.cur === null ? null : onlineMvFromJSON(s.cur);
    m.refIds.set(s.refIds);
    m.curIds.set(s.curIds);
    m.nextId = s.nextId;
    m.shifts.importState(shifts);
    m.fit.importState(s.fit);
    if (s.novelty !== null && m.novelty !== null) m.novelty.importState(s.novelty);
    m.consts.set(consts);
    m.locSd.set(s.locSd);
    m.locPen.set(s.locPen);
    m.unit.set(s.unit);
    m.bgCenter.set(s.bgCenter);
    m.bgScale.set(s.bgScale);
    m.bgConst = s.bgConst;
    m.surprise.importFields(s);
    m.accepted = s.accepted;
    m.lastTs = s.lastTs;
    m.lastOffset = s.lastOffset;
    m.desk.importState(s);
    return m;
  }
}

export interface VectorMonitorState extends SurpriseFields, ShiftFields {
  stream: string;
  phase: VectorMonitorPhase;
  d: number;
  boot: number[] | null;
  ref: OnlineMvDocument | null;
  cur: OnlineMvDocument | null;
  refIds: number[];
  curIds: number[];
  nextId: number;
  owned: number[];
  fit: number[];
  novelty: VectorNoveltyState | null;
  locSd: number[];
  locPen: number[];
  unit: number[];
  bgCenter: number[];
  bgScale: number[];
  bgConst: number;
  accepted: number;
  lastTs: number;
  lastOffset: number;
  pendingCount: number;
  alerts: ActiveAlert[];
}

/** A copy of m without component j, weights renormalised (same frame). */
function dropComponent(m: MvMixture, j: number): MvMixture {
  const d = m.d;
  const out = new MvMixture(m.k - 1, d, { center: m.center, scale: m.scale }, m.regCovar);
  for (let a = 0, t = 0; a < m.k; a++) {
    if (a === j) continue;
    out.weights[t] = m.weights[a];
    out.frameMeans.set(m.frameMeans.subarray(a * d, (a + 1) * d), t * d);
    out.frameCovariances.set(m.frameCovariances.subarray(a * d * d, (a + 1) * d * d), t * d * d);
    t++;
  }
  out.normalizeWeights();
  out.refresh();
  return out;
}

function statKind(type: number): AlertKind {
  return type === VANISH ? 'mode_vanished' : type < LOC ? 'weight_shift' : 'location_shift';
}

function statName(type: number): string {
  if (type === W_UP) return 'cusum_weight_up';
  if (type === W_DOWN) return 'cusum_weight_down';
  if (type === VANISH) return 'cusum_weight_vanish';
  const axis = (type - LOC) >> 1;
  return `cusum_location_${(type - LOC) % 2 === 0 ? 'up' : 'down'}_axis${axis}`;
}

function indexOf(ids: Int32Array, k: number, id: number): number {
  for (let j = 0; j < k; j++) if (ids[j] === id) return j;
  return -1;
}



function vec(v: ArrayLike<number>): string {
  return `(${Array.from(v, fmt).join(', ')})`;
}
