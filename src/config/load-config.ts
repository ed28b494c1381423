/**
 * loadConfig: the configuration file (schema in schema.ts), then the environment, then flags, checked in one
 * pass that reports every problem with its key path and, for values from the file, its line and column.
 * Secrets are read here (from the environment or a file) into Secret objects; relative paths are resolved
 * against the config file's directory (paths given by environment or flag: against the working directory).
 */
import { readFileSync, statSync } from 'node:fs';
import { dirname, resolve } from 'node:path';
import { LineCounter, parseDocument } from 'yaml';
import { DEFAULT_MONITOR_CONFIG, validateMonitorConfig, type KnownComponent, type MonitorConfig } from '../detect/monitor-config.js';
import { DecodingConfigError, validateMessageDecoding, type MessageDecoding } from '../ingest/message-decoder.js';
import { UNIT_FACTORS } from '../export/metric-names.js';
import { SCALE_NAMES } from '../math/scale.js';
import { absent, bool, httpUrlProblem, int, isObj, list, mapping, num, oneOf, optStr, parseHostPort, show, str, topicName, type Obj } from './checks.js';
import { applyOverrides } from './overrides.js';
import { closestKey, formatPath, ProblemList, type PathSeg } from './problems.js';
import {
  LOG_LEVELS,
  SASL_MECHANISMS,
  type AlertsConfig,
  type CheckpointConfig,
  type ConfigResult,
  type FlagOverrides,
  type HttpConfig,
  type KafkaConfig,
  type LoggingConfig,
  type SaslConfig,
  type SinkConfig,
  type StreamRule,
  type StreamsConfig,
  type TopicConfig,
} from './schema.js';
import { Secret } from './secret.js';
import { globToRegExp } from './stream-rules.js';

export interface LoadOptions {
  /**
   * The command the config is for. `run` requires the kafka section (and only then do the MODEWATCH_KAFKA_*
   * variables create one where the file has none); otherwise an absent kafka section is fine.
   */
  command?: 'run' | 'replay' | 'check';
  /** Working directory for paths given by environment or flag (default process.cwd()). */
  cwd?: string;
}

const TOP_KEYS = ['kafka', 'streams', 'checkpoint', 'alerts', 'http', 'logging'];
const INLINE_SECRET =
  'inline secrets are not accepted (config files get copied, committed and printed): name an environment variable with {env} or a file with {file}';

