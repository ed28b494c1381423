/**
 * Versioned JSON documents for models. JavaScript prints every finite double in the shortest
 * form that parses back to the same bits (ECMA-262 Number::toString), so plain JSON numbers
 * round-trip a model exactly. A document of another kind or version is refused with a reason.
 */
import { Mixture1D } from './mixture1d.js';
import { isScaleName } from './scale.js';
import { OnlineMixture1D, type OnlineMixture1DState, type StepwiseOptions } from './stepwise-em1d.js';

export const MIXTURE1D_FORMAT = 'modewatch/mixture1d';
export const ONLINE1D_FORMAT = 'modewatch/online-mixture1d';
export const FORMAT_VERSION = 1;

export class ModelDocumentError extends Error {
  constructor(message: string) {
    super(message);
    this.name = 'ModelDocumentError';
  }
}

interface Envelope {
  format: string;
  version: number;
}

function checkEnvelope(doc: unknown, format: string): Record<string, unknown> {
  if (typeof doc !== 'object' || doc === null || Array.isArray(doc)) throw new ModelDocumentError('model document must be a JSON object');
  const o = doc as Record<string, unknown> & Partial<Envelope>;
  if (o.format !== format) throw new ModelDocumentError(`expected format "${format}", found ${JSON.stringify(o.format)}`);
  if (o.version !== FORMAT_VERSION) throw new ModelDocumentError(`${format}: version ${JSON.stringify(o.version)} is not supported (this build reads version ${FORMAT_VERSION})`);
  return o;
}

function numbers(o: Record<string, unknown>, key: string, length?: number): number[] {
  const v = o[key];
  if (!Array.isArray(v) || !v.every((x) => typeof x === 'number' && Number.isFinite(x))) {
    throw new ModelDocumentError(`"${key}" must be an array of finite numbers`);
  }
  if (length !== undefined && v.length !== length) throw new ModelDocumentError(`"${key}" must have ${length} entries, has ${v.length}`);
  return v as number[];
}

function finite(o: Record<string, unknown>, key: string): number {
  const v = o[key];
  if (typeof v !== 'number' || !Number.isFinite(v)) throw new ModelDocumentError(`"${key}" must be a finite number`);
  return v;
}

function scaleOf(o: Record<string, unknown>) {
  const s = o.scale;
  if (typeof s !== 'string' || !isScaleName(s)) throw new ModelDocumentError(`"scale" must be identity, log or log1p, found ${JSON.stringify(s)}`);
  return s;
}

export function mixtureToJSON(m: Mixture1D): object {
  return {
    format: MIXTURE1D_FORMAT,
    version: FORMAT_VERSION,
    scale: m.scale,
    weights: Array.from(m.weights),
    means: Array.from(m.means),
    sds: Array.from(m.sds),
  };
}

export function mixtureFromJSON(doc: unknown): Mixture1D {
  const o = checkEnvelope(doc, MIXTURE1D_FORMAT);
  const weights = numbers(o, 'weights');
  try {
    return new Mixture1D(scaleOf(o), weights, numbers(o, 'means', weights.length), numbers(o, 'sds', weights.length));
  } catch (e) {
    if (e instanceof ModelDocumentError) throw e;
    throw new ModelDocumentError((e as Error).message);
  }
}

export function onlineToJSON(m: OnlineMixture1D): object {
  return { format: ONLINE1D_FORMAT, version: FORMAT_VERSION, ...m.exportState() };
}

const OPTION_KEYS: (keyof StepwiseOptions)[] = ['alpha', 't0', 'window', 'halfLifeMs', 'sdFloorFraction', 'backgroundWeight', 'capacity'];

export function onlineFromJSON(doc: unknown): OnlineMixture1D {
  const o = checkEnvelope(doc, ONLINE1D_FORMAT);
  const opts = o.options;
  if (typeof opts !== 'object' || opts === null) throw new ModelDocumentError('"options" must be an object');
  const options = {} as StepwiseOptions;
  for (const key of OPTION_KEYS) options[key] = finite(opts as Record<string, unknown>, key);
  const ids = numbers(o, 'ids');
  const lastTs = o.lastTs === null ? null : finite(o, 'lastTs');
  const state: OnlineMixture1DState = {
    scale: scaleOf(o),
    options,
    center: finite(o, 'center'),
    unit: finite(o, 'unit'),
    ids,
    s0: numbers(o, 's0', ids.length),
    mu: numbers(o, 'mu', ids.length),
    variance: numbers(o, 'variance', ids.length),
    nextId: finite(o, 'nextId'),
    t: finite(o, 't'),
    nEff: finite(o, 'nEff'),
    lastTs,
  };
  try {
    return OnlineMixture1D.importState(state);
  } catch (e) {
    throw new ModelDocumentError((e as Error).message);
  }
}
