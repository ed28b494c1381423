/** The configuration room: the file format (schema.ts), loading and checking, stream rules, redaction. */
export { loadConfig, type LoadOptions } from './load-config.js';
export { resolveStreamSettings, matchingRule, globToRegExp } from './stream-rules.js';
export { redactConfig, redactUrl } from './redact.js';
export { Secret, REDACTED } from './secret.js';
export { formatProblem, type LoadProblem } from './problems.js';
export { OVERRIDES, type OverrideSpec } from './overrides.js';
export { EXAMPLE_CONFIG } from './example.js';
export * from './to-options.js';
export type * from './schema.js';
export { LOG_LEVELS, SASL_MECHANISMS } from './schema.js';
