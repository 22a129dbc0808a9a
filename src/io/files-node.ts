/**
 * File helpers for the Node CLI: reading inputs with clear errors, and writing a set of outputs so
 * that nothing half-written is ever left behind (each file goes to a temporary name in the target
 * folder and is renamed into place only once every file has been written).
 */
import { mkdirSync, readFileSync, renameSync, rmdirSync, statSync, unlinkSync, writeFileSync, existsSync } from 'node:fs';
import { dirname, join, resolve } from 'node:path';

export class InputError extends Error {
  constructor(message: string) {
    super(message);
    this.name = 'InputError';
  }
}

export function readBytes(path: string, what: string): Uint8Array {
  try {
    const st = statSync(path);
    if (st.isDirectory()) throw new InputError(`${what} "${path}" is a folder, not a file`);
    return new Uint8Array(readFileSync(path));
  } catch (e) {
    if (e instanceof InputError) throw e;
    const code = (e as NodeJS.ErrnoException).code;
    if (code === 'ENOENT') throw new InputError(`${what} "${path}" does not exist`);
    if (code === 'EACCES') throw new InputError(`${what} "${path}" cannot be read (permission denied)`);
    throw new InputError(`${what} "${path}" cannot be read: ${(e as Error).message}`);
  }
}

export function readJson(path: string, what: string): unknown {
  const text = new TextDecoder().decode(readBytes(path, what));
  try {
    return JSON.parse(text);
  } catch (e) {
    throw new InputError(`${what} "${path}" is not valid JSON: ${(e as Error).message}`);
  }
}

export interface OutputFile {
  name: string;
  data: Uint8Array | string;
}

/**
 * Write all files into `dir` atomically as a set: temporary names first, renames last. On failure
 * the temporaries are removed, and the folder too if this call created it.
 */
export function writeOutputs(dir: string, files: OutputFile[]): string[] {
  const target = resolve(dir);
  let created = false;
  if (existsSync(target)) {
    if (!statSync(target).isDirectory()) throw new InputError(`--out "${dir}" exists and is not a folder`);
  } else {
    try {
      mkdirSync(target, { recursive: true });
      created = true;
    } catch (e) {
      throw new InputError(`cannot create output folder "${dir}": ${(e as Error).message}`);
    }
  }
  const temps: string[] = [];
  const tag = `.tmp-${process.pid}-${Date.now().toString(36)}`;
  try {
    for (const f of files) {
      const tmp = join(target, `.${f.name}${tag}`);
      temps.push(tmp);
      writeFileSync(tmp, f.data);
    }
    const finals = files.map((f) => join(target, f.name));
    for (let i = 0; i < files.length; i++) renameSync(temps[i]!, finals[i]!);
    return finals;
  } catch (e) {
    for (const t of temps) {
      try {
        unlinkSync(t);
      } catch {
        /* already gone */
      }
    }
    if (created) {
      try {
        rmdirSync(target);
      } catch {
        /* not empty or gone */
      }
    }
    throw new InputError(`cannot write outputs to "${dir}": ${(e as Error).message}`);
  }
}

export function baseDirOf(path: string): string {
  return dirname(resolve(path));
}
