// The exporter web configuration loader against promtool's own checker (Debian prometheus
// 2.42: `promtool check web-config`), with certificates made by openssl and bcrypt hashes
// made by libxcrypt (Debian's python3 crypt module) and by bcryptjs 3.0.3; then real
// node http/https servers that use the loader and checkBasicAuth.
import { execFileSync } from 'node:child_process';
import { once } from 'node:events';
import { readFile, writeFile } from 'node:fs/promises';
import { createServer as createHttpServer, type IncomingMessage, type ServerResponse, type Server } from 'node:http';
import { createServer as createHttpsServer, request as httpsRequest } from 'node:https';
import type { AddressInfo } from 'node:net';
import type { TLSSocket } from 'node:tls';
import { join } from 'node:path';
import bcrypt from 'bcryptjs';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import {
  checkBasicAuth,
  clientCertAllowed,
  httpsServerOptions,
  loadWebConfig,
  WebConfigError,
} from '../src/http/web-config.js';
import { promtool, tempDir } from './support/prometheus-tools.js';

let dir: { path: string; remove(): Promise<void> };
let xcryptHash: string; // password "correct horse"
let jsHash: string; // password "s3cret:with:colons"
const servers: Server[] = [];

function openssl(args: string[]): void {
  execFileSync('openssl', args, { cwd: dir.path, stdio: 'pipe' });
}

beforeAll(async () => {
  dir = await tempDir('webcfg');
  const selfSigned = (name: string, cn: string) =>
    openssl([
      'req', '-x509', '-newkey', 'ec', '-pkeyopt', 'ec_paramgen_curve:prime256v1', '-nodes',
      '-keyout', `${name}.key`, '-out', `${name}.crt`, '-days', '2', '-subj', `/CN=${cn}`,
      '-addext', 'subjectAltName=IP:127.0.0.1',
    ]);
  selfSigned('server', 'localhost');
  selfSigned('client', 'scraper');
  xcryptHash = execFileSync(
    '/usr/bin/python3',
    ['-W', 'ignore', '-c', "import crypt; print(crypt.crypt('correct horse', crypt.mksalt(crypt.METHOD_BLOWFISH, rounds=1<<5)))"],
    { encoding: 'utf8' },
  ).trim();
  jsHash = bcrypt.hashSync('s3cret:with:colons', 10);
});

afterAll(async () => {
  for (const s of servers) {
    s.closeAllConnections();
    s.close();
  }
  await dir?.remove();
});

async function file(name: string, text: string): Promise<string> {
  const p = join(dir.path, name);
  await writeFile(p, text);
  return p;
}

describe('files the loader accepts, promtool accepts', () => {
  const valid: Record<string, () => string> = {
    'empty.yml': () => '',
    'auth-only.yml': () => `basic_auth_users:\n  alice: '${xcryptHash}'\n  bob: '${jsHash}'\n`,
    'tls.yml': () =>
      [
        'tls_server_config:',
        '  cert_file: server.crt',
        '  key_file: server.key',
        '  min_version: TLS12',
        '  max_version: TLS13',
        'http_server_config:',
        '  headers:',
        '    X-Frame-Options: deny',
        'basic_auth_users:',
        `  alice: '${xcryptHash}'`,
        '',
      ].join('\n'),
    'mtls.yml': () =>
      [
        'tls_server_config:',
        '  cert_file: server.crt',
        '  key_file: server.key',
        '  client_auth_type: RequireAndVerifyClientCert',
        '  client_ca_file: client.crt',
        '',
      ].join('\n'),
  };
  for (const [name, text] of Object.entries(valid)) {
    it(name, async () => {
      const p = await file(name, text());
      const cfg = await loadWebConfig(p);
      const check = await promtool(['check', 'web-config', p]);
      expect(check.code, check.stdout + check.stderr).toBe(0);
      expect(check.stdout + check.stderr).toContain('SUCCESS');
      if (name === 'tls.yml') {
        expect(cfg.tls?.minVersion).toBe('TLSv1.2');
        expect(cfg.tls?.requestClientCert).toBe(false);
        expect(cfg.tls?.cert.toString()).toContain('BEGIN CERTIFICATE');
        expect(cfg.headers).toEqual({ 'X-Frame-Options': 'deny' });
        expect([...cfg.users.keys()]).toEqual(['alice']);
      }
      if (name === 'mtls.yml') {
        expect(cfg.tls?.requestClientCert).toBe(true);
        expect(cfg.tls?.ca?.toString()).toContain('BEGIN CERTIFICATE');
      }
      if (name === 'empty.yml') expect(cfg.users.size).toBe(0);
    });
  }
});

