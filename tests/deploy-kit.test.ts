// Structural checks of the deploy kit where no Docker engine or cluster runs: every YAML file
// parses, compose and Kubernetes manifests name images, agree on port 9471, mount files that
// exist, and point probes at paths the daemon serves; the Dockerfile builds from files that exist.
import { existsSync, readdirSync, readFileSync, statSync } from 'node:fs';
import { join, resolve } from 'node:path';
import { parseAllDocuments, parse } from 'yaml';
import { describe, expect, it } from 'vitest';

const DEPLOY = 'deploy';
const PORT = 9471; // the daemon's default HTTP port
// The daemon's HTTP paths as the project fixes them (the http room serves them).
const DAEMON_PATHS = ['/metrics', '/healthz', '/readyz', '/api/streams', '/'];

function walk(dir: string): string[] {
  return readdirSync(dir).flatMap((n) => {
    const p = join(dir, n);
    return statSync(p).isDirectory() ? walk(p) : [p];
  });
}

function yamlFile<T>(path: string): T {
  return parse(readFileSync(path, 'utf8')) as T;
}

interface ComposeService {
  image?: string;
  build?: { context: string; dockerfile: string };
  command?: string[];
  environment?: Record<string, string | number>;
  ports?: string[];
  volumes?: string[];
  depends_on?: string[] | Record<string, unknown>;
  healthcheck?: { test: string[] };
}
const compose = yamlFile<{ services: Record<string, ComposeService> }>(join(DEPLOY, 'compose.yaml'));
const services = compose.services;

function hostPort(target: string): { host: string; port: number } {
  const u = new URL(target.includes('://') ? target : `http://${target}`);
  return { host: u.hostname, port: Number(u.port) };
}

describe('every YAML file in deploy/ parses', () => {
  const files = walk(DEPLOY).filter((f) => /\.ya?ml$/.test(f));
  it('finds the kit', () => {
    expect(files.length).toBeGreaterThanOrEqual(12);
  });
  for (const f of files) {
    it(f, () => {
      const docs = parseAllDocuments(readFileSync(f, 'utf8'));
      for (const d of Array.isArray(docs) ? docs : [docs]) expect(d.errors, f).toEqual([]);
    });
  }
});

