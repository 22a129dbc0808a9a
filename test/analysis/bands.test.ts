import { describe, expect, it } from 'vitest';
import { Random } from '../../src/dsp/random.ts';
import {
  OCTAVE_RATIO,
  bandIndexContaining,
  bandPowers,
  fractionalOctaveBand,
  fractionalOctaveBands,
  segmentLengthForBands,
} from '../../src/analysis/bands.ts';
import { welchPsd } from '../../src/analysis/welch.ts';
import { expectClose, expectRelClose } from '../helpers/tolerance.ts';

describe('bands', () => {
  describe('fractionalOctaveBand', () => {
    it('should give the IEC 61260-1 mid-band and edge frequencies at 1 kHz', () => {
      // IEC 61260-1:2014 clause 5: G = 10^(3/10), edges f_m·G^(∓1/(2b)); the edges here are calculated from those
      // formulas: 1/3-octave at 1 kHz 891.25–1122.02 Hz; octave at 1 kHz 707.95–1412.54 Hz (docs/references.md).
      expectClose(OCTAVE_RATIO, 1.99526, 5e-6, 'G');
      const third = fractionalOctaveBand(0, 3);
      expect(third.centerHz).toBe(1000);
      expect(third.nominalHz).toBe(1000);
      expectClose(third.lowHz, 891.25, 0.005, '1/3-oct f1');
      expectClose(third.highHz, 1122.02, 0.005, '1/3-oct f2');
      const octave = fractionalOctaveBand(0, 1);
      expectClose(octave.lowHz, 707.95, 0.005, 'octave f1');
      expectClose(octave.highHz, 1412.54, 0.005, 'octave f2');
    });

    it('should label the band whose exact mid-band frequency is 31.623 Hz as nominal 31.5 Hz', () => {
      // IEC 61260-1:2014: the band labelled 31.5 Hz has the exact mid-band frequency 10^1.5 = 31.623 Hz (calculated from clause 5).
      const octave = fractionalOctaveBand(-5, 1);
      expectClose(octave.centerHz, 31.623, 0.0005, 'octave centre');
      expect(octave.nominalHz).toBe(31.5);
      const third = fractionalOctaveBand(-15, 3);
      expectClose(third.centerHz, 31.623, 0.0005, 'third centre');
      expect(third.nominalHz).toBe(31.5);
    });

    it('should carry the standard nominal series from 10 Hz to 20 kHz', () => {
      // IEC 61260-1:2014 Annex E nominal mid-band frequencies (from memory).
      const thirds = [10, 12.5, 16, 20, 25, 31.5, 40, 50, 63, 80, 100, 125, 160, 200, 250, 315, 400, 500, 630, 800,
        1000, 1250, 1600, 2000, 2500, 3150, 4000, 5000, 6300, 8000, 10000, 12500, 16000, 20000];
      const labels = [];
      for (let x = -20; x <= 13; x++) labels.push(fractionalOctaveBand(x, 3).nominalHz);
      expect(labels).toEqual(thirds);
      const octaves = [];
      for (let x = -5; x <= 4; x++) octaves.push(fractionalOctaveBand(x, 1).nominalHz);
      expect(octaves).toEqual([31.5, 63, 125, 250, 500, 1000, 2000, 4000, 8000, 16000]);
      // Labels are roundings of the exact values (within 3 %), and exact values follow f_r·G^(x/b).
      for (let x = -20; x <= 13; x++) {
        const band = fractionalOctaveBand(x, 3);
        expectRelClose(band.centerHz, band.nominalHz, 0.03, `band ${x}`);
        expectRelClose(band.centerHz, 1000 * Math.pow(10, x / 10), 1e-12, `exact ${x}`);
      }
    });

    it('should make adjacent band edges meet and each 1/3-octave band span one third of the octave band', () => {
      for (let x = -10; x < 10; x++) {
        expectRelClose(fractionalOctaveBand(x, 3).highHz, fractionalOctaveBand(x + 1, 3).lowHz, 1e-12, `edge ${x}`);
      }
      const octave = fractionalOctaveBand(2, 1);
      expectRelClose(fractionalOctaveBand(5, 3).lowHz, octave.lowHz, 1e-12, 'octave low edge');
      expectRelClose(fractionalOctaveBand(7, 3).highHz, octave.highHz, 1e-12, 'octave high edge');
    });

    it('should refuse fractions other than 1 and 3', () => {
      expect(() => fractionalOctaveBand(0, 2 as 1)).toThrow(/fraction must be 1 \(octave\) or 3 \(one-third octave\), got 2/);
      expect(() => fractionalOctaveBand(0.5, 3)).toThrow(/index must be an integer/);
    });
  });

  describe('fractionalOctaveBands', () => {
    it('should list the 31 one-third-octave bands 20 Hz–20 kHz', () => {
      const bands = fractionalOctaveBands({ fraction: 3, lowHz: 20, highHz: 20000 });
      expect(bands.length).toBe(31);
      expect(bands[0]!.nominalHz).toBe(20);
      expect(bands[30]!.nominalHz).toBe(20000);
      expect(bands[0]!.lowHz).toBeLessThanOrEqual(20);
      expect(bands[30]!.highHz).toBeGreaterThan(20000);
    });

    it('should put a frequency on a band edge into the band above', () => {
      const edge = fractionalOctaveBand(0, 3).highHz;
      expect(bandIndexContaining(edge, 3)).toBe(1);
      expect(bandIndexContaining(edge * (1 - 1e-6), 3)).toBe(0);
      const bands = fractionalOctaveBands({ fraction: 1, lowHz: edge, highHz: 2000 });
      expect(bands.map((b) => b.nominalHz)).toEqual([1000, 2000]);
    });

    it('should refuse an empty range', () => {
      expect(() => fractionalOctaveBands({ fraction: 3, lowHz: 100, highHz: 50 })).toThrow(/highHz must be > lowHz \(100 Hz\), got 50/);
    });
  });

  describe('bandPowers', () => {
    it('should integrate a flat PSD exactly over band edges that fall inside bins', () => {
      const df = 10;
      const n = 2049;
      const frequencies = new Float64Array(n).map((_, k) => k * df);
      const psd = new Float64Array(n).fill(3e-4);
      const bands = fractionalOctaveBands({ fraction: 3, lowHz: 50, highHz: 8000 });
      const powers = bandPowers(psd, frequencies, bands);
      for (let b = 0; b < bands.length; b++) {
        expectRelClose(powers[b]!, 3e-4 * (bands[b]!.highHz - bands[b]!.lowHz), 1e-12, `band ${bands[b]!.nominalHz}`);
      }
    });

    it('should give band powers of white noise that add up to the power in their span', () => {
      // Welch 1967: one-sided white-noise PSD 2σ²/fs, so a band of width W holds 2σ²W/fs.
      const fs = 16000;
      const x = new Float64Array(1 << 17);
      new Random(5).fillGaussian(x, 1);
      const r = welchPsd(x, fs, { segmentLength: 4096 });
      const bands = fractionalOctaveBands({ fraction: 1, lowHz: 60, highHz: 5000 }); // 63 Hz … 4 kHz, all below fs/2
      const powers = bandPowers(r.psd, r.frequencies, bands);
      let total = 0;
      for (let b = 0; b < bands.length; b++) {
        const expected = (2 * (bands[b]!.highHz - bands[b]!.lowHz)) / fs;
        expectRelClose(powers[b]!, expected, 0.12, `octave ${bands[b]!.nominalHz}`);
        total += powers[b]!;
      }
      const span = bandPowers(r.psd, r.frequencies, [
        { ...bands[0]!, highHz: bands[bands.length - 1]!.highHz },
      ]);
      expectRelClose(total, span[0]!, 1e-12, 'sum of bands');
    });

    it('should refuse a frequency axis that does not start at 0 Hz', () => {
      const bands = fractionalOctaveBands({ fraction: 1, lowHz: 100, highHz: 200 });
      expect(() => bandPowers([1, 1, 1], [5, 10, 15], bands)).toThrow(/frequencies must start at 0 Hz/);
    });
  });

  describe('segmentLengthForBands', () => {
    it('should give a resolution of at most 1/5 of the narrowest band', () => {
      // 20 Hz 1/3-octave band: width 19.953·(10^0.05 − 10^−0.05) = 4.604 Hz (IEC 61260-1 edges, calc).
      const L = segmentLengthForBands(48000, { fraction: 3, lowHz: 20 });
      expect(L).toBe(65536);
      const band = fractionalOctaveBand(-17, 3);
      expectClose(band.highHz - band.lowHz, 4.604, 0.001, 'width');
      expect(48000 / L).toBeLessThanOrEqual((band.highHz - band.lowHz) / 5);
      expect(48000 / (L / 2)).toBeGreaterThan((band.highHz - band.lowHz) / 5);
      expect(segmentLengthForBands(48000, { fraction: 1, lowHz: 100, binsPerBand: 2 })).toBe(2048);
    });
  });
});