describe('bad files are rejected with the key named', () => {
  // `promtoolToo`: promtool 2.42 refuses the same file (its own rule); the others are modewatch's stricter checks.
  const bad: { name: string; text: () => string; key: RegExp; promtoolToo: boolean }[] = [
    { name: 'no-key.yml', text: () => 'tls_server_config:\n  cert_file: server.crt\n', key: /tls_server_config\.key_file: missing/, promtoolToo: true },
    { name: 'no-cert-file.yml', text: () => 'tls_server_config:\n  cert_file: nothere.crt\n  key_file: server.key\n', key: /tls_server_config\.cert_file: cannot read .*nothere\.crt/, promtoolToo: true },
    { name: 'plain-password.yml', text: () => 'basic_auth_users:\n  alice: hunter2\n', key: /basic_auth_users\.alice: must be a bcrypt hash/, promtoolToo: true },
    { name: 'unknown-top.yml', text: () => 'tls_config:\n  cert_file: a\n', key: /tls_config: unknown key/, promtoolToo: true },
    { name: 'bad-auth-type.yml', text: () => 'tls_server_config:\n  cert_file: server.crt\n  key_file: server.key\n  client_auth_type: Sometimes\n', key: /tls_server_config\.client_auth_type: must be one of/, promtoolToo: true },
    { name: 'bad-version.yml', text: () => 'tls_server_config:\n  cert_file: server.crt\n  key_file: server.key\n  min_version: TLS9\n', key: /tls_server_config\.min_version: must be one of/, promtoolToo: true },
    { name: 'ca-without-policy.yml', text: () => 'tls_server_config:\n  cert_file: server.crt\n  key_file: server.key\n  client_ca_file: client.crt\n', key: /tls_server_config\.client_ca_file: set, but client_auth_type/, promtoolToo: true },
    { name: 'key-not-pem.yml', text: () => 'tls_server_config:\n  cert_file: server.crt\n  key_file: auth-only.yml\n', key: /tls_server_config\.key_file: is not a PEM private key/, promtoolToo: true },
    { name: 'verify-without-ca.yml', text: () => 'tls_server_config:\n  cert_file: server.crt\n  key_file: server.key\n  client_auth_type: VerifyClientCertIfGiven\n', key: /tls_server_config\.client_ca_file: required/, promtoolToo: false },
    { name: 'colon-user.yml', text: () => `basic_auth_users:\n  'a:b': '${jsHash}'\n`, key: /basic_auth_users\.a:b: user names/, promtoolToo: false },
    { name: 'not-yaml.yml', text: () => 'basic_auth_users: [unclosed\n', key: /not valid YAML/, promtoolToo: true },
  ];
  for (const b of bad) {
    it(b.name, async () => {
      const p = await file(b.name, b.text());
      const err = await loadWebConfig(p).then(
        () => null,
        (e: unknown) => e,
      );
      expect(err).toBeInstanceOf(WebConfigError);
      expect((err as Error).message).toMatch(b.key);
      expect((err as Error).message).toContain(p);
      if (b.promtoolToo) {
        const check = await promtool(['check', 'web-config', p]);
        expect(check.code, check.stdout + check.stderr).not.toBe(0);
      }
    });
  }
});

describe('checkBasicAuth', () => {
  it('accepts right credentials (libxcrypt and bcryptjs hashes) and refuses wrong ones', async () => {
    const users = new Map([
      ['alice', xcryptHash],
      ['bob', jsHash],
    ]);
    expect(await checkBasicAuth(users, basic('alice', 'correct horse'))).toBe(true);
    expect(await checkBasicAuth(users, basic('bob', 's3cret:with:colons'))).toBe(true);
    expect(await checkBasicAuth(users, basic('alice', 'correct horse '))).toBe(false);
    expect(await checkBasicAuth(users, basic('bob', 's3cret'))).toBe(false);
    expect(await checkBasicAuth(users, basic('carol', 'correct horse'))).toBe(false);
    expect(await checkBasicAuth(users, undefined)).toBe(false);
    expect(await checkBasicAuth(users, 'Bearer abc')).toBe(false);
    expect(await checkBasicAuth(users, 'Basic !!!')).toBe(false);
    expect(await checkBasicAuth(new Map(), undefined)).toBe(true); // no users: no authentication
  });

  it('caches a successful verification, and a wrong password after it still fails', async () => {
    const users = new Map([['bob', jsHash]]);
    const t0 = performance.now();
    expect(await checkBasicAuth(users, basic('bob', 's3cret:with:colons'))).toBe(true);
    const first = performance.now() - t0;
    const t1 = performance.now();
    for (let i = 0; i < 20; i++) expect(await checkBasicAuth(users, basic('bob', 's3cret:with:colons'))).toBe(true);
    const twenty = performance.now() - t1;
    expect(twenty).toBeLessThan(first); // 20 cached checks cost less than one bcrypt (cost 10)
    expect(await checkBasicAuth(users, basic('bob', 'nope'))).toBe(false);
    // A reloaded config with a new hash for the same user is not fooled by the cache.
    const reloaded = new Map([['bob', bcrypt.hashSync('new password', 4)]]);
    expect(await checkBasicAuth(reloaded, basic('bob', 's3cret:with:colons'))).toBe(false);
  });
});

