import { describe, expect, it } from 'vitest';
import { createProgress, formatDuration, formatProgressLine } from '../src/cli/progress.js';

/** A terminal stand-in: records what was written; isTTY and columns as a real tty.WriteStream has them. */
function fakeTty(columns = 100): { isTTY: boolean; columns: number; writes: string[]; write(s: string): boolean } {
  return {
    isTTY: true,
    columns,
    writes: [],
    write(s: string) {
      this.writes.push(s);
      return true;
    },
  };
}

describe('progress display', () => {
  it('prints nothing at all when the stream is not a terminal', () => {
    const writes: string[] = [];
    const pipe = { write: (s: string) => writes.push(s) }; // no isTTY: a pipe or a file
    const p = createProgress({ total: 1000, unit: 'bytes', label: 'reading x.csv', stream: pipe });
    for (let i = 0; i <= 1000; i += 10) p.update(i);
    p.finish();
    expect(p.active).toBe(false);
    expect(writes).toEqual([]);
    const p2 = createProgress({ label: 'x', stream: { write: (s: string) => writes.push(s), isTTY: false } });
    p2.update(5);
    p2.finish();
    expect(writes).toEqual([]);
  });

  it('on a terminal shows done/total, percent, rate and time left, redrawn at most every 100 ms', () => {
    const tty = fakeTty(100);
    let now = 0;
    const p = createProgress({ total: 10 * 1024 * 1024, unit: 'bytes', label: 'reading big.ndjson', stream: tty, now: () => now });
    // 1000 updates within the first 50 ms: one redraw (the first).
    for (let i = 0; i < 1000; i++) {
      now = i * 0.05;
      p.update(i * 100);
    }
    expect(tty.writes.length).toBe(1);
    now = 2000; // 2 s in, 5 MiB done: 2.5 MiB/s, 50 %, 2 s left
    p.update(5 * 1024 * 1024);
    expect(tty.writes.length).toBe(2);
    const line = tty.writes[1];
    expect(line.startsWith('\r')).toBe(true);
    expect(line).toContain('reading big.ndjson');
    expect(line).toContain('5.00 MiB / 10.0 MiB');
    expect(line).toContain('50%');
    expect(line).toContain('2.50 MiB/s');
    expect(line).toContain('0:02 left');
    expect(line).toMatch(/\[#{5,}\.{5,}\]/);
    // Visible text fits the terminal (the escape sequence that clears the rest of the line is not visible).
    const visible = line.replace('\r', '').replace('\x1b[K', '');
    expect(visible.length).toBeLessThan(100);
    now = 2050;
    p.update(6 * 1024 * 1024);
    expect(tty.writes.length).toBe(2); // within 100 ms of the last redraw
    now = 4000;
    p.finish();
    expect(tty.writes.length).toBe(3);
    expect(tty.writes[2].endsWith('\n')).toBe(true);
    expect(tty.writes[2]).toContain('done in 0:04');
    p.update(7);
    p.finish();
    expect(tty.writes.length).toBe(3);
  });

  it('takes a total that becomes known later', () => {
    const tty = fakeTty(100);
    let now = 0;
    const p = createProgress({ unit: 'items', label: 'fitting', stream: tty, now: () => now });
    now = 1000;
    p.update(3, 12);
    expect(tty.writes[0]).toContain('3 / 12  25%');
    expect(tty.writes[0]).toContain('0:03 left');
  });

  it('without a total shows the count, rate and elapsed time; no bar', () => {
    const line = formatProgressLine({ label: 'replaying', unit: 'events', done: 1_500_000, elapsedSeconds: 3 }, 80);
    expect(line).toBe('replaying  1.50M events  500.0k events/s  0:03 elapsed');
  });

  it('cuts the line to a narrow terminal and drops the bar first', () => {
    const line = formatProgressLine({ label: 'reading a-rather-long-file-name.csv', unit: 'bytes', done: 512, total: 2048, elapsedSeconds: 1 }, 40);
    expect(line.length).toBeLessThanOrEqual(39);
    expect(line).not.toContain('[');
  });

  it('formats durations as m:ss and h:mm:ss', () => {
    expect(formatDuration(0)).toBe('0:00');
    expect(formatDuration(75)).toBe('1:15');
    expect(formatDuration(3 * 3600 + 62)).toBe('3:01:02');
    expect(formatDuration(Infinity)).toBe('?');
  });

  it('update is cheap enough to call on every chunk of lines', () => {
    const tty = fakeTty();
    const p = createProgress({ total: 1e9, unit: 'lines', label: 'x', stream: tty });
    const t0 = performance.now();
    for (let i = 0; i < 200_000; i++) p.update(i * 65_536);
    const ms = performance.now() - t0;
    p.finish();
    // 200k calls is ~13 billion lines at one call per 64k lines; a generous bound for a shared 2-core machine.
    expect(ms).toBeLessThan(1000);
    expect(tty.writes.length).toBeLessThan(2 + ms / 100 + 1);
  });
});
