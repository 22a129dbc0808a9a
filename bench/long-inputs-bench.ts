/**
 * `npm run bench:long`: wall time and peak memory of `ancbench analyze` and `ancbench simulate --out` on
 * long inputs (default 1, 10 and 30 minutes of audio at 48 kHz), to show that memory does not grow with
 * the duration. Kept out of `npm run bench` (the engine benchmark) because the 30-minute runs take minutes.
 *
 *   npm run bench:long                         readable table
 *   npm run bench:long -- --json               one JSON object per (command, minutes)
 *   npm run bench:long -- --minutes 1,10       other durations
 *   npm run bench:long -- --cli path/to/ancbench.mjs   measure another build of the command line (e.g.
 *                                              an older commit, for a before/after comparison)
 *   npm run bench:long -- --only analyze       one command only (analyze or simulate)
 *
 * Inputs (invented, for measurement only): three 16-bit mono 48 kHz WAV files per duration, reference
 * (white noise), control-off error (the reference delayed 5 ms and scaled, plus independent noise) and
 * control-on error (a tenth of it); and the workshop-hum demo scenario with its duration set to the
 * same length. Each command runs in its own process under /usr/bin/time, which reports the peak resident
 * set size (Linux getrusage ru_maxrss). A benchmark, not a test: nothing passes or fails.
 */
import { execFileSync, spawnSync } from 'node:child_process';
import { closeSync, mkdtempSync, openSync, readFileSync, rmSync, writeFileSync, writeSync } from 'node:fs';
import os from 'node:os';
import { join } from 'node:path';
import { fileURLToPath } from 'node:url';
import { Random } from '../src/dsp/random.ts';

const FS = 48000;
const root = fileURLToPath(new URL('..', import.meta.url));

interface Row {
  command: 'analyze' | 'simulate --out';
  minutes: number;
  wallS: number;
  peakRssMiB: number;
  exitStatus: number;
  loadAverage: number;
}

function arg(name: string): string | undefined {
  const i = process.argv.indexOf(`--${name}`);
  return i >= 0 ? process.argv[i + 1] : undefined;
}

/** A 16-bit mono WAV of `frames` samples, written block by block from `next(out)`. */
function writeInt16Wav(path: string, frames: number, next: (out: Float64Array) => void): void {
  const fd = openSync(path, 'w');
  const h = Buffer.alloc(44);
  h.write('RIFF', 0, 'latin1');
  h.writeUInt32LE(36 + 2 * frames, 4);
  h.write('WAVEfmt ', 8, 'latin1');
  h.writeUInt32LE(16, 16);
  h.writeUInt16LE(1, 20);
  h.writeUInt16LE(1, 22);
  h.writeUInt32LE(FS, 24);
  h.writeUInt32LE(2 * FS, 28);
  h.writeUInt16LE(2, 32);
  h.writeUInt16LE(16, 34);
  h.write('data', 36, 'latin1');
  h.writeUInt32LE(2 * frames, 40);
  writeSync(fd, h);
  const block = new Float64Array(65536);
  const ints = new Int16Array(block.length);
  for (let t = 0; t < frames; t += block.length) {
    const n = Math.min(block.length, frames - t);
    next(block);
    for (let i = 0; i < n; i++) ints[i] = Math.max(-32768, Math.min(32767, Math.round(block[i]! * 32767)));
    writeSync(fd, new Uint8Array(ints.buffer, 0, 2 * n));
  }
  closeSync(fd);
}

function makeRecordings(dir: string, minutes: number): void {
  const frames = minutes * 60 * FS;
  const delay = Math.round(0.005 * FS);
  for (const [name, errorScale] of [['ref', 0], ['err', 0.5], ['on', 0.05]] as const) {
    const r = new Random(11); // the same reference sequence in each file
    const own = new Random(name === 'on' ? 13 : 12);
    const history = new Float64Array(delay);
    let h = 0;
    writeInt16Wav(join(dir, `${name}.wav`), frames, (out) => {
      for (let i = 0; i < out.length; i++) {
        const x = 0.2 * r.gaussian();
        if (errorScale === 0) out[i] = x;
        else {
          out[i] = errorScale * history[h]! + 0.01 * own.gaussian();
          history[h] = x;
          h = (h + 1) % delay;
        }
      }
    });
  }
}

