import { MV_MAX_DIM, MvMixture } from './mixture.js';
import { OnlineMvMixture, type OnlineMvSettings } from './online-em.js';

/**
 * Versioned JSON documents for multivariate mixtures and their online state.
 *
 * Doubles are written as JSON numbers: ECMAScript's Number-to-string conversion emits the
 * shortest digits that parse back to the same double (ECMA-262, Number::toString), so every
 * finite value round-trips bit for bit. The one value a JSON number cannot carry is −0, which
 * is written as the string "-0". Non-finite values never occur in a valid state and are refused.
 * Cached factors (Cholesky, log-determinants) are not stored: they are recomputed by the same
 * deterministic code from the stored covariances and come out identical.
 */
export const MV_FORMAT_VERSION = 1;
export const MV_MIXTURE_FORMAT = 'modewatch/mv-mixture';
export const MV_ONLINE_FORMAT = 'modewatch/mv-online';

type Num = number | '-0';

export interface MvMixtureDocument {
  format: typeof MV_MIXTURE_FORMAT;
  version: number;
  k: number;
  d: number;
  regCovar: Num;
  center: Num[];
  scale: Num[];
  weights: Num[];
  frameMeans: Num[];
  frameCovariances: Num[];
}

export interface OnlineMvDocument {
  format: typeof MV_ONLINE_FORMAT;
  version: number;
  k: number;
  d: number;
  settings: { alpha: Num; t0: Num; gammaMin: Num; miniBatch: number };
  t: Num;
  eventsSeen: number;
  sinceMStep: number;
  mixture: MvMixtureDocument;
  stats: { weight: Num[]; mean: Num[]; scatter: Num[] };
}

/** A document that cannot be read: the message names the field and what is wrong. */
export class MvFormatError extends Error {
  constructor(message: string) {
    super(message);
    this.name = 'MvFormatError';
  }
}

function enc(v: number, what: string): Num {
  if (!Number.isFinite(v)) throw new MvFormatError(`cannot serialise ${what}: value ${v} is not finite`);
  return Object.is(v, -0) ? '-0' : v;
}

function encArr(a: ArrayLike<number>, what: string): Num[] {
  const out: Num[] = new Array<Num>(a.length);
  for (let i = 0; i < a.length; i++) out[i] = enc(a[i], `${what}[${i}]`);
  return out;
}

function mixtureDoc(m: MvMixture): MvMixtureDocument {
  return {
    format: MV_MIXTURE_FORMAT,
    version: MV_FORMAT_VERSION,
    k: m.k,
    d: m.d,
    regCovar: enc(m.regCovar, 'regCovar'),
    center: encArr(m.center, 'center'),
    scale: encArr(m.scale, 'scale'),
    weights: encArr(m.weights, 'weights'),
    frameMeans: encArr(m.frameMeans, 'frameMeans'),
    frameCovariances: encArr(m.frameCovariances, 'frameCovariances'),
  };
}

/** Serialise a mixture or an online model (with its statistics and counters) to a JSON-ready object. */
export function mvToJSON(model: MvMixture): MvMixtureDocument;
export function mvToJSON(model: OnlineMvMixture): OnlineMvDocument;
export function mvToJSON(model: MvMixture | OnlineMvMixture): MvMixtureDocument | OnlineMvDocument;
export function mvToJSON(model: MvMixture | OnlineMvMixture): MvMixtureDocument | OnlineMvDocument {
  if (model instanceof MvMixture) return mixtureDoc(model);
  const c = model.counters();
  const s = model.settings;
  return {
    format: MV_ONLINE_FORMAT,
    version: MV_FORMAT_VERSION,
    k: model.k,
    d: model.d,
    settings: { alpha: enc(s.alpha, 'alpha'), t0: enc(s.t0, 't0'), gammaMin: enc(s.gammaMin, 'gammaMin'), miniBatch: s.miniBatch },
    t: enc(c.t, 't'),
    eventsSeen: c.seen,
    sinceMStep: c.sinceMStep,
    mixture: mixtureDoc(model.mixture),
    stats: {
      weight: encArr(model.statWeight, 'stats.weight'),
      mean: encArr(model.statMean, 'stats.mean'),
      scatter: encArr(model.statScatter, 'stats.scatter'),
    },
  };
}

function isObject(v: unknown): v is Record<string, unknown> {
  return typeof v === 'object' && v !== null && !Array.isArray(v);
}

function field(o: Record<string, unknown>, key: string, path: string): unknown {
  if (!(key in o)) throw new MvFormatError(`${path}${key} is missing`);
  return o[key];
}

function dec(v: unknown, what: string): number {
  if (v === '-0') return -0;
  if (typeof v !== 'number' || !Number.isFinite(v)) throw new MvFormatError(`${what} must be a finite number, got ${JSON.stringify(v)}`);
  return v;
}

function decInt(v: unknown, what: string, min: number, max: number): number {
  if (typeof v !== 'number' || !Number.isInteger(v) || v < min || v > max)
    throw new MvFormatError(`${what} must be an integer in ${min}..${max}, got ${JSON.stringify(v)}`);
  return v;
}

function decArr(v: unknown, len: number, what: string): Float64Array {
  if (!Array.isArray(v)) throw new MvFormatError(`${what} must be an array of ${len} numbers`);
  if (v.length !== len) throw new MvFormatError(`${what} has ${v.length} entries, expected ${len}`);
  const out = new Float64Array(len);
  for (let i = 0; i < len; i++) out[i] = dec(v[i], `${what}[${i}]`);
  return out;
}

