// Reading only regular files with a size cap, and output folders written all or nothing.
import { afterEach, beforeEach, describe, expect, it } from 'vitest';
import { execFileSync } from 'node:child_process';
import { existsSync, mkdirSync, mkdtempSync, readdirSync, readFileSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { abortPendingOutputs, InputError, OutputFolder, readBytes, SingleOutputFile, writeOutputs } from '../../src/io/files-node.ts';

let dir = '';
beforeEach(() => {
  dir = mkdtempSync(join(tmpdir(), 'ancbench-files-'));
});
afterEach(() => {
  abortPendingOutputs();
  rmSync(dir, { recursive: true, force: true });
});

describe('readBytes', () => {
  it('should read a regular file whole', () => {
    writeFileSync(join(dir, 'a.bin'), new Uint8Array([1, 2, 3]));
    expect(Array.from(readBytes(join(dir, 'a.bin'), 'test file'))).toEqual([1, 2, 3]);
  });

  it('should refuse a folder, a character device and a FIFO before reading', () => {
    expect(() => readBytes(dir, 'test file')).toThrow(/is a folder, not a regular file/);
    expect(() => readBytes('/dev/zero', 'test file')).toThrow(/"\/dev\/zero" is a character device, not a regular file/);
    const fifo = join(dir, 'pipe');
    execFileSync('mkfifo', [fifo]);
    // Reading a FIFO with no writer would block for ever: the refusal must come first.
    expect(() => readBytes(fifo, 'test file')).toThrow(/is a named pipe \(FIFO\), not a regular file/);
  });

  it('should refuse a file above the cap, naming the limit', () => {
    writeFileSync(join(dir, 'big.json'), 'x'.repeat(3000));
    expect(() => readBytes(join(dir, 'big.json'), 'model file', 2048)).toThrow(/model file ".*big\.json" is 0\.00 MiB, more than the 0\.00 MiB/);
    expect(() => readBytes(join(dir, 'big.json'), 'model file', 2048)).toThrow(InputError);
  });

  it('should say when a file does not exist', () => {
    expect(() => readBytes(join(dir, 'nope'), 'scenario file')).toThrow(/scenario file ".*nope" does not exist/);
  });
});

describe('OutputFolder', () => {
  it('should show nothing at the target until commit, then all files at once', () => {
    const target = join(dir, 'deep', 'out');
    const f = OutputFolder.prepare(target, ['a.txt', 'b.txt']);
    f.write('a.txt', 'A');
    expect(existsSync(target)).toBe(false);
    f.write('b.txt', 'B');
    f.commit();
    expect(readdirSync(target).sort()).toEqual(['a.txt', 'b.txt']);
    expect(readdirSync(join(dir, 'deep'))).toEqual(['out']); // no temporary folder left beside it
  });

  it('should remove everything it made on abort, parent folders included', () => {
    const f = OutputFolder.prepare(join(dir, 'x', 'y', 'out'), ['a.txt']);
    f.write('a.txt', 'A');
    f.abort();
    expect(readdirSync(dir)).toEqual([]);
  });

  it('should replace files in an existing folder and keep the others', () => {
    const target = join(dir, 'out');
    mkdirSync(target);
    writeFileSync(join(target, 'keep.txt'), 'K');
    writeFileSync(join(target, 'a.txt'), 'old');
    writeOutputs(target, [{ name: 'a.txt', data: 'new' }]);
    expect(readdirSync(target).sort()).toEqual(['a.txt', 'keep.txt']);
    expect(readFileSync(join(target, 'a.txt'), 'utf8')).toBe('new');
  });

  it('should refuse, before any work, an output name taken by a folder, a target that is a file, and an empty name', () => {
    const target = join(dir, 'out');
    mkdirSync(join(target, 'bands.csv'), { recursive: true });
    expect(() => OutputFolder.prepare(target, ['analysis.json', 'bands.csv'])).toThrow(/"bands\.csv" exists there and is not a file/);
    writeFileSync(join(dir, 'file'), '');
    expect(() => OutputFolder.prepare(join(dir, 'file'), ['a'])).toThrow(/exists and is not a folder/);
    expect(() => OutputFolder.prepare(join(dir, 'file', 'sub'), ['a'])).toThrow(/cannot be written: a part of the path is a file, not a folder/);
    expect(() => OutputFolder.prepare('', ['a'])).toThrow(/needs a folder or file name, got an empty string/);
    expect(() => OutputFolder.prepare('/proc/ancbench-out', ['a'])).toThrow(/inside \/proc/);
    expect(readdirSync(target)).toEqual(['bands.csv']);
  });

  it('should leave no trace when a run fails between prepare and commit (abortPendingOutputs)', () => {
    const f = OutputFolder.prepare(join(dir, 'out'), ['a.txt']);
    f.write('a.txt', 'A');
    abortPendingOutputs();
    expect(readdirSync(dir)).toEqual([]);
  });
});

describe('SingleOutputFile', () => {
  it('should write the file only on commit and refuse a folder', () => {
    const target = join(dir, 'm', 'model.json');
    const f = SingleOutputFile.prepare(target);
    expect(existsSync(target)).toBe(false);
    f.commit('{}');
    expect(readFileSync(target, 'utf8')).toBe('{}');
    expect(readdirSync(join(dir, 'm'))).toEqual(['model.json']);
    expect(() => SingleOutputFile.prepare(dir)).toThrow(/must name a file/);
    const g = SingleOutputFile.prepare(join(dir, 'n', 'model.json'));
    g.abort();
    expect(existsSync(join(dir, 'n'))).toBe(false);
  });
});
