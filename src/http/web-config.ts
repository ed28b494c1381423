/**
 * The web configuration file that Prometheus exporters share (the exporter-toolkit
 * "web-config" format, also read by `promtool check web-config`):
 *
 *   tls_server_config:      # optional: serve HTTPS
 *     cert_file: server.crt # paths relative to this file
 *     key_file: server.key
 *     client_auth_type: RequireAndVerifyClientCert   # optional, default NoClientCert
 *     client_ca_file: ca.crt                         # required by the Verify* types here
 *     min_version: TLS12                              # optional: TLS10..TLS13
 *     max_version: TLS13                              # optional
 *   http_server_config:     # optional
 *     headers: { X-Frame-Options: deny }
 *     http2: true           # accepted for compatibility with the format; not used by modewatch
 *   basic_auth_users:       # optional: user -> bcrypt hash
 *     prometheus: $2y$10$...
 *
 * loadWebConfig() validates it and reads the files; every error names the file and the key.
 * checkBasicAuth() checks an Authorization header against the users (RFC 7617 Basic).
 */
import { createHmac, randomBytes, timingSafeEqual } from 'node:crypto';
import { readFile } from 'node:fs/promises';
import type { TLSSocket } from 'node:tls';
import { dirname, resolve } from 'node:path';
import bcrypt from 'bcryptjs';
import { parse as parseYaml } from 'yaml';

export type ClientAuthType =
  | 'NoClientCert'
  | 'RequestClientCert'
  | 'RequireAnyClientCert'
  | 'VerifyClientCertIfGiven'
  | 'RequireAndVerifyClientCert';

const CLIENT_AUTH_TYPES: readonly ClientAuthType[] = [
  'NoClientCert',
  'RequestClientCert',
  'RequireAnyClientCert',
  'VerifyClientCertIfGiven',
  'RequireAndVerifyClientCert',
];

type TlsVersion = 'TLSv1' | 'TLSv1.1' | 'TLSv1.2' | 'TLSv1.3';
const TLS_VERSIONS: Record<string, TlsVersion> = {
  TLS10: 'TLSv1',
  TLS11: 'TLSv1.1',
  TLS12: 'TLSv1.2',
  TLS13: 'TLSv1.3',
};

export interface WebTlsConfig {
  cert: Buffer;
  key: Buffer;
  ca?: Buffer;
  /** Ask clients for a certificate during the handshake. */
  requestClientCert: boolean;
  clientAuth: ClientAuthType;
  minVersion?: TlsVersion;
  maxVersion?: TlsVersion;
}

export interface WebConfig {
  tls?: WebTlsConfig;
  /** user -> bcrypt hash; empty means no authentication. */
  users: Map<string, string>;
  /** Extra response headers from http_server_config.headers. */
  headers: Record<string, string>;
}

export class WebConfigError extends Error {
  constructor(
    readonly file: string,
    readonly key: string | null,
    detail: string,
  ) {
    super(key ? `web config ${file}: ${key}: ${detail}` : `web config ${file}: ${detail}`);
    this.name = 'WebConfigError';
  }
}

/** bcrypt modular-crypt hash: $2a$/$2b$/$2y$, two-digit cost, 22 salt + 31 hash chars. */
const BCRYPT_HASH = /^\$2[aby]\$(0[4-9]|[12][0-9]|3[01])\$[./A-Za-z0-9]{53}$/;

function isRecord(v: unknown): v is Record<string, unknown> {
  return typeof v === 'object' && v !== null && !Array.isArray(v);
}

