/**
 * The daemon's HTTP(S) endpoint: /metrics for Prometheus, /healthz and /readyz for the
 * orchestrator, a JSON API over the streams, an operator re-baseline, and the web page.
 *
 * TLS, client certificates, basic auth and extra headers come from the exporter web configuration
 * (web-config.ts). /healthz and /readyz answer without credentials so that liveness and readiness
 * probes need none (they reveal nothing about the streams); everything else asks for them when
 * users are configured. Requests are bounded (header size, body size, time) and a bad request is
 * answered, never thrown: 400 for an unreadable URL, 404 for an unknown path or stream, 405 with
 * Allow for a wrong method, 413 for a body that is too large.
 */
import { createServer as createHttpServer, type IncomingMessage, type Server, type ServerResponse } from 'node:http';
import { createServer as createHttpsServer } from 'node:https';
import type { AddressInfo } from 'node:net';
import type { TLSSocket } from 'node:tls';
import { promisify } from 'node:util';
import { gzip as gzipCb } from 'node:zlib';
import type { DaemonHealth } from '../export/daemon-health.js';
import { EXPOSITION_CONTENT_TYPE, MetricsExporter } from '../export/render-metrics.js';
import type { StreamEntry, StreamRegistry } from '../streams/stream-registry.js';
import { PAGE_SCRIPT } from './page/app-script.js';
import { PAGE_STYLE } from './page/app-style.js';
import { FAVICON_SVG, pageHtml } from './page/app-html.js';
import { streamDetail, streamSummary, type StreamSummary } from './stream-views.js';
import { checkBasicAuth, clientCertAllowed, httpsServerOptions, type WebConfig } from './web-config.js';

const gzip = promisify(gzipCb);

export interface HttpServerOptions {
  listen: { host: string; port: number };
  registry: StreamRegistry;
  health: DaemonHealth;
  webConfig?: WebConfig;
  /** URL under which users reach the daemon (e.g. behind a proxy at https://ops.example/modewatch/): its path prefixes every route. */
  externalUrl?: string;
  /** Exporter to use (default: a new MetricsExporter over registry and health). */
  exporter?: MetricsExporter;
  /** Called after an operator re-baselined a stream through the API (for the log). */
  onRebaseline?: (stream: string, remote: string) => void;
}

export interface RunningHttpServer {
  /** Where the server listens, with the path prefix: e.g. http://127.0.0.1:40123 */
  url: string;
  close(): Promise<void>;
}

/** Largest request body accepted (the only body is the empty one of a re-baseline). */
const MAX_BODY = 4096;
const PAGE_LIMIT_DEFAULT = 200;
const PAGE_LIMIT_MAX = 2000;

type Handler = (req: IncomingMessage, res: ServerResponse, params: string[]) => Promise<void> | void;
interface Route {
  pattern: RegExp;
  methods: Partial<Record<'GET' | 'POST', Handler>>;
  /** Answered without credentials. */
  open?: boolean;
}

/** The path prefix of an external URL, without a trailing slash ('' for none). */
export function basePathOf(externalUrl: string | undefined): string {
  if (externalUrl === undefined || externalUrl === '') return '';
  const p = new URL(externalUrl).pathname.replace(/\/+$/, '');
  return p === '/' ? '' : p;
}

export { streamPageUrl } from './links.js';