/** Reads, merges and checks the configuration. `path` null: no file, only defaults, environment and flags. */
export function loadConfig(path: string | null, env: NodeJS.ProcessEnv, overrides: FlagOverrides = {}, options: LoadOptions = {}): ConfigResult {
  const cwd = options.cwd ?? process.cwd();
  let root: Obj = {};
  let ps = new ProblemList();
  let file: string | null = null;
  if (path !== null) {
    file = resolve(cwd, path);
    let text: string;
    try {
      text = readFileSync(file, 'utf8');
    } catch (e) {
      return { ok: false, problems: [{ path: '', message: `cannot read the config file: ${(e as NodeJS.ErrnoException).code ?? String(e)}` }] };
    }
    const lines = new LineCounter();
    const doc = parseDocument(text, { lineCounter: lines, merge: true, prettyErrors: true });
    ps = new ProblemList(doc, lines);
    if (doc.errors.length > 0) {
      // The yaml library's message carries a code frame of the offending line, which may hold a secret: keep
      // the first sentence and the position only.
      const problems = doc.errors.map((e) => {
        const pos = e.linePos?.[0];
        const message = `YAML syntax: ${e.message.split(/ at line \d+/)[0]}`;
        return pos ? { path: '', message, line: pos.line, column: pos.col } : { path: '', message };
      });
      return { ok: false, problems };
    }
    for (const w of doc.warnings) {
      const pos = w.linePos?.[0];
      ps.items.push({ path: '', message: `YAML: ${w.message.split(/ at line \d+/)[0]}`, ...(pos ? { line: pos.line, column: pos.col } : {}) });
    }
    let js: unknown;
    try {
      // The alias bound keeps a small file from expanding into a huge object (the "billion laughs" shape).
      js = doc.toJS({ maxAliasCount: 1000 });
    } catch (e) {
      return { ok: false, problems: [{ path: '', message: `YAML: ${(e as Error).message.split(/ at line \d+/)[0]}` }] };
    }
    if (isObj(js)) root = { ...js };
    else if (!absent(js)) {
      ps.add([], `the file must be a mapping of sections (${TOP_KEYS.join(', ')}), got ${show(js)}`);
      return { ok: false, problems: ps.sorted() };
    }
  }
  const baseDir = file !== null ? dirname(file) : cwd;
  applyOverrides(root, env, overrides, ps, options.command === 'run');
  const top = mapping(ps, root, [], TOP_KEYS) ?? {};

  const ctx: Ctx = { ps, env, baseDir, cwd };
  const kafka = absent(top.kafka) ? null : kafkaSection(ctx, top.kafka);
  if (absent(top.kafka) && options.command === 'run') ps.add(['kafka'], 'required by `modewatch run`: the brokers and topics to read');
  const streams = streamsSection(ctx, top.streams);
  const checkpoint = checkpointSection(ctx, top.checkpoint, !absent(top.kafka));
  const alerts = alertsSection(ctx, top.alerts, !absent(top.kafka));
  const http = httpSection(ctx, top.http);
  const logging = loggingSection(ctx, top.logging);

  if (ps.length > 0 || !streams || !checkpoint || !alerts || !http || !logging || (!absent(top.kafka) && !kafka)) {
    return { ok: false, problems: ps.sorted() };
  }
  return { ok: true, config: { file, kafka, streams, checkpoint, alerts, http, logging } };
}

interface Ctx {
  ps: ProblemList;
  env: NodeJS.ProcessEnv;
  baseDir: string;
  cwd: string;
}

/** A path from the file is relative to the file's directory; one from the environment or a flag to the working directory. */
function resolvePath(ctx: Ctx, path: PathSeg[], value: string): string {
  return resolve(ctx.ps.origins.has(formatPath(path)) ? ctx.cwd : ctx.baseDir, value);
}

// ---------------------------------------------------------------------------------------------------------------
// kafka

const KAFKA_KEYS = ['brokers', 'clientId', 'groupId', 'fromBeginning', 'sessionTimeoutMs', 'consumerThread', 'ssl', 'sasl', 'topics', 'deadLetterTopic'];

function kafkaSection(ctx: Ctx, raw: unknown): KafkaConfig | null {
  const { ps } = ctx;
  const base = ['kafka'];
  const o = mapping(ps, raw, base, KAFKA_KEYS);
  if (!o) return null;
  const before = ps.length;
  const brokers: string[] = [];
  const bl = list(ps, o, 'brokers', base);
  if (bl) {
    if (bl.length === 0) ps.add([...base, 'brokers'], 'must name at least one broker (host:port)');
    bl.forEach((b, i) => {
      if (typeof b !== 'string') return ps.add([...base, 'brokers', i], `must be host:port, got ${show(b)}`);
      const hp = parseHostPort(b, 1);
      if (typeof hp === 'string') ps.add([...base, 'brokers', i], hp);
      else brokers.push(b);
    });
  }
  const clientId = str(ps, o, 'clientId', base, 'modewatch');
  const groupId = str(ps, o, 'groupId', base, 'modewatch');
  const fromBeginning = bool(ps, o, 'fromBeginning', base, false);
  // Kafka brokers accept 6 s to 30 min by default (group.min/max.session.timeout.ms).
  const sessionTimeoutMs = int(ps, o, 'sessionTimeoutMs', base, 30_000, 6_000, 1_800_000);
  const consumerThread = bool(ps, o, 'consumerThread', base, true);
  const ssl = bool(ps, o, 'ssl', base, false);
  const sasl = absent(o.sasl) ? null : saslSection(ctx, o.sasl);
  const topics = topicsList(ctx, o);
  const deadLetterTopic = absent(o.deadLetterTopic) ? null : topicName(ps, o, 'deadLetterTopic', base);
  if (ps.length > before || clientId === undefined || groupId === undefined || topics === null || sasl === undefined || deadLetterTopic === undefined) return null;
  return { brokers, clientId, groupId, fromBeginning, sessionTimeoutMs: sessionTimeoutMs ?? 30_000, consumerThread, ssl, sasl, topics, deadLetterTopic };
}

