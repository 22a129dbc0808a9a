/** Pieces every command shares: usage errors, the reproducibility stamp, JSON without NaN/Infinity. */
import { readFileSync } from 'node:fs';
import { fileURLToPath } from 'node:url';
import { SCENARIO_SCHEMA_VERSION } from '../plant/scenario.ts';

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

/**
 * JSON text in which no number is NaN or ±Infinity: such values become null (callers add a note
 * with the reason beside the field). Typed arrays become plain arrays.
 */
export function safeJson(value: unknown, indent = 2): string {
  return JSON.stringify(
    value,
    (_k, v: unknown) => {
      if (typeof v === 'number' && !Number.isFinite(v)) return null;
      if (ArrayBuffer.isView(v) && !(v instanceof DataView)) return Array.from(v as unknown as ArrayLike<number>);
      return v;
    },
    indent,
  );
}

export function fmtDb(v: number | null | undefined, digits = 1): string {
  return v === null || v === undefined || !Number.isFinite(v) ? 'n/a' : `${v.toFixed(digits)} dB`;
}
