/** Pieces every command shares: usage errors, the reproducibility stamp, JSON without NaN/Infinity. */
import { readFileSync } from 'node:fs';
import { parseArgs, type ParseArgsConfig } from 'node:util';
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

type OptionsConfig = NonNullable<ParseArgsConfig['options']>;

/**
 * A command's flags parsed strictly (unknown flags refused), every command's `-h/--help` added; a
 * parse error becomes a UsageError followed by the command's usage text.
 */
export function parseCommandArgs<O extends OptionsConfig, P extends boolean>(argv: string[], options: O, usage: string, allowPositionals: P) {
  try {
    return parseArgs({ args: argv, allowPositionals, strict: true, options: { ...options, help: { type: 'boolean', short: 'h' } } as O & { help: { type: 'boolean'; short: 'h' } } });
  } catch (e) {
    throw new UsageError(`${(e as Error).message}\n\n${usage}`);
  }
}

/** A numeric flag: a finite number within [min, max] (and whole if asked), or a UsageError naming the flag. */
export function numberFlag(flag: string, text: string | undefined, min: number, max: number, whole = false): number | undefined {
  if (text === undefined) return undefined;
  const v = Number(text);
  if (text.trim() === '' || !Number.isFinite(v) || v < min || v > max || (whole && !Number.isInteger(v))) {
    throw new UsageError(`--${flag} must be ${whole ? 'a whole number' : 'a number'} from ${min} to ${max}, got "${text}"`);
  }
  return v;
}
