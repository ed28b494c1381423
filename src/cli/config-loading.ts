/** Loading the configuration file for commands that only need per-stream settings (replay). */
import { loadConfig, resolveStreamSettings } from '../config/index.js';
import { formatProblem } from '../config/problems.js';
import type { ScaleName } from '../math/scale.js';
import type { SettingsResolver } from '../streams/stream-registry.js';
import { UsageError } from './usage-error.js';

/**
 * The per-stream settings of a configuration file. `scale` (the --scale flag) applies to streams whose
 * settings do not name a scale of their own.
 */
export async function loadStreamSettings(path: string, scale: ScaleName | 'auto'): Promise<SettingsResolver> {
  const r = loadConfig(path, process.env, {}, { command: 'replay' });
  if (!r.ok) throw new UsageError(`${path} has ${r.problems.length} problem(s):\n` + r.problems.map((p) => '  ' + formatProblem(path, p)).join('\n'));
  const resolve = resolveStreamSettings(r.config);
  const rules = r.config.streams.rules;
  const defaultsNameScale = r.config.streams.defaults.scale !== undefined;
  return (stream) => {
    const s = resolve(stream);
    const rule = rules.find((x) => x.regex.test(stream));
    const named = rule !== undefined ? rule.settings.scale !== undefined || defaultsNameScale : defaultsNameScale;
    return named ? s : { monitor: { ...s.monitor, scale } };
  };
}
