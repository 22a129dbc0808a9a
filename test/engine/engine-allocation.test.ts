import { describe, expect, it } from 'vitest';
import { PerformanceObserver } from 'node:perf_hooks';
import { Engine } from '../../src/engine/engine.ts';
import { Random } from '../../src/dsp/random.ts';

/**
 * An honest no-allocation check: a block path that allocates even a few bytes per block makes V8 run
 * minor ("scavenge") collections during a long synchronous loop. We run 40 000 blocks and count the
 * garbage collections whose start time falls inside the loop.
 */
async function gcCountDuring(fn: () => void): Promise<number> {
  const entries: { startTime: number }[] = [];
  const obs = new PerformanceObserver((list) => {
    for (const e of list.getEntries()) entries.push({ startTime: e.startTime });
  });
  obs.observe({ entryTypes: ['gc'] });
  await new Promise((r) => setTimeout(r, 20));
  const t0 = performance.now();
  fn();
  const t1 = performance.now();
  await new Promise((r) => setTimeout(r, 50));
  obs.disconnect();
  return entries.filter((e) => e.startTime >= t0 && e.startTime <= t1).length;
}

describe('Engine', () => {
  describe('with FxNLMS over many blocks', () => {
    it('should not allocate per block (no garbage collection during 40 000 blocks)', async () => {
      const model = new Float32Array(64).map((_, i) => Math.exp(-i / 8) * 0.3);
      const engine = new Engine({ sampleRate: 48000, maxBlockSize: 128, controller: { algorithm: 'fxnlms', taps: 64, stepSize: 0.01 }, secondaryPathModel: model, startMode: 'control' });
      const rng = new Random(1);
      const ref = new Float32Array(128).map(() => 0.1 * rng.gaussian());
      const err = new Float32Array(128).map(() => 0.01 * rng.gaussian());
      const out = new Float32Array(128);
      // warm up the JIT, including the queued-parameter path (a first-time branch deoptimises once)
      for (let i = 0; i < 4000; i++) {
        if (i % 500 === 0) engine.setStepSize(0.01 + i * 1e-6);
        engine.process(ref, err, out, 128);
      }
      const gcs = await gcCountDuring(() => {
        for (let i = 0; i < 40000; i++) {
          if (i % 10000 === 0) engine.setStepSize(0.02 - i * 1e-7);
          engine.process(ref, err, out, 128);
        }
      });
      expect(gcs).toBe(0);
    });

    it('should be caught by the same check when something allocates (the check can fail)', async () => {
      const keep: number[][] = [];
      const gcs = await gcCountDuring(() => {
        for (let i = 0; i < 40000; i++) {
          keep.length = 0;
          keep.push(new Array(64).fill(i));
        }
      });
      expect(gcs).toBeGreaterThan(0);
    });
  });

  describe('with an invalid configuration', () => {
    it('should refuse it, naming the field, range and value', () => {
      const model = new Float32Array(4);
      expect(() => new Engine({ sampleRate: 1000, maxBlockSize: 128, controller: { algorithm: 'fxlms', taps: 8, stepSize: 0.1 }, secondaryPathModel: model })).toThrow(/sampleRate must be 8000 … 192000 Hz, got 1000/);
      expect(() => new Engine({ sampleRate: 48000, maxBlockSize: 128, controller: { algorithm: 'fxlms', taps: 0, stepSize: 0.1 }, secondaryPathModel: model })).toThrow(/controller\.taps: must be an integer ≥ 1 and ≤ 65536 \(taps\), got 0/);
      expect(() => new Engine({ sampleRate: 48000, maxBlockSize: 128, controller: { algorithm: 'fxlms', taps: 8, stepSize: 0.1 }, secondaryPathModel: model, ceilingDbfs: 3 })).toThrow(/ceilingDbfs: must be a number ≥ -120 and ≤ 0 \(dBFS\), got 3/);
    });
  });

  describe('with start and stop', () => {
    it('should ramp the output in and out and never pass the ceiling', () => {
      const model = new Float32Array([0, 0, 1]);
      const engine = new Engine({ sampleRate: 8000, maxBlockSize: 32, controller: { algorithm: 'fxlms', taps: 4, stepSize: 0.1 }, secondaryPathModel: model, rampMs: 20, ceilingDbfs: -6 });
      (engine.controller as unknown as { setWeights(w: number[]): void }).setWeights([4]);
      engine.controller.adapt = false;
      const ref = new Float32Array(32).fill(1);
      const err = new Float32Array(32);
      const out = new Float32Array(32);
      engine.setMode('control');
      const gains: number[] = [];
      for (let b = 0; b < 8; b++) {
        engine.process(ref, err, out, 32);
        gains.push(engine.meters.rampGain);
        for (const v of out) expect(Math.abs(v)).toBeLessThanOrEqual(Math.pow(10, -6 / 20) + 1e-7);
      }
      // 20 ms at 8 kHz = 160 samples = 5 blocks of 32
      expect(gains[3]!).toBeLessThan(1);
      expect(gains[5]!).toBe(1);
      engine.setMode('idle');
      // the fade (5 blocks), then the true-peak filter's memory of two samples
      for (let b = 0; b < 7; b++) engine.process(ref, err, out, 32);
      expect(engine.meters.rampGain).toBe(0);
      expect(out.every((v) => v === 0)).toBe(true);
    });
  });
});
