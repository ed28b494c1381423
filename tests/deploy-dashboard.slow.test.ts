// The Grafana dashboard in deploy/grafana: well-formed, every variable declared, and every
// PromQL expression accepted by promtool 2.42 (Debian `prometheus`): each expression, with
// template variables replaced by literal values, becomes a recording rule in a temp file
// that `promtool check rules` must accept. Metric names must exist in src/export/metric-names.ts.
import { readFileSync } from 'node:fs';
import { writeFile } from 'node:fs/promises';
import { join } from 'node:path';
import { parse, stringify } from 'yaml';
import { afterAll, describe, expect, it } from 'vitest';
import { knownMetricNames, modewatchNamesIn, promtool, tempDir } from './support/prometheus-tools.js';

interface Target {
  expr?: string;
  refId?: string;
  datasource?: { type?: string; uid?: string };
}
interface Panel {
  id: number;
  type: string;
  title: string;
  gridPos: { x: number; y: number; w: number; h: number };
  datasource?: { type?: string; uid?: string };
  targets?: Target[];
  panels?: Panel[];
}
interface Dashboard {
  uid: string;
  title: string;
  panels: Panel[];
  templating: { list: { name: string; type: string; query: unknown; definition?: string }[] };
  annotations: { list: { name: string; expr?: string; datasource?: { uid?: string } }[] };
}

const FILE = 'deploy/grafana/dashboards/modewatch.json';
const text = readFileSync(FILE, 'utf8');
const dash = JSON.parse(text) as Dashboard;
const allPanels = dash.panels.flatMap((p) => [p, ...(p.panels ?? [])]);

/** Literal stand-ins for template variables (Grafana built-ins start with "__"). */
const SUBSTITUTES: Record<string, string> = {
  stream: 'checkout',
  datasource: 'prometheus',
  __rate_interval: '1m',
  __interval: '30s',
  __range: '6h',
};

function substitute(expr: string): string {
  return expr.replace(/\$\{(\w+)(?::\w+)?\}|\$(\w+)|\[\[(\w+)\]\]/g, (_m, a?: string, b?: string, c?: string) => {
    const name = (a ?? b ?? c)!;
    const v = SUBSTITUTES[name];
    if (v === undefined) throw new Error(`no substitute for $${name}`);
    return v;
  });
}

/** Every PromQL expression in the dashboard: panel targets, annotations, variable queries. */
function expressions(): { where: string; expr: string }[] {
  const out: { where: string; expr: string }[] = [];
  for (const p of allPanels) {
    for (const t of p.targets ?? []) if (t.expr) out.push({ where: `panel ${p.id} "${p.title}" ${t.refId}`, expr: t.expr });
  }
  for (const a of dash.annotations.list) if (a.expr) out.push({ where: `annotation "${a.name}"`, expr: a.expr });
  for (const v of dash.templating.list) {
    if (v.type !== 'query') continue;
    const q = typeof v.query === 'string' ? v.query : (v.query as { query: string }).query;
    // label_values(<selector>, <label>) is Grafana's, not PromQL: check the selector inside.
    const m = /^label_values\((.*),\s*(\w+)\)$/.exec(q);
    out.push({ where: `variable ${v.name}`, expr: m ? m[1] : q });
  }
  return out;
}

