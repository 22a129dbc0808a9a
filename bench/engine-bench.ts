/**
 * `npm run bench`: the engine's real-time factor (seconds of audio processed per second of wall time)
 * at 48 kHz with 128-sample blocks, for each FxLMS implementation and filter size, plus memory.
 *
 *   npm run bench                      readable table
 *   npm run bench -- --json            a JSON array, one object per (implementation, taps, modelTaps)
 *   npm run bench -- --runs 7          timed runs per row (the median is reported; default 5)
 *   npm run bench -- --only wasm,fd    some implementations only
 *   npm run bench -- --sizes 512x256   some sizes only (LxM, comma-separated)
 *   npm run bench -- --worklet         also run the engine in a real-time AudioWorklet of headless
 *                                      Chromium at (4096, 2048) (or --sizes) for --worklet-seconds
 *                                      (default 60) per implementation: render-budget share, underruns
 *   npm run bench -- --sweep           also the sweep throughput (bench/sweep-bench.ts): runs per minute
 *                                      at (512, 256), 10 s of audio each, 1 worker vs one per core;
 *                                      --sweep-runs N runs per pool (default 2 per core)
 *
 * A benchmark, not a test: nothing here passes or fails. Each run processes blocks until at least
 * `RUN_S` of wall time has passed; the median of the runs is reported with the spread, because the
 * machines are shared. The load average at each row is printed so a slow row can be read for what
 * it is. The stimulus is open loop (random reference and error blocks, adaptation on), so every
 * implementation does its whole per-block work; FxNLMS with a small step keeps the weights bounded.
 * The divergence guard is off (an open-loop stimulus is no plant for it to judge).
 */
import os from 'node:os';
import { wasmSimdSupported } from '../src/dsp/wasm-module.ts';
import { BLOCK, SAMPLE_RATE, VARIANTS, buildBenchEngine, benchStimulus, variantByName, type EngineHost, type Variant } from './bench-engine.ts';
import { runWorkletBench, type WorkletResult } from './worklet-run.ts';
import { runSweepBench, type SweepBenchRow } from './sweep-bench.ts';

const RUN_S = 0.25;
const SIZES: [number, number][] = [
  [64, 64],
  [256, 128],
  [512, 256],
  [1024, 512],
  [4096, 2048],
  [8192, 4096],
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
  /** The controller's process() alone (same stimulus, runs interleaved with the engine's), median. */
  controllerRealTimeFactor: number;
  /** Median engine time per block minus the controller's: the output stage, meters and the rest. */
  engineOverheadMicroseconds: number;
  budgetShare: number;
  /** Bytes the engine and controller allocated at construction (JS heap + ArrayBuffers, wasm memory included). */
  stateBytes: number;
  /** The process's peak resident set size so far, MiB. */
  peakRssMiB: number;
  loadAverage1m: number;
  /** How the engine got the controller: through its factory, or handed in by the bench. */
  host: EngineHost;
  date: string;
  cpu: string;
  cores: number;
  node: string;
}

interface Args {
  json: boolean;
  runs: number;
  only: Set<string> | null;
  sizes: [number, number][] | null;
  worklet: boolean;
  workletSeconds: number;
  sweep: boolean;
  sweepRuns: number;
}

function parseArgs(argv: string[]): Args {
  let json = false;
  let runs = 5;
  let only: Set<string> | null = null;
  let sizes: [number, number][] | null = null;
  let worklet = false;
  let workletSeconds = 60;
  let sweep = false;
  let sweepRuns = 2 * os.availableParallelism();
  for (let i = 0; i < argv.length; i++) {
    const a = argv[i]!;
    if (a === '--json') json = true;
    else if (a === '--runs') {
      runs = Number(argv[++i]);
      if (!Number.isInteger(runs) || runs < 1 || runs > 101) throw new RangeError(`--runs must be an integer from 1 to 101, got ${argv[i]}`);
    } else if (a === '--only') {
      only = new Set((argv[++i] ?? '').split(','));
      for (const v of only) variantByName(v);
    } else if (a === '--sizes') {
      sizes = (argv[++i] ?? '').split(',').map((s) => {
        const m = /^(\d+)x(\d+)$/.exec(s);
        if (!m) throw new RangeError(`--sizes: expected LxM such as 512x256, got "${s}"`);
        return [Number(m[1]), Number(m[2])] as [number, number];
      });
    } else if (a === '--worklet') worklet = true;
    else if (a === '--worklet-seconds') {
      workletSeconds = Number(argv[++i]);
      if (!(workletSeconds >= 3 && workletSeconds <= 3600)) throw new RangeError(`--worklet-seconds must be from 3 to 3600, got ${argv[i]}`);
    } else if (a === '--sweep') sweep = true;
    else if (a === '--sweep-runs') {
      sweepRuns = Number(argv[++i]);
      if (!Number.isInteger(sweepRuns) || sweepRuns < 1 || sweepRuns > 1000) throw new RangeError(`--sweep-runs must be an integer from 1 to 1000, got ${argv[i]}`);
    } else throw new RangeError(`unknown option ${a} (known: --json, --runs N, --only LIST, --sizes LIST, --worklet, --worklet-seconds S, --sweep, --sweep-runs N)`);
  }
  return { json, runs, only, sizes, worklet, workletSeconds, sweep, sweepRuns };
}

