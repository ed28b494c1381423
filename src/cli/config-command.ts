/**
 * `modewatch config check FILE`: loads a configuration as `run` would (file, then environment) and prints "ok"
 * with a short summary (secrets redacted), or every problem as `FILE:LINE:COL: key.path: message`; exit code 2
 * on problems. `modewatch config example`: prints the commented example configuration.
 * Also the flags that `run` and `replay` offer over the file (configFlags, flagOverrides).
 */
import type { Writable } from 'node:stream';
import type { Argv, CommandModule } from 'yargs';
import { EXAMPLE_CONFIG } from '../config/example.js';
import { loadConfig, type LoadOptions } from '../config/load-config.js';
import { OVERRIDES } from '../config/overrides.js';
import { formatProblem } from '../config/problems.js';
import { redactConfig, redactUrl } from '../config/redact.js';
import type { FlagOverrides, ModewatchConfig } from '../config/schema.js';
import { REDACTED } from '../config/secret.js';

/** One line per section; secrets redacted, URLs without their password. */
export function summarizeConfig(config: ModewatchConfig): string[] {
  const r = redactConfig(config);
  const out: string[] = [];
  const k = r.kafka;
  if (k === null) out.push('kafka: not configured (needed by modewatch run)');
  else {
    const auth = k.sasl ? `, sasl ${k.sasl.mechanism} as ${k.sasl.username} (password ${REDACTED})` : '';
    out.push(`kafka: brokers ${k.brokers.join(', ')}, group ${k.groupId}, client ${k.clientId}, ssl ${k.ssl ? 'on' : 'off'}${auth}, from ${k.fromBeginning ? 'earliest' : 'latest'}`);
    config.kafka?.topics.forEach((t) => {
      const d = t.decoding;
      const value = d.value.format === 'json' ? `json ${[d.value.path].flat().join(',')}` : d.value.format === 'csv' ? `csv column ${[d.value.column].flat().join(',')}` : 'number';
      const key = d.key ? `key from ${d.key.from}` : 'stream = topic';
      out.push(`  topic ${t.name !== null ? t.name : `/${t.pattern?.source}/`}: value ${value}, ${key}, time from ${d.time?.from ?? 'record'}`);
    });
    if (k.deadLetterTopic !== null) out.push(`  dead letters: ${k.deadLetterTopic}`);
  }
  const s = config.streams;
  const set = (o: object): string => Object.keys(o).join(', ') || 'nothing';
  out.push(`streams: at most ${s.maxStreams}, ${s.recentValues} recent values each; defaults set ${set(s.defaults)}; ${s.rules.length} rule(s)`);
  s.rules.forEach((rule, i) => {
    out.push(`  rule ${i}: ${rule.match !== null ? `match ${JSON.stringify(rule.match)}` : `matchRegex /${rule.matchRegex}/`} sets ${set(rule.settings)}`);
  });
  const c = r.checkpoint;
  out.push(`checkpoint: ${c.store === 'directory' ? `directory ${c.directory}` : `kafka topic ${c.topic}`}, every ${c.everyEvents} events or ${c.everySeconds} s`);
  out.push(`alerts: ${r.alerts.sinks.length} sink(s)`);
  for (const sink of r.alerts.sinks) {
    let what = '';
    if (sink.type === 'alertmanager') what = ` ${sink.urls.join(', ')}, severity ${sink.severity}, resend every ${sink.resendSeconds} s`;
    else if (sink.type === 'webhook') what = ` ${sink.url}${sink.token !== null ? ` (token ${REDACTED})` : ''}`;
    else if (sink.type === 'kafka') what = ` topic ${sink.topic}`;
    out.push(`  ${sink.name}: ${sink.type}${what}`);
  }
  const h = r.http;
  out.push(`http: listen ${h.listen}${h.webConfigFile !== null ? `, web config ${h.webConfigFile}` : ''}${h.externalUrl !== null ? `, external URL ${redactUrl(h.externalUrl)}` : ''}`);
  out.push(`logging: ${r.logging.level}`);
  return out;
}

