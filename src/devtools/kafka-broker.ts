/**
 * A real Apache Kafka broker for tests and for trying modewatch locally.
 *
 * startBroker() tries, in order:
 *  (a) MODEWATCH_KAFKA_BROKERS (comma-separated host:port): a broker someone else runs;
 *  (b) testcontainers (@testcontainers/kafka, Confluent 7.9 image = Kafka 3.9) when a Docker engine answers;
 *  (c) a single-node KRaft broker started from the Apache Kafka 3.9.1 jars published on Maven Central,
 *      run with the local Java 17 (jars fetched once with Maven into a cache dir).
 * Kafka 3.9 still serves the older protocol versions kafkajs 2.2.4 speaks; Kafka 4.x dropped some of them.
 *
 * `node dist/devtools/kafka-broker.js` (npm run broker) starts one and keeps it until Ctrl-C.
 */
import { spawn, spawnSync } from 'node:child_process';
import { createHash, randomBytes } from 'node:crypto';
import { createWriteStream, existsSync, mkdirSync, mkdtempSync, readFileSync, renameSync, rmSync, writeFileSync } from 'node:fs';
import { createServer } from 'node:net';
import { homedir, tmpdir } from 'node:os';
import { dirname, join, resolve } from 'node:path';
import { fileURLToPath, pathToFileURL } from 'node:url';

export interface BrokerHandle {
  /** Bootstrap addresses, host:port. */
  brokers: string[];
  stop(): Promise<void>;
  /** How the broker was obtained, for logs and skip messages. */
  how: string;
}

export interface StartBrokerOptions {
  /** Progress messages (default: silent). */
  log?: (line: string) => void;
  /** Upper bound on waiting for the jar broker to say it started (default 90 s). */
  readyTimeoutMs?: number;
  /** Upper bound on the Docker engine probe (default 2 s). */
  dockerProbeMs?: number;
}

export const KAFKA_VERSION = '3.9.1';
const CONTAINER_IMAGE = 'confluentinc/cp-kafka:7.9.2';

/** tests/support/kafka holds the pom and config templates; this file sits two levels below the repo root in src/ and dist/. */
const SUPPORT_DIR = resolve(dirname(fileURLToPath(import.meta.url)), '..', '..', 'tests', 'support', 'kafka');

export function defaultLibsDir(): string {
  return process.env.MODEWATCH_KAFKA_LIBS || join(homedir(), '.cache', 'modewatch', `kafka-${KAFKA_VERSION}`, 'libs');
}

export async function startBroker(options: StartBrokerOptions = {}): Promise<BrokerHandle> {
  const log = options.log ?? (() => {});
  const why: string[] = [];

  const fromEnv = process.env.MODEWATCH_KAFKA_BROKERS;
  if (fromEnv !== undefined && fromEnv.trim() !== '') {
    const brokers = parseBrokerList(fromEnv);
    return { brokers, how: `MODEWATCH_KAFKA_BROKERS=${brokers.join(',')}`, stop: async () => {} };
  }
  why.push('MODEWATCH_KAFKA_BROKERS is not set');

  const docker = await tryTestcontainers(options.dockerProbeMs ?? 2000, log);
  if ('handle' in docker) return docker.handle;
  why.push(docker.why);

  const java = javaProblem();
  if (java !== null) {
    why.push(java);
    throw new Error(`no Kafka broker available: ${why.join('; ')}`);
  }
  return startJarBroker(options.readyTimeoutMs ?? 90_000, log);
}

export function parseBrokerList(text: string): string[] {
  const brokers = text.split(',').map((s) => s.trim()).filter((s) => s !== '');
  for (const b of brokers) {
    const m = /^(.+):(\d{1,5})$/.exec(b);
    if (!m || Number(m[2]) < 1 || Number(m[2]) > 65535) {
      throw new Error(`MODEWATCH_KAFKA_BROKERS: "${b}" is not host:port (expected e.g. 127.0.0.1:9092,127.0.0.1:9093)`);
    }
  }
  if (brokers.length === 0) throw new Error('MODEWATCH_KAFKA_BROKERS is set but names no broker');
  return brokers;
}

// ---------------------------------------------------------------------------------------------- (b) Docker

