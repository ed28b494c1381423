/**
 * Per-stream settings of a monitor, with defaults and validation. Plain data: the config room
 * parses YAML/flags into this shape; detection never reads files or the environment.
 */
import { Mixture1D } from '../math/mixture1d.js';
import type { ScaleName } from '../math/scale.js';

/** A component declared as normal in the configuration instead of learned. */
export interface KnownComponent {
  weight: number;
  /** Family of the component in the stream's units: `normal` (identity scale) or `lognormal` (log scale). */
  family: 'normal' | 'lognormal';
  /** Location in the stream's units: the mean for normal, the median for lognormal. */
  location: number;
  /** Spread in the stream's units: the sd for normal; for lognormal the sd of log(x). */
  spread: number;
}

/** The mixture that known components describe, on the scale their family implies (lognormal: log). */
export function knownMixture(known: readonly KnownComponent[]): Mixture1D {
  const log = known[0].family === 'lognormal';
  return new Mixture1D(
    log ? 'log' : 'identity',
    known.map((c) => c.weight),
    known.map((c) => (log ? Math.log(c.location) : c.location)),
    known.map((c) => c.spread),
  );
}

export interface MonitorConfig {
  /** Model scale, or auto: chosen at bootstrap by likelihood in the stream's units. */
  scale: ScaleName | 'auto';
  /** Unit the values are in (e.g. milliseconds), for read-outs in base units; '' if none. */
  unit: string;
  /** Events buffered for the first batch fit. */
  bootstrapEvents: number;
  /** Events (including bootstrap) during which the monitor learns and raises nothing. */
  warmupEvents: number;
  /** Largest number of components BIC may choose at bootstrap. */
  maxComponents: number;
  /** Most components a model may hold, births included. */
  capacity: number;
  /** Forgetting window of the reference model (what is normal), in events. */
  referenceWindow: number;
  /** Forgetting window of the current model (what is happening), in events. */
  currentWindow: number;
  /** If > 0, windows are half-lives in event time (ms) instead of event counts. */
  referenceHalfLifeMs: number;
  currentHalfLifeMs: number;
  /** Weight of the background (outlier) component; scattered outliers go there. */
  outlierWeight: number;
  /** CUSUM threshold on the log-likelihood ratio: ln of the run length between false alarms per statistic. */
  threshold: number;
  /** Threshold of the fit statistic (in standardised units). */
  fitThreshold: number;
  /** Smallest weight of a new mode worth an alert. */
  minNewModeWeight: number;
  /** Weight alternatives: the smallest change of interest, absolute and relative to min(w, 1-w). */
  weightShiftAbsolute: number;
  weightShiftRelative: number;
  /** Location alternative, in the component's own sd on the model scale. */
  locationShiftSds: number;
  /** A component whose current weight falls below this fraction of its reference weight has vanished. */
  vanishFraction: number;
  /** Events a crossing must hold before an alert goes from pending to firing. */
  confirmEvents: number;
  /** After an alert fired for this many events (or this much event time, if > 0) the reference absorbs the change. */
  absorbAfterEvents: number;
  absorbAfterMs: number;
  /** Components declared normal: the reference is fixed to these and not learned. */
  known: KnownComponent[] | null;
  /** Seed of the bootstrap fit (restarts). */
  seed: number;
}

export const DEFAULT_MONITOR_CONFIG: MonitorConfig = {
  scale: 'auto',
  unit: '',
  bootstrapEvents: 1000,
  warmupEvents: 3000,
  maxComponents: 4,
  capacity: 8,
  referenceWindow: 20_000,
  currentWindow: 8000,
  referenceHalfLifeMs: 0,
  currentHalfLifeMs: 0,
  outlierWeight: 0.002,
  threshold: 18,
  fitThreshold: 40,
  minNewModeWeight: 0.01,
  weightShiftAbsolute: 0.05,
  weightShiftRelative: 0.5,
  locationShiftSds: 1,
  vanishFraction: 0.1,
  confirmEvents: 16,
  absorbAfterEvents: 50_000,
  absorbAfterMs: 0,
  known: null,
  seed: 1,
};

/** One problem with a config, naming the key. */
export interface ConfigProblem {
  key: string;
  message: string;
}

