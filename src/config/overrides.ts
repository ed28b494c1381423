/**
 * Environment variables and flags over the file: the environment overrides the file, flags override the
 * environment. Overridden values are written into the parsed file object before it is checked, and their
 * origin is recorded so that a problem with such a value names the variable or flag instead of a file line.
 * Secrets have no variable or flag here on purpose: they come only through passwordEnv/passwordFile.
 */
import { isObj, type Obj } from './checks.js';
import type { ProblemList } from './problems.js';
import type { FlagOverrides } from './schema.js';

export interface OverrideSpec {
  section: 'kafka' | 'http' | 'checkpoint' | 'logging';
  key: string;
  env: string;
  /** The flag the CLI offers (src/cli/config-command.ts, configFlags). */
  flag: string;
  from: keyof FlagOverrides;
  list?: boolean;
}

export const OVERRIDES: readonly OverrideSpec[] = [
  { section: 'kafka', key: 'brokers', env: 'MODEWATCH_KAFKA_BROKERS', flag: '--kafka-brokers', from: 'kafkaBrokers', list: true },
  { section: 'kafka', key: 'groupId', env: 'MODEWATCH_KAFKA_GROUP_ID', flag: '--kafka-group-id', from: 'kafkaGroupId' },
  { section: 'http', key: 'listen', env: 'MODEWATCH_HTTP_LISTEN', flag: '--http-listen', from: 'httpListen' },
  { section: 'checkpoint', key: 'directory', env: 'MODEWATCH_CHECKPOINT_DIRECTORY', flag: '--checkpoint-directory', from: 'checkpointDirectory' },
  { section: 'logging', key: 'level', env: 'MODEWATCH_LOG_LEVEL', flag: '--log-level', from: 'logLevel' },
];

function splitList(parts: readonly string[]): string[] {
  return parts.flatMap((p) => p.split(',')).map((s) => s.trim()).filter((s) => s.length > 0);
}

/**
 * Applies environment and flag values to `root` (the parsed file) in place. An empty environment variable
 * counts as unset. Kafka values create a kafka section only when `createKafka` (the `run` command); otherwise
 * they apply to a kafka section the file has and are ignored without one (replay does not read Kafka).
 */
export function applyOverrides(root: Obj, env: NodeJS.ProcessEnv, flags: FlagOverrides, ps: ProblemList, createKafka: boolean): void {
  for (const o of OVERRIDES) {
    let value: string | string[] | undefined;
    let origin = '';
    const e = env[o.env];
    if (e !== undefined && e !== '') {
      value = o.list ? splitList([e]) : e;
      origin = `environment variable ${o.env}`;
    }
    const f = flags[o.from];
    if (f !== undefined) {
      value = o.list ? splitList(Array.isArray(f) ? f : [String(f)]) : String(f);
      origin = `flag ${o.flag}`;
    }
    if (value === undefined) continue;
    let section = root[o.section];
    if (section === undefined || section === null) {
      if (o.section === 'kafka' && !createKafka) continue;
      section = {};
      root[o.section] = section;
    }
    // A section that is not a mapping is reported by the checks; there is nothing to override in it.
    if (!isObj(section)) continue;
    root[o.section] = { ...section, [o.key]: value };
    ps.origins.set(`${o.section}.${o.key}`, origin);
  }
}
