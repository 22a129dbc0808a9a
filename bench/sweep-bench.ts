/**
 * Sweep throughput (`npm run bench -- --sweep`): runs per minute of `ancbench sweep`'s worker pool on a
 * scenario at (L, M) = (512, 256), 48 kHz, block 128, 10 s of audio per run, with one worker and with one
 * per core, and the speedup. A benchmark, not a test: the machines are shared, so the load average is
 * printed beside the figures.
 */
import os from 'node:os';
import { mkdtempSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { runPool } from '../src/cli/sweep-pool.ts';
import { combination, parseGridShape, gridSize } from '../src/plant/settings-grid.ts';

export interface SweepBenchRow {
  host: 'sweep';
  taps: number;
  modelTaps: number;
  audioSecondsPerRun: number;
  runs: number;
  workers: number;
  wallS: number;
  runsPerMinute: number;
  loadAverage1m: number;
}

export async function runSweepBench(runs: number, say: (s: string) => void): Promise<{ rows: SweepBenchRow[]; speedup: number }> {
  const dir = mkdtempSync(join(tmpdir(), 'ancbench-sweep-bench-'));
  try {
    // an invented broadband plant whose secondary path fills the 256-tap model
    const fir = Array.from({ length: 200 }, (_, k) => 0.8 * Math.exp(-k / 40) * Math.cos(0.3 * k));
    const scenario = {
      schemaVersion: 1, sampleRate: 48000, blockSize: 128, durationS: 10, seed: 5,
      sources: [{ kind: 'noise', color: 'pink', rms: 0.05 }],
      paths: { reference: { delayMs: 0 }, primary: { delayMs: 8, gain: 0.6, fir: [1, 0.4, 0.1] }, secondary: { delayMs: 3, fir } },
      sensorNoiseRms: 0.0005,
      controller: { algorithm: 'fxnlms', taps: 512, stepSize: 0.005, modelTaps: 256 },
    };
    const path = join(dir, 'scenario.json');
    writeFileSync(path, JSON.stringify(scenario));
    const grid = parseGridShape({ 'controller.stepSize': Array.from({ length: runs }, (_, i) => 0.002 * (i + 1)) });
    const jobs = Array.from({ length: gridSize(grid) }, (_, i) => ({ index: i, settings: combination(grid, i) }));
    const rows: SweepBenchRow[] = [];
    for (const workers of [1, os.availableParallelism()]) {
      const t0 = performance.now();
      await runPool({ kind: 'scenario', path }, jobs, workers, () => {});
      const wallS = (performance.now() - t0) / 1000;
      const row: SweepBenchRow = { host: 'sweep', taps: 512, modelTaps: 256, audioSecondsPerRun: 10, runs: jobs.length, workers, wallS, runsPerMinute: (60 * jobs.length) / wallS, loadAverage1m: os.loadavg()[0]! };
      rows.push(row);
      say(`sweep    ${String(workers).padStart(3)} worker${workers > 1 ? 's' : ' '}  ${jobs.length} runs in ${wallS.toFixed(1)} s: ${row.runsPerMinute.toFixed(1)} runs/min  (load ${row.loadAverage1m.toFixed(2)})`);
    }
    const speedup = rows[1]!.runsPerMinute / rows[0]!.runsPerMinute;
    say(`sweep    speedup with ${os.availableParallelism()} workers: ${speedup.toFixed(2)}x (ideal ${os.availableParallelism()}x on idle cores)`);
    return { rows, speedup };
  } finally {
    rmSync(dir, { recursive: true, force: true });
  }
}
