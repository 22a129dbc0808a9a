import { describe, expect, it } from 'vitest';
import { TruePeakMax } from '../../src/dsp/true-peak-max.ts';
import { TruePeakMeter } from '../../src/dsp/true-peak.ts';
import { Random } from '../../src/dsp/random.ts';

describe('TruePeakMax', () => {
  describe('with the SIMD kernel', () => {
    it('should run the kernel on this platform (Node 20 has WebAssembly SIMD)', () => {
      expect(new TruePeakMax(64).simd).toBe(true);
    });

    it('should follow the scalar ITU-R BS.1770-4 Annex 2 meter within f32 rounding, block by block', () => {
      // Reference: the scalar float64 TruePeakMeter (checked against the BS.1770-4 fs/4, 45° sine
      // in true-peak.test.ts); the kernel sums in f32, so agreement is to about 1e-6 relative.
      const fast = new TruePeakMax(96);
      const ref = new TruePeakMeter();
      const rng = new Random(31);
      const x = new Float32Array(96);
      for (let b = 0; b < 300; b++) {
        const n = 1 + (b * 37) % 96; // blocks of every length, shorter than the window too
        const level = b % 41 === 0 ? 0.9 : b % 7 === 0 ? 0.4 : 0.05;
        for (let i = 0; i < n; i++) x[i] = b % 29 === 0 ? level * (i % 2 ? 1 : -1) * (i % 4 < 2 ? 1 : -1) : level * rng.gaussian();
        if (b === 150) x[3] = NaN;
        fast.processMax(x, n);
        ref.process(x, n);
        expect(Math.abs(fast.peak - ref.peak)).toBeLessThanOrEqual(2e-6 * ref.peak);
      }
      expect(fast.nonFiniteCount).toBe(1);
    });

    it('should read 0 dBTP for the fs/4 sine at 45° whose samples peak at −3.01 dBFS (ITU-R BS.1770-4 Annex 2; calculated: sin(π/4) = −3.01 dB)', () => {
      const m = new TruePeakMax(128);
      const x = new Float32Array(128).map((_, i) => Math.sin((Math.PI / 2) * i + Math.PI / 4));
      for (let b = 0; b < 4; b++) m.processMax(x, 128);
      expect(20 * Math.log10(m.peak)).toBeGreaterThan(-0.1);
      expect(20 * Math.log10(m.peak)).toBeLessThan(0.2);
    });
  });
});
