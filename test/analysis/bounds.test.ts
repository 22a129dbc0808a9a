import { describe, expect, it } from 'vitest';
import { Random } from '../../src/dsp/random.ts';
import {
  MAX_COHERENCE,
  causalityVerdict,
  coherenceBoundDb,
  coherenceBoundSpectrum,
  overallCoherenceBoundDb,
} from '../../src/analysis/bounds.ts';
import { welchCrossSpectra } from '../../src/analysis/welch.ts';
import { expectClose } from '../helpers/tolerance.ts';

describe('bounds', () => {
  describe('coherenceBoundDb', () => {
    it('should give the published bound values', () => {
      // The bound −10·log10(1 − γ²) of Nelson & Elliott, Active Control of Sound, 1992 (from memory); the values are
      // calculated from it: γ² = 0.5, 0.75, 0.9, 0.95, 0.99, 0.999 → 3.01, 6.02, 10.0, 13.0, 20.0, 30.0 dB.
      // Tolerance: half a unit in the last digit published (3.01 → ±0.005, 13.0 → ±0.05).
      const table: [number, number, number][] = [
        [0.5, 3.01, 0.005], [0.75, 6.02, 0.005], [0.9, 10.0, 0.05], [0.95, 13.0, 0.05], [0.99, 20.0, 0.05], [0.999, 30.0, 0.05],
      ];
      for (const [g, db, tol] of table) expectClose(coherenceBoundDb(g), db, tol, `γ² = ${g}`);
      const spectrum = coherenceBoundSpectrum(table.map(([g]) => g));
      for (let k = 0; k < table.length; k++) expectClose(spectrum[k]!, table[k]![1], table[k]![2], `spectrum ${k}`);
    });

    it('should cap γ² so that full coherence gives 60 dB, not Infinity', () => {
      expect(MAX_COHERENCE).toBe(1 - 1e-6);
      expectClose(coherenceBoundDb(1), 60, 1e-6, 'γ² = 1');
      expectClose(coherenceBoundDb(1 + 1e-12), 60, 1e-6, 'γ² rounded above 1');
      expect(coherenceBoundDb(0)).toBe(0);
      expect(() => coherenceBoundDb(1.5)).toThrow(/coherence must be a coherence in \[0, 1\], got 1.5/);
      expect(() => coherenceBoundDb(Number.NaN)).toThrow(/got NaN/);
    });
  });

  describe('overallCoherenceBoundDb', () => {
    it('should match the analytic bound for a filtered reference plus uncorrelated noise within 1 dB', () => {
      // d = h*x + n with n independent of x: the best linear estimate of d from x leaves exactly n, so the
      // bound is 10·log10(P_d / P_n) (Wiener; Nelson & Elliott 1992, from memory).
      const fs = 8000;
      const count = 1 << 17;
      const rng = new Random(21);
      const x = new Float64Array(count);
      rng.fillGaussian(x);
      const d = new Float64Array(count);
      const h = [0.8, 0.5, -0.3, 0.1];
      const noiseRms = 0.3;
      let pd = 0;
      for (let n = 0; n < count; n++) {
        let s = 0;
        for (let j = 0; j < h.length; j++) if (n >= j) s += h[j]! * x[n - j]!;
        d[n] = s + noiseRms * rng.gaussian();
        pd += d[n]! * d[n]!;
      }
      pd /= count;
      const analytic = 10 * Math.log10(pd / (noiseRms * noiseRms));
      expect(analytic).toBeGreaterThan(10); // a bound worth measuring (≈ 10.6 dB)
      const r = welchCrossSpectra(x, d, fs, { segmentLength: 512 });
      const estimated = overallCoherenceBoundDb(r.coherence, r.pyy);
      expectClose(estimated, analytic, 1, 'overall bound');
      // Per bin the bound follows the colouring of h: largest where |H| is largest.
      const perBin = coherenceBoundSpectrum(r.coherence);
      expect(perBin[10]!).toBeGreaterThan(perBin[250]!);
    });

    it('should restrict the sum to a frequency range and refuse a range without frequencies', () => {
      const frequencies = Float64Array.from([0, 100, 200, 300, 400]);
      const coherence = Float64Array.from([0, 0.9, 0.9, 0.5, 0]);
      const psd = Float64Array.from([1, 1, 1, 1, 1]);
      expectClose(overallCoherenceBoundDb(coherence, psd, { frequencies, lowHz: 100, highHz: 200 }), 10, 1e-9, '100–200 Hz');
      // (1 + 1) / (0.1 + 0.5) over 200–300 Hz
      expectClose(overallCoherenceBoundDb(coherence, psd, { frequencies, lowHz: 150, highHz: 300 }), 10 * Math.log10(2 / 0.6), 1e-9, '150–300 Hz');
      expect(overallCoherenceBoundDb(coherence, new Float64Array(5))).toBe(0);
      expect(() => overallCoherenceBoundDb(coherence, psd, { lowHz: 100 })).toThrow(/frequencies must be given/);
    });
  });

  describe('causalityVerdict', () => {
    it('should call a positive or zero margin broadband and a deficit predictable-only', () => {
      // Kuo & Morgan, Proc. IEEE 87(6), 1999 (from memory): broadband feedforward needs primary delay ≥ secondary delay.
      const ok = causalityVerdict(2.4, 1.1);
      expect(ok.verdict).toBe('broadband');
      expectClose(ok.marginMs!, 1.3, 1e-12, 'margin');
      expect(ok.sentence).toContain('1.30 ms to spare');
      expect(causalityVerdict(1.5, 1.5).verdict).toBe('broadband');
      const late = causalityVerdict(1.2, 3);
      expect(late.verdict).toBe('predictable-only');
      expectClose(late.marginMs!, -1.8, 1e-12, 'deficit');
      expect(late.sentence).toContain('1.80 ms too late');
      expect(causalityVerdict(-0.5, 0).verdict).toBe('predictable-only');
    });

    it('should say unknown when the secondary delay is not known, and refuse bad delays', () => {
      const r = causalityVerdict(2, null);
      expect(r).toMatchObject({ marginMs: null, verdict: 'unknown' });
      expect(r.sentence).toMatch(/not known/);
      expect(() => causalityVerdict(Number.NaN, 1)).toThrow(/primaryDelayMs must be a finite number, got NaN/);
      expect(() => causalityVerdict(1, -1)).toThrow(/secondaryDelayMs must be a finite number ≥ 0 or null, got -1/);
    });
  });
});
