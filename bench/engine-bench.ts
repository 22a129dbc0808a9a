/**
 * `npm run bench`: the engine's real-time factor (seconds of audio processed per second of wall time)
 * at 48 kHz with 128-sample blocks, for each FxLMS implementation and filter size, plus memory.
 *
 *   npm run bench                      readable table
 *   npm run bench -- --json            a JSON array, one object per (implementation, taps, modelTaps)
 *   npm run bench -- --runs 7          timed runs per row (the median is reported; default 5)
 *   npm run bench -- --only wasm,fd    some implementations only
 *   npm run bench -- --sizes 512x256   some sizes only (LxM, comma-separated)
 *
 * A benchmark, not a test: nothing here passes or fails. Each run processes blocks until at least
 * `RUN_S` of wall time has passed; the median of the runs is reported with the spread, because the
 * machines are shared. The load average at each row is printed so a slow row can be read for what
 * it is. The stimulus is open loop (random reference and error blocks, adaptation on), so every
 * implementation does its whole per-block work; FxNLMS with a small step keeps the weights bounded.
 */
import os from 'node:os';
import { Engine } from '../src/engine/engine.ts';
import type { ControllerConfig } from '../src/engine/controller-factory.ts';
import { createFxlmsController, type FxlmsImplementation, type FxlmsImplementationSettings } from '../src/engine/implementation.ts';
import type { FxlmsConfig } from '../src/dsp/fxlms.ts';
import type { GradientConstraint } from '../src/dsp/fd-fxlms.ts';
import { wasmSimdSupported } from '../src/dsp/wasm-module.ts';
import { Random } from '../src/dsp/random.ts';

const SAMPLE_RATE = 48000;
const BLOCK = 128;
const RUN_S = 0.25;
const SIZES: [number, number][] = [
  [64, 64],
  [256, 128],
  [512, 256],
  [1024, 512],
  [4096, 2048],
  [8192, 4096],
];

/** What a bench row runs: an implementation and, for the frequency domain, its options. */
interface Variant {
  name: string;
  implementation: FxlmsImplementation;
  update: 'sample' | 'block';
  constraint?: GradientConstraint;
  wasmSimd: boolean;
  note: string;
}

const VARIANTS: Variant[] = [
  { name: 'js', implementation: 'js', update: 'sample', wasmSimd: false, note: 'TypeScript time domain (reference), per-sample update' },
  { name: 'wasm', implementation: 'wasm', update: 'sample', wasmSimd: true, note: 'wasm SIMD time domain, per-sample update' },
  { name: 'fd', implementation: 'fd', update: 'block', constraint: 'alternating', wasmSimd: true, note: 'partitioned FD, alternating constraint, wasm SIMD spectral loops' },
  { name: 'fd-full', implementation: 'fd', update: 'block', constraint: 'full', wasmSimd: true, note: 'partitioned FD, full constraint, wasm SIMD spectral loops' },
  { name: 'fd-js', implementation: 'fd', update: 'block', constraint: 'alternating', wasmSimd: false, note: 'partitioned FD, alternating constraint, TypeScript loops (no-SIMD fallback)' },
];

export interface BenchRow {
  implementation: string;
  variant: string;
  taps: number;
  modelTaps: number;
  blockSize: number;
  sampleRate: number;
  /** Median real-time factor over the runs. */
  realTimeFactor: number;
  realTimeFactorMin: number;
  realTimeFactorMax: number;
  /**
   * Median real-time factor over the process's CPU time instead of wall time: on a shared machine
   * this is close to what one unshared core would do (it still counts the JIT and GC threads).
   */
  cpuRealTimeFactor: number;
  runs: number;
  /** Wall time per block, median, in microseconds, and its share of the block's real-time budget. */
  microsecondsPerBlock: number;
  budgetShare: number;
  /** Bytes the engine and controller allocated at construction (JS heap + ArrayBuffers, wasm memory included). */
  stateBytes: number;
  /** The process's peak resident set size so far, MiB. */
  peakRssMiB: number;
  loadAverage1m: number;
  /** How the engine got the controller: through its factory, or handed in by the bench. */
  host: 'engine-factory' | 'engine-with-bench-controller';
  date: string;
  cpu: string;
  cores: number;
  node: string;
}

