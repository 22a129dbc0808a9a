import { describe, expect, it } from 'vitest';
import { CalibrationTone } from '../../src/dsp/calibration-tone.ts';

const FS = 48000;
const BLOCK = 128;

/** Run the tone block by block until `until` holds (at most maxBlocks); returns every sample written. */
function run(t: CalibrationTone, blocks: number, onBlock?: (x: Float32Array) => void): number[] {
  const x = new Float32Array(BLOCK);
  const all: number[] = [];
  for (let b = 0; b < blocks; b++) {
    t.process(x, BLOCK);
    onBlock?.(x);
    for (let i = 0; i < BLOCK; i++) all.push(x[i]!);
  }
  return all;
}

describe('CalibrationTone', () => {
  describe('with a steady tone', () => {
    it('should read its nominal level in dBFS (AES17: a sine of peak A reads 20·log10(A) dBFS)', () => {
      // AES17 (from memory): 0 dBFS is the RMS level of a full-scale sine, the project convention of src/dsp/units.ts
      for (const [hz, dbfs] of [
        [1000, -30],
        [125, -36.5],
        [3150, -12],
      ] as const) {
        const t = new CalibrationTone(FS, 0.05, 60);
        t.start(hz, dbfs);
        run(t, 40); // past the 50 ms fade-in
        expect(t.open).toBe(true);
        run(t, 375, (x) => t.measure(x, BLOCK)); // 1 s
        expect(t.measuredDbfs).toBeCloseTo(dbfs, 2);
        expect(t.measuredSamples).toBe(375 * BLOCK);
      }
    });
  });

  describe('when it starts and stops', () => {
    it('should fade in and out without a step larger than the sine and the fade allow', () => {
      const fadeS = 0.05;
      const t = new CalibrationTone(FS, fadeS, 60);
      const A = Math.pow(10, -20 / 20);
      const hz = 1000;
      t.start(hz, -20);
      const x = run(t, 50);
      t.stop();
      let blocks = 0;
      while (!t.done && blocks < 100) {
        x.push(...run(t, 1));
        blocks++;
      }
      expect(t.done).toBe(true);
      // the fade-out lasts fadeS: done within one block of it
      expect(blocks * BLOCK).toBeGreaterThanOrEqual(fadeS * FS);
      expect(blocks * BLOCK).toBeLessThan(fadeS * FS + BLOCK);
      // first and last samples near silence, no jump anywhere: |Δ(g·sin)| ≤ A·(|Δg| + |Δsin|),
      // with |Δsin| ≤ 2·sin(π f/fs) (chord of a step) and |Δg| ≤ π/(2·fade samples) for the raised cosine
      const bound = A * ((Math.PI / 2) / (fadeS * FS) + 2 * Math.sin((Math.PI * hz) / FS));
      let step = Math.abs(x[0]!);
      for (let i = 1; i < x.length; i++) step = Math.max(step, Math.abs(x[i]! - x[i - 1]!));
      expect(step).toBeLessThanOrEqual(bound * 1.0001);
      expect(Math.abs(x[x.length - 1]!)).toBeLessThan(1e-6);
      // and the tone did reach full amplitude in between
      expect(Math.max(...x.map(Math.abs))).toBeGreaterThan(0.999 * A);
    });

    it('should stop by itself at its time limit', () => {
      const t = new CalibrationTone(FS, 0.01, 0.1);
      t.start(500, -30);
      run(t, Math.ceil((0.1 * FS) / BLOCK) + 1);
      expect(t.stopping).toBe(true);
      run(t, Math.ceil((0.01 * FS) / BLOCK) + 1);
      expect(t.done).toBe(true);
    });

    it('should refuse a fade that is not positive and a limit shorter than the fade', () => {
      expect(() => new CalibrationTone(FS, 0, 10)).toThrow(/fadeS must be above 0 s, got 0/);
      expect(() => new CalibrationTone(FS, 0.05, 0.01)).toThrow(/maxS must be above fadeS \(0.05 s\), got 0.01/);
    });
  });
});