describe('compose.yaml', () => {
  it('brings up Kafka (3.9.x, KRaft), modewatch, Prometheus, Alertmanager and Grafana, each with an image', () => {
    expect(Object.keys(services).sort()).toEqual(['alertmanager', 'grafana', 'kafka', 'modewatch', 'prometheus']);
    for (const [name, s] of Object.entries(services)) expect(s.image, name).toMatch(/^[\w./-]+:[\w.-]+$/);
    expect(services.kafka.image).toMatch(/^apache\/kafka:3\.9\.\d+$/);
  });

  it('configures Kafka as a single KRaft node that advertises the address modewatch uses', () => {
    const env = services.kafka.environment!;
    expect(String(env.KAFKA_PROCESS_ROLES).split(',').sort()).toEqual(['broker', 'controller']);
    expect(env.KAFKA_CONTROLLER_QUORUM_VOTERS).toBe(`${env.KAFKA_NODE_ID}@kafka:9093`);
    expect(env.KAFKA_OFFSETS_TOPIC_REPLICATION_FACTOR).toBe(1);
    const advertised = String(env.KAFKA_ADVERTISED_LISTENERS).replace(/^PLAINTEXT:\/\//, '');
    const cfg = yamlFile<{ kafka: { brokers: string[] } }>(join(DEPLOY, 'modewatch.example.yaml'));
    expect(cfg.kafka.brokers).toEqual([advertised]);
    expect(services.kafka.healthcheck?.test.join(' ')).toContain('localhost:9092');
  });

  it('builds modewatch from deploy/Dockerfile, publishes 9471 and mounts the example config', () => {
    const m = services.modewatch;
    const context = resolve(DEPLOY, m.build!.context);
    expect(existsSync(join(context, m.build!.dockerfile))).toBe(true);
    expect(m.ports).toContain(`${PORT}:${PORT}`);
    expect(m.volumes).toContain('./modewatch.example.yaml:/etc/modewatch/modewatch.yaml:ro');
    expect(m.command).toEqual(['run', '--config', '/etc/modewatch/modewatch.yaml']);
    expect(Object.keys(m.depends_on as Record<string, unknown>)).toContain('kafka');
  });

  it('mounts only files and folders that exist in deploy/', () => {
    for (const [name, s] of Object.entries(services)) {
      for (const v of s.volumes ?? []) {
        const host = v.split(':')[0];
        if (!host.startsWith('.')) continue; // named volumes
        expect(existsSync(resolve(DEPLOY, host)), `${name}: ${host}`).toBe(true);
      }
    }
  });

  it('wires Prometheus to modewatch:9471 and Alertmanager, and Grafana to Prometheus, by service name', () => {
    const prom = yamlFile<{
      scrape_configs: { job_name: string; static_configs: { targets: string[] }[] }[];
      alerting: { alertmanagers: { static_configs: { targets: string[] }[] }[] };
    }>(join(DEPLOY, 'prometheus/prometheus.yml'));
    const job = prom.scrape_configs.find((j) => j.job_name === 'modewatch')!;
    const target = hostPort(job.static_configs[0].targets[0]);
    expect(target).toEqual({ host: 'modewatch', port: PORT });
    const am = hostPort(prom.alerting.alertmanagers[0].static_configs[0].targets[0]);
    expect(services[am.host]).toBeDefined();
    expect(services[am.host].ports).toContain(`${am.port}:${am.port}`);
    const ds = yamlFile<{ datasources: { url: string }[] }>(join(DEPLOY, 'grafana/provisioning/datasources/modewatch.yml'));
    const p = hostPort(ds.datasources[0].url);
    expect(services[p.host].ports).toContain(`${p.port}:${p.port}`);
    // Prometheus reads its rule file next to its config: both are mounted side by side.
    expect(services.prometheus.volumes).toContain('./prometheus/modewatch-rules.yml:/etc/prometheus/modewatch-rules.yml:ro');
  });
});

describe('modewatch.example.yaml', () => {
  it('listens on 9471 and sends alerts to the compose Alertmanager', () => {
    const cfg = yamlFile<{
      http: { listen: string };
      alerts: { sinks: { type: string; urls?: string[] }[] };
    }>(join(DEPLOY, 'modewatch.example.yaml'));
    expect(hostPort(cfg.http.listen).port).toBe(PORT);
    const am = cfg.alerts.sinks.find((s) => s.type === 'alertmanager')!;
    const u = hostPort(am.urls![0]);
    expect(services[u.host]).toBeDefined();
  });
});

describe('Dockerfile', () => {
  const text = readFileSync(join(DEPLOY, 'Dockerfile'), 'utf8');
  const lines = text
    .replace(/\\\n/g, ' ')
    .split('\n')
    .map((l) => l.trim())
    .filter((l) => l && !l.startsWith('#'));
  const instr = (name: string) => lines.filter((l) => l.toUpperCase().startsWith(`${name} `));

  it('builds on node:20-slim, runs npm ci and the build, as a non-root user', () => {
    for (const f of instr('FROM')) expect(f).toMatch(/^FROM node:20-slim\b/);
    expect(text).toMatch(/npm ci\b/);
    expect(text).toMatch(/npm run build/);
    const users = instr('USER');
    expect(users.length).toBeGreaterThan(0);
    expect(users.at(-1)).not.toMatch(/^USER (root|0)(:|$)/);
  });

  it('exposes 9471 and checks /healthz on it', () => {
    expect(instr('EXPOSE')).toEqual([`EXPOSE ${PORT}`]);
    const hc = instr('HEALTHCHECK').join(' ');
    expect(hc).toContain(`127.0.0.1:${PORT}/healthz`);
    expect(DAEMON_PATHS).toContain('/healthz');
  });

  it('copies only files that exist and that the ignore file lets through', () => {
    const ignore = readFileSync(join(DEPLOY, 'Dockerfile.dockerignore'), 'utf8');
    for (const c of instr('COPY')) {
      if (c.includes('--from=')) continue;
      const parts = c.split(/\s+/).slice(1, -1);
      for (const src of parts) {
        expect(existsSync(src), src).toBe(true);
        expect(ignore, `${src} is excluded from the build context`).toMatch(new RegExp(`^!${src.replace(/[.*+?^${}()|[\]\\]/g, '\\$&')}`, 'm'));
      }
    }
  });

  it('starts with the config path it copies the example config to', () => {
    expect(text).toContain('COPY deploy/modewatch.example.yaml /etc/modewatch/modewatch.yaml');
    expect(instr('CMD').join(' ')).toContain('/etc/modewatch/modewatch.yaml');
  });
});

describe('kubernetes manifests', () => {
  const K = join(DEPLOY, 'kubernetes');
  interface Container {
    name: string;
    image: string;
    args: string[];
    ports: { name: string; containerPort: number }[];
    readinessProbe: { httpGet: { path: string; port: string | number } };
    livenessProbe: { httpGet: { path: string; port: string | number } };
    startupProbe?: { httpGet: { path: string; port: string | number } };
    resources: { requests: Record<string, string>; limits: Record<string, string> };
    securityContext: { allowPrivilegeEscalation: boolean; readOnlyRootFilesystem: boolean };
    volumeMounts: { name: string; mountPath: string }[];
  }
  const dep = yamlFile<{
    kind: string;
    spec: {
      selector: { matchLabels: Record<string, string> };
      template: {
        metadata: { labels: Record<string, string> };
        spec: {
          securityContext: { runAsNonRoot: boolean; runAsUser: number };
          containers: Container[];
          volumes: { name: string; configMap?: { name: string } }[];
        };
      };
    };
  }>(join(K, 'deployment.yaml'));
  const svc = yamlFile<{
    kind: string;
    spec: { selector: Record<string, string>; ports: { port: number; targetPort: string | number }[] };
  }>(join(K, 'service.yaml'));
  const cm = yamlFile<{ kind: string; metadata: { name: string }; data: Record<string, string> }>(join(K, 'configmap.yaml'));
  const c = dep.spec.template.spec.containers[0];

  it('kustomization lists every manifest, and each exists', () => {
    const k = yamlFile<{ resources: string[] }>(join(K, 'kustomization.yaml'));
    expect(k.resources.sort()).toEqual(['configmap.yaml', 'deployment.yaml', 'service.yaml']);
    for (const r of k.resources) expect(existsSync(join(K, r))).toBe(true);
    expect([dep.kind, svc.kind, cm.kind]).toEqual(['Deployment', 'Service', 'ConfigMap']);
  });

  it('runs the image as non-root with resource requests and limits', () => {
    expect(c.image).toMatch(/^[\w./-]+:[\w.-]+$/);
    expect(dep.spec.template.spec.securityContext.runAsNonRoot).toBe(true);
    expect(dep.spec.template.spec.securityContext.runAsUser).toBeGreaterThan(0);
    expect(c.securityContext.allowPrivilegeEscalation).toBe(false);
    for (const k of ['cpu', 'memory']) {
      expect(c.resources.requests[k], k).toBeTruthy();
      expect(c.resources.limits[k], k).toBeTruthy();
    }
  });

  it('probes /readyz for readiness and /healthz for liveness on the 9471 port', () => {
    expect(c.ports).toEqual([{ name: 'http', containerPort: PORT }]);
    expect(c.readinessProbe.httpGet.path).toBe('/readyz');
    expect(c.livenessProbe.httpGet.path).toBe('/healthz');
    for (const p of [c.readinessProbe, c.livenessProbe, c.startupProbe].filter(Boolean)) {
      expect(DAEMON_PATHS).toContain(p!.httpGet.path);
      expect([PORT, 'http']).toContain(p!.httpGet.port);
    }
  });

  it('the Service selects the pods and targets the container port', () => {
    expect(dep.spec.selector.matchLabels).toEqual(dep.spec.template.metadata.labels);
    expect(svc.spec.selector).toEqual(dep.spec.template.metadata.labels);
    expect(svc.spec.ports[0].port).toBe(PORT);
    expect(c.ports.map((p) => p.name)).toContain(svc.spec.ports[0].targetPort);
  });

  it('mounts the ConfigMap where the container reads its config, and that config listens on 9471', () => {
    const vol = dep.spec.template.spec.volumes.find((v) => v.configMap)!;
    expect(vol.configMap!.name).toBe(cm.metadata.name);
    const mount = c.volumeMounts.find((m) => m.name === vol.name)!;
    const configArg = c.args[c.args.indexOf('--config') + 1];
    const key = configArg.slice(mount.mountPath.length + 1);
    expect(configArg.startsWith(`${mount.mountPath}/`)).toBe(true);
    expect(Object.keys(cm.data)).toContain(key);
    const cfg = parse(cm.data[key]) as { http: { listen: string } };
    expect(hostPort(cfg.http.listen).port).toBe(PORT);
  });
});
