/**
 * `modewatch fit FILE`: fits a mixture to one column (or several columns as a vector) of a CSV or NDJSON file in
 * batch, chooses the number of components by BIC and prints the components in the data's units.
 *
 * `runFit(options, io)` does the work and returns the exit code (0, or 2 for a user error whose message went to
 * io.stderr); `fitCommand` is the yargs module the CLI entry registers.
 */
import { stat, writeFile } from 'node:fs/promises';
import type { Argv, CommandModule } from 'yargs';
import { isScaleName } from '../math/scale.js';
import { FIT_DEFAULTS, K_LIMIT, checkSettings, fitTable, type FitSettings, type ScaleChoice } from './fit-model.js';
import { fitJson, fitSvg, fitText } from './fit-format.js';
import { FitInputError, readDataTable, type InputFormat } from './fit-read.js';
import { createProgress, type ProgressStream } from './progress.js';

export interface FitCommandOptions extends Partial<FitSettings> {
  file: string;
  /** Column names; each entry may also hold several separated by commas. */
  columns?: readonly string[];
  format?: InputFormat | 'auto';
  json?: boolean;
  /** Write an SVG picture of the fit here. */
  plot?: string;
}

export interface FitIO {
  stdout: { write(text: string): unknown };
  /** Progress (TTY only) and error messages. */
  stderr: ProgressStream;
}

export async function runFit(options: FitCommandOptions, io: FitIO = { stdout: process.stdout, stderr: process.stderr }): Promise<number> {
  try {
    await fitAndPrint(options, io);
    return 0;
  } catch (e) {
    if (e instanceof FitInputError) {
      io.stderr.write(`modewatch fit: ${e.message}\n`);
      return e.exitCode;
    }
    throw e;
  }
}

async function fitAndPrint(options: FitCommandOptions, io: FitIO): Promise<void> {
  const settings: FitSettings = { ...FIT_DEFAULTS };
  for (const key of Object.keys(FIT_DEFAULTS) as (keyof FitSettings)[]) {
    const v = options[key];
    if (v !== undefined) (settings as unknown as Record<string, unknown>)[key] = v;
  }
  if (!(settings.scale === 'auto' || isScaleName(settings.scale)))
    throw new FitInputError(`--scale must be one of identity, log, log1p, auto; got ${JSON.stringify(settings.scale)}`);
  const format = options.format ?? 'auto';
  if (format !== 'auto' && format !== 'csv' && format !== 'ndjson') throw new FitInputError(`--format must be csv, ndjson or auto; got ${JSON.stringify(format)}`);
  const columns = (options.columns ?? []).flatMap((c) => c.split(',')).map((c) => c.trim()).filter((c) => c !== '');
  if (new Set(columns).size !== columns.length) throw new FitInputError(`--column names a column twice: ${columns.join(', ')}`);
  checkSettings(settings); // flags first: no point reading a big file to then refuse --k-min 0
  if (options.plot !== undefined && !/\.svg$/i.test(options.plot)) throw new FitInputError(`--plot writes SVG: give a file name ending in .svg, got ${options.plot}`);

  let size: number | undefined;
  try {
    size = (await stat(options.file)).size;
  } catch {
    size = undefined; // readDataTable reports the problem with its own words
  }
  const reading = createProgress({ total: size, unit: 'bytes', label: `reading ${options.file}`, stream: io.stderr });
  let table;
  try {
    table = await readDataTable(options.file, { columns, format, skipInvalid: settings.skipInvalid, onProgress: (b) => reading.update(b) });
  } finally {
    reading.finish();
  }
  const fitting = createProgress({ unit: 'items', label: `fitting ${table.n} rows: candidate fits`, stream: io.stderr });
  let report;
  try {
    report = fitTable(table, settings, { onFit: (done, total) => fitting.update(done, total) });
  } finally {
    fitting.finish();
  }
  if (options.plot !== undefined) {
    try {
      await writeFile(options.plot, fitSvg(report));
    } catch (e) {
      throw new FitInputError(`cannot write --plot ${options.plot}: ${(e as NodeJS.ErrnoException).code ?? (e as Error).message}`);
    }
  }
  io.stdout.write(options.json === true ? JSON.stringify(fitJson(report)) + '\n' : fitText(report, options.plot));
}

interface FitArgs {
  file: string;
  column?: string[];
  k?: number;
  'k-min': number;
  'k-max': number;
  scale: string;
  format: string;
  seed: number;
  restarts: number;
  tolerance: number;
  'max-iterations': number;
  'screen-rows': number;
  'skip-invalid': boolean;
  json: boolean;
  plot?: string;
}

