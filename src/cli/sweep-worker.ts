/** A sweep's worker thread: runs the grid points the pool hands it, one at a time. */
import { parentPort, workerData } from 'node:worker_threads';
import { sweepRun, type SweepSource } from './sweep-run.ts';
import type { GridValue } from '../plant/settings-grid.ts';

const source = (workerData as { source: SweepSource }).source;
parentPort!.on('message', (m: { index: number; settings: Record<string, GridValue> }) => {
  try {
    parentPort!.postMessage({ ok: true, result: sweepRun(source, m.index, m.settings) });
  } catch (e) {
    parentPort!.postMessage({ ok: false, index: m.index, message: (e as Error).message, name: (e as Error).name });
  }
});