/** Runs `config check`; returns the exit code (0 ok, 2 problems). Streams and environment are injectable for tests. */
export function runConfigCheck(file: string, env: NodeJS.ProcessEnv, stdout: Writable, stderr: Writable, options: LoadOptions = {}): number {
  const result = loadConfig(file, env, {}, { command: 'check', ...options });
  if (!result.ok) {
    for (const p of result.problems) stderr.write(`${formatProblem(file, p)}\n`);
    stderr.write(`${result.problems.length} problem(s) in ${file}\n`);
    return 2;
  }
  stdout.write(`ok: ${file}\n`);
  for (const line of summarizeConfig(result.config)) stdout.write(`${line}\n`);
  return 0;
}

interface ConfigArgs {
  file?: string;
  for?: 'run' | 'replay';
}

export const configCommand: CommandModule<object, ConfigArgs> = {
  command: 'config <action>',
  describe: 'Check a configuration file, or print the commented example',
  builder: (y: Argv<object>): Argv<ConfigArgs> =>
    y
      .command({
        command: 'check <file>',
        describe: 'Check FILE (with MODEWATCH_* environment variables applied): "ok" and a summary, or every problem with its line; exit code 2 on problems',
        builder: (c: Argv<object>) =>
          c
            .positional('file', { type: 'string', demandOption: true, describe: 'configuration file (YAML)' })
            .option('for', { choices: ['run', 'replay'] as const, describe: 'check as this command would: run also requires the kafka section' }),
        handler: (argv: { file: string; for?: 'run' | 'replay' }) => {
          process.exitCode = runConfigCheck(argv.file, process.env, process.stdout, process.stderr, argv.for ? { command: argv.for } : {});
        },
      })
      .command({
        command: 'example',
        describe: 'Print the commented example configuration',
        handler: () => {
          process.stdout.write(EXAMPLE_CONFIG);
        },
      })
      .demandCommand(1, 'Name an action: check FILE or example.') as unknown as Argv<ConfigArgs>,
  handler: () => {
    // The subcommands do the work; yargs runs this only for an unknown action, which demandCommand refuses.
  },
};

/** Flag values over the environment, as `run` and `replay` take them (see configFlags). */
export interface ConfigFlagArgs {
  'kafka-brokers'?: string[];
  'kafka-group-id'?: string;
  'http-listen'?: string;
  'checkpoint-directory'?: string;
  'log-level'?: string;
}

/** Adds the override flags (--kafka-brokers, --kafka-group-id, --http-listen, --checkpoint-directory, --log-level). */
export function configFlags<T>(y: Argv<T>): Argv<T & ConfigFlagArgs> {
  const describe: Record<string, string> = {
    '--kafka-brokers': 'Kafka brokers host:port (comma list or repeated); overrides kafka.brokers and MODEWATCH_KAFKA_BROKERS',
    '--kafka-group-id': 'consumer group; overrides kafka.groupId and MODEWATCH_KAFKA_GROUP_ID',
    '--http-listen': 'host:port of the HTTP server; overrides http.listen and MODEWATCH_HTTP_LISTEN',
    '--checkpoint-directory': 'checkpoint directory; overrides checkpoint.directory and MODEWATCH_CHECKPOINT_DIRECTORY',
    '--log-level': 'log level; overrides logging.level and MODEWATCH_LOG_LEVEL',
  };
  let out = y as Argv<unknown>;
  for (const o of OVERRIDES) {
    const name = o.flag.slice(2);
    out = out.option(name, o.list ? { type: 'string', array: true, describe: describe[o.flag] } : { type: 'string', describe: describe[o.flag] });
  }
  return out as Argv<T & ConfigFlagArgs>;
}

/** The FlagOverrides for loadConfig from parsed flags. */
export function flagOverrides(argv: ConfigFlagArgs): FlagOverrides {
  const f: FlagOverrides = {};
  if (argv['kafka-brokers'] !== undefined) f.kafkaBrokers = argv['kafka-brokers'];
  if (argv['kafka-group-id'] !== undefined) f.kafkaGroupId = argv['kafka-group-id'];
  if (argv['http-listen'] !== undefined) f.httpListen = argv['http-listen'];
  if (argv['checkpoint-directory'] !== undefined) f.checkpointDirectory = argv['checkpoint-directory'];
  if (argv['log-level'] !== undefined) f.logLevel = argv['log-level'];
  return f;
}