/** Check ranges; returns every problem found (empty when valid). `path` prefixes the key names. */
export function validateMonitorConfig(c: MonitorConfig, path = ''): ConfigProblem[] {
  const out: ConfigProblem[] = [];
  const p = (key: string, message: string) => out.push({ key: path + key, message });
  const int = (key: keyof MonitorConfig, min: number, max = Number.MAX_SAFE_INTEGER) => {
    const v = c[key];
    if (typeof v !== 'number' || !Number.isInteger(v) || v < min || v > max) p(key, `must be a whole number from ${min} to ${max}, got ${JSON.stringify(v)}`);
  };
  const num = (key: keyof MonitorConfig, min: number, max: number, openMin = false) => {
    const v = c[key];
    if (typeof v !== 'number' || !Number.isFinite(v) || (openMin ? v <= min : v < min) || v > max) {
      p(key, `must be a number ${openMin ? '>' : '>='} ${min} and <= ${max}, got ${JSON.stringify(v)}`);
    }
  };
  if (!['auto', 'identity', 'log', 'log1p'].includes(c.scale)) p('scale', `must be identity, log, log1p or auto, got ${JSON.stringify(c.scale)}`);
  int('bootstrapEvents', 20, 1_000_000);
  int('warmupEvents', 0, 100_000_000);
  int('maxComponents', 1, 8);
  int('capacity', 1, 16);
  if (c.capacity < c.maxComponents) p('capacity', `must be >= maxComponents (${c.maxComponents})`);
  int('referenceWindow', 10, 1e9);
  int('currentWindow', 10, 1e9);
  if (c.currentWindow >= c.referenceWindow) p('currentWindow', `must be smaller than referenceWindow (${c.referenceWindow})`);
  num('referenceHalfLifeMs', 0, 1e13);
  num('currentHalfLifeMs', 0, 1e13);
  num('outlierWeight', 0, 0.2);
  num('threshold', 1, 200);
  num('fitThreshold', 1, 1000);
  num('minNewModeWeight', 0, 0.5, true);
  num('weightShiftAbsolute', 0, 0.5, true);
  num('weightShiftRelative', 0, 1);
  num('locationShiftSds', 0, 20, true);
  num('vanishFraction', 0, 0.9, true);
  int('confirmEvents', 0, 1e9);
  int('absorbAfterEvents', 1, 1e12);
  num('absorbAfterMs', 0, 1e13);
  int('seed', 0, 2 ** 31);
  if (c.known !== null) {
    if (!Array.isArray(c.known) || c.known.length === 0) p('known', 'must be a non-empty list of components');
    else {
      if (c.known.length > c.capacity) p('known', `has ${c.known.length} components, more than capacity ${c.capacity}`);
      const families = new Set(c.known.map((k) => k.family));
      if (families.size > 1) p('known', 'all known components must share one family (normal or lognormal)');
      let sum = 0;
      c.known.forEach((k, i) => {
        const kp = `known[${i}].`;
        if (!(k.weight > 0 && k.weight <= 1)) p(kp + 'weight', `must be in (0, 1], got ${JSON.stringify(k.weight)}`);
        if (k.family !== 'normal' && k.family !== 'lognormal') p(kp + 'family', `must be normal or lognormal, got ${JSON.stringify(k.family)}`);
        if (!Number.isFinite(k.location) || (k.family === 'lognormal' && !(k.location > 0))) p(kp + 'location', 'must be a finite number (> 0 for lognormal)');
        if (!(k.spread > 0) || !Number.isFinite(k.spread)) p(kp + 'spread', 'must be a finite number > 0');
        sum += k.weight;
      });
      if (Math.abs(sum - 1) > 1e-6) p('known', `weights must sum to 1, they sum to ${sum}`);
      const fam = c.known[0]?.family;
      const implied = fam === 'lognormal' ? 'log' : 'identity';
      if (c.scale !== 'auto' && c.scale !== implied) p('scale', `known components of family ${fam} need scale ${implied}`);
    }
  }
  return out;
}

export function monitorConfig(overrides: Partial<MonitorConfig> = {}): MonitorConfig {
  return { ...DEFAULT_MONITOR_CONFIG, ...overrides };
}
