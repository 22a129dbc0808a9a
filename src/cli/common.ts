/** Pieces every command shares: usage errors, the reproducibility stamp, JSON without NaN/Infinity. */
import { readFileSync } from 'node:fs';
import { fileURLToPath } from 'node:url';
import { SCENARIO_SCHEMA_VERSION } from '../plant/scenario.ts';

// safeJson lives in src/io/json.ts (browser-safe); re-exported for the commands.
export { safeJson } from '../io/json.ts';

export class UsageError extends Error {
  constructor(message: string) {
    super(message);
    this.name = 'UsageError';
  }
}

let cachedVersion: string | null = null;
export function toolVersion(): string {
  if (cachedVersion) return cachedVersion;
  const pkg = JSON.parse(readFileSync(fileURLToPath(new URL('../../package.json', import.meta.url)), 'utf8')) as { version: string };
  cachedVersion = pkg.version;
  return cachedVersion;
}

export interface Stamp {
  tool: 'ancbench';
  version: string;
  schemaVersion: number;
  seed: number;
  scenarioSha256: string;
  command: string;
}

export function stamp(command: string, seed: number, sha256: string): Stamp {
  return { tool: 'ancbench', version: toolVersion(), schemaVersion: SCENARIO_SCHEMA_VERSION, seed, scenarioSha256: sha256, command };
}

export function fmtDb(v: number | null | undefined, digits = 1): string {
  return v === null || v === undefined || !Number.isFinite(v) ? 'n/a' : `${v.toFixed(digits)} dB`;
}