type Handler = (req: IncomingMessage, res: ServerResponse) => void;

function guarded(users: Map<string, string>, extra?: (req: IncomingMessage) => boolean): Handler {
  return (req, res) => {
    void checkBasicAuth(users, req.headers.authorization).then((ok) => {
      if (extra && !extra(req)) {
        res.writeHead(403).end('client certificate refused\n');
      } else if (!ok) {
        res.writeHead(401, { 'www-authenticate': 'Basic realm="modewatch"' }).end('unauthorized\n');
      } else {
        res.writeHead(200, { 'content-type': 'text/plain' }).end('modewatch_up 1\n');
      }
    });
  };
}

async function listen(s: Server): Promise<number> {
  servers.push(s);
  s.listen(0, '127.0.0.1');
  await once(s, 'listening');
  return (s.address() as AddressInfo).port;
}

function httpsGet(
  port: number,
  opts: { auth?: string; ca: Buffer; cert?: Buffer; key?: Buffer },
): Promise<number> {
  return new Promise((resolve, reject) => {
    const req = httpsRequest(
      {
        host: '127.0.0.1',
        port,
        path: '/metrics',
        ca: opts.ca,
        cert: opts.cert,
        key: opts.key,
        headers: opts.auth ? { authorization: opts.auth } : {},
        timeout: 5000,
      },
      (res) => {
        res.resume();
        resolve(res.statusCode ?? 0);
      },
    );
    req.on('error', reject);
    req.on('timeout', () => req.destroy(new Error('timeout')));
    req.end();
  });
}

describe('servers built with the loaded config', () => {
  it('plain http with basic auth: 401 without or with wrong credentials, 200 with right ones', async () => {
    const cfg = await loadWebConfig(await file('srv-auth.yml', `basic_auth_users:\n  alice: '${xcryptHash}'\n`));
    const port = await listen(createHttpServer(guarded(cfg.users)));
    const get = async (auth?: string) => {
      const res = await fetch(`http://127.0.0.1:${port}/metrics`, { headers: auth ? { authorization: auth } : {} });
      await res.text();
      return res.status;
    };
    expect(await get()).toBe(401);
    expect(await get(basic('alice', 'wrong'))).toBe(401);
    expect(await get(basic('mallory', 'correct horse'))).toBe(401);
    expect(await get(basic('alice', 'correct horse'))).toBe(200);
  });

  it('https with basic auth', async () => {
    const cfg = await loadWebConfig(join(dir.path, 'tls.yml'));
    const port = await listen(createHttpsServer(httpsServerOptions(cfg.tls!), guarded(cfg.users)));
    const ca = cfg.tls!.cert; // self-signed: the server certificate is its own trust anchor
    expect(await httpsGet(port, { ca })).toBe(401);
    expect(await httpsGet(port, { ca, auth: basic('alice', 'nope') })).toBe(401);
    expect(await httpsGet(port, { ca, auth: basic('alice', 'correct horse') })).toBe(200);
  });

  it('https requiring a verified client certificate refuses clients without one', async () => {
    const cfg = await loadWebConfig(join(dir.path, 'mtls.yml'));
    const tls = cfg.tls!;
    const port = await listen(
      createHttpsServer(
        httpsServerOptions(tls),
        guarded(cfg.users, (req) => clientCertAllowed(tls, req.socket as TLSSocket)),
      ),
    );
    const ca = tls.cert;
    await expect(httpsGet(port, { ca })).rejects.toThrow();
    const cert = await readFile(join(dir.path, 'client.crt'));
    const key = await readFile(join(dir.path, 'client.key'));
    expect(await httpsGet(port, { ca, cert, key })).toBe(200);
  });
});

function basic(user: string, pass: string): string {
  return `Basic ${Buffer.from(`${user}:${pass}`).toString('base64')}`;
}
