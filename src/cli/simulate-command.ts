/**
 * `modewatch simulate`: writes an invented scenario as NDJSON records (stdout or a file) and, on request, its
 * ground truth as JSON. Scenarios are the built-in suite (src/simulate/suite.ts) or a JSON/YAML file.
 */
import { createWriteStream } from 'node:fs';
import { readFile, writeFile } from 'node:fs/promises';
import type { Writable } from 'node:stream';
import type { Argv, CommandModule } from 'yargs';
import YAML from 'yaml';
import { simulate, type GroundTruth } from '../simulate/generator.js';
import { parseScenario, type Scenario } from '../simulate/scenario.js';
import { SCENARIOS, SCENARIO_NAMES, buildScenario } from '../simulate/suite.js';

export interface SimulateOptions {
  scenario?: string;
  scenarioFile?: string;
  /** Events per stream. */
  events?: number;
  /** Built-in scenarios: stream-local index of the change. */
  changeAt?: number;
  seed: number;
  /** Output file; stdout when absent or '-'. */
  out?: string;
  truth?: string;
  list?: boolean;
}

/** Reads and validates a scenario file; errors name the file and the key. */
export async function loadScenarioFile(path: string, events?: number): Promise<Scenario> {
  let text: string;
  try {
    text = await readFile(path, 'utf8');
  } catch (e) {
    throw new Error(`cannot read scenario file ${path}: ${(e as NodeJS.ErrnoException).code ?? String(e)}`);
  }
  let raw: unknown;
  try {
    raw = /\.json$/i.test(path) ? JSON.parse(text) : YAML.parse(text);
  } catch (e) {
    throw new Error(`scenario file ${path} is not valid ${/\.json$/i.test(path) ? 'JSON' : 'YAML'}: ${(e as Error).message}`);
  }
  return parseScenario(raw, path, events);
}

/**
 * Writes the lines in blocks, waiting for 'drain'. Returns false when the reader went away (EPIPE, e.g. piped
 * into `head`): that ends the output quietly rather than as an error.
 */
async function writeAll(out: Writable, lines: Iterable<string>): Promise<boolean> {
  let failure: NodeJS.ErrnoException | null = null;
  let wake: (() => void) | null = null;
  const onError = (e: NodeJS.ErrnoException): void => {
    failure = e;
    wake?.();
  };
  const onDrain = (): void => wake?.();
  out.on('error', onError);
  out.on('drain', onDrain);
  try {
    let block: string[] = [];
    const flush = async (): Promise<void> => {
      const ok = out.write(block.join('\n') + '\n');
      block = [];
      if (!ok && failure === null) await new Promise<void>((resolve) => (wake = resolve));
      wake = null;
    };
    for (const l of lines) {
      block.push(l);
      if (block.length >= 4096) await flush();
      if (failure !== null) break;
    }
    if (block.length > 0 && failure === null) await flush();
    const f = failure as NodeJS.ErrnoException | null;
    if (f !== null) {
      if (f.code === 'EPIPE') return false;
      throw f;
    }
    return true;
  } finally {
    out.off('error', onError);
    out.off('drain', onDrain);
  }
}

/** Runs the command; returns the ground truth (null for --list or when the reader closed early). `stdout` is injectable for tests. */
export async function runSimulate(opts: SimulateOptions, stdout: Writable = process.stdout): Promise<GroundTruth | null> {
  if (opts.list === true) {
    for (const name of SCENARIO_NAMES) stdout.write(`${name}\n    ${SCENARIOS[name].description}\n`);
    return null;
  }
  if ((opts.scenario === undefined) === (opts.scenarioFile === undefined))
    throw new Error('give exactly one of --scenario NAME (built-in; --list shows them) or --scenario-file FILE');
  if (opts.events !== undefined && (!Number.isInteger(opts.events) || opts.events < 2)) throw new Error(`--events must be an integer >= 2, got ${opts.events}`);
  if (!Number.isInteger(opts.seed) || opts.seed < 0 || opts.seed > 0xffffffff) throw new Error(`--seed must be an integer in 0..4294967295, got ${opts.seed}`);
  let scenario: Scenario;
  if (opts.scenario !== undefined) {
    if (!(opts.scenario in SCENARIOS)) throw new Error(`--scenario: unknown scenario ${JSON.stringify(opts.scenario)}; built-in: ${SCENARIO_NAMES.join(', ')}`);
    try {
      scenario = buildScenario(opts.scenario, { events: opts.events, changeAt: opts.changeAt });
    } catch (e) {
      throw new Error(`--scenario ${opts.scenario}: ${(e as Error).message}`);
    }
  } else {
    if (opts.changeAt !== undefined) throw new Error('--change-at applies to built-in scenarios only; a scenario file sets its own change indices');
    scenario = await loadScenarioFile(opts.scenarioFile as string, opts.events);
  }
  const run = simulate(scenario, opts.seed);
  const toFile = opts.out !== undefined && opts.out !== '-';
  const out: Writable = toFile ? createWriteStream(opts.out as string) : stdout;
  if (toFile) {
    await new Promise<void>((resolve, reject) => {
      out.once('open', () => resolve());
      out.once('error', (e) => reject(new Error(`cannot write --out ${opts.out}: ${(e as NodeJS.ErrnoException).code ?? e.message}`)));
    });
  }
  function* lines(): Generator<string> {
    for (const r of run.records()) yield r.line;
  }
  const complete = await writeAll(out, lines());
  if (toFile) await new Promise<void>((resolve, reject) => out.end((e?: Error | null) => (e ? reject(e) : resolve())));
  if (!complete) return null;
  const truth = run.truth();
  if (opts.truth !== undefined) {
    try {
      await writeFile(opts.truth, JSON.stringify(truth, null, 2) + '\n');
    } catch (e) {
      throw new Error(`cannot write --truth ${opts.truth}: ${(e as NodeJS.ErrnoException).code ?? String(e)}`);
    }
  }
  return truth;
}

interface SimulateArgs {
  scenario?: string;
  'scenario-file'?: string;
  events?: number;
  'change-at'?: number;
  seed: number;
  out?: string;
  truth?: string;
  list: boolean;
}

export const simulateCommand: CommandModule<object, SimulateArgs> = {
  command: 'simulate',
  describe: 'Write an invented scenario stream as NDJSON records {"ts","stream","value"}, with its ground truth',
  builder: (y: Argv<object>): Argv<SimulateArgs> =>
    y
      .option('scenario', { type: 'string', describe: `Built-in scenario: ${SCENARIO_NAMES.join(', ')}` })
      .option('scenario-file', { type: 'string', describe: 'Scenario file (JSON or YAML)' })
      .option('events', { type: 'number', describe: 'Events per stream (overrides the scenario)' })
      .option('change-at', { type: 'number', describe: 'Built-in scenarios: event index of the change (default: half of --events)' })
      .option('seed', { type: 'number', default: 1, describe: 'Random seed; the same seed gives the same records' })
      .option('out', { type: 'string', describe: "Records file (default: stdout; '-' also means stdout)" })
      .option('truth', { type: 'string', describe: 'Write the ground truth (changes, their line offsets, pre/post mixtures) to this JSON file' })
      .option('list', { type: 'boolean', default: false, describe: 'List the built-in scenarios and exit' }) as unknown as Argv<SimulateArgs>,
  handler: async (argv) => {
    await runSimulate({
      scenario: argv.scenario,
      scenarioFile: argv['scenario-file'],
      events: argv.events,
      changeAt: argv['change-at'],
      seed: argv.seed,
      out: argv.out,
      truth: argv.truth,
      list: argv.list,
    });
  },
};
