/** Loading the configuration file for commands that only need per-stream settings (replay). */
import type { ScaleName } from '../math/scale.js';
import type { SettingsResolver } from '../streams/stream-registry.js';
import { defaultResolver } from './replay.js';
import { UsageError } from './usage-error.js';

export async function loadStreamSettings(path: string, scale: ScaleName | 'auto'): Promise<SettingsResolver> {
  void path;
  void scale;
  throw new UsageError('--config is not wired yet');
}
export { defaultResolver };
