/**
 * File helpers for the Node CLI: reading inputs with clear errors and bounded memory, and writing a
 * set of outputs all or nothing.
 *
 * Reading: only regular files are read (a FIFO, a device such as /dev/zero or a folder is refused before
 * anything is read, since reading one could block or never end), and whole-file reads are capped
 * (`MAX_READ_BYTES`); long recordings are read piece by piece instead (src/io/wav-file-node.ts).
 *
 * Writing: an output folder is prepared before the run (`OutputFolder.prepare`): its parent is created
 * if needed, a temporary sibling folder is made there (which proves the place is writable), and every
 * file is written into that temporary folder, large ones block by block. `commit()` then renames the
 * temporary folder into place (or, when the folder exists already, each file into it, after checking
 * that no output name is taken by a folder); `abort()` removes everything this run made. A single output
 * file (`SingleOutputFile.prepare`) works the same way with a temporary sibling file.
 */
import {
  accessSync,
  closeSync,
  constants,
  existsSync,
  fstatSync,
  lstatSync,
  mkdirSync,
  openSync,
  readSync,
  renameSync,
  rmSync,
  statSync,
  writeFileSync,
} from 'node:fs';
import { basename, dirname, join, resolve } from 'node:path';

export class InputError extends Error {
  constructor(message: string) {
    super(message);
    this.name = 'InputError';
  }
}

/** Largest file read whole into memory (scenario, model and calibration files, short WAV sources): 256 MiB. */
export const MAX_READ_BYTES = 256 * 1024 * 1024;

function mib(bytes: number): string {
  return `${(bytes / 1048576).toFixed(bytes < 1048576 ? 2 : 0)} MiB`;
}

/** What kind of thing a stat describes, for messages. */
function kindOf(st: { isDirectory(): boolean; isFIFO(): boolean; isCharacterDevice(): boolean; isBlockDevice(): boolean; isSocket(): boolean }): string {
  if (st.isDirectory()) return 'a folder';
  if (st.isFIFO()) return 'a named pipe (FIFO)';
  if (st.isCharacterDevice()) return 'a character device';
  if (st.isBlockDevice()) return 'a block device';
  if (st.isSocket()) return 'a socket';
  return 'not a regular file';
}

function openError(e: unknown, path: string, what: string): InputError {
  if (e instanceof InputError) return e;
  const code = (e as NodeJS.ErrnoException).code;
  if (code === 'ENOENT') return new InputError(`${what} "${path}" does not exist`);
  if (code === 'EACCES' || code === 'EPERM') return new InputError(`${what} "${path}" cannot be read (permission denied)`);
  if (code === 'ENOTDIR') return new InputError(`${what} "${path}" does not exist (a part of the path is not a folder)`);
  if (code === 'ENAMETOOLONG') return new InputError(`${what} "${path.slice(0, 80)}…" has too long a name`);
  return new InputError(`${what} "${path}" cannot be read: ${(e as Error).message}`);
}

/**
 * Open a regular file for reading: refuses folders, FIFOs, devices and sockets before opening (opening a
 * FIFO would wait for a writer), and checks again on the open descriptor. Returns the descriptor and size.
 */
export function openRegularFile(path: string, what: string): { fd: number; size: number } {
  if (path === '') throw new InputError(`${what}: the file name is empty`);
  try {
    const st = statSync(path);
    if (!st.isFile()) throw new InputError(`${what} "${path}" is ${kindOf(st)}, not a regular file`);
    const fd = openSync(path, constants.O_RDONLY | constants.O_NONBLOCK);
    const st2 = fstatSync(fd);
    if (!st2.isFile()) {
      closeSync(fd);
      throw new InputError(`${what} "${path}" is ${kindOf(st2)}, not a regular file`);
    }
    return { fd, size: st2.size };
  } catch (e) {
    throw openError(e, path, what);
  }
}

