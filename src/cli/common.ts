/**
 * Pieces every command shares: usage errors, flag parsing, the one error path every command's failures
 * go through (`runCommand`), number formatting with true minus signs, the reproducibility stamp, JSON
 * without NaN/Infinity.
 */
import { readFileSync } from 'node:fs';
import { parseArgs, type ParseArgsConfig } from 'node:util';
import { fileURLToPath } from 'node:url';
import { SCENARIO_SCHEMA_VERSION, ScenarioError } from '../plant/scenario.ts';
import { abortPendingOutputs, InputError } from '../io/files-node.ts';
import { WavError } from '../io/wav.ts';
import { PathModelError } from '../io/path-model-file.ts';

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

/** The true minus sign used in printed figures (JSON keeps plain numbers). */
export const MINUS = '\u2212';

/**
 * A number for text output: `digits` decimals, a true minus sign "−" for negative figures, and no
 * "−0.0" (a value that rounds to zero prints without a sign).
 */
export function fmtNum(v: number, digits = 1): string {
  const t = v.toFixed(digits);
  if (!t.startsWith('-')) return t;
  return /^-0(\.0*)?$/.test(t) ? t.slice(1) : MINUS + t.slice(1);
}

export function fmtDb(v: number | null | undefined, digits = 1): string {
  return v === null || v === undefined || !Number.isFinite(v) ? 'n/a' : `${fmtNum(v, digits)} dB`;
}

type OptionsConfig = NonNullable<ParseArgsConfig['options']>;

/** Edit distance (insertions, deletions, substitutions) between two short strings. */
function editDistance(a: string, b: string): number {
  let prev = Array.from({ length: b.length + 1 }, (_, j) => j);
  for (let i = 1; i <= a.length; i++) {
    const row = [i];
    for (let j = 1; j <= b.length; j++) row[j] = Math.min(prev[j]! + 1, row[j - 1]! + 1, prev[j - 1]! + (a[i - 1] === b[j - 1] ? 0 : 1));
    prev = row;
  }
  return prev[b.length]!;
}

/** The valid flag closest to `given` (a prefix counts as close), or null when none is near. */
export function nearestFlag(given: string, valid: readonly string[]): string | null {
  let best: string | null = null;
  let bestD = Infinity;
  for (const v of valid) {
    const d = v.startsWith(given) || given.startsWith(v) ? Math.min(1, editDistance(given, v)) : editDistance(given, v);
    if (d < bestD) {
      bestD = d;
      best = v;
    }
  }
  return best !== null && bestD <= Math.max(2, Math.floor(given.length / 3)) ? best : null;
}

/** A token shown in a message: quoted, and cut short when long. */
function token(t: string): string {
  return JSON.stringify(t.length > 40 ? t.slice(0, 37) + '...' : t);
}

/**
 * A command's flags parsed strictly (unknown flags refused), every command's `-h/--help` added. Problems
 * become one-line UsageErrors in ancbench's own words: an unknown flag names the nearest valid one.
 */
export function parseCommandArgs<O extends OptionsConfig, P extends boolean>(argv: string[], options: O, usage: string, allowPositionals: P) {
  const all = { ...options, help: { type: 'boolean', short: 'h' } } as O & { help: { type: 'boolean'; short: 'h' } };
  const names = Object.keys(all);
  const shorts = new Map(Object.entries(all).flatMap(([k, o]) => (o.short ? [[o.short, k] as [string, string]] : [])));
  for (const a of argv) {
    if (a === '--') break;
    if (a.startsWith('--')) {
      const name = a.slice(2).split('=')[0]!;
      if (!names.includes(name)) {
        const near = nearestFlag(name, names);
        throw new UsageError(`unknown option ${token('--' + name)}${near ? `; did you mean --${near}?` : `; the options are ${names.map((n) => '--' + n).join(', ')}`}`);
      }
    } else if (a.startsWith('-') && a.length > 1 && !/^-\d/.test(a)) {
      for (const c of a.slice(1)) if (!shorts.has(c)) throw new UsageError(`unknown option ${token(a)}; options are written --name (see --help)`);
    }
  }
  void usage;
  try {
    return parseArgs({ args: argv, allowPositionals, strict: true, options: all });
  } catch (e) {
    const code = (e as NodeJS.ErrnoException).code;
    const msg = (e as Error).message;
    const flag = /'(-[^' ]+)/.exec(msg)?.[1];
    if (code === 'ERR_PARSE_ARGS_INVALID_OPTION_VALUE' && flag) {
      const name = flag.replace(/^-+/, '');
      const o = (all as Record<string, { type: string }>)[name] ?? (all as Record<string, { type: string }>)[shorts.get(name) ?? ''];
      throw new UsageError(o?.type === 'boolean' ? `${flag} takes no value` : `${flag} needs a value`);
    }
    if (code === 'ERR_PARSE_ARGS_UNEXPECTED_POSITIONAL') {
      const arg = /'([^']*)'/.exec(msg)?.[1] ?? '';
      throw new UsageError(`unexpected argument ${token(arg)}: this command takes options only`);
    }
    throw new UsageError(msg.split('\n')[0]!.replace(/'/g, '"'));
  }
}

