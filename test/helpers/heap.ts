// Heap-growth harness for the "no allocation per block" rule (DEVELOPERS.md, 'Layers' and 'Real-time code and the JIT': src/dsp and the engine's
// real-time path). A garbage collection is forced, the blocks run, and the young generation ("new
// space", where short-lived objects are born) is read before any further collection could hide
// garbage; it holds far more than the budget. Old space is not counted: the JIT and feedback data grow
// it now and then, unrelated to the code under test. The smallest growth of HEAP_ROUNDS rounds counts,
// so a round disturbed by the JIT does not decide. Any allocation made every block is ≥ 12 bytes, i.e.
// ≥ 48 kB over HEAP_BLOCKS = 4000 blocks, against a 16 kB budget (4 bytes per block: room for the
// measurement itself, about 2–3 kB, and for the rare re-optimisation). Each test file using this
// should also run a control step that allocates, to prove the harness sees it.
// Doubles a step keeps live belong in object fields: a double in a captured `let` is boxed anew on
// every store.
import { getHeapSpaceStatistics, setFlagsFromString } from 'node:v8';
import { runInNewContext } from 'node:vm';

setFlagsFromString('--expose-gc');
const gc = runInNewContext('gc') as () => void;

/** Blocks per measured round (and in the warm-up). */
export const HEAP_BLOCKS = 4000;
/** Measured rounds; the smallest growth counts. */
export const HEAP_ROUNDS = 5;
/** Largest new-space growth (bytes) over one round that still counts as no per-block allocation. */
export const HEAP_BUDGET_BYTES = 16 * 1024;

/** Bytes in use in V8's new space (young generation). */
export function newSpaceUsed(): number {
  for (const s of getHeapSpaceStatistics()) if (s.space_name === 'new_space') return s.space_used_size;
  throw new Error('V8 reports no new_space');
}

/**
 * Runs `step` HEAP_BLOCKS times as a warm-up, then HEAP_ROUNDS rounds of HEAP_BLOCKS calls, each
 * after a forced collection, and returns the smallest new-space growth of a round (bytes).
 */
export function heapGrowth(step: () => void): number {
  for (let i = 0; i < HEAP_BLOCKS; i++) step(); // warm-up
  let smallest = Infinity;
  for (let r = 0; r < HEAP_ROUNDS; r++) {
    gc();
    const before = newSpaceUsed();
    for (let i = 0; i < HEAP_BLOCKS; i++) step();
    smallest = Math.min(smallest, newSpaceUsed() - before);
  }
  return smallest;
}