describe('grafana dashboard', () => {
  it('is one JSON object with a uid, a title and unique panel ids that fit a 24-column grid', () => {
    expect(dash.uid).toMatch(/^[a-zA-Z0-9_-]{1,40}$/);
    expect(dash.title).toBeTruthy();
    const ids = allPanels.map((p) => p.id);
    expect(new Set(ids).size).toBe(ids.length);
    for (const p of allPanels) {
      expect(p.gridPos.x + p.gridPos.w, `panel ${p.id}`).toBeLessThanOrEqual(24);
      expect(p.gridPos.w).toBeGreaterThan(0);
      expect(p.gridPos.h).toBeGreaterThan(0);
    }
  });

  it('declares every $variable it uses, and uses every variable it declares', () => {
    const declared = new Set(dash.templating.list.map((v) => v.name));
    const used = new Set<string>();
    for (const m of text.matchAll(/\$\{(\w+)(?::\w+)?\}|\$(\w+)|\[\[(\w+)\]\]/g)) used.add((m[1] ?? m[2] ?? m[3])!);
    for (const name of used) {
      if (name.startsWith('__')) continue; // Grafana built-ins such as $__rate_interval
      expect(declared.has(name), `$${name} is used but not declared`).toBe(true);
    }
    for (const name of declared) expect(used.has(name), `$${name} is declared but never used`).toBe(true);
  });

  it('has the stream variable from label_values(modewatch_stream_components, stream)', () => {
    const v = dash.templating.list.find((x) => x.name === 'stream');
    expect(v?.type).toBe('query');
    expect(v?.definition).toBe('label_values(modewatch_stream_components, stream)');
  });

  it('queries the provisioned Prometheus through the datasource variable everywhere', () => {
    for (const p of allPanels) {
      if (p.type === 'row') continue;
      expect(p.datasource?.uid, `panel ${p.id}`).toBe('${datasource}');
      for (const t of p.targets ?? []) expect(t.datasource?.uid, `panel ${p.id} ${t.refId}`).toBe('${datasource}');
    }
  });

  it('draws what the kit promises: stacked weights, location ± spread, shift score, alert annotations, health', () => {
    const exprs = expressions().map((e) => e.expr);
    const has = (re: RegExp) => exprs.some((e) => re.test(e));
    expect(has(/modewatch_component_weight\{/)).toBe(true);
    expect(has(/modewatch_component_location.*\+ on .*modewatch_component_spread/)).toBe(true);
    expect(has(/modewatch_component_location.*- on .*modewatch_component_spread/)).toBe(true);
    expect(has(/modewatch_stream_shift_score/)).toBe(true);
    expect(dash.annotations.list.some((a) => a.expr?.includes('modewatch_alert_active'))).toBe(true);
    expect(has(/modewatch_rejected_events_total/)).toBe(true);
    expect(has(/modewatch_ready/)).toBe(true);
    const weights = allPanels.find((p) => p.targets?.some((t) => t.expr?.startsWith('modewatch_component_weight')));
    expect(JSON.stringify(weights)).toContain('"stacking":{"mode":"normal"');
  });

  it('uses only metric names that modewatch exposes', async () => {
    const known = await knownMetricNames();
    const unknown: string[] = [];
    for (const { where, expr } of expressions()) {
      for (const name of modewatchNamesIn(expr)) if (!known.has(name)) unknown.push(`${name} (${where})`);
    }
    expect(unknown).toEqual([]);
  });

  const tmp: { remove(): Promise<void> }[] = [];
  afterAll(async () => {
    for (const t of tmp) await t.remove();
  });

  it('every expression passes promtool check rules', async () => {
    const exprs = expressions();
    expect(exprs.length).toBeGreaterThan(20);
    const dir = await tempDir('dash');
    tmp.push(dir);
    const rules = {
      groups: [
        {
          name: 'dashboard-expressions',
          rules: exprs.map((e, i) => ({ record: `dashboard:expr_${i}`, expr: substitute(e.expr) })),
        },
      ],
    };
    const file = join(dir.path, 'dashboard-rules.yml');
    await writeFile(file, stringify(rules));
    const r = await promtool(['check', 'rules', file]);
    expect(r.code, r.stdout + r.stderr).toBe(0);
    expect(r.stdout + r.stderr).toContain(`SUCCESS: ${exprs.length} rules found`);

    // The check is real: a broken expression in the same form is refused.
    const broken = join(dir.path, 'broken.yml');
    await writeFile(broken, stringify({ groups: [{ name: 'b', rules: [{ record: 'x:y', expr: 'sum by (a (up)' }] }] }));
    expect((await promtool(['check', 'rules', broken])).code).not.toBe(0);
  });
});

describe('grafana provisioning', () => {
  it('provides the Prometheus datasource and loads dashboards from where compose mounts them', () => {
    const ds = parse(readFileSync('deploy/grafana/provisioning/datasources/modewatch.yml', 'utf8')) as {
      apiVersion: number;
      datasources: { type: string; url: string; uid: string }[];
    };
    expect(ds.apiVersion).toBe(1);
    expect(ds.datasources[0].type).toBe('prometheus');
    expect(ds.datasources[0].url).toBe('http://prometheus:9090');
    const prov = parse(readFileSync('deploy/grafana/provisioning/dashboards/modewatch.yml', 'utf8')) as {
      apiVersion: number;
      providers: { type: string; options: { path: string } }[];
    };
    expect(prov.providers[0].type).toBe('file');
    const compose = parse(readFileSync('deploy/compose.yaml', 'utf8')) as {
      services: Record<string, { volumes?: string[] }>;
    };
    const mounts = compose.services.grafana.volumes ?? [];
    expect(mounts).toContain(`./grafana/dashboards:${prov.providers[0].options.path}:ro`);
    expect(mounts).toContain('./grafana/provisioning:/etc/grafana/provisioning:ro');
  });
});