function measure(cli: string, args: string[]): { wallS: number; peakRssMiB: number; exitStatus: number } {
  const r = spawnSync('/usr/bin/time', ['-f', 'ANCBENCH_TIME %e %M', process.execPath, cli, ...args], { encoding: 'utf8', maxBuffer: 1 << 26 });
  const m = /ANCBENCH_TIME ([\d.]+) (\d+)/.exec(r.stderr ?? '');
  if (!m) throw new Error(`could not measure ${args.join(' ')}: ${r.stderr}`);
  if (r.status !== 0) process.stderr.write(`(exit ${r.status}) ${r.stderr.split('\n').slice(0, 3).join(' ')}\n`);
  return { wallS: Number(m[1]), peakRssMiB: Number(m[2]) / 1024, exitStatus: r.status ?? -1 };
}

function main(): void {
  const minutesList = (arg('minutes') ?? '1,10,30').split(',').map(Number);
  const cli = arg('cli') ?? join(root, 'bin', 'ancbench.mjs');
  const only = arg('only');
  const json = process.argv.includes('--json');
  const rows: Row[] = [];
  const scenario = JSON.parse(readFileSync(join(root, 'demo', 'scenarios', 'workshop-extractor-hum.json'), 'utf8')) as Record<string, unknown>;
  for (const minutes of minutesList) {
    const dir = mkdtempSync(join(os.tmpdir(), 'ancbench-long-'));
    try {
      if (only !== 'simulate') {
        makeRecordings(dir, minutes);
        const m = measure(cli, ['analyze', '--ref', join(dir, 'ref.wav'), '--err', join(dir, 'err.wav'), '--control-on', join(dir, 'on.wav'), '--json']);
        rows.push({ command: 'analyze', minutes, ...m, loadAverage: os.loadavg()[0]! });
        if (!json) process.stderr.write(`analyze ${minutes} min: ${m.wallS} s, ${m.peakRssMiB.toFixed(0)} MiB\n`);
        for (const f of ['ref.wav', 'err.wav', 'on.wav']) rmSync(join(dir, f));
      }
      if (only !== 'analyze') {
        const path = join(dir, 'long.json');
        writeFileSync(path, JSON.stringify({ ...scenario, durationS: minutes * 60 }));
        const m = measure(cli, ['simulate', path, '--out', join(dir, 'out'), '--json']);
        rows.push({ command: 'simulate --out', minutes, ...m, loadAverage: os.loadavg()[0]! });
        if (!json) process.stderr.write(`simulate --out ${minutes} min: ${m.wallS} s, ${m.peakRssMiB.toFixed(0)} MiB\n`);
      }
    } finally {
      rmSync(dir, { recursive: true, force: true });
    }
  }
  if (json) {
    process.stdout.write(JSON.stringify(rows, null, 2) + '\n');
    return;
  }
  const cpu = os.cpus()[0]?.model ?? 'unknown CPU';
  process.stdout.write(`long inputs: ${os.cpus().length} cores (${cpu}), Node ${process.version}, ${execFileSync('uname', ['-r'], { encoding: 'utf8' }).trim()}\n\n`);
  process.stdout.write('command          minutes   wall s   peak MiB   load\n');
  for (const r of rows) {
    process.stdout.write(`${r.command.padEnd(16)} ${String(r.minutes).padStart(7)} ${r.wallS.toFixed(1).padStart(8)} ${r.peakRssMiB.toFixed(0).padStart(10)} ${r.loadAverage.toFixed(1).padStart(6)}${r.exitStatus === 0 ? '' : `  exit ${r.exitStatus}`}\n`);
  }
}

main();