type Attempt = { handle: BrokerHandle } | { why: string };

async function tryTestcontainers(probeMs: number, log: (l: string) => void): Promise<Attempt> {
  let tc: typeof import('testcontainers');
  try {
    // A dev dependency: absent from a production install, and it may fail to load on some Node versions.
    tc = await import('testcontainers');
  } catch (e) {
    return { why: `testcontainers could not be loaded on Node ${process.version} (${firstLine(e)})` };
  }
  // getContainerRuntimeClient() has no timeout of its own: race it against a timer.
  let timer: NodeJS.Timeout | undefined;
  const timeout = new Promise<never>((_, reject) => {
    timer = setTimeout(() => reject(new Error(`no answer within ${probeMs} ms`)), probeMs);
    timer.unref();
  });
  try {
    await Promise.race([tc.getContainerRuntimeClient(), timeout]);
  } catch (e) {
    return { why: `no Docker engine reachable (${firstLine(e)})` };
  } finally {
    clearTimeout(timer);
  }
  log(`starting ${CONTAINER_IMAGE} with testcontainers`);
  const { KafkaContainer } = await import('@testcontainers/kafka');
  const container = await new KafkaContainer(CONTAINER_IMAGE).withKraft().start();
  const brokers = [`${container.getHost()}:${container.getMappedPort(9093)}`];
  return {
    handle: {
      brokers,
      how: `testcontainers ${CONTAINER_IMAGE}`,
      stop: async () => {
        await container.stop();
      },
    },
  };
}

// ---------------------------------------------------------------------------------------------- (c) jars

function javaProblem(): string | null {
  const r = spawnSync('java', ['-version'], { encoding: 'utf8', timeout: 10_000 });
  if (r.error) return `java is not runnable (${r.error.message}); install Java 17`;
  const m = /version "(\d+)/.exec(`${r.stderr}${r.stdout}`);
  if (!m || Number(m[1]) < 17) return `Java 17 or later is needed to run Kafka ${KAFKA_VERSION} (found: ${firstLine(r.stderr)})`;
  return null;
}

/** Makes sure the broker's jars are in the cache dir; fetches them with Maven if not (same as .ci/steps/20-kafka-jars.sh). */
export function ensureKafkaJars(libs = defaultLibsDir(), log: (l: string) => void = () => {}): string {
  const pom = join(SUPPORT_DIR, 'pom.xml');
  if (!existsSync(pom)) {
    throw new Error(`Kafka jars: ${pom} is missing (run from a modewatch checkout, or set MODEWATCH_KAFKA_LIBS to a dir of Kafka ${KAFKA_VERSION} jars)`);
  }
  const want = createHash('sha256').update(readFileSync(pom)).digest('hex');
  const marker = join(libs, '.complete');
  if (existsSync(marker) && readFileSync(marker, 'utf8').trim() === want) return libs;

  log(`fetching Kafka ${KAFKA_VERSION} jars with Maven into ${libs}`);
  mkdirSync(dirname(libs), { recursive: true });
  // Fetch into a temp dir beside the target and rename: a concurrent or interrupted fetch never leaves a half cache.
  const tmp = mkdtempSync(`${libs}.tmp.`);
  try {
    const r = spawnSync(
      'mvn',
      ['-q', '-B', '-Dstyle.color=never', '-f', pom, 'dependency:copy-dependencies', '-DincludeScope=runtime', `-DoutputDirectory=${tmp}`],
      { encoding: 'utf8', timeout: 600_000 },
    );
    if (r.error || r.status !== 0) {
      throw new Error(`Kafka jars: Maven failed (${r.error?.message ?? `exit ${r.status}`}): ${lastLines(`${r.stdout}\n${r.stderr}`, 15)}`);
    }
    writeFileSync(join(tmp, '.complete'), `${want}\n`);
    rmSync(libs, { recursive: true, force: true });
    renameSync(tmp, libs);
  } finally {
    rmSync(tmp, { recursive: true, force: true });
  }
  return libs;
}

/** Free loopback port: bind port 0, read it, close. Another process may take it before Kafka binds: startJarBroker retries. */
export async function freePort(): Promise<number> {
  return (await freePorts(1))[0];
}

