/**
 * Pieces of the Prometheus text exposition format, version 0.0.4
 * (https://prometheus.io/docs/instrumenting/exposition_formats/#text-based-format):
 *  - label values escape backslash, double quote and line feed as \\, \" and \n;
 *  - HELP text escapes backslash and line feed only;
 *  - sample values are Go-style floats: NaN, +Inf, -Inf, or a decimal/exponent number.
 */

const LABEL_SPECIAL = /[\\"\n]/;

export function escapeLabelValue(v: string): string {
  if (!LABEL_SPECIAL.test(v)) return v;
  return v.replace(/\\/g, '\\\\').replace(/"/g, '\\"').replace(/\n/g, '\\n');
}

export function escapeHelp(v: string): string {
  return v.replace(/\\/g, '\\\\').replace(/\n/g, '\\n');
}

export function formatValue(x: number): string {
  if (Number.isNaN(x)) return 'NaN';
  if (x === Infinity) return '+Inf';
  if (x === -Infinity) return '-Inf';
  // JS number-to-string gives the shortest round-trip form ("1e-7", "0.25"), which Prometheus parses.
  return String(x);
}

/** The `# HELP` and `# TYPE` lines of a family. */
export function familyHeader(name: string, type: 'gauge' | 'counter' | 'untyped', help: string): string {
  return `# HELP ${name} ${escapeHelp(help)}\n# TYPE ${name} ${type}\n`;
}
