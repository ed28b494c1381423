#!/usr/bin/env node
/**
 * The modewatch command line: the one place where the rooms are wired together.
 */
import yargs from 'yargs';
import { hideBin } from 'yargs/helpers';
import { configCommand } from './config-command.js';
import { demoCommand } from './demo-command.js';
import { fitCommand } from './fit-command.js';
import { replayCommand } from './replay-command.js';
import { runCommand } from './run-command.js';
import { simulateCommand } from './simulate-command.js';
import { UsageError } from './usage-error.js';
import { VERSION } from './version.js';

async function main(argv: string[]): Promise<void> {
  await yargs(argv)
    .scriptName('modewatch')
    .usage('$0 <command> [options]\n\nWatches numeric event streams for new, vanished and shifted modes.')
    .command(runCommand)
    .command(replayCommand)
    .command(fitCommand)
    .command(simulateCommand)
    .command(demoCommand)
    .command(configCommand)
    .demandCommand(1, 'Name a command (see --help).')
    .strict()
    .version(VERSION)
    .help()
    .wrap(Math.min(110, process.stdout.columns ?? 100))
    .fail((msg, err, y) => {
      if (err) throw err;
      void y;
      process.stderr.write(`modewatch: ${msg}\nRun with --help for usage.\n`);
      process.exit(2);
    })
    .parseAsync();
}

// A reader that went away (`modewatch replay f | head`) ends the output quietly, as command-line tools do.
process.stdout.on('error', (e: NodeJS.ErrnoException) => {
  if (e.code === 'EPIPE') process.exit(0);
  throw e;
});

main(hideBin(process.argv)).catch((e: unknown) => {
  if (e instanceof UsageError) {
    process.stderr.write(`modewatch: ${e.message}\n`);
    process.exit(2);
  }
  process.stderr.write(`modewatch: ${e instanceof Error ? (e.stack ?? e.message) : String(e)}\n`);
  process.exit(1);
});
