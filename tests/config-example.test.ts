/** The example configuration: the embedded copy is example.yaml, and it passes the loader's checks. */
import { existsSync, readFileSync, writeFileSync } from 'node:fs';
import { fileURLToPath } from 'node:url';
import { describe, expect, it } from 'vitest';
import { loadConfig } from '../src/config/load-config.js';

const yamlPath = fileURLToPath(new URL('../src/config/example.yaml', import.meta.url));
const tsPath = fileURLToPath(new URL('../src/config/example.ts', import.meta.url));

/** The text of src/config/example.ts for a given example.yaml. */
function exampleModule(yaml: string): string {
  if (yaml.includes('`') || yaml.includes('${')) throw new Error('example.yaml must not contain a backtick or ${ (it is embedded in a template literal)');
  return `/**
 * The commented example configuration, embedded so that the built CLI can print it (tsc does not copy
 * example.yaml into dist). Generated from src/config/example.yaml, which is the one to edit; then run
 *   UPDATE_CONFIG_EXAMPLE=1 npx vitest run tests/config-example.test.ts
 * (that test fails while the two differ).
 */
export const EXAMPLE_CONFIG: string = String.raw\`${yaml}\`;
`;
}

describe('example configuration', () => {
  const yaml = readFileSync(yamlPath, 'utf8');
  if (process.env.UPDATE_CONFIG_EXAMPLE === '1') writeFileSync(tsPath, exampleModule(yaml));

  it('example.ts is generated from example.yaml and embeds the same text', async () => {
    expect(existsSync(tsPath)).toBe(true);
    expect(readFileSync(tsPath, 'utf8')).toBe(exampleModule(yaml));
    const { EXAMPLE_CONFIG } = await import('../src/config/example.js');
    expect(EXAMPLE_CONFIG).toBe(yaml);
  });

  it('loads with no problems, as for `modewatch run`, with an empty environment', () => {
    const r = loadConfig(yamlPath, {}, {}, { command: 'run' });
    expect(r.ok ? [] : r.problems).toEqual([]);
    if (!r.ok) return;
    expect(r.config.kafka?.topics.map((t) => t.name)).toEqual(['checkout-latency', 'payments-latency']);
    expect(r.config.streams.rules).toHaveLength(2);
    expect(r.config.alerts.sinks.map((s) => s.type)).toEqual(['log', 'alertmanager', 'webhook', 'kafka']);
  });
});