/**
 * n different free loopback ports: all n are bound at once before any is closed, so they differ (two calls of
 * freePort() in a row can return the same port, which Kafka refuses for its broker and controller listeners).
 */
export async function freePorts(n: number): Promise<number[]> {
  const servers = Array.from({ length: n }, () => createServer());
  try {
    return await Promise.all(
      servers.map(
        (srv) =>
          new Promise<number>((resolvePort, reject) => {
            srv.unref();
            srv.on('error', reject);
            srv.listen(0, '127.0.0.1', () => {
              const addr = srv.address();
              resolvePort(typeof addr === 'object' && addr !== null ? addr.port : 0);
            });
          }),
      ),
    );
  } finally {
    await Promise.all(servers.map((srv) => new Promise<void>((done) => (srv.listening ? srv.close(() => done()) : done()))));
  }
}

/** KRaft cluster id: 16 random bytes, base64url without padding (what `kafka-storage random-uuid` prints). */
function clusterId(): string {
  for (;;) {
    const id = randomBytes(16).toString('base64url');
    if (!id.startsWith('-')) return id; // a leading '-' would be read as a command-line flag
  }
}

/**
 * Runs java under a small bash wrapper that also stops it when our stdin pipe closes, i.e. when this Node
 * process dies by any means (SIGKILL included), so a killed test run leaves neither a broker nor its temp dir.
 * SIGTERM to the wrapper is passed on to java (a clean Kafka shutdown).
 */
const WRAPPER = [
  'exec 3<&0',
  '"$@" </dev/null &',
  'jp=$!',
  "trap 'kill -TERM $jp 2>/dev/null' TERM INT",
  '( while read -r _ <&3; do :; done; kill -TERM $jp 2>/dev/null ) &',
  'wp=$!',
  'rc=0',
  'while kill -0 $jp 2>/dev/null; do wait $jp; rc=$?; done',
  'kill $wp 2>/dev/null',
  // The broker's temp dir goes with it, also when no Node process is left to remove it.
  'if [ -n "$MODEWATCH_KAFKA_TMP" ]; then rm -rf "$MODEWATCH_KAFKA_TMP"; fi',
  'exit $rc',
].join('\n');

async function startJarBroker(readyTimeoutMs: number, log: (l: string) => void): Promise<BrokerHandle> {
  const libs = ensureKafkaJars(defaultLibsDir(), log);
  let lastError: Error | undefined;
  for (let attempt = 1; attempt <= 2; attempt++) {
    try {
      return await launchOnce(libs, readyTimeoutMs, log);
    } catch (e) {
      lastError = e instanceof Error ? e : new Error(String(e));
      // Only a lost race for a port is worth a second try.
      if (!/Address already in use|BindException/.test(lastError.message)) break;
      log('port taken before Kafka could bind it; retrying with new ports');
    }
  }
  throw lastError ?? new Error('Kafka broker did not start');
}

interface BrokerLayout {
  dir: string;
  port: number;
  ctrl: number;
  jvm: string[];
  cp: string[];
}

/** A temp dir with server.properties (fresh free ports) and log4j.properties, and its storage formatted. */
async function prepareLayout(libs: string): Promise<BrokerLayout> {
  const dir = mkdtempSync(join(tmpdir(), 'modewatch-kafka-'));
  const [port, ctrl] = await freePorts(2);
  const props = readFileSync(join(SUPPORT_DIR, 'server.properties.template'), 'utf8')
    .replaceAll('@PORT@', String(port))
    .replaceAll('@CTRL@', String(ctrl))
    .replaceAll('@LOGDIR@', join(dir, 'kraft-logs'));
  writeFileSync(join(dir, 'server.properties'), props);
  writeFileSync(join(dir, 'log4j.properties'), readFileSync(join(SUPPORT_DIR, 'log4j.properties')));
  const jvm = ['-Xms256m', '-Xmx1g', '-XX:+UseG1GC', '-Djava.awt.headless=true', `-Dlog4j.configuration=file:${join(dir, 'log4j.properties')}`];
  const cp = ['-cp', `${libs}/*`];

  const format = spawnSync(
    'java',
    [...jvm, ...cp, 'kafka.tools.StorageTool', 'format', '-c', join(dir, 'server.properties'), '-t', clusterId(), '--ignore-formatted'],
    { encoding: 'utf8', timeout: 60_000 },
  );
  if (format.error || format.status !== 0) {
    rmSync(dir, { recursive: true, force: true });
    throw new Error(`Kafka storage format failed: ${format.error?.message ?? lastLines(`${format.stdout}\n${format.stderr}`, 10)}`);
  }
  return { dir, port, ctrl, jvm, cp };
}

