import { readFileSync, writeFileSync, mkdtempSync, rmSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { describe, expect, it } from 'vitest';
import YAML from 'yaml';
import { loadConfig } from '../src/config/index.js';

/** The deploy kit's configurations must load with the daemon's own loader, for the command they are for. */
describe('deploy kit configurations', () => {
  it('deploy/modewatch.example.yaml loads for `run`', () => {
    const r = loadConfig(new URL('../deploy/modewatch.example.yaml', import.meta.url).pathname, {}, {}, { command: 'run' });
    expect(r.ok ? [] : r.problems).toEqual([]);
  });

  it('the Kubernetes ConfigMap carries a configuration that loads for `run`', () => {
    const cm = YAML.parse(readFileSync(new URL('../deploy/kubernetes/configmap.yaml', import.meta.url), 'utf8')) as { data: Record<string, string> };
    const dir = mkdtempSync(join(tmpdir(), 'modewatch-cm-'));
    try {
      const file = join(dir, 'modewatch.yaml');
      writeFileSync(file, cm.data['modewatch.yaml']);
      const r = loadConfig(file, {}, {}, { command: 'run' });
      expect(r.ok ? [] : r.problems).toEqual([]);
    } finally {
      rmSync(dir, { recursive: true, force: true });
    }
  });
});
