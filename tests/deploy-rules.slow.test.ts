// The Prometheus side of the deploy kit, checked with the real tools (Debian prometheus 2.42,
// prometheus-alertmanager 0.25): config and rules pass promtool, the rule unit tests pass,
// a real Prometheus loads them, and the Alertmanager config passes amtool.
import { cp } from 'node:fs/promises';
import { readFileSync } from 'node:fs';
import { join } from 'node:path';
import { parse } from 'yaml';
import { afterAll, describe, expect, it } from 'vitest';
import {
  knownMetricNames,
  modewatchNamesIn,
  promtool,
  run,
  startPrometheus,
  tempDir,
  type RunningServer,
} from './support/prometheus-tools.js';

const PROM_DIR = 'deploy/prometheus';
const RULES = join(PROM_DIR, 'modewatch-rules.yml');

interface Rule {
  alert?: string;
  record?: string;
  expr: string;
  for?: string;
  labels?: Record<string, string>;
  annotations?: Record<string, string>;
}
const rules = parse(readFileSync(RULES, 'utf8')) as { groups: { name: string; rules: Rule[] }[] };
const allRules = rules.groups.flatMap((g) => g.rules);

describe('deploy/prometheus with promtool', () => {
  it('promtool check config accepts prometheus.yml and finds the rule file', async () => {
    const r = await promtool(['check', 'config', join(PROM_DIR, 'prometheus.yml')]);
    expect(r.code, r.stdout + r.stderr).toBe(0);
    expect(r.stdout + r.stderr).toContain('1 rule files found');
  });

  it('promtool check rules accepts every rule', async () => {
    const r = await promtool(['check', 'rules', RULES]);
    expect(r.code, r.stdout + r.stderr).toBe(0);
    expect(r.stdout + r.stderr).toContain(`SUCCESS: ${allRules.length} rules found`);
  });

  it('promtool test rules passes the unit tests', async () => {
    const r = await promtool(['test', 'rules', 'modewatch-rules.test.yml'], PROM_DIR);
    expect(r.code, r.stdout + r.stderr).toBe(0);
    expect(r.stdout + r.stderr).toContain('SUCCESS');
  });

  it('every alert has a unit test where it fires, and says what and how bad', () => {
    const tests = parse(readFileSync(join(PROM_DIR, 'modewatch-rules.test.yml'), 'utf8')) as {
      tests: { alert_rule_test?: { alertname: string; exp_alerts: unknown[] }[] }[];
    };
    const fired = new Set(
      tests.tests.flatMap((t) => (t.alert_rule_test ?? []).filter((a) => a.exp_alerts.length > 0).map((a) => a.alertname)),
    );
    const alerts = allRules.filter((r) => r.alert);
    expect(alerts.length).toBeGreaterThanOrEqual(9);
    for (const a of alerts) {
      expect(fired.has(a.alert!), `${a.alert} has no firing unit test`).toBe(true);
      expect(['page', 'warning']).toContain(a.labels?.severity);
      expect(a.annotations?.summary, a.alert).toBeTruthy();
      expect(a.annotations?.description, a.alert).toBeTruthy();
    }
    // The health concerns the kit promises to cover.
    const names = alerts.map((a) => a.alert);
    for (const want of [
      'ModewatchDown',
      'ModewatchNotReady',
      'ModewatchCheckpointTooOld',
      'ModewatchSinkDeliveryFailing',
      'ModewatchStreamCapReached',
      'ModewatchConsumerLagGrowing',
    ]) {
      expect(names).toContain(want);
    }
  });

  it('rules use only metric names modewatch exposes (and Prometheus\'s own `up`)', async () => {
    const known = await knownMetricNames();
    for (const r of allRules) {
      for (const name of modewatchNamesIn(r.expr)) expect(known.has(name), `${name} in ${r.alert ?? r.record}`).toBe(true);
      const bare = r.expr.match(/(?<![\w:])[a-z_][a-z0-9_]*(?=\s*[{[])/g) ?? [];
      for (const name of bare) {
        if (name.startsWith('modewatch_')) continue;
        // PromQL functions and aggregations are followed by "(", not "{" or "["; only `up` is allowed here.
        expect(name, `${name} in ${r.alert ?? r.record}`).toBe('up');
      }
    }
  });

  it('amtool check-config accepts deploy/alertmanager/alertmanager.yml', async () => {
    const r = await run('/usr/bin/amtool', ['check-config', 'deploy/alertmanager/alertmanager.yml']);
    expect(r.code, r.stdout + r.stderr).toBe(0);
  });
});

describe('a real Prometheus with the kit', () => {
  let prom: RunningServer | undefined;
  let dir: { path: string; remove(): Promise<void> } | undefined;
  afterAll(async () => {
    await prom?.stop();
    await dir?.remove();
  });

  it('loads the configuration and every rule group', async () => {
    dir = await tempDir('kit');
    await cp(RULES, join(dir.path, 'modewatch-rules.yml'));
    const cfg = parse(readFileSync(join(PROM_DIR, 'prometheus.yml'), 'utf8')) as { rule_files: string[] };
    cfg.rule_files = [join(dir.path, 'modewatch-rules.yml')];
    prom = await startPrometheus(JSON.stringify(cfg));
    const res = await fetch(`${prom.url}/api/v1/rules`);
    const body = (await res.json()) as { data: { groups: { name: string; rules: { name: string; health: string }[] }[] } };
    const groups = body.data.groups;
    expect(groups.map((g) => g.name).sort()).toEqual(rules.groups.map((g) => g.name).sort());
    expect(groups.flatMap((g) => g.rules)).toHaveLength(allRules.length);
    // Targets appear once service discovery ran (static configs: within a few seconds).
    type Targets = { data: { activeTargets: { labels: { job: string }; scrapeUrl: string }[] } };
    let mw: { scrapeUrl: string } | undefined;
    for (let i = 0; i < 100 && !mw; i++) {
      const targets = (await (await fetch(`${prom.url}/api/v1/targets`)).json()) as Targets;
      mw = targets.data.activeTargets.find((t) => t.labels.job === 'modewatch');
      if (!mw) await new Promise((r) => setTimeout(r, 100));
    }
    expect(mw?.scrapeUrl).toBe('http://modewatch:9471/metrics');
  });
});