interface RunningJava {
  /** SIGTERM (a clean Kafka shutdown), SIGKILL after 20 s; then the log file is closed. Idempotent. */
  halt(): Promise<void>;
}

/**
 * Starts java on a prepared layout and waits for "Kafka Server started". `ownsDir`: the wrapper removes the dir
 * when java ends (a one-shot broker); a restartable broker keeps it for the next start.
 */
async function runJava(l: BrokerLayout, readyTimeoutMs: number, ownsDir: boolean, onExitCleanup: () => void): Promise<RunningJava> {
  const logFile = join(l.dir, 'broker.log');
  const out = createWriteStream(logFile, { flags: 'a' });
  const child = spawn('bash', ['-c', WRAPPER, 'kafka-broker', 'java', ...l.jvm, ...l.cp, 'kafka.Kafka', join(l.dir, 'server.properties')], {
    stdio: ['pipe', 'pipe', 'pipe'],
    env: ownsDir ? { ...process.env, MODEWATCH_KAFKA_TMP: l.dir } : { ...process.env, MODEWATCH_KAFKA_TMP: '' },
  });
  let tail = '';
  let started = false;
  const exited = new Promise<number | null>((res) => child.once('exit', (code) => res(code)));
  const onOutput = (chunk: Buffer) => {
    out.write(chunk);
    tail = (tail + chunk.toString('utf8')).slice(-8000);
    if (!started && tail.includes('Kafka Server started')) started = true;
  };
  child.stdout?.on('data', onOutput);
  child.stderr?.on('data', onOutput);
  // If this process exits without stop(), take the broker down with it (the wrapper covers harder deaths).
  const onExit = () => {
    child.kill('SIGKILL');
    onExitCleanup();
  };
  process.once('exit', onExit);

  let halting: Promise<void> | null = null;
  const halt = (): Promise<void> => {
    halting ??= (async () => {
      process.removeListener('exit', onExit);
      if (child.exitCode === null && child.signalCode === null) {
        child.kill('SIGTERM');
        const done = await Promise.race([exited.then(() => true), sleep(20_000).then(() => false)]);
        if (!done) {
          child.kill('SIGKILL');
          await Promise.race([exited, sleep(5_000)]);
        }
      }
      child.stdin?.destroy();
      await new Promise<void>((res) => out.end(() => res()));
    })();
    return halting;
  };

  const t0 = Date.now();
  let exitCode: number | null | undefined;
  void exited.then((c) => (exitCode = c));
  while (!started) {
    if (exitCode !== undefined) {
      const lines = lastLines(tail, 20);
      await halt();
      throw new Error(`Kafka broker (java) exited with code ${exitCode} before it was ready:\n${lines}`);
    }
    if (Date.now() - t0 > readyTimeoutMs) {
      const lines = lastLines(tail, 20);
      await halt();
      throw new Error(`Kafka broker did not report "Kafka Server started" within ${readyTimeoutMs} ms:\n${lines}`);
    }
    await sleep(100);
  }
  return { halt };
}

async function launchOnce(libs: string, readyTimeoutMs: number, log: (l: string) => void): Promise<BrokerHandle> {
  const l = await prepareLayout(libs);
  const removeDir = () => rmSync(l.dir, { recursive: true, force: true });
  const t0 = Date.now();
  let java: RunningJava;
  try {
    java = await runJava(l, readyTimeoutMs, true, removeDir);
  } catch (e) {
    removeDir();
    throw e;
  }
  log(`Kafka ${KAFKA_VERSION} (KRaft, jars) up on 127.0.0.1:${l.port} after ${Date.now() - t0} ms; logs in ${join(l.dir, 'broker.log')}`);
  return {
    brokers: [`127.0.0.1:${l.port}`],
    how: `Kafka ${KAFKA_VERSION} jars (KRaft, java) in ${l.dir}`,
    stop: async () => {
      await java.halt();
      removeDir();
    },
  };
}

