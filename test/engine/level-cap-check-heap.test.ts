import { describe, it, expect } from 'vitest';
import { LevelCapCheck } from '../../src/engine/level-cap-check.ts';
import { createEventBatch } from '../../src/engine/events.ts';
import { HEAP_BLOCKS, HEAP_BUDGET_BYTES, heapGrowth } from '../helpers/heap.ts';

// No allocation per block (DEVELOPERS.md, 'Real-time code and the JIT': the AudioWorklet drives `process` on the audio thread).
// Measured by the new-space harness in test/helpers/heap.ts: any per-block allocation (≥ 12 bytes) over
// 4000 blocks is ≥ 48 kB, against a 16 kB budget. A control step that allocates proves the harness sees it.

const N = 16;

describe('LevelCapCheck per-block allocation', () => {
  it('should be visible to the harness when a step allocates (control)', () => {
    const sink: number[][] = [[]];
    expect(heapGrowth(() => (sink[0] = [1, 2]))).toBeGreaterThan(HEAP_BUDGET_BYTES);
  });

  it('should be nil while the check ramps tone, noise and the adversarial signal, with error-mic input and event draining', () => {
    const config = (rampS: number) => new LevelCapCheck({
      sampleRate: 8000,
      blockSize: N,
      limiter: { ceilingDbfs: -6, truePeak: true },
      guard: { outputAtCeiling: { action: 'mute', gainReductionDb: 1 } },
      signal: { rampS, holdS: 0.5, gapS: 0.25 },
    });
    const out = new Float32Array(N);
    const mic = new Float32Array(N);
    const batch = createEventBatch(64);
    const st = { drained: 0 };
    const block = (chk: LevelCapCheck) => {
      for (let i = 0; i < N; i++) mic[i] = 0.5 * out[i]!;
      chk.process(out, N, mic);
      // what a worklet does with events: copy them into a preallocated batch to post
      if (chk.engine.events.size > 32) st.drained += chk.engine.events.drainInto(batch);
    };
    // Warm-up: two whole short checks, so every branch (limiter engaging, guard events, special
    // values, segment changes) has run and been optimised; a branch first taken while measuring
    // runs unoptimised for a while and allocates boxed numbers, which is the JIT, not the code.
    for (let w = 0; w < 2; w++) {
      const short = config(0.5);
      while (!short.done) block(short);
    }
    // 24 000 blocks of 16 samples at 8 kHz = 48 s: the three 15.75 s kinds are all crossed while measured
    const chk = config(15);
    expect(chk.totalSamples).toBeGreaterThan(5 * HEAP_BLOCKS * N);
    expect(chk.totalSamples).toBeLessThan(6 * HEAP_BLOCKS * N);
    const growth = heapGrowth(() => block(chk));
    expect(growth).toBeLessThan(HEAP_BUDGET_BYTES);
    const r = chk.result();
    expect(r.samplesOverCeiling).toBe(0);
    expect(r.nonFiniteInputSamples).toBe(3); // the adversarial hold was reached while measuring
  });
});