function saslSection(ctx: Ctx, raw: unknown): SaslConfig | undefined {
  const { ps } = ctx;
  const base = ['kafka', 'sasl'];
  const o = mapping(ps, raw, base, ['mechanism', 'username', 'passwordEnv', 'passwordFile'], {
    password: INLINE_SECRET.replace('{env}', 'passwordEnv').replace('{file}', 'passwordFile'),
  });
  if (!o) return undefined;
  const mechanism = oneOf(ps, o, 'mechanism', base, SASL_MECHANISMS);
  const username = str(ps, o, 'username', base);
  // An inline password was reported above; do not also say that none was given.
  const password = secret(ctx, o, base, 'passwordEnv', 'passwordFile', !('password' in o));
  if (mechanism === undefined || username === undefined || !password) return undefined;
  return { mechanism, username, password };
}

const ENV_NAME = /^[A-Za-z_][A-Za-z0-9_]*$/;

/**
 * A secret from the environment variable named by `envKey` or the file named by `fileKey` (exactly one).
 * Messages name the variable or file, never the value; a passwordEnv that does not look like a variable name
 * is not repeated either (it may be the password itself, put in the wrong key).
 */
function secret(ctx: Ctx, o: Obj, base: PathSeg[], envKey: string, fileKey: string, required: boolean): Secret | null | undefined {
  const { ps } = ctx;
  const e = o[envKey];
  const f = o[fileKey];
  if (!absent(e) && !absent(f)) {
    ps.add([...base, fileKey], `give one of ${envKey} and ${fileKey}, not both`);
    return undefined;
  }
  if (!absent(e)) {
    if (typeof e !== 'string' || !ENV_NAME.test(e)) {
      ps.add([...base, envKey], 'must be the name of an environment variable (letters, digits and _), not the secret itself');
      return undefined;
    }
    const v = ctx.env[e];
    if (v === undefined || v === '') {
      ps.add([...base, envKey], `environment variable ${e} is ${v === undefined ? 'not set' : 'empty'}`);
      return undefined;
    }
    return new Secret(v, `environment variable ${e}`);
  }
  if (!absent(f)) {
    if (typeof f !== 'string' || f.length === 0) {
      ps.add([...base, fileKey], `must be a file path, got ${show(f)}`);
      return undefined;
    }
    const p = resolvePath(ctx, [...base, fileKey], f);
    let text: string;
    try {
      text = readFileSync(p, 'utf8');
    } catch (err) {
      ps.add([...base, fileKey], `cannot read ${p}: ${(err as NodeJS.ErrnoException).code ?? 'error'}`);
      return undefined;
    }
    // Files written by `echo` or an editor end in a newline that is not part of the secret (common practice).
    const v = text.replace(/\r?\n$/, '');
    if (v.length === 0) {
      ps.add([...base, fileKey], `file ${p} is empty`);
      return undefined;
    }
    return new Secret(v, `file ${p}`);
  }
  if (required) {
    ps.add(base, `needs ${envKey} (an environment variable holding the secret) or ${fileKey} (a file holding it)`);
    return undefined;
  }
  return null;
}