/** Read a whole regular file of at most `maxBytes` (default MAX_READ_BYTES). */
export function readBytes(path: string, what: string, maxBytes = MAX_READ_BYTES): Uint8Array {
  const { fd, size } = openRegularFile(path, what);
  try {
    if (size > maxBytes) {
      throw new InputError(`${what} "${path}" is ${mib(size)}, more than the ${mib(maxBytes)} ancbench reads into memory for this kind of file`);
    }
    const out = new Uint8Array(size);
    let at = 0;
    while (at < size) {
      const got = readSync(fd, out, at, size - at, at);
      if (got === 0) break;
      at += got;
    }
    return at === size ? out : out.subarray(0, at);
  } catch (e) {
    throw openError(e, path, what);
  } finally {
    closeSync(fd);
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

/** One file of an output set. */
export interface OutputFile {
  name: string;
  data: Uint8Array | string;
}

/** Outputs prepared but neither committed nor aborted; `abortPendingOutputs` removes them (error path). */
const pending = new Set<{ abort(): void }>();

/** Remove every output this process prepared and did not commit (the CLI's error path and Ctrl-C call it). */
export function abortPendingOutputs(): void {
  for (const p of [...pending]) p.abort();
}

const tempTag = (): string => `.tmp-${process.pid}-${Date.now().toString(36)}${Math.random().toString(36).slice(2, 6)}`;

/** Create `dir` and its missing parents; returns the topmost folder created (to remove on failure), or null. */
function makeParents(dir: string, flag: string, shown: string): string | null {
  let top: string | null = null;
  let p = dir;
  while (!existsSync(p)) {
    top = p;
    const up = dirname(p);
    if (up === p) break;
    p = up;
  }
  if (top === null) {
    const st = statSync(dir);
    if (!st.isDirectory()) throw new InputError(`${flag} "${shown}": "${dir}" is ${kindOf(st)}, so nothing can be written inside it`);
    return null;
  }
  try {
    mkdirSync(dir, { recursive: true });
  } catch (e) {
    throw writeError(e, flag, shown);
  }
  return top;
}

function writeError(e: unknown, flag: string, shown: string): InputError {
  if (e instanceof InputError) return e;
  const code = (e as NodeJS.ErrnoException).code;
  const why =
    code === 'EACCES' || code === 'EPERM' ? 'permission denied'
    : code === 'EROFS' ? 'the file system is read-only'
    : code === 'ENOSPC' ? 'no space left on the device'
    : code === 'ENOTDIR' ? 'a part of the path is a file, not a folder'
    : code === 'ENOENT' ? 'the place does not exist and cannot be created'
    : code === 'ENAMETOOLONG' ? 'the name is too long'
    : (e as Error).message;
  return new InputError(`${flag} "${shown}" cannot be written: ${why}`);
}

/** Paths under these cannot hold ordinary files (kernel and device file systems). */
function refusePseudoFs(abs: string, flag: string, shown: string): void {
  if (/^\/(proc|sys|dev)(\/|$)/.test(abs)) throw new InputError(`${flag} "${shown}" is inside /${abs.split('/')[1]}, which holds no ordinary files: choose another place`);
}

/** Check a flag's value names a place (not ""), for --out and friends. */
function requireName(value: string, flag: string): void {
  if (value.trim() === '') throw new InputError(`${flag} needs a folder or file name, got an empty string`);
}

/**
 * An output folder written all or nothing. Prepare it before the run (the place is checked and a
 * temporary sibling folder made), write files into it (`write`, or `pathOf` for block-by-block writers),
 * then `commit()` or `abort()`.
 */
export class OutputFolder {
  private done = false;
  private constructor(
    readonly shown: string,
    readonly target: string,
    readonly temp: string,
    private readonly names: readonly string[],
    private readonly createdTop: string | null,
    private readonly flag: string,
  ) {
    pending.add(this);
  }

  /**
   * Check that `dir` can receive the files `names` and make the temporary folder. Refuses an empty name,
   * a path that is a file, an output name taken by a folder, and places that cannot be written to.
   */
  static prepare(dir: string, names: readonly string[], flag = '--out'): OutputFolder {
    requireName(dir, flag);
    const target = resolve(dir);
    refusePseudoFs(target, flag, dir);
    let existing = false;
    try {
      const st = lstatSync(target);
      const real = st.isSymbolicLink() ? statSync(target) : st;
      if (!real.isDirectory()) throw new InputError(`${flag} "${dir}" exists and is not a folder`);
      existing = true;
    } catch (e) {
      if (e instanceof InputError) throw e;
      const code = (e as NodeJS.ErrnoException).code;
      if (code !== 'ENOENT') throw writeError(e, flag, dir);
    }
    if (existing) {
      for (const n of names) {
        const p = join(target, n);
        if (existsSync(p) && !statSync(p).isFile()) throw new InputError(`${flag} "${dir}": "${n}" exists there and is not a file, so it cannot be replaced`);
      }
      try {
        accessSync(target, constants.W_OK);
      } catch (e) {
        throw writeError(e, flag, dir);
      }
    }
    const parent = dirname(target);
    const createdTop = existing ? null : makeParents(parent, flag, dir);
    const temp = join(existing ? target : parent, `.${basename(target)}${tempTag()}`);
    try {
      mkdirSync(temp);
    } catch (e) {
      if (createdTop) rmSync(createdTop, { recursive: true, force: true });
      throw writeError(e, flag, dir);
    }
    return new OutputFolder(dir, target, temp, names, createdTop, flag);
  }

  /** Where a file of the set is written before commit (for writers that stream into it). */
  pathOf(name: string): string {
    if (!this.names.includes(name)) throw new Error(`output "${name}" was not prepared`);
    return join(this.temp, name);
  }

  write(name: string, data: Uint8Array | string): void {
    try {
      writeFileSync(this.pathOf(name), data);
    } catch (e) {
      throw writeError(e, this.flag, this.shown);
    }
  }

  /** Move the written files into place; returns their final paths. */
  commit(): string[] {
    if (this.done) throw new Error('output folder already committed or aborted');
    const missing = this.names.filter((n) => !existsSync(join(this.temp, n)));
    if (missing.length) {
      this.abort();
      throw new Error(`outputs not written: ${missing.join(', ')}`);
    }
    try {
      if (!existsSync(this.target)) {
        renameSync(this.temp, this.target);
      } else {
        for (const n of this.names) renameSync(join(this.temp, n), join(this.target, n));
        rmSync(this.temp, { recursive: true, force: true });
      }
    } catch (e) {
      this.abort();
      throw writeError(e, this.flag, this.shown);
    }
    this.done = true;
    pending.delete(this);
    return this.names.map((n) => join(this.target, n));
  }

  /** Remove everything this run made: the temporary folder and any parent folders it created. */
  abort(): void {
    if (this.done) return;
    this.done = true;
    pending.delete(this);
    rmSync(this.temp, { recursive: true, force: true });
    if (this.createdTop) rmSync(this.createdTop, { recursive: true, force: true });
  }
}

/** One output file written all or nothing: prepared before the run (a temporary sibling is made), then committed. */
export class SingleOutputFile {
  private done = false;
  private constructor(readonly shown: string, readonly target: string, readonly temp: string, private readonly createdTop: string | null, private readonly flag: string) {
    pending.add(this);
  }

  static prepare(path: string, flag = '--out'): SingleOutputFile {
    requireName(path, flag);
    if (path.endsWith('/')) throw new InputError(`${flag} must name a file, e.g. model.json, got "${path}" (a folder)`);
    const target = resolve(path);
    refusePseudoFs(target, flag, path);
    if (existsSync(target)) {
      const st = statSync(target);
      if (st.isDirectory()) throw new InputError(`${flag} must name a file, e.g. model.json, got "${path}" (a folder)`);
      if (!st.isFile()) throw new InputError(`${flag} "${path}" is ${kindOf(st)}, not a regular file`);
    }
    const createdTop = makeParents(dirname(target), flag, path);
    const temp = join(dirname(target), `.${basename(target)}${tempTag()}`);
    try {
      writeFileSync(temp, '', { flag: 'wx' });
    } catch (e) {
      if (createdTop) rmSync(createdTop, { recursive: true, force: true });
      throw writeError(e, flag, path);
    }
    return new SingleOutputFile(path, target, temp, createdTop, flag);
  }

  commit(data: Uint8Array | string): string {
    try {
      writeFileSync(this.temp, data);
      renameSync(this.temp, this.target);
    } catch (e) {
      this.abort();
      throw writeError(e, this.flag, this.shown);
    }
    this.done = true;
    pending.delete(this);
    return this.target;
  }

  abort(): void {
    if (this.done) return;
    this.done = true;
    pending.delete(this);
    rmSync(this.temp, { force: true });
    if (this.createdTop) rmSync(this.createdTop, { recursive: true, force: true });
  }
}

/**
 * Write all files into `dir` as a set, all or nothing (prepare, write, commit in one call). Prefer
 * `OutputFolder.prepare` before a long run, so that an unwritable place is reported before the work.
 */
export function writeOutputs(dir: string, files: OutputFile[]): string[] {
  const folder = OutputFolder.prepare(dir, files.map((f) => f.name));
  try {
    for (const f of files) folder.write(f.name, f.data);
    return folder.commit();
  } catch (e) {
    folder.abort();
    throw e;
  }
}

export function baseDirOf(path: string): string {
  return dirname(resolve(path));
}
