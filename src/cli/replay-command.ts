/** `modewatch replay FILE...`: yargs wiring around runReplay (src/cli/replay.ts). */
import type { Argv, CommandModule } from 'yargs';
import type { ScaleName } from '../math/scale.js';
import { UsageError } from './usage-error.js';
import { defaultResolver, runReplay, writeSummary } from './replay.js';
import { stat } from 'node:fs/promises';
import { loadStreamSettings } from './config-loading.js';
import { createProgress } from './progress.js';

interface ReplayArgs {
  files: string[];
  config?: string;
  scale: ScaleName | 'auto';
  format?: 'ndjson' | 'csv';
  summary?: string;
  'max-streams': number;
}

export const replayCommand: CommandModule<object, ReplayArgs> = {
  command: 'replay <files..>',
  describe: 'Run recorded streams through the detection pipeline; alert transitions to stdout as NDJSON',
  builder: (y: Argv) =>
    y
      .positional('files', { type: 'string', array: true, demandOption: true, describe: 'NDJSON ({"ts","stream","value"}) or CSV (ts,stream,value) files; - for stdin' })
      .option('config', { type: 'string', describe: 'configuration file (its streams section sets per-stream settings)' })
      .option('scale', { choices: ['identity', 'log', 'log1p', 'auto'] as const, default: 'auto' as const, describe: 'default scale of every stream' })
      .option('format', { choices: ['ndjson', 'csv'] as const, describe: 'input format (default: detected from the first line)' })
      .option('summary', { type: 'string', describe: 'write the summary as JSON to this file instead of stderr' })
      .option('max-streams', { type: 'number', default: 100_000, describe: 'most streams to create; events of further streams are refused and counted' }) as unknown as Argv<ReplayArgs>,
  handler: async (args) => {
    const resolve = args.config !== undefined ? await loadStreamSettings(args.config, args.scale) : defaultResolver(args.scale);
    if (!(args['max-streams'] >= 1)) throw new UsageError(`--max-streams must be >= 1, got ${args['max-streams']}`);
    let total = 0;
    for (const f of args.files) {
      if (f === '-') continue;
      try {
        total += (await stat(f)).size;
      } catch {
        throw new UsageError(`cannot read ${f}: no such file`);
      }
    }
    // Shown only when stderr is a terminal; quiet in pipes and logs.
    const progress = createProgress({ label: `replaying ${args.files.length} file(s)`, unit: 'bytes', total: total > 0 ? total : undefined });
    const summary = await runReplay(
      { files: args.files, resolve, scale: args.scale, format: args.format, maxStreams: args['max-streams'], onProgress: (b) => progress.update(b) },
      process.stdout,
    );
    progress.finish();
    await writeSummary(summary, args.summary, process.stderr);
  },
};
