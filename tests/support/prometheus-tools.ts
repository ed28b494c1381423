/**
 * Test helpers around Debian's Prometheus tools (package `prometheus` 2.42 and
 * `prometheus-alertmanager` 0.25 on the CI machine): run promtool, and start a real
 * Alertmanager or Prometheus on loopback with a temp directory and a free port.
 * Every process started here is stopped by the returned stop() (call it in afterAll).
 */
import { spawn, type ChildProcess } from 'node:child_process';
import { once } from 'node:events';
import { mkdtemp, rm, writeFile } from 'node:fs/promises';
import { createServer } from 'node:net';
import { tmpdir } from 'node:os';
import { join } from 'node:path';

export const PROMTOOL = process.env.PROMTOOL ?? '/usr/bin/promtool';
export const PROMETHEUS = process.env.PROMETHEUS ?? '/usr/bin/prometheus';
export const ALERTMANAGER = process.env.ALERTMANAGER ?? '/usr/bin/prometheus-alertmanager';

export interface RunResult {
  code: number | null;
  stdout: string;
  stderr: string;
}

/** Run a program to completion (bounded by timeoutMs), capturing its output. */
export function run(cmd: string, args: string[], timeoutMs = 60_000, cwd?: string): Promise<RunResult> {
  return new Promise((resolve, reject) => {
    const child = spawn(cmd, args, { cwd, stdio: ['ignore', 'pipe', 'pipe'] });
    let stdout = '';
    let stderr = '';
    child.stdout.on('data', (d: Buffer) => (stdout += d.toString()));
    child.stderr.on('data', (d: Buffer) => (stderr += d.toString()));
    const timer = setTimeout(() => child.kill('SIGKILL'), timeoutMs);
    child.on('error', (e) => {
      clearTimeout(timer);
      reject(e);
    });
    child.on('close', (code) => {
      clearTimeout(timer);
      resolve({ code, stdout, stderr });
    });
  });
}

export function promtool(args: string[], cwd?: string): Promise<RunResult> {
  return run(PROMTOOL, args, 60_000, cwd);
}

/** `promtool check metrics` on an exposition text (given on its standard input); it prints nothing when all is well. */
export function promtoolCheckMetrics(text: string): Promise<{ code: number | null; out: string }> {
  return new Promise((resolve, reject) => {
    const child = spawn(PROMTOOL, ['check', 'metrics'], { stdio: ['pipe', 'pipe', 'pipe'] });
    let out = '';
    child.stdout!.on('data', (d: Buffer) => (out += d.toString()));
    child.stderr!.on('data', (d: Buffer) => (out += d.toString()));
    const timer = setTimeout(() => child.kill('SIGKILL'), 60_000);
    child.on('error', reject);
    child.on('close', (code) => {
      clearTimeout(timer);
      resolve({ code, out });
    });
    child.stdin!.end(text);
  });
}

/** A port that was free a moment ago on 127.0.0.1. */
export async function freePort(): Promise<number> {
  const srv = createServer();
  srv.listen(0, '127.0.0.1');
  await once(srv, 'listening');
  const addr = srv.address();
  const port = typeof addr === 'object' && addr ? addr.port : 0;
  srv.close();
  await once(srv, 'close');
  return port;
}

export async function tempDir(prefix: string): Promise<{ path: string; remove(): Promise<void> }> {
  const path = await mkdtemp(join(tmpdir(), `modewatch-${prefix}-`));
  return { path, remove: () => rm(path, { recursive: true, force: true }) };
}

/** Poll `url` until it answers 200, the process exits, or timeoutMs passes. */
export async function waitReady(url: string, child: ChildProcess, log: () => string, timeoutMs = 30_000): Promise<void> {
  const end = Date.now() + timeoutMs;
  while (Date.now() < end) {
    if (child.exitCode !== null) throw new Error(`process exited with ${child.exitCode} before ready:\n${log()}`);
    try {
      const res = await fetch(url, { signal: AbortSignal.timeout(1000) });
      await res.text();
      if (res.status === 200) return;
    } catch {
      // not listening yet
    }
    await new Promise((r) => setTimeout(r, 100));
  }
  throw new Error(`${url} not ready within ${timeoutMs} ms:\n${log()}`);
}