function parseArgs(argv: string[]): { json: boolean; runs: number; only: Set<string> | null; sizes: [number, number][] } {
  let json = false;
  let runs = 5;
  let only: Set<string> | null = null;
  let sizes = SIZES;
  for (let i = 0; i < argv.length; i++) {
    const a = argv[i]!;
    if (a === '--json') json = true;
    else if (a === '--runs') {
      runs = Number(argv[++i]);
      if (!Number.isInteger(runs) || runs < 1 || runs > 101) throw new RangeError(`--runs must be an integer from 1 to 101, got ${argv[i]}`);
    } else if (a === '--only') {
      only = new Set((argv[++i] ?? '').split(','));
      for (const v of only) if (!VARIANTS.some((x) => x.name === v)) throw new RangeError(`--only: unknown implementation "${v}" (known: ${VARIANTS.map((x) => x.name).join(', ')})`);
    } else if (a === '--sizes') {
      sizes = (argv[++i] ?? '').split(',').map((s) => {
        const m = /^(\d+)x(\d+)$/.exec(s);
        if (!m) throw new RangeError(`--sizes: expected LxM such as 512x256, got "${s}"`);
        return [Number(m[1]), Number(m[2])] as [number, number];
      });
    } else throw new RangeError(`unknown option ${a} (known: --json, --runs N, --only LIST, --sizes LIST)`);
  }
  return { json, runs, only, sizes };
}

function median(xs: number[]): number {
  const s = [...xs].sort((a, b) => a - b);
  const m = s.length >> 1;
  return s.length % 2 ? s[m]! : 0.5 * (s[m - 1]! + s[m]!);
}

/** A decaying, oscillating secondary-path model of M taps with a bulk delay of one block. */
function benchModel(M: number): Float32Array {
  const s = new Float32Array(M);
  const delay = Math.min(BLOCK, M - 1);
  for (let m = delay; m < M; m++) s[m] = 0.3 * Math.exp(-(m - delay) / (M / 6)) * Math.cos(0.05 * m);
  return s;
}

/**
 * An engine running the variant. The engine builds its controller through its factory; when the
 * factory does not yet know `implementation`, the bench hands the engine its controller instead.
 */
function buildEngine(v: Variant, L: number, M: number): { engine: Engine; host: BenchRow['host'] } {
  const config: FxlmsConfig = { algorithm: 'fxnlms', taps: L, stepSize: 1e-3, regularization: 1e-3, update: v.update };
  const model = benchModel(M);
  // the fields buildFxlmsController (src/engine/implementation.ts) reads; a factory that does not
  // know them yet ignores them
  const settings: FxlmsImplementationSettings = { implementation: v.implementation, ...(v.constraint ? { fdConstraint: v.constraint } : {}) };
  const withImpl = { ...config, ...settings } as ControllerConfig;
  let engine: Engine;
  try {
    engine = new Engine({ sampleRate: SAMPLE_RATE, maxBlockSize: BLOCK, controller: withImpl, secondaryPathModel: model, startMode: 'control' });
  } catch {
    engine = new Engine({ sampleRate: SAMPLE_RATE, maxBlockSize: BLOCK, controller: config, secondaryPathModel: model, startMode: 'control' });
  }
  const built = engine.controller as { implementation?: string; constraint?: string; kernel?: string };
  const matches = built.implementation === v.implementation && (v.constraint === undefined || built.constraint === v.constraint) && (v.implementation !== 'fd' || built.kernel === (v.wasmSimd ? 'wasm' : 'js'));
  if (matches && v.name !== 'js') return { engine, host: 'engine-factory' };
  if (v.name === 'js' && (built.implementation === undefined || built.implementation === 'js')) return { engine, host: 'engine-factory' };
  const c = createFxlmsController(config, model, BLOCK, v.implementation, { wasmSimd: v.wasmSimd, ...(v.constraint ? { constraint: v.constraint } : {}) });
  Object.defineProperty(engine, 'controller', { value: c });
  return { engine, host: 'engine-with-bench-controller' };
}

function memoryNow(): number {
  const m = process.memoryUsage();
  return m.heapUsed + m.arrayBuffers;
}

