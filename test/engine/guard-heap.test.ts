import { describe, it, expect } from 'vitest';
import { OutputLimiter } from '../../src/dsp/limiter.ts';
import { GainRamp } from '../../src/dsp/gain-ramp.ts';
import { HighPass } from '../../src/dsp/highpass.ts';
import { DivergenceGuard, GuardBlockInfo } from '../../src/engine/guard.ts';
import { EventRing, createEventBatch } from '../../src/engine/events.ts';
import { Random } from '../../src/dsp/random.ts';
import { HEAP_BUDGET_BYTES, heapGrowth } from '../helpers/heap.ts';

// No allocation per block (ancbench rule for src/dsp and the engine's real-time path, DEVELOPERS.md),
// measured by the new-space harness in test/helpers/heap.ts; the control step proves it sees an
// allocation.

const FS = 48000;
const N = 128;

function noiseBlocks(seed: number, count: number, rms: number): Float32Array[] {
  const rng = new Random(seed);
  return Array.from({ length: count }, () => rng.fillGaussian(new Float32Array(N), rms) as Float32Array);
}

describe('per-block allocation', () => {
  it('should be visible to the harness when a step allocates (control)', () => {
    const sink: number[][] = [[]];
    const growth = heapGrowth(() => {
      sink[0] = [1, 2];
    });
    expect(growth).toBeGreaterThan(HEAP_BUDGET_BYTES);
  });

  it('should be nil for the limiter in every mode, with loud and non-finite input', () => {
    const blocks = noiseBlocks(1, 8, 2);
    blocks[3]![17] = NaN;
    blocks[5]![90] = Infinity;
    const y = new Float32Array(N);
    for (const cfg of [{}, { lookaheadMs: 2 }, { truePeak: true }]) {
      const lim = new OutputLimiter({ sampleRate: FS, maxBlockSize: N, ceilingDbfs: -6, ...cfg });
      let k = 0;
      const st = { readouts: 0 };
      const growth = heapGrowth(() => {
        lim.process(blocks[k++ & 7]!, y, N);
        st.readouts += lim.gainReductionDb + lim.maxTruePeak + lim.nonFiniteCount + lim.blockMaxGainReductionDb;
      });
      expect(Number.isFinite(st.readouts)).toBe(true);
      expect(growth).toBeLessThan(HEAP_BUDGET_BYTES);
    }
  });

  it('should be nil for the guard while it detects, pushes events and resumes', () => {
    const ring = new EventRing(64);
    const batch = createEventBatch(64);
    const guard = new DivergenceGuard({ sampleRate: FS, maxBlockSize: N, resume: { holdOffMs: 50, maxAutoResumes: 1000 } }, ring);
    const ref = noiseBlocks(2, 8, 0.1);
    const err = noiseBlocks(3, 8, 0.1);
    const loud = noiseBlocks(4, 8, 1);
    const out = new Float32Array(N);
    const info = new GuardBlockInfo();
    let k = 0;
    let actions = 0;
    const st = { t: 0 };
    const growth = heapGrowth(() => {
      const t = st.t;
      // Alternate 0.4 s of clean signals with 0.4 s of a loud error (error-rise), clipping and NaN.
      const faulty = Math.floor(t / 0.4) % 2 === 1;
      info.timeS = t;
      info.n = N;
      info.ref = ref[k & 7]!;
      info.err = faulty ? loud[k & 7]! : err[k & 7]!;
      if (faulty) info.ref[5] = NaN;
      info.out = out;
      info.outN = N;
      info.weightNormSq = 1;
      info.baselineErrorPower = 0.01;
      info.limiterGainReductionDb = faulty ? 6 : 0;
      actions += guard.check(info);
      if (ring.size > 32) ring.drainInto(batch);
      k++;
      st.t = t + N / FS;
    });
    expect(actions).toBeGreaterThan(0);
    expect(ring.pushed).toBeGreaterThan(10);
    expect(growth).toBeLessThan(HEAP_BUDGET_BYTES);
  });

  it('should be nil for the whole output chain: high-pass → ramp → limiter', () => {
    const hp = new HighPass({ sampleRate: FS });
    const ramp = new GainRamp({ sampleRate: FS });
    const lim = new OutputLimiter({ sampleRate: FS, maxBlockSize: N, ceilingDbfs: -3 });
    const blocks = noiseBlocks(5, 8, 0.5);
    const y = new Float32Array(N);
    let k = 0;
    const growth = heapGrowth(() => {
      y.set(blocks[k & 7]!);
      if ((k & 255) === 0) ramp.start();
      if ((k & 255) === 128) ramp.stop();
      hp.process(y, y, N);
      ramp.process(y, N);
      lim.process(y, y, N);
      k++;
    });
    expect(growth).toBeLessThan(HEAP_BUDGET_BYTES);
  });
});
