import { createRequire } from 'node:module';

/** The package version, read once from package.json (one source of truth). */
export const VERSION: string = (createRequire(import.meta.url)('../../package.json') as { version: string }).version;