function topicsList(ctx: Ctx, o: Obj): TopicConfig[] | null {
  const { ps } = ctx;
  const base: PathSeg[] = ['kafka', 'topics'];
  const l = list(ps, o, 'topics', ['kafka']);
  if (!l) return null;
  if (l.length === 0) {
    ps.add(base, 'must list at least one topic');
    return null;
  }
  const before = ps.length;
  const out: TopicConfig[] = [];
  const seen = new Map<string, number>();
  l.forEach((raw, i) => {
    const tb = [...base, i];
    const t = mapping(ps, raw, tb, ['name', 'pattern', 'decoding']);
    if (!t) return;
    let name: string | null = null;
    let pattern: RegExp | null = null;
    if (absent(t.name) === absent(t.pattern)) ps.add(tb, 'give exactly one of name (a topic) and pattern (a regular expression over topic names)');
    else if (!absent(t.name)) {
      name = topicName(ps, t, 'name', tb) ?? null;
      if (name !== null) {
        if (seen.has(name)) ps.add([...tb, 'name'], `topic ${name} is already listed at kafka.topics[${seen.get(name)}]`);
        seen.set(name, i);
      }
    } else {
      const src = str(ps, t, 'pattern', tb);
      if (src !== undefined) {
        try {
          pattern = new RegExp(src);
        } catch (e) {
          ps.add([...tb, 'pattern'], `is not a valid regular expression: ${(e as Error).message}`);
        }
      }
    }
    const decoding = decodingOf(ctx, t.decoding, [...tb, 'decoding'], name ?? 'pattern-topic');
    if ((name !== null || pattern !== null) && decoding) out.push({ name, pattern, decoding });
  });
  if (ps.length > before) return null;
  if (out.some((t) => t.name !== null) && out.some((t) => t.pattern !== null)) {
    ps.add(base, 'list topics by name or by pattern, not both (the Kafka consumer subscribes to one kind)');
    return null;
  }
  return out;
}

/** MessageDecoding validation is the ingest room's (it stops at its first problem); the topic comes from the topic entry. */
function decodingOf(ctx: Ctx, raw: unknown, path: PathSeg[], topic: string): Omit<MessageDecoding, 'topic'> | null {
  const { ps } = ctx;
  if (absent(raw)) {
    ps.add(path, 'required: how message values are read, e.g. { value: { format: number } }');
    return null;
  }
  if (!isObj(raw)) {
    ps.add(path, `must be a mapping, got ${show(raw)}`);
    return null;
  }
  if ('topic' in raw) {
    ps.add([...path, 'topic'], "not allowed here: the topic is the entry's name or pattern", true);
    return null;
  }
  const where = formatPath(path);
  try {
    const d = validateMessageDecoding({ ...raw, topic }, where);
    const { topic: _t, ...rest } = d;
    void _t;
    return rest;
  } catch (e) {
    if (!(e instanceof DecodingConfigError)) throw e;
    const m = e.message;
    const cut = m.startsWith(where) ? m.indexOf(': ', where.length) : -1;
    if (cut < 0) ps.add(path, m);
    else ps.addText(m.slice(0, cut), m.slice(cut + 2));
    return null;
  }
}

// ---------------------------------------------------------------------------------------------------------------
// streams

const MONITOR_KEYS = Object.keys(DEFAULT_MONITOR_CONFIG) as (keyof MonitorConfig)[];
const SCALES = ['auto', ...SCALE_NAMES] as const;
const UNITS = Object.keys(UNIT_FACTORS);