function median(xs: number[]): number {
  const s = [...xs].sort((a, b) => a - b);
  const m = s.length >> 1;
  return s.length % 2 ? s[m]! : 0.5 * (s[m - 1]! + s[m]!);
}

function memoryNow(): number {
  const m = process.memoryUsage();
  return m.heapUsed + m.arrayBuffers;
}

/** Blocks until RUN_S of wall time has passed: real-time factors over wall and CPU time. */
function timedRun(step: (k: number) => void, from: number): { rtf: number; cpuRtf: number; usPerBlock: number; next: number } {
  let blocks = 0;
  let k = from;
  const cpu0 = process.cpuUsage();
  const t0 = performance.now();
  let t = t0;
  while (t - t0 < RUN_S * 1000 || blocks < 8) {
    for (let i = 0; i < 4; i++) step(k++);
    blocks += 4;
    t = performance.now();
  }
  const cpu = process.cpuUsage(cpu0);
  const wallS = (t - t0) / 1000;
  const audioS = (blocks * BLOCK) / SAMPLE_RATE;
  return { rtf: audioS / wallS, cpuRtf: audioS / ((cpu.user + cpu.system) / 1e6), usPerBlock: (wallS * 1e6) / blocks, next: k };
}

function benchRow(v: Variant, L: number, M: number, runs: number): BenchRow {
  const before = memoryNow();
  const { engine, host } = buildBenchEngine(v, L, M);
  const stateBytes = Math.max(0, memoryNow() - before);
  const { refs, errs } = benchStimulus(L * 31 + M);
  const stimulusBlocks = refs.length;
  const out = new Float32Array(BLOCK);
  // warm-up: let the JIT compile the block path (and the wasm tier-up happen)
  const warmEnd = performance.now() + 150;
  let b = 0;
  while (performance.now() < warmEnd || b < 8) {
    engine.process(refs[b % stimulusBlocks]!, errs[b % stimulusBlocks]!, out, BLOCK);
    b++;
  }
  const ctrl = engine.controller;
  const engineStep = (k: number): void => engine.process(refs[k % stimulusBlocks]!, errs[k % stimulusBlocks]!, out, BLOCK);
  const controllerStep = (k: number): void => ctrl.process(refs[k % stimulusBlocks]!, errs[k % stimulusBlocks]!, out, BLOCK);
  const rtfs: number[] = [];
  const cpuRtfs: number[] = [];
  const usPerBlock: number[] = [];
  const ctrlUsPerBlock: number[] = [];
  // engine and controller-alone runs interleaved, so both see the same load
  for (let r = 0; r < runs; r++) {
    const e = timedRun(engineStep, b);
    b = e.next;
    rtfs.push(e.rtf);
    cpuRtfs.push(e.cpuRtf);
    usPerBlock.push(e.usPerBlock);
    const c = timedRun(controllerStep, b);
    b = c.next;
    ctrlUsPerBlock.push(c.usPerBlock);
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
    controllerRealTimeFactor: round(BLOCK / SAMPLE_RATE / (median(ctrlUsPerBlock) / 1e6), 3),
    engineOverheadMicroseconds: round(median(usPerBlock) - median(ctrlUsPerBlock), 2),
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

/** A worklet result as a row of the JSON output (realTimeFactor = 1 / render-budget share). */
interface WorkletRow extends WorkletResult {
  implementation: string;
  realTimeFactor: number;
  host: 'audioworklet';
  engineHost: string;
  date: string;
  cpu: string;
  cores: number;
}

async function main(): Promise<void> {
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
  say('RTF: audio seconds per wall second; CPU RTF: per second of this process\'s CPU time (what one unshared core would do);');
  say('ctrl RTF: the controller alone, without the engine\'s output stage and meters');
  for (const v of variants) say(`  ${v.name.padEnd(8)} ${v.note}`);
  say('');
  say(`${'impl'.padEnd(8)} ${'L'.padStart(5)} ${'M'.padStart(5)} ${'RTF'.padStart(8)} ${'(min–max)'.padEnd(17)} ${'CPU RTF'.padStart(8)} ${'ctrl RTF'.padStart(9)} ${'µs/block'.padStart(9)} ${'budget'.padStart(7)} ${'state MiB'.padStart(9)} ${'load'.padStart(5)}`);
  for (const [L, M] of args.sizes ?? SIZES) {
    for (const v of variants) {
      const row = benchRow(v, L, M, args.runs);
      rows.push(row);
      say(
        `${v.name.padEnd(8)} ${String(L).padStart(5)} ${String(M).padStart(5)} ${row.realTimeFactor.toFixed(1).padStart(7)}x ${`(${row.realTimeFactorMin.toFixed(1)}–${row.realTimeFactorMax.toFixed(1)})`.padEnd(17)} ${row.cpuRealTimeFactor.toFixed(1).padStart(7)}x ${row.controllerRealTimeFactor.toFixed(1).padStart(8)}x ${row.microsecondsPerBlock.toFixed(1).padStart(9)} ${(100 * row.budgetShare).toFixed(1).padStart(6)}% ${(row.stateBytes / 1048576).toFixed(2).padStart(9)} ${row.loadAverage1m.toFixed(2).padStart(5)}` +
          (row.host === 'engine-with-bench-controller' ? ' *' : ''),
      );
    }
  }
  say('');
  say(`peak resident memory: ${(process.resourceUsage().maxRSS / 1024).toFixed(1)} MiB; load average at end ${os.loadavg().map((x) => x.toFixed(2)).join(' ')}`);
  if (rows.some((r) => r.host === 'engine-with-bench-controller')) say('* the engine builds this implementation only where WebAssembly SIMD is missing (the fallback); here the bench hands the engine that controller');
  const all: (BenchRow | WorkletRow)[] = [...rows];
  if (args.worklet) {
    const wv = variants.filter((v) => (args.only ? true : ['js', 'wasm', 'fd'].includes(v.name)));
    const sizes = args.sizes ?? [[4096, 2048]];
    say('');
    say(`AudioWorklet in headless Chromium, 48 kHz, ${args.workletSeconds} s per row (the first second is left out):`);
    const results = await runWorkletBench(wv, sizes, args.workletSeconds, (t) => say(t));
    say(`${'impl'.padEnd(8)} ${'L'.padStart(5)} ${'M'.padStart(5)} ${'budget'.padStart(8)} ${'µs/quantum'.padStart(11)} ${'quanta'.padStart(7)} ${'underruns'.padStart(10)}`);
    for (const r of results) {
      const v = variantByName(r.variant);
      all.push({ ...r, implementation: v.implementation, realTimeFactor: round(1 / r.renderBudgetShare, 3), host: 'audioworklet', engineHost: r.host, date: new Date().toISOString(), cpu: os.cpus()[0]?.model ?? 'unknown', cores: os.availableParallelism() });
      const under = r.underrunEvents === null ? 'n/a' : `${r.underrunEvents} (${(r.underrunDurationS ?? 0).toFixed(3)} s)`;
      say(`${r.variant.padEnd(8)} ${String(r.taps).padStart(5)} ${String(r.modelTaps).padStart(5)} ${(100 * r.renderBudgetShare).toFixed(2).padStart(7)}% ${r.microsecondsPerQuantum.toFixed(1).padStart(11)} ${String(r.quanta).padStart(7)} ${under.padStart(10)}`);
    }
  }
  const sweepRows: SweepBenchRow[] = [];
  if (args.sweep) {
    say('');
    say(`sweep throughput: ${args.sweepRuns} runs of 10 s at (512, 256), 48 kHz, block 128, simulated closed loop:`);
    sweepRows.push(...(await runSweepBench(args.sweepRuns, say)).rows);
  }
  if (args.json) process.stdout.write(JSON.stringify([...all, ...sweepRows], null, 2) + '\n');
}

main().catch((e: unknown) => {
  process.stderr.write(`${e instanceof Error ? e.message : String(e)}\n`);
  process.exit(1);
});