function benchRow(v: Variant, L: number, M: number, runs: number): BenchRow {
  const before = memoryNow();
  const { engine, host } = buildEngine(v, L, M);
  const stateBytes = Math.max(0, memoryNow() - before);
  const rng = new Random(L * 31 + M);
  const stimulusBlocks = 32;
  const refs = Array.from({ length: stimulusBlocks }, () => rng.fillGaussian(new Float32Array(BLOCK), 0.1) as Float32Array);
  const errs = Array.from({ length: stimulusBlocks }, () => rng.fillGaussian(new Float32Array(BLOCK), 0.01) as Float32Array);
  const out = new Float32Array(BLOCK);
  // warm-up: let the JIT compile the block path (and the wasm tier-up happen)
  const warmEnd = performance.now() + 150;
  let b = 0;
  while (performance.now() < warmEnd || b < 8) {
    engine.process(refs[b % stimulusBlocks]!, errs[b % stimulusBlocks]!, out, BLOCK);
    b++;
  }
  const rtfs: number[] = [];
  const cpuRtfs: number[] = [];
  const usPerBlock: number[] = [];
  for (let r = 0; r < runs; r++) {
    let blocks = 0;
    const cpu0 = process.cpuUsage();
    const t0 = performance.now();
    let t = t0;
    while (t - t0 < RUN_S * 1000 || blocks < 8) {
      for (let k = 0; k < 4; k++) {
        engine.process(refs[b % stimulusBlocks]!, errs[b % stimulusBlocks]!, out, BLOCK);
        b++;
      }
      blocks += 4;
      t = performance.now();
    }
    const cpu = process.cpuUsage(cpu0);
    const wallS = (t - t0) / 1000;
    rtfs.push((blocks * BLOCK) / SAMPLE_RATE / wallS);
    cpuRtfs.push((blocks * BLOCK) / SAMPLE_RATE / ((cpu.user + cpu.system) / 1e6));
    usPerBlock.push((wallS * 1e6) / blocks);
  }
  const rtf = median(rtfs);
  return {
    implementation: v.implementation,
    variant: v.name,
    taps: L,
    modelTaps: M,
    blockSize: BLOCK,
    sampleRate: SAMPLE_RATE,
    realTimeFactor: round(rtf, 3),
    realTimeFactorMin: round(Math.min(...rtfs), 3),
    realTimeFactorMax: round(Math.max(...rtfs), 3),
    cpuRealTimeFactor: round(median(cpuRtfs), 3),
    runs,
    microsecondsPerBlock: round(median(usPerBlock), 2),
    budgetShare: round(1 / rtf, 4),
    stateBytes,
    peakRssMiB: round(process.resourceUsage().maxRSS / 1024, 1),
    loadAverage1m: round(os.loadavg()[0]!, 2),
    host,
    date: new Date().toISOString(),
    cpu: os.cpus()[0]?.model ?? 'unknown',
    cores: os.availableParallelism(),
    node: process.version,
  };
}

function round(x: number, digits: number): number {
  const f = 10 ** digits;
  return Math.round(x * f) / f;
}

function main(): void {
  const args = parseArgs(process.argv.slice(2));
  const simd = wasmSimdSupported();
  const variants = VARIANTS.filter((v) => (args.only ? args.only.has(v.name) : true) && (simd || !v.wasmSimd));
  const rows: BenchRow[] = [];
  const say = (s: string): void => {
    if (!args.json) process.stdout.write(s + '\n');
  };
  say(`ancbench engine benchmark — ${new Date().toISOString()}`);
  say(`machine: ${os.cpus()[0]?.model ?? 'unknown'}, ${os.availableParallelism()} cores, Node ${process.version}; wasm SIMD ${simd ? 'available' : 'NOT available (wasm rows skipped)'}`);
  say(`48 kHz, block ${BLOCK}, FxNLMS adapting, median of ${args.runs} runs of ≥ ${RUN_S} s; load average at start ${os.loadavg().map((x) => x.toFixed(2)).join(' ')}`);
  say('RTF: audio seconds per wall second; CPU RTF: per second of this process\'s CPU time (what one unshared core would do)');
  for (const v of variants) say(`  ${v.name.padEnd(8)} ${v.note}`);
  say('');
  say(`${'impl'.padEnd(8)} ${'L'.padStart(5)} ${'M'.padStart(5)} ${'RTF'.padStart(8)} ${'(min–max)'.padEnd(17)} ${'CPU RTF'.padStart(8)} ${'µs/block'.padStart(9)} ${'budget'.padStart(7)} ${'state MiB'.padStart(9)} ${'load'.padStart(5)}`);
  for (const [L, M] of args.sizes) {
    for (const v of variants) {
      const row = benchRow(v, L, M, args.runs);
      rows.push(row);
      say(
        `${v.name.padEnd(8)} ${String(L).padStart(5)} ${String(M).padStart(5)} ${row.realTimeFactor.toFixed(1).padStart(7)}x ${`(${row.realTimeFactorMin.toFixed(1)}–${row.realTimeFactorMax.toFixed(1)})`.padEnd(17)} ${row.cpuRealTimeFactor.toFixed(1).padStart(7)}x ${row.microsecondsPerBlock.toFixed(1).padStart(9)} ${(100 * row.budgetShare).toFixed(1).padStart(6)}% ${(row.stateBytes / 1048576).toFixed(2).padStart(9)} ${row.loadAverage1m.toFixed(2).padStart(5)}` +
          (row.host === 'engine-with-bench-controller' ? ' *' : ''),
      );
    }
  }
  say('');
  say(`peak resident memory: ${(process.resourceUsage().maxRSS / 1024).toFixed(1)} MiB; load average at end ${os.loadavg().map((x) => x.toFixed(2)).join(' ')}`);
  if (rows.some((r) => r.host === 'engine-with-bench-controller')) say('* the engine\'s controller factory does not build this implementation yet: the bench hands the engine its controller');
  if (args.json) process.stdout.write(JSON.stringify(rows, null, 2) + '\n');
}

main();