function streamsSection(ctx: Ctx, raw: unknown): StreamsConfig | null {
  const { ps } = ctx;
  const base = ['streams'];
  const o = mapping(ps, raw, base, ['maxStreams', 'recentValues', 'defaults', 'rules']);
  if (!o) return null;
  const before = ps.length;
  const maxStreams = int(ps, o, 'maxStreams', base, 100_000, 1, 10_000_000);
  const recentValues = int(ps, o, 'recentValues', base, 256, 0, 65_536);
  const defaults = monitorSettings(ctx, o.defaults, [...base, 'defaults']);
  const monitor: MonitorConfig = { ...DEFAULT_MONITOR_CONFIG, ...defaults };
  const defaultProblems = validateMonitorConfig(monitor);
  for (const p of defaultProblems) ps.addText(`streams.defaults.${p.key}`, p.message);
  const seenDefault = new Set(defaultProblems.map((p) => `${p.key}\n${p.message}`));

  const rules: StreamRule[] = [];
  const rl = list(ps, o, 'rules', base, []);
  rl?.forEach((r, i) => {
    const rb = [...base, 'rules', i];
    const m = mapping(ps, r, rb, ['match', 'matchRegex', 'settings']);
    if (!m) return;
    let regex: RegExp | null = null;
    let match: string | null = null;
    let matchRegex: string | null = null;
    if (absent(m.match) === absent(m.matchRegex)) ps.add(rb, 'give exactly one of match (a glob on the stream name) and matchRegex (a regular expression)');
    else if (!absent(m.match)) {
      match = str(ps, m, 'match', rb) ?? null;
      if (match !== null) regex = globToRegExp(match);
    } else {
      matchRegex = str(ps, m, 'matchRegex', rb) ?? null;
      if (matchRegex !== null) {
        try {
          regex = new RegExp(matchRegex);
        } catch (e) {
          ps.add([...rb, 'matchRegex'], `is not a valid regular expression: ${(e as Error).message}`);
        }
      }
    }
    if (absent(m.settings)) ps.add(rb, 'required: settings (the MonitorConfig keys this rule overrides)');
    const settings = monitorSettings(ctx, m.settings, [...rb, 'settings']);
    const merged: MonitorConfig = { ...monitor, ...settings };
    for (const p of validateMonitorConfig(merged)) {
      const top = p.key.split(/[.[]/)[0] as keyof MonitorConfig;
      const own = top in settings;
      // A problem the defaults already have is reported there once, unless this rule sets that key itself.
      if (!own && seenDefault.has(`${p.key}\n${p.message}`)) continue;
      ps.addText(`streams.rules[${i}].settings.${p.key}`, own ? p.message : `${p.message} (with streams.defaults merged)`);
    }
    if (regex !== null) rules.push({ match, matchRegex, regex, settings, monitor: merged });
  });
  if (ps.length > before) return null;
  return { maxStreams, recentValues, defaults, monitor, rules };
}

/** The MonitorConfig keys a mapping sets, type-checked; ranges are validateMonitorConfig's job on the merged result. */
function monitorSettings(ctx: Ctx, raw: unknown, base: PathSeg[]): Partial<MonitorConfig> {
  const { ps } = ctx;
  const o = mapping(ps, raw, base, MONITOR_KEYS);
  const out: Partial<MonitorConfig> = {};
  if (!o) return out;
  const set = out as Record<string, unknown>;
  for (const key of MONITOR_KEYS) {
    if (!(key in o)) continue;
    const v = o[key];
    const path = [...base, key];
    if (key === 'known') {
      const known = knownComponents(ctx, v, path);
      if (known !== undefined) out.known = known;
    } else if (key === 'scale') {
      const s = oneOf(ps, o, key, base, SCALES);
      if (s !== undefined) out.scale = s;
    } else if (key === 'unit') {
      if (v === '' || (typeof v === 'string' && UNITS.includes(v))) out.unit = v;
      else {
        const near = typeof v === 'string' ? closestKey(v, UNITS) : null;
        ps.add(path, `must be one of ${UNITS.join(', ')} (or '' for none), got ${show(v)}${near !== null ? ` (did you mean ${near}?)` : ''}`);
      }
    } else if (typeof v === 'number' && Number.isFinite(v)) set[key] = v;
    else ps.add(path, `must be a number, got ${show(v)}`);
  }
  return out;
}

function knownComponents(ctx: Ctx, v: unknown, path: PathSeg[]): KnownComponent[] | null | undefined {
  const { ps } = ctx;
  if (v === null) return null;
  if (!Array.isArray(v)) {
    ps.add(path, `must be a list of components {weight, family, location, spread}, or null, got ${show(v)}`);
    return undefined;
  }
  const before = ps.length;
  const out: KnownComponent[] = [];
  v.forEach((raw, i) => {
    const kb = [...path, i];
    const k = mapping(ps, raw, kb, ['weight', 'family', 'location', 'spread']);
    if (!k) return;
    const family = oneOf(ps, k, 'family', kb, ['normal', 'lognormal'] as const);
    const numbers: number[] = [];
    for (const key of ['weight', 'location', 'spread']) {
      const x = k[key];
      if (typeof x === 'number' && Number.isFinite(x)) numbers.push(x);
      else ps.add([...kb, key], absent(x) ? 'required: a number' : `must be a number, got ${show(x)}`);
    }
    if (family !== undefined && numbers.length === 3) out.push({ weight: numbers[0], family, location: numbers[1], spread: numbers[2] });
  });
  return ps.length > before ? undefined : out;
}

// ---------------------------------------------------------------------------------------------------------------
// checkpoint, alerts, http, logging

function checkpointSection(ctx: Ctx, raw: unknown, haveKafka: boolean): CheckpointConfig | null {
  const { ps } = ctx;
  const base = ['checkpoint'];
  const o = mapping(ps, raw, base, ['store', 'directory', 'topic', 'everyEvents', 'everySeconds']);
  if (!o) return null;
  const before = ps.length;
  const store = oneOf(ps, o, 'store', base, ['directory', 'kafka'] as const, 'directory');
  if (store === 'kafka' && !haveKafka) ps.add([...base, 'store'], 'kafka needs the kafka section (brokers) for its connection');
  const dir = str(ps, o, 'directory', base, './modewatch-state');
  const topic = topicName(ps, o, 'topic', base, 'modewatch-checkpoints');
  const everyEvents = int(ps, o, 'everyEvents', base, 100_000, 1, 1_000_000_000);
  const everySeconds = num(ps, o, 'everySeconds', base, 30, 0, 86_400, true);
  if (ps.length > before || store === undefined || dir === undefined || topic === undefined) return null;
  return { store, directory: resolvePath(ctx, [...base, 'directory'], dir), topic, everyEvents, everySeconds };
}

const SINK_KEYS: Record<SinkConfig['type'], string[]> = {
  log: ['type', 'name'],
  alertmanager: ['type', 'name', 'urls', 'resendSeconds', 'severity', 'labels'],
  webhook: ['type', 'name', 'url', 'tokenEnv', 'tokenFile'],
  kafka: ['type', 'name', 'topic'],
};
const SINK_TYPES = Object.keys(SINK_KEYS) as SinkConfig['type'][];
const LABEL_NAME = /^[a-zA-Z_][a-zA-Z0-9_]*$/; // Prometheus data model: label names

function alertsSection(ctx: Ctx, raw: unknown, haveKafka: boolean): AlertsConfig | null {
  const { ps } = ctx;
  const base = ['alerts'];
  const o = mapping(ps, raw, base, ['sinks']);
  if (!o) return null;
  const before = ps.length;
  const l = list(ps, o, 'sinks', base, [{ type: 'log' }]);
  const sinks: SinkConfig[] = [];
  const names = new Map<string, number>();
  const perType = new Map<string, number>();
  l?.forEach((r, i) => {
    const sb = [...base, 'sinks', i];
    if (!isObj(r)) return ps.add(sb, `must be a mapping with a type (${SINK_TYPES.join(', ')}), got ${show(r)}`);
    const type = oneOf(ps, r, 'type', sb, SINK_TYPES);
    if (type === undefined) return;
    const s = mapping(ps, r, sb, SINK_KEYS[type], type === 'webhook' ? { token: INLINE_SECRET.replace('{env}', 'tokenEnv').replace('{file}', 'tokenFile') } : {});
    if (!s) return;
    const n = (perType.get(type) ?? 0) + 1;
    perType.set(type, n);
    const name = str(ps, s, 'name', sb, n === 1 ? type : `${type}-${n}`);
    if (name === undefined) return;
    if (names.has(name)) ps.add([...sb, 'name'], `sink name ${JSON.stringify(name)} is already used by alerts.sinks[${names.get(name)}]; sinks need distinct names (metrics label)`);
    names.set(name, i);
    switch (type) {
      case 'log':
        sinks.push({ type, name });
        break;
      case 'alertmanager': {
        const urls: string[] = [];
        const ul = list(ps, s, 'urls', sb);
        if (ul?.length === 0) ps.add([...sb, 'urls'], 'must list at least one Alertmanager URL');
        ul?.forEach((u, j) => {
          const bad = httpUrlProblem(u);
          if (bad !== null) ps.add([...sb, 'urls', j], bad);
          else urls.push(u as string);
        });
        const resendSeconds = num(ps, s, 'resendSeconds', sb, 60, 0, 86_400, true);
        const severity = str(ps, s, 'severity', sb, 'warning');
        const labels: Record<string, string> = {};
        const lv = s.labels;
        if (!absent(lv) && !isObj(lv)) ps.add([...sb, 'labels'], `must be a mapping of label names to values, got ${show(lv)}`);
        else if (isObj(lv)) {
          for (const [k, v] of Object.entries(lv)) {
            if (!LABEL_NAME.test(k)) ps.add([...sb, 'labels', k], 'is not a Prometheus label name ([a-zA-Z_][a-zA-Z0-9_]*)', true);
            else if (typeof v !== 'string' || v.length === 0) ps.add([...sb, 'labels', k], `must be a non-empty string, got ${show(v)}`);
            else labels[k] = v;
          }
        }
        if (severity !== undefined) sinks.push({ type, name, urls, resendSeconds, severity, labels });
        break;
      }
      case 'webhook': {
        const bad = httpUrlProblem(s.url);
        if (bad !== null) ps.add([...sb, 'url'], absent(s.url) ? 'required: an http or https URL' : bad);
        const token = secret(ctx, s, sb, 'tokenEnv', 'tokenFile', false);
        if (bad === null && token !== undefined) sinks.push({ type, name, url: s.url as string, token });
        break;
      }
      case 'kafka': {
        if (!haveKafka) ps.add([...sb, 'type'], 'a kafka sink needs the kafka section (brokers) for its connection');
        const topic = topicName(ps, s, 'topic', sb);
        if (topic !== undefined) sinks.push({ type, name, topic });
        break;
      }
    }
  });
  if (ps.length > before || l === null) return null;
  return { sinks };
}

function httpSection(ctx: Ctx, raw: unknown): HttpConfig | null {
  const { ps } = ctx;
  const base = ['http'];
  const o = mapping(ps, raw, base, ['listen', 'webConfigFile', 'externalUrl']);
  if (!o) return null;
  const before = ps.length;
  const listen = str(ps, o, 'listen', base, '127.0.0.1:9471');
  let host = '';
  let port = 0;
  if (listen !== undefined) {
    const hp = parseHostPort(listen, 0);
    if (typeof hp === 'string') ps.add([...base, 'listen'], hp);
    else ({ host, port } = hp);
  }
  let webConfigFile: string | null = null;
  const wc = optStr(ps, o, 'webConfigFile', base);
  if (typeof wc === 'string') {
    webConfigFile = resolvePath(ctx, [...base, 'webConfigFile'], wc);
    try {
      if (!statSync(webConfigFile).isFile()) ps.add([...base, 'webConfigFile'], `${webConfigFile} is not a file`);
    } catch (e) {
      ps.add([...base, 'webConfigFile'], `cannot read ${webConfigFile}: ${(e as NodeJS.ErrnoException).code ?? 'error'}`);
    }
  }
  let externalUrl: string | null = null;
  if (!absent(o.externalUrl)) {
    const bad = httpUrlProblem(o.externalUrl);
    if (bad !== null) ps.add([...base, 'externalUrl'], bad);
    else externalUrl = o.externalUrl as string;
  }
  if (ps.length > before || listen === undefined) return null;
  return { listen, host, port, webConfigFile, externalUrl };
}

function loggingSection(ctx: Ctx, raw: unknown): LoggingConfig | null {
  const { ps } = ctx;
  const o = mapping(ps, raw, ['logging'], ['level']);
  if (!o) return null;
  const level = oneOf(ps, o, 'level', ['logging'], LOG_LEVELS, 'info');
  return level === undefined ? null : { level };
}
