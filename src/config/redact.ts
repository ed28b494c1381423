/**
 * A printable copy of the configuration: every Secret becomes "<redacted>", every RegExp its source, and the
 * password part of a URL's user information "<redacted>" too. Safe for logs, `config check` and the web page.
 */
import type { ModewatchConfig, Redacted, RedactedConfig } from './schema.js';
import { REDACTED, Secret } from './secret.js';

/** A URL with its password (user:password@) replaced; other strings unchanged. */
export function redactUrl(s: string): string {
  if (!/^[a-z][a-z0-9+.-]*:\/\/[^/?#]*@/i.test(s)) return s;
  try {
    const u = new URL(s);
    if (u.password === '') return s;
    u.password = 'redacted';
    return u.toString().replace(':redacted@', `:${REDACTED}@`);
  } catch {
    return s;
  }
}

function redact<T>(v: T): Redacted<T> {
  let out: unknown;
  if (v instanceof Secret) out = REDACTED;
  else if (v instanceof RegExp) out = v.source;
  else if (typeof v === 'string') out = redactUrl(v);
  else if (Array.isArray(v)) out = v.map((x: unknown) => redact(x));
  else if (typeof v === 'object' && v !== null) {
    const o: Record<string, unknown> = {};
    for (const [k, x] of Object.entries(v)) o[k] = redact(x);
    out = o;
  } else out = v;
  return out as Redacted<T>;
}

export function redactConfig(config: ModewatchConfig): RedactedConfig {
  return redact(config);
}