export interface RunningServer {
  url: string;
  port: number;
  dir: string;
  /** Output so far, for failure messages. */
  log(): string;
  stop(): Promise<void>;
}

async function stopChild(child: ChildProcess): Promise<void> {
  if (child.exitCode !== null || child.signalCode !== null) return;
  const exited = once(child, 'exit');
  child.kill('SIGTERM');
  const timer = setTimeout(() => child.kill('SIGKILL'), 5000);
  await exited;
  clearTimeout(timer);
}

async function startServer(
  prefix: string,
  bin: string,
  configName: string,
  config: string,
  args: (dir: string, port: number) => string[],
): Promise<RunningServer> {
  const dir = await tempDir(prefix);
  await writeFile(join(dir.path, configName), config);
  // A port may be taken between freePort() and the bind: try a few times.
  for (let tries = 0; ; tries++) {
    const port = await freePort();
    const child = spawn(bin, args(dir.path, port), { cwd: dir.path, stdio: ['ignore', 'pipe', 'pipe'] });
    let out = '';
    child.stdout!.on('data', (d: Buffer) => (out = (out + d.toString()).slice(-20_000)));
    child.stderr!.on('data', (d: Buffer) => (out = (out + d.toString()).slice(-20_000)));
    const url = `http://127.0.0.1:${port}`;
    try {
      await waitReady(`${url}/-/ready`, child, () => out);
    } catch (err) {
      await stopChild(child);
      if (tries < 2 && /address already in use/.test(out)) continue;
      await dir.remove();
      throw err;
    }
    return {
      url,
      port,
      dir: dir.path,
      log: () => out,
      stop: async () => {
        await stopChild(child);
        await dir.remove();
      },
    };
  }
}

/** A real Alertmanager with one do-nothing receiver, clustering off, on 127.0.0.1. */
export function startAlertmanager(config?: string): Promise<RunningServer> {
  const cfg =
    config ??
    ['route:', '  receiver: blackhole', '  group_wait: 1s', 'receivers:', '  - name: blackhole', ''].join('\n');
  return startServer('alertmanager', ALERTMANAGER, 'alertmanager.yml', cfg, (dir, port) => [
    `--config.file=${join(dir, 'alertmanager.yml')}`,
    `--storage.path=${join(dir, 'data')}`,
    `--web.listen-address=127.0.0.1:${port}`,
    '--cluster.listen-address=',
    '--log.level=warn',
  ]);
}

/** A real Prometheus with the given configuration file text, on 127.0.0.1. */
export function startPrometheus(config: string): Promise<RunningServer> {
  return startServer('prometheus', PROMETHEUS, 'prometheus.yml', config, (dir, port) => [
    `--config.file=${join(dir, 'prometheus.yml')}`,
    `--storage.tsdb.path=${join(dir, 'data')}`,
    `--web.listen-address=127.0.0.1:${port}`,
    '--log.level=warn',
  ]);
}

/**
 * Every metric name modewatch can expose, from src/export/metric-names.ts: the listed
 * families, plus the `_seconds` / `_bytes` variants of location and spread (the unit
 * suffixes that file documents).
 */
export async function knownMetricNames(): Promise<Set<string>> {
  const { METRICS, UNIT_FACTORS } = await import('../../src/export/metric-names.js');
  const names = new Set<string>(Object.values(METRICS));
  const bases = new Set(Object.values(UNIT_FACTORS).map((u) => u.base));
  for (const family of [METRICS.componentLocation, METRICS.componentSpread]) {
    for (const b of bases) names.add(`${family}_${b}`);
  }
  return names;
}

/** modewatch_* metric names mentioned in a PromQL expression (recording rule names use colons). */
export function modewatchNamesIn(expr: string): string[] {
  return [...expr.matchAll(/\bmodewatch_[a-zA-Z0-9_]*[a-zA-Z0-9]/g)].map((m) => m[0]);
}
