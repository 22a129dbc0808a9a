// A sandbox for CLI tests: a fresh temporary folder per test, and everything `main` writes to stdout and
// stderr captured instead of printed. The fields are read and replaced live, so a test may start a fresh
// capture with `cli.out = []` between two commands.
import { afterEach, beforeEach, vi } from 'vitest';
import { mkdtempSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';

/** Captured output: one string per `write` call, in order. */
export interface CapturedOutput {
  out: string[];
  err: string[];
}

export interface CliSandbox extends CapturedOutput {
  /** This test's temporary folder (absolute path); removed after the test. */
  dir: string;
  /** Writes `value` (JSON-encoded unless it is already a string or bytes) to `dir/name` and returns that path. */
  file(value: unknown, name?: string): string;
}

/**
 * Empties `target.out` and `target.err` (fresh arrays) and spies on process.stdout/stderr.write so that each
 * call appends its text to them; `vi.restoreAllMocks()` undoes it.
 */
export function captureOutput(target: CapturedOutput): void {
  target.out = [];
  target.err = [];
  vi.spyOn(process.stdout, 'write').mockImplementation((s: string | Uint8Array) => (target.out.push(String(s)), true));
  vi.spyOn(process.stderr, 'write').mockImplementation((s: string | Uint8Array) => (target.err.push(String(s)), true));
}

/**
 * Registers, in the calling test file or suite, a beforeEach that makes a temporary folder named
 * `prefix` + random suffix and captures the output, and an afterEach that restores every mock (including
 * those a test added itself) and removes the folder.
 */
export function useCliSandbox(prefix: string): CliSandbox {
  const sandbox: CliSandbox = {
    dir: '',
    out: [],
    err: [],
    file(value: unknown, name = 's.json'): string {
      const p = join(sandbox.dir, name);
      writeFileSync(p, typeof value === 'string' || value instanceof Uint8Array ? value : JSON.stringify(value));
      return p;
    },
  };
  beforeEach(() => {
    sandbox.dir = mkdtempSync(join(tmpdir(), prefix));
    captureOutput(sandbox);
  });
  afterEach(() => {
    vi.restoreAllMocks();
    rmSync(sandbox.dir, { recursive: true, force: true });
  });
  return sandbox;
}