/** Load and validate a web configuration file. */
export async function loadWebConfig(path: string): Promise<WebConfig> {
  let text: string;
  try {
    text = await readFile(path, 'utf8');
  } catch (err) {
    throw new WebConfigError(path, null, `cannot read: ${(err as NodeJS.ErrnoException).code ?? String(err)}`);
  }
  let doc: unknown;
  try {
    doc = parseYaml(text, { uniqueKeys: true });
  } catch (err) {
    throw new WebConfigError(path, null, `not valid YAML: ${(err as Error).message}`);
  }
  if (doc === null || doc === undefined) return { users: new Map(), headers: {} };
  if (!isRecord(doc)) throw new WebConfigError(path, null, 'must be a mapping at the top level');
  const err = (key: string, detail: string) => new WebConfigError(path, key, detail);

  for (const k of Object.keys(doc)) {
    if (!['tls_server_config', 'http_server_config', 'basic_auth_users'].includes(k)) {
      throw err(k, 'unknown key (expected tls_server_config, http_server_config, basic_auth_users)');
    }
  }

  const baseDir = dirname(resolve(path));
  const readRelative = async (key: string, file: unknown): Promise<Buffer> => {
    if (typeof file !== 'string' || file === '') throw err(key, 'must be a file path');
    const full = resolve(baseDir, file);
    try {
      return await readFile(full);
    } catch (e) {
      throw err(key, `cannot read ${full}: ${(e as NodeJS.ErrnoException).code ?? String(e)}`);
    }
  };

  let tls: WebTlsConfig | undefined;
  const t = doc.tls_server_config;
  if (t !== undefined && t !== null) {
    if (!isRecord(t)) throw err('tls_server_config', 'must be a mapping');
    const known = ['cert_file', 'key_file', 'client_auth_type', 'client_ca_file', 'min_version', 'max_version'];
    for (const k of Object.keys(t)) {
      if (!known.includes(k)) {
        throw err(`tls_server_config.${k}`, `not supported by modewatch (supported: ${known.join(', ')})`);
      }
    }
    if (t.cert_file === undefined) throw err('tls_server_config.cert_file', 'missing (required with tls_server_config)');
    if (t.key_file === undefined) throw err('tls_server_config.key_file', 'missing (required with tls_server_config)');
    const clientAuth = (t.client_auth_type ?? 'NoClientCert') as ClientAuthType;
    if (!CLIENT_AUTH_TYPES.includes(clientAuth)) {
      throw err('tls_server_config.client_auth_type', `must be one of ${CLIENT_AUTH_TYPES.join(', ')}`);
    }
    const verifies = clientAuth === 'VerifyClientCertIfGiven' || clientAuth === 'RequireAndVerifyClientCert';
    if (t.client_ca_file !== undefined && clientAuth === 'NoClientCert') {
      throw err('tls_server_config.client_ca_file', 'set, but client_auth_type asks for no client certificate');
    }
    if (verifies && t.client_ca_file === undefined) {
      throw err('tls_server_config.client_ca_file', `required when client_auth_type is ${clientAuth}`);
    }
    const version = (key: 'min_version' | 'max_version'): TlsVersion | undefined => {
      const v = t[key];
      if (v === undefined) return undefined;
      const mapped = typeof v === 'string' ? TLS_VERSIONS[v] : undefined;
      if (!mapped) throw err(`tls_server_config.${key}`, `must be one of ${Object.keys(TLS_VERSIONS).join(', ')}`);
      return mapped;
    };
    const minVersion = version('min_version');
    const maxVersion = version('max_version');
    if (minVersion && maxVersion && minVersion > maxVersion) {
      throw err('tls_server_config.max_version', 'is below min_version');
    }
    tls = {
      cert: await readRelative('tls_server_config.cert_file', t.cert_file),
      key: await readRelative('tls_server_config.key_file', t.key_file),
      requestClientCert: clientAuth !== 'NoClientCert',
      clientAuth,
    };
    if (t.client_ca_file !== undefined) tls.ca = await readRelative('tls_server_config.client_ca_file', t.client_ca_file);
    if (minVersion) tls.minVersion = minVersion;
    if (maxVersion) tls.maxVersion = maxVersion;
    if (!/-----BEGIN CERTIFICATE-----/.test(tls.cert.toString('latin1'))) {
      throw err('tls_server_config.cert_file', 'is not a PEM certificate');
    }
    if (!/-----BEGIN [A-Z ]*PRIVATE KEY-----/.test(tls.key.toString('latin1'))) {
      throw err('tls_server_config.key_file', 'is not a PEM private key');
    }
  }

  const headers: Record<string, string> = {};
  const h = doc.http_server_config;
  if (h !== undefined && h !== null) {
    if (!isRecord(h)) throw err('http_server_config', 'must be a mapping');
    for (const k of Object.keys(h)) {
      if (k !== 'headers' && k !== 'http2') throw err(`http_server_config.${k}`, 'unknown key (expected headers, http2)');
    }
    if (h.http2 !== undefined && typeof h.http2 !== 'boolean') throw err('http_server_config.http2', 'must be true or false');
    if (h.headers !== undefined && h.headers !== null) {
      if (!isRecord(h.headers)) throw err('http_server_config.headers', 'must be a mapping of header name to value');
      for (const [name, value] of Object.entries(h.headers)) {
        if (!/^[!#$%&'*+.^_`|~0-9A-Za-z-]+$/.test(name)) {
          throw err(`http_server_config.headers.${name}`, 'is not a valid header name');
        }
        if (typeof value !== 'string') throw err(`http_server_config.headers.${name}`, 'must be a string');
        headers[name] = value;
      }
    }
  }

  const users = new Map<string, string>();
  const u = doc.basic_auth_users;
  if (u !== undefined && u !== null) {
    if (!isRecord(u)) throw err('basic_auth_users', 'must be a mapping of user name to bcrypt hash');
    for (const [user, hash] of Object.entries(u)) {
      // Basic credentials split at the first colon (RFC 7617 section 2): such a user could never log in.
      if (user === '' || user.includes(':')) throw err(`basic_auth_users.${user}`, 'user names must be non-empty without ":"');
      if (typeof hash !== 'string' || !BCRYPT_HASH.test(hash)) {
        throw err(`basic_auth_users.${user}`, 'must be a bcrypt hash ($2a$, $2b$ or $2y$ with cost 04..31)');
      }
      users.set(user, hash);
    }
  }
  const out: WebConfig = { users, headers };
  if (tls) out.tls = tls;
  return out;
}

/** Node https.createServer options for a loaded TLS config. */
export function httpsServerOptions(tls: WebTlsConfig): {
  cert: Buffer;
  key: Buffer;
  ca?: Buffer;
  requestCert: boolean;
  rejectUnauthorized: boolean;
  minVersion?: TlsVersion;
  maxVersion?: TlsVersion;
} {
  const o: ReturnType<typeof httpsServerOptions> = {
    cert: tls.cert,
    key: tls.key,
    requestCert: tls.requestClientCert,
    // Node verifies and requires in one switch; the other policies are checked per request.
    rejectUnauthorized: tls.clientAuth === 'RequireAndVerifyClientCert',
  };
  if (tls.ca) o.ca = tls.ca;
  if (tls.minVersion) o.minVersion = tls.minVersion;
  if (tls.maxVersion) o.maxVersion = tls.maxVersion;
  return o;
}

/** Whether a request's TLS client certificate satisfies the policy (call per request). */
export function clientCertAllowed(tls: WebTlsConfig, socket: TLSSocket): boolean {
  const cert = socket.getPeerCertificate();
  const given = cert !== null && typeof cert === 'object' && Object.keys(cert).length > 0;
  switch (tls.clientAuth) {
    case 'NoClientCert':
    case 'RequestClientCert':
      return true;
    case 'RequireAnyClientCert':
      return given;
    case 'VerifyClientCertIfGiven':
      return !given || socket.authorized;
    case 'RequireAndVerifyClientCert':
      return given && socket.authorized;
  }
}

// Successful verifications, per users map, per user: an HMAC of the password under a
// per-process key together with the hash it matched. A scrape then costs one HMAC, not a
// bcrypt run; changing the hash (reload) invalidates the entry.
const cacheKey = randomBytes(32);
const verified = new WeakMap<Map<string, string>, Map<string, { hash: string; mac: Buffer }>>();
let dummyHash: string | null = null;

function mac(user: string, password: string): Buffer {
  return createHmac('sha256', cacheKey).update(user).update('\0').update(password).digest();
}

/**
 * Check an `Authorization: Basic ...` header against the users (RFC 7617). With no users
 * configured every request passes. Unknown users still pay a bcrypt comparison so that
 * timing does not tell which user names exist.
 */
export async function checkBasicAuth(users: Map<string, string>, authorization: string | undefined): Promise<boolean> {
  if (users.size === 0) return true;
  if (!authorization) return false;
  const m = /^Basic[ ]+([A-Za-z0-9+/=]+)\s*$/i.exec(authorization);
  if (!m) return false;
  const decoded = Buffer.from(m[1], 'base64').toString('utf8');
  const colon = decoded.indexOf(':');
  if (colon < 0) return false;
  const user = decoded.slice(0, colon);
  const password = decoded.slice(colon + 1);
  const hash = users.get(user);
  if (hash === undefined) {
    dummyHash ??= bcrypt.hashSync('modewatch-no-such-user', 10);
    await bcrypt.compare(password, dummyHash);
    return false;
  }
  let perUser = verified.get(users);
  if (!perUser) {
    perUser = new Map();
    verified.set(users, perUser);
  }
  const tag = mac(user, password);
  const cached = perUser.get(user);
  if (cached && cached.hash === hash && timingSafeEqual(cached.mac, tag)) return true;
  const ok = await bcrypt.compare(password, hash);
  if (ok) perUser.set(user, { hash, mac: tag });
  return ok;
}