function checkHeader(doc: unknown, format: string, path: string): Record<string, unknown> {
  if (!isObject(doc)) throw new MvFormatError(`${path || 'document'} must be a JSON object`);
  const f = field(doc, 'format', path);
  if (f !== format) throw new MvFormatError(`${path}format is ${JSON.stringify(f)}, expected ${JSON.stringify(format)}`);
  const v = field(doc, 'version', path);
  if (v !== MV_FORMAT_VERSION)
    throw new MvFormatError(`${path}version is ${JSON.stringify(v)}; this build reads version ${MV_FORMAT_VERSION} only`);
  return doc;
}

function readMixture(doc: unknown, path: string): MvMixture {
  const o = checkHeader(doc, MV_MIXTURE_FORMAT, path);
  const k = decInt(field(o, 'k', path), `${path}k`, 1, 1_000_000);
  const d = decInt(field(o, 'd', path), `${path}d`, 1, MV_MAX_DIM);
  const regCovar = dec(field(o, 'regCovar', path), `${path}regCovar`);
  if (!(regCovar > 0)) throw new MvFormatError(`${path}regCovar must be > 0, got ${regCovar}`);
  const center = decArr(field(o, 'center', path), d, `${path}center`);
  const scale = decArr(field(o, 'scale', path), d, `${path}scale`);
  for (let i = 0; i < d; i++) if (!(scale[i] > 0)) throw new MvFormatError(`${path}scale[${i}] must be > 0, got ${scale[i]}`);
  const weights = decArr(field(o, 'weights', path), k, `${path}weights`);
  for (let j = 0; j < k; j++) if (weights[j] < 0) throw new MvFormatError(`${path}weights[${j}] is negative (${weights[j]})`);
  const means = decArr(field(o, 'frameMeans', path), k * d, `${path}frameMeans`);
  const covs = decArr(field(o, 'frameCovariances', path), k * d * d, `${path}frameCovariances`);
  const m = new MvMixture(k, d, { center, scale }, regCovar);
  m.weights.set(weights);
  m.frameMeans.set(means);
  m.frameCovariances.set(covs);
  m.refresh();
  return m;
}

/** Read a mixture document; throws MvFormatError naming the first problem. */
export function mvMixtureFromJSON(doc: unknown): MvMixture {
  return readMixture(doc, '');
}

/** Read an online-model document; throws MvFormatError naming the first problem. */
export function onlineMvFromJSON(doc: unknown): OnlineMvMixture {
  const o = checkHeader(doc, MV_ONLINE_FORMAT, '');
  const k = decInt(field(o, 'k', ''), 'k', 1, 1_000_000);
  const d = decInt(field(o, 'd', ''), 'd', 1, MV_MAX_DIM);
  const mixture = readMixture(field(o, 'mixture', ''), 'mixture.');
  if (mixture.k !== k || mixture.d !== d)
    throw new MvFormatError(`mixture has k = ${mixture.k}, d = ${mixture.d} but the document says k = ${k}, d = ${d}`);
  const sRaw = field(o, 'settings', '');
  if (!isObject(sRaw)) throw new MvFormatError('settings must be an object');
  const settings: OnlineMvSettings = {
    alpha: dec(field(sRaw, 'alpha', 'settings.'), 'settings.alpha'),
    t0: dec(field(sRaw, 't0', 'settings.'), 'settings.t0'),
    gammaMin: dec(field(sRaw, 'gammaMin', 'settings.'), 'settings.gammaMin'),
    miniBatch: decInt(field(sRaw, 'miniBatch', 'settings.'), 'settings.miniBatch', 1, 1_000_000_000),
  };
  if (!(settings.alpha > 0.5 && settings.alpha <= 1)) throw new MvFormatError(`settings.alpha must satisfy 0.5 < alpha <= 1, got ${settings.alpha}`);
  if (!(settings.t0 >= 0)) throw new MvFormatError(`settings.t0 must be >= 0, got ${settings.t0}`);
  if (!(settings.gammaMin >= 0 && settings.gammaMin <= 1)) throw new MvFormatError(`settings.gammaMin must be in [0, 1], got ${settings.gammaMin}`);
  const t = dec(field(o, 't', ''), 't');
  if (!(t >= 0)) throw new MvFormatError(`t must be >= 0, got ${t}`);
  const seen = decInt(field(o, 'eventsSeen', ''), 'eventsSeen', 0, Number.MAX_SAFE_INTEGER);
  const sinceMStep = decInt(field(o, 'sinceMStep', ''), 'sinceMStep', 0, settings.miniBatch - 1);
  const stRaw = field(o, 'stats', '');
  if (!isObject(stRaw)) throw new MvFormatError('stats must be an object');
  const tri = (d * (d + 1)) / 2;
  const weight = decArr(field(stRaw, 'weight', 'stats.'), k, 'stats.weight');
  const mean = decArr(field(stRaw, 'mean', 'stats.'), k * d, 'stats.mean');
  const scatter = decArr(field(stRaw, 'scatter', 'stats.'), k * tri, 'stats.scatter');
  for (let j = 0; j < k; j++) if (weight[j] < 0) throw new MvFormatError(`stats.weight[${j}] is negative (${weight[j]})`);
  return OnlineMvMixture.restore(mixture, settings, { t, seen, sinceMStep, weight, mean, scatter });
}

/** Read either document kind, dispatching on its `format` field. */
export function mvFromJSON(doc: unknown): MvMixture | OnlineMvMixture {
  if (isObject(doc) && doc.format === MV_ONLINE_FORMAT) return onlineMvFromJSON(doc);
  if (isObject(doc) && doc.format === MV_MIXTURE_FORMAT) return mvMixtureFromJSON(doc);
  const f = isObject(doc) ? JSON.stringify(doc.format) : 'absent (not a JSON object)';
  throw new MvFormatError(`format is ${f}, expected "${MV_MIXTURE_FORMAT}" or "${MV_ONLINE_FORMAT}"`);
}