/** A value of an --out style flag: refused when empty (a forgotten argument should not pass silently). */
export function outFlag(flag: string, value: string | undefined): string | undefined {
  if (value === undefined) return undefined;
  if (value.trim() === '') throw new UsageError(`--${flag} needs a folder or file name, got an empty string`);
  return value;
}

/** The exit status and one-line message for an error a command threw. */
export function describeFailure(command: string, e: unknown): { status: number; message: string } {
  const oneLine = (m: string): string => {
    // Multi-problem messages ("invalid scenario:\n  a\n  b") become one line: "invalid scenario: a; b".
    const lines = m.split('\n').map((l) => l.trim()).filter(Boolean);
    if (lines.length <= 1) return lines[0] ?? '';
    const [head, ...rest] = lines;
    return `${head}${head!.endsWith(':') ? ' ' : '; '}${rest.join('; ')}`;
  };
  const prefix = `ancbench ${command}: `;
  // A usage error's message may carry the usage text after a blank line: --help shows that instead.
  if (e instanceof UsageError) return { status: 2, message: `${prefix}${oneLine(e.message.split('\n\n')[0]!)} (ancbench ${command} --help lists the options)` };
  if (e instanceof ScenarioError || e instanceof InputError || e instanceof WavError || e instanceof PathModelError) {
    return { status: 1, message: prefix + oneLine(e.message) };
  }
  const what = e instanceof Error ? oneLine(e.message).slice(0, 300) : String(e);
  return { status: 1, message: `${prefix}could not finish: ${what} (an input ancbench did not check, or a fault in ancbench; --debug shows where)` };
}

/** True when the stack of a failure should be shown (`--debug` or ANCBENCH_DEBUG=1). */
export function debugWanted(argv: string[]): boolean {
  const stop = argv.indexOf('--');
  return (stop < 0 ? argv : argv.slice(0, stop)).includes('--debug') || process.env.ANCBENCH_DEBUG === '1';
}

/** argv without `--debug` (before any `--`). */
export function withoutDebug(argv: string[]): string[] {
  const stop = argv.indexOf('--');
  const head = (stop < 0 ? argv : argv.slice(0, stop)).filter((a) => a !== '--debug');
  return stop < 0 ? head : [...head, ...argv.slice(stop)];
}

/**
 * The one error path of every command: runs it, and turns any failure into one line on stderr
 * ("ancbench <command>: <input and problem>") and exit status 2 (usage) or 1 (anything else), after
 * removing every output the command prepared and did not commit. `--debug` adds the stack.
 * New commands (in their own files) call their function through this from main.ts.
 */
export async function runCommand(command: string, run: (argv: string[]) => Promise<number>, argv: string[]): Promise<number> {
  const debug = debugWanted(argv);
  try {
    return await run(withoutDebug(argv));
  } catch (e) {
    abortPendingOutputs();
    const { status, message } = describeFailure(command, e);
    process.stderr.write(message + '\n');
    if (debug && e instanceof Error && e.stack) process.stderr.write(e.stack + '\n');
    return status;
  } finally {
    abortPendingOutputs();
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
