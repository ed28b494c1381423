/**
 * Per-stream settings: the defaults, then the first rule whose pattern matches the stream name.
 * Every rule's merged MonitorConfig is built and validated when the file is loaded (load-config.ts), so a
 * stream seen hours later cannot meet a bad rule; resolving is then a scan of compiled patterns.
 */
import type { MonitorConfig } from '../detect/monitor-config.js';
import type { ModewatchConfig } from './schema.js';

/**
 * A glob on the whole stream name: `*` matches any run of characters (':' and '.' included), `?` exactly one;
 * everything else stands for itself.
 */
export function globToRegExp(glob: string): RegExp {
  let src = '^';
  for (const ch of glob) {
    if (ch === '*') src += '[\\s\\S]*';
    else if (ch === '?') src += '[\\s\\S]';
    else src += ch.replace(/[.*+?^${}()|[\]\\/]/g, '\\$&');
  }
  return new RegExp(src + '$', 'u');
}

/** Index of the first rule matching the stream, or -1 when the defaults apply. */
export function matchingRule(config: ModewatchConfig, stream: string): number {
  const rules = config.streams.rules;
  for (let i = 0; i < rules.length; i++) if (rules[i].regex.test(stream)) return i;
  return -1;
}

/**
 * The resolver the stream registry takes (SettingsResolver in src/streams/stream-registry.ts). Streams matched
 * by the same rule share one MonitorConfig object (read-only by contract), which keeps 100k streams cheap.
 */
export function resolveStreamSettings(config: ModewatchConfig): (stream: string) => { monitor: MonitorConfig } {
  const fallback = { monitor: config.streams.monitor };
  const byRule = config.streams.rules.map((r) => ({ monitor: r.monitor }));
  return (stream: string) => {
    const i = matchingRule(config, stream);
    return i < 0 ? fallback : byRule[i];
  };
}