const JSON_HELP = `Print one JSON object: {"k", "scale", "logLikelihood", "bic", "components": [{"weight", "mean", "sd", "cov"}], "candidates": [{"k", "logLikelihood", "bic"}], "columns", "n", "skipped", "notes"}. One column: "mean" and "sd" are numbers in the data's units; on the log and log1p scales they are the mean and sd of the log-normal component (x, or 1 + x, log-normal), and "location" (median), "spread" (half the central 68% interval), "logMean", "logSd" are given too. Several columns: "mean" and "sd" are arrays, "cov" the covariance matrix. Components are sorted by the mean of the first column.`;

export const fitCommand: CommandModule<object, FitArgs> = {
  command: 'fit <file>',
  describe: 'Fit a mixture to a column (or columns, as a vector) of a CSV or NDJSON file; choose k by BIC',
  builder: (y: Argv<object>): Argv<FitArgs> =>
    y
      .positional('file', { type: 'string', demandOption: true, describe: 'CSV with a header row, or NDJSON (one JSON object per line)' })
      .option('column', {
        alias: 'c',
        type: 'string',
        array: true,
        describe: 'Column (CSV header name) or field (NDJSON; dotted paths reach nested fields). Repeat, or separate by commas, to fit a vector (up to 8). Default: the only column',
      })
      .option('k', { type: 'number', describe: 'Fit exactly this many components (sets --k-min and --k-max)' })
      .option('k-min', { type: 'number', default: FIT_DEFAULTS.kMin, describe: `Fewest components to try (1..${K_LIMIT})` })
      .option('k-max', { type: 'number', default: FIT_DEFAULTS.kMax, describe: `Most components to try (1..${K_LIMIT}; capped at the row count)` })
      .option('scale', {
        type: 'string',
        choices: ['auto', 'identity', 'log', 'log1p'],
        default: FIT_DEFAULTS.scale,
        describe: 'Model scale: Gaussian components on x, log x (log-normal) or log(1 + x); auto picks the best likelihood in the data\'s units. Vectors: identity only',
      })
      .option('format', { type: 'string', choices: ['auto', 'csv', 'ndjson'], default: 'auto', describe: 'Input format; auto goes by the file name, then by the first line' })
      .option('seed', { type: 'number', default: FIT_DEFAULTS.seed, describe: 'Seed of the k-means++ starts; the same seed gives the same fit' })
      .option('restarts', { type: 'number', default: FIT_DEFAULTS.restarts, describe: 'EM starts per k; the best likelihood wins' })
      .option('tolerance', {
        type: 'number',
        default: FIT_DEFAULTS.tolerance,
        describe: 'EM stops when the mean log-likelihood per row changes by less than this (candidates are compared at max(this, 1e-6), the chosen fit is refined to this)',
      })
      .option('max-iterations', { type: 'number', default: FIT_DEFAULTS.maxIterations, describe: 'EM iteration cap per start' })
      .option('screen-rows', {
        type: 'number',
        default: FIT_DEFAULTS.screenRows,
        describe: 'One column with more rows: choose k and the scale on a random sample of this many rows, then fit the chosen model on every row (0: all rows)',
      })
      .option('skip-invalid', {
        type: 'boolean',
        default: false,
        describe: "Leave out unreadable lines and bad values (non-numeric, non-finite, outside the scale's domain) instead of stopping; they are counted in the output",
      })
      .option('json', { type: 'boolean', default: false, describe: JSON_HELP })
      .option('plot', { type: 'string', describe: 'Also write an SVG picture (histogram, fitted density, components) to this .svg file' })
      .epilogue('BIC = -2 log-likelihood + (free parameters) × ln(rows): lower is better. Exit code 2 on a mistake in the file or the flags.') as unknown as Argv<FitArgs>,
  handler: async (argv) => {
    const code = await runFit({
      file: argv.file,
      columns: argv.column,
      kMin: argv.k ?? argv['k-min'],
      kMax: argv.k ?? argv['k-max'],
      scale: argv.scale as ScaleChoice,
      format: argv.format as InputFormat | 'auto',
      seed: argv.seed,
      restarts: argv.restarts,
      tolerance: argv.tolerance,
      maxIterations: argv['max-iterations'],
      screenRows: argv['screen-rows'],
      skipInvalid: argv['skip-invalid'],
      json: argv.json,
      plot: argv.plot,
    });
    if (code !== 0) process.exitCode = code;
  },
};
