/**
 * A small pool of worker threads (node:worker_threads): N workers, one grid point each at a time, the
 * next handed out as one finishes. Simpler than a pool library here: the jobs are few (≤ 1000), long
 * (seconds each) and independent, so a queue and a message handler are all it takes.
 */
import { Worker } from 'node:worker_threads';
import type { GridValue } from '../plant/settings-grid.ts';
import type { SweepRunResult, SweepSource } from './sweep-run.ts';
import { InputError } from '../io/files-node.ts';

export interface PoolJob {
  index: number;
  settings: Record<string, GridValue>;
}

export async function runPool(source: SweepSource, jobs: PoolJob[], workers: number, onDone: (done: number) => void): Promise<SweepRunResult[]> {
  const results: SweepRunResult[] = new Array(jobs.length);
  let next = 0, done = 0;
  const pool: Worker[] = [];
  try {
    await new Promise<void>((resolve, reject) => {
      const feed = (w: Worker): void => {
        if (next < jobs.length) w.postMessage(jobs[next++]);
      };
      const count = Math.max(1, Math.min(workers, jobs.length));
      for (let k = 0; k < count; k++) {
        const w = new Worker(new URL('./sweep-worker-entry.mjs', import.meta.url), { workerData: { source } });
        pool.push(w);
        w.on('message', (m: { ok: true; result: SweepRunResult } | { ok: false; index: number; message: string; name: string }) => {
          if (!m.ok) {
            reject(new InputError(`run ${m.index + 1} of the sweep failed: ${m.message}`));
            return;
          }
          const pos = jobs.findIndex((j) => j.index === m.result.index);
          results[pos] = m.result;
          onDone(++done);
          if (done === jobs.length) resolve();
          else feed(w);
        });
        w.on('error', (e) => reject(e));
        feed(w);
      }
    });
  } finally {
    await Promise.all(pool.map((w) => w.terminate()));
  }
  return results;
}