/** A jar broker that can be taken down and brought back on the same ports and log dir (broker outage tests). */
export interface RestartableBroker extends BrokerHandle {
  /** Clean shutdown (SIGTERM, as an operator would), keeping ports, log dir and data. */
  halt(): Promise<void>;
  /** Starts it again on the same ports and log dir; resolves once it reports it has started. */
  restart(): Promise<void>;
  readonly running: boolean;
}

/**
 * Always the Kafka jars (restarting needs a broker this process runs itself): throws when Java 17 is missing.
 * Ports can be taken by another process while the broker is down; restart() then fails with a BindException.
 */
export async function startRestartableBroker(options: StartBrokerOptions = {}): Promise<RestartableBroker> {
  const log = options.log ?? (() => {});
  const readyMs = options.readyTimeoutMs ?? 90_000;
  const java = javaProblem();
  if (java !== null) throw new Error(`no restartable Kafka broker: ${java}`);
  const libs = ensureKafkaJars(defaultLibsDir(), log);
  const l = await prepareLayout(libs);
  const removeDir = () => rmSync(l.dir, { recursive: true, force: true });
  let current: RunningJava | null = null;
  const launch = async () => {
    const t0 = Date.now();
    current = await runJava(l, readyMs, false, removeDir);
    log(`Kafka ${KAFKA_VERSION} (KRaft, jars, restartable) up on 127.0.0.1:${l.port} after ${Date.now() - t0} ms; logs in ${join(l.dir, 'broker.log')}`);
  };
  try {
    await launch();
  } catch (e) {
    removeDir();
    throw e;
  }
  // While halted no java runs, so no per-launch exit hook covers the dir.
  process.once('exit', removeDir);
  const halt = async () => {
    const j = current;
    current = null;
    await j?.halt();
  };
  return {
    brokers: [`127.0.0.1:${l.port}`],
    how: `Kafka ${KAFKA_VERSION} jars (KRaft, java, restartable) in ${l.dir}`,
    get running() {
      return current !== null;
    },
    halt,
    restart: async () => {
      if (current !== null) throw new Error('restart: the broker is running');
      await launch();
    },
    stop: async () => {
      await halt();
      process.removeListener('exit', removeDir);
      removeDir();
    },
  };
}

// ---------------------------------------------------------------------------------------------- helpers

function sleep(ms: number): Promise<void> {
  return new Promise((res) => setTimeout(res, ms));
}

function firstLine(e: unknown): string {
  const text = e instanceof Error ? e.message : String(e ?? '');
  return text.split('\n')[0]?.trim() ?? '';
}

function lastLines(text: string, n: number): string {
  return text.trim().split('\n').slice(-n).join('\n');
}

// ---------------------------------------------------------------------------------------------- npm run broker

async function main(): Promise<void> {
  const t0 = Date.now();
  const broker = await startBroker({ log: (l) => console.error(l) });
  const addr = broker.brokers.join(',');
  console.log(`Kafka broker ready in ${((Date.now() - t0) / 1000).toFixed(1)} s: ${addr}  (${broker.how})`);
  console.log(`Use it with modewatch: point its Kafka brokers setting at ${addr}, or export MODEWATCH_KAFKA_BROKERS=${addr}`);
  console.log('so that the tests use this broker too. Ctrl-C stops it.');
  let stopping = false;
  const shutdown = (signal: string) => {
    if (stopping) return;
    stopping = true;
    console.error(`${signal}: stopping the broker`);
    broker.stop().then(
      () => process.exit(0),
      (e: unknown) => {
        console.error(`stop failed: ${firstLine(e)}`);
        process.exit(1);
      },
    );
  };
  process.on('SIGINT', () => shutdown('SIGINT'));
  process.on('SIGTERM', () => shutdown('SIGTERM'));
}

if (process.argv[1] !== undefined && import.meta.url === pathToFileURL(resolve(process.argv[1])).href) {
  main().catch((e: unknown) => {
    console.error(e instanceof Error ? e.message : String(e));
    process.exit(1);
  });
}
