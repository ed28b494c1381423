/**
 * A one-line progress display for long work (reading big files, replaying recorded streams).
 *
 * On a terminal (stream.isTTY) it redraws one line in place — done/total, percent, rate per second and time
 * left — at most once per `minIntervalMs` (default 100 ms, i.e. ~10 redraws a second). Anywhere else (a pipe,
 * a file, CI logs) it prints nothing at all, so that output meant for machines stays clean.
 *
 * `update(done)` is cheap: when not a TTY it returns at once; on a TTY it stores the number and reads the clock,
 * and only formats and writes when the redraw interval has passed. Calling it every 64k lines costs nothing
 * measurable.
 *
 * @example
 * const p = createProgress({ total: size, unit: 'bytes', label: 'reading data.csv' });
 * for (const chunk of chunks) p.update(bytesSoFar);
 * p.finish();
 */

/** The subset of a writable stream the display needs (process.stderr qualifies; so does a test double). */
export interface ProgressStream {
  write(text: string): unknown;
  isTTY?: boolean;
  columns?: number;
}

export type ProgressUnit = 'bytes' | 'lines' | 'events' | 'items';

export interface ProgressOptions {
  /** Amount of work in `unit`s; unknown when absent (no percent or time left then). */
  total?: number;
  /** What the work is, e.g. "reading data.csv". */
  label: string;
  /** Default 'items'. Bytes are shown with binary prefixes (KiB, MiB, GiB). */
  unit?: ProgressUnit;
  /** Default process.stderr. */
  stream?: ProgressStream;
  /** Least time between two redraws. Default 100 ms. */
  minIntervalMs?: number;
  /** Clock in milliseconds; injectable for tests. Default performance.now. */
  now?: () => number;
}

export interface Progress {
  /** Record that `done` units of work are complete (absolute, not an increment); `total` if it became known. */
  update(done: number, total?: number): void;
  /** Draw the final state and end the line (on a TTY); afterwards update() does nothing. */
  finish(): void;
  /** Whether this display draws anything at all (the stream is a TTY). */
  readonly active: boolean;
}

const NOOP: Progress = { update() {}, finish() {}, active: false };

export function createProgress(options: ProgressOptions): Progress {
  const stream = options.stream ?? process.stderr;
  if (stream.isTTY !== true) return NOOP;
  const now = options.now ?? (() => performance.now());
  const unit = options.unit ?? 'items';
  const minInterval = options.minIntervalMs ?? 100;
  const validTotal = (t: number | undefined): number | undefined => (t !== undefined && Number.isFinite(t) && t > 0 ? t : undefined);
  let total = validTotal(options.total);
  const start = now();
  let lastDraw = -Infinity;
  let done = 0;
  let finished = false;
  let drawn = false;

  const draw = (final: boolean): void => {
    const t = now();
    const elapsed = (t - start) / 1000;
    // A pseudo-terminal without a size reports 0 columns.
    const columns = stream.columns !== undefined && stream.columns > 0 ? stream.columns : 80;
    const line = formatProgressLine({ label: options.label, unit, done, total, elapsedSeconds: elapsed, final }, columns);
    // \r returns to the line start; ESC[K clears what a longer previous line left behind (ECMA-48 EL).
    stream.write('\r' + line + '\x1b[K' + (final ? '\n' : ''));
    lastDraw = t;
    drawn = true;
  };

  return {
    active: true,
    update(d: number, t?: number): void {
      if (finished) return;
      done = d;
      if (t !== undefined) total = validTotal(t);
      if (now() - lastDraw >= minInterval) draw(false);
    },
    finish(): void {
      if (finished) return;
      finished = true;
      // Work that ended before the first redraw leaves no trace: nothing to clear, nothing to say.
      if (drawn) draw(true);
    },
  };
}

export interface ProgressState {
  label: string;
  unit: ProgressUnit;
  done: number;
  total?: number;
  elapsedSeconds: number;
  final?: boolean;
}

/** The text of one progress line, fitted to `columns` characters (pure; exported for tests). */
export function formatProgressLine(s: ProgressState, columns: number): string {
  const rate = s.elapsedSeconds > 0 ? s.done / s.elapsedSeconds : 0;
  const parts: string[] = [];
  const amount = s.total !== undefined ? `${formatAmount(s.done, s.unit)} / ${formatAmount(s.total, s.unit)}` : formatAmount(s.done, s.unit);
  parts.push(amount);
  let fraction: number | undefined;
  if (s.total !== undefined) {
    fraction = Math.min(1, Math.max(0, s.done / s.total));
    parts.push(`${(fraction * 100).toFixed(fraction < 0.1 ? 1 : 0)}%`);
  }
  if (rate > 0) parts.push(`${formatAmount(rate, s.unit)}/s`);
  if (s.final === true) parts.push(`done in ${formatDuration(s.elapsedSeconds)}`);
  else if (s.total !== undefined && rate > 0) parts.push(`${formatDuration(Math.max(0, s.total - s.done) / rate)} left`);
  else parts.push(`${formatDuration(s.elapsedSeconds)} elapsed`);
  const text = parts.join('  ');
  const width = Math.max(20, columns - 1); // the last column would make some terminals wrap
  // The numbers matter more than the label: shorten the label first, then the bar goes.
  let label = s.label;
  const room = width - text.length - 2;
  if (label.length > room) label = room >= 8 ? label.slice(0, room - 1) + '…' : '';
  let line = label === '' ? text : `${label}  ${text}`;
  if (fraction !== undefined) {
    const barWidth = Math.min(40, width - line.length - 4);
    if (barWidth >= 10) {
      const full = Math.round(fraction * barWidth);
      line = `${label}  [${'#'.repeat(full)}${'.'.repeat(barWidth - full)}]  ${text}`;
    }
  }
  if (line.length > width) line = line.slice(0, width - 1) + '…';
  return line;
}

function formatAmount(v: number, unit: ProgressUnit): string {
  if (unit === 'bytes') {
    const prefixes = ['B', 'KiB', 'MiB', 'GiB', 'TiB'];
    let x = v;
    let i = 0;
    while (x >= 1024 && i < prefixes.length - 1) {
      x /= 1024;
      i++;
    }
    return i === 0 ? `${Math.round(x)} B` : `${x.toFixed(x < 10 ? 2 : 1)} ${prefixes[i]}`;
  }
  const word = unit === 'items' ? '' : ` ${unit}`;
  if (v >= 1e6) return `${(v / 1e6).toFixed(v < 1e7 ? 2 : 1)}M${word}`;
  if (v >= 1e4) return `${(v / 1e3).toFixed(1)}k${word}`;
  if (v < 10 && !Number.isInteger(v)) return `${v.toFixed(1)}${word}`; // slow rates: 0.4/s, not 0/s
  return `${Math.round(v)}${word}`;
}

/** h:mm:ss or m:ss. */
export function formatDuration(seconds: number): string {
  if (!Number.isFinite(seconds)) return '?';
  const s = Math.round(seconds);
  const h = Math.floor(s / 3600);
  const m = Math.floor((s % 3600) / 60);
  const r = s % 60;
  const mm = h > 0 ? String(m).padStart(2, '0') : String(m);
  return `${h > 0 ? `${h}:` : ''}${mm}:${String(r).padStart(2, '0')}`;
}