export async function startHttpServer(options: HttpServerOptions): Promise<RunningHttpServer> {
  const { registry, health, webConfig } = options;
  const exporter = options.exporter ?? new MetricsExporter(registry, health);
  const base = basePathOf(options.externalUrl);
  const users = webConfig?.users ?? new Map<string, string>();
  const tls = webConfig?.tls;
  const extraHeaders = webConfig?.headers ?? {};
  const html = pageHtml(base);
  const externalOrigin = options.externalUrl ? new URL(options.externalUrl).origin : null;

  const send = async (req: IncomingMessage, res: ServerResponse, status: number, type: string, body: string | Buffer, extra: Record<string, string> = {}) => {
    let payload = typeof body === 'string' ? Buffer.from(body, 'utf8') : body;
    const headers: Record<string, string | number> = { 'Content-Type': type, ...extra };
    if (payload.length > 1024 && /\bgzip\b/.test(String(req.headers['accept-encoding'] ?? ''))) {
      // zlib runs on the thread pool: a large /metrics body does not hold the event loop.
      payload = await gzip(payload);
      headers['Content-Encoding'] = 'gzip';
      headers['Vary'] = 'Accept-Encoding';
    }
    headers['Content-Length'] = payload.length;
    res.writeHead(status, headers);
    res.end(req.method === 'HEAD' ? undefined : payload);
  };
  const json = (req: IncomingMessage, res: ServerResponse, status: number, value: unknown) =>
    send(req, res, status, 'application/json; charset=utf-8', JSON.stringify(value), { 'Cache-Control': 'no-store' });
  const text = (req: IncomingMessage, res: ServerResponse, status: number, body: string, extra: Record<string, string> = {}) =>
    send(req, res, status, 'text/plain; charset=utf-8', body.endsWith('\n') ? body : body + '\n', extra);

  const lookup = (raw: string) => {
    let name: string;
    try {
      name = decodeURIComponent(raw);
    } catch {
      return undefined;
    }
    return registry.get(name);
  };

  const page: Handler = (req, res) =>
    send(req, res, 200, 'text/html; charset=utf-8', html, { 'Cache-Control': 'no-cache' });

  const routes: Route[] = [
    { pattern: /^\/$/, methods: { GET: page } },
    { pattern: /^\/streams\/([^/]+)$/, methods: { GET: page } },
    {
      pattern: /^\/assets\/app\.js$/,
      methods: { GET: (req, res) => send(req, res, 200, 'text/javascript; charset=utf-8', PAGE_SCRIPT, { 'Cache-Control': 'no-cache' }) },
    },
    {
      pattern: /^\/assets\/app\.css$/,
      methods: { GET: (req, res) => send(req, res, 200, 'text/css; charset=utf-8', PAGE_STYLE, { 'Cache-Control': 'no-cache' }) },
    },
    {
      pattern: /^\/favicon\.svg$/,
      methods: { GET: (req, res) => send(req, res, 200, 'image/svg+xml', FAVICON_SVG, { 'Cache-Control': 'max-age=86400' }) },
    },
    {
      pattern: /^\/metrics$/,
      methods: { GET: async (req, res) => send(req, res, 200, EXPOSITION_CONTENT_TYPE, await exporter.renderBuffer(), { 'Cache-Control': 'no-store' }) },
    },
    { pattern: /^\/healthz$/, open: true, methods: { GET: (req, res) => text(req, res, 200, 'ok') } },
    {
      pattern: /^\/readyz$/,
      open: true,
      methods: {
        GET: (req, res) => {
          if (health.ready()) return text(req, res, 200, 'ready');
          const reason = health.notReadyReason?.() ?? 'not ready';
          return text(req, res, 503, `not ready: ${reason}`);
        },
      },
    },
    {
      pattern: /^\/api\/streams$/,
      methods: {
        GET: (req, res) => {
          const q = new URL(req.url ?? '/', 'http://local').searchParams;
          const limit = clampInt(q.get('limit'), PAGE_LIMIT_DEFAULT, 1, PAGE_LIMIT_MAX);
          const offset = clampInt(q.get('offset'), 0, 0, Number.MAX_SAFE_INTEGER);
          const filter = (q.get('q') ?? '').slice(0, 200).toLowerCase();
          const all: StreamEntry[] = [];
          for (const e of registry.streams()) if (filter === '' || e.name.toLowerCase().includes(filter)) all.push(e);
          // Streams with active alerts first (firing before pending), then by name.
          const rank = (e: StreamEntry) => {
            let r = 0;
            for (const a of e.monitor.alerts()) r = Math.max(r, a.state === 'firing' ? 2 : 1);
            return r;
          };
          const ranked = all.map((e) => ({ e, r: rank(e) }));
          ranked.sort((a, b) => b.r - a.r || (a.e.name < b.e.name ? -1 : a.e.name > b.e.name ? 1 : 0));
          const streams: StreamSummary[] = ranked.slice(offset, offset + limit).map((x) => streamSummary(x.e));
          return json(req, res, 200, { total: registry.size, matched: all.length, offset, limit, streams });
        },
      },
    },
    {
      pattern: /^\/api\/streams\/([^/]+)$/,
      methods: {
        GET: (req, res, [name]) => {
          const e = lookup(name);
          if (e === undefined) return json(req, res, 404, { error: 'no such stream' });
          return json(req, res, 200, streamDetail(e));
        },
      },
    },
    {
      pattern: /^\/api\/streams\/([^/]+)\/rebaseline$/,
      methods: {
        POST: async (req, res, [name]) => {
          // A browser sends Origin on cross-site POSTs: refuse those, so a page elsewhere cannot use a logged-in operator's credentials.
          const origin = req.headers.origin;
          // Behind a proxy that rewrites Host, the external URL's origin is the page's origin.
          if (origin !== undefined && origin !== 'null' && !sameHost(origin, req.headers.host) && origin !== externalOrigin) {
            return json(req, res, 403, { error: 'cross-origin request refused' });
          }
          if (origin === 'null') return json(req, res, 403, { error: 'cross-origin request refused' });
          const body = await readBody(req, MAX_BODY);
          if (body === null) return json(req, res, 413, { error: `request body over ${MAX_BODY} bytes` });
          const e = lookup(name);
          if (e === undefined) return json(req, res, 404, { error: 'no such stream' });
          if (e.monitor.state === 'bootstrap') return json(req, res, 409, { error: 'the stream is still bootstrapping: there is no model to re-baseline yet' });
          e.monitor.rebaseline();
          options.onRebaseline?.(e.name, req.socket.remoteAddress ?? '');
          return json(req, res, 202, { stream: e.name, rebaselined: true });
        },
      },
    },
  ];

  const handle = async (req: IncomingMessage, res: ServerResponse): Promise<void> => {
    for (const [k, v] of Object.entries(extraHeaders)) res.setHeader(k, v);
    res.setHeader('X-Content-Type-Options', 'nosniff');
    res.setHeader('Content-Security-Policy', "default-src 'self'; img-src 'self' data:; style-src 'self'; script-src 'self'; frame-ancestors 'none'");
    res.setHeader('Referrer-Policy', 'no-referrer');

    let path: string;
    try {
      path = new URL(req.url ?? '/', 'http://local').pathname;
    } catch {
      return text(req, res, 400, 'bad request URL');
    }
    if (base !== '') {
      if (path === base) path = '/';
      else if (path.startsWith(base + '/')) path = path.slice(base.length);
      else return text(req, res, 404, 'not found');
    }
    if (tls !== undefined && tls.clientAuth !== 'NoClientCert' && !clientCertAllowed(tls, req.socket as TLSSocket)) {
      return text(req, res, 403, 'client certificate required or not trusted');
    }
    let route: Route | undefined;
    let params: string[] = [];
    for (const r of routes) {
      const m = r.pattern.exec(path);
      if (m) {
        route = r;
        params = m.slice(1);
        break;
      }
    }
    if (route?.open !== true && users.size > 0 && !(await checkBasicAuth(users, req.headers.authorization))) {
      return text(req, res, 401, 'authentication required', { 'WWW-Authenticate': 'Basic realm="modewatch", charset="UTF-8"' });
    }
    if (route === undefined) return text(req, res, 404, 'not found');
    const method = req.method === 'HEAD' ? 'GET' : req.method;
    const h = method === 'GET' || method === 'POST' ? route.methods[method] : undefined;
    if (h === undefined) {
      const allow = Object.keys(route.methods).flatMap((m) => (m === 'GET' ? ['GET', 'HEAD'] : [m])).join(', ');
      return text(req, res, 405, 'method not allowed', { Allow: allow });
    }
    await h(req, res, params);
  };

  const listener = (req: IncomingMessage, res: ServerResponse) => {
    handle(req, res).catch((err: unknown) => {
      if (!res.headersSent) {
        res.writeHead(500, { 'Content-Type': 'text/plain; charset=utf-8' });
        res.end(`internal error: ${err instanceof Error ? err.message : String(err)}\n`);
      } else res.destroy();
    });
  };

  const serverOptions = { maxHeaderSize: 16 * 1024, requestTimeout: 30_000, headersTimeout: 15_000 };
  const server: Server = tls === undefined ? createHttpServer(serverOptions, listener) : createHttpsServer({ ...serverOptions, ...httpsServerOptions(tls) }, listener);
  server.on('clientError', (_err, socket) => {
    if (socket.writable) socket.end('HTTP/1.1 400 Bad Request\r\nConnection: close\r\n\r\n');
    else socket.destroy();
  });
  await new Promise<void>((resolve, reject) => {
    server.once('error', reject);
    server.listen(options.listen.port, options.listen.host, () => {
      server.off('error', reject);
      resolve();
    });
  });
  const addr = server.address() as AddressInfo;
  const host = addr.family === 'IPv6' ? `[${addr.address}]` : addr.address;
  return {
    url: `${tls === undefined ? 'http' : 'https'}://${host}:${addr.port}${base}`,
    close: () =>
      new Promise<void>((resolve) => {
        server.close(() => resolve());
        server.closeAllConnections();
      }),
  };
}

function clampInt(v: string | null, dflt: number, min: number, max: number): number {
  if (v === null || !/^\d{1,15}$/.test(v)) return dflt;
  return Math.min(max, Math.max(min, Number(v)));
}

function sameHost(origin: string, host: string | undefined): boolean {
  try {
    return host !== undefined && new URL(origin).host === host;
  } catch {
    return false;
  }
}

/** The body as a Buffer, or null when it is longer than `limit` (the rest is not read). */
function readBody(req: IncomingMessage, limit: number): Promise<Buffer | null> {
  const declared = Number(req.headers['content-length'] ?? 0);
  if (declared > limit) return Promise.resolve(null);
  return new Promise((resolve, reject) => {
    const parts: Buffer[] = [];
    let size = 0;
    req.on('data', (d: Buffer) => {
      size += d.length;
      if (size > limit) {
        req.removeAllListeners('data');
        req.resume();
        resolve(null);
      } else parts.push(d);
    });
    req.on('end', () => resolve(Buffer.concat(parts)));
    req.on('error', reject);
  });
}
