import { describe, expect, it } from 'vitest';
import { readFileSync } from 'node:fs';
import { WeightingFilter, analogWeightingDb } from '../../src/dsp/weighting-filter.ts';
import type { FrequencyWeighting } from '../../src/dsp/weighting-filter.ts';
import { Random } from '../../src/dsp/random.ts';
import { expectClose } from '../helpers/tolerance.ts';

interface Table3Row {
  nominalHz: number;
  exponent: number;
  class1PlusDb: number;
  class1MinusDb: number | null;
}

// IEC 61672-1:2013 Table 3 class 1 acceptance limits: from memory (see the fixture's provenance field).
const table3 = JSON.parse(
  readFileSync(new URL('../fixtures/analysis/iec61672-table3.json', import.meta.url), 'utf8'),
) as { rows: Table3Row[] };

const RATES = [44100, 48000, 96000] as const;
const WEIGHTINGS: FrequencyWeighting[] = ['A', 'C'];

/**
 * What weighting-filter.ts claims: the largest |deviation| from the Annex E formula at the mid-band
 * frequencies up to `upToHz`, per rate (measured when the filter was designed, calc).
 */
const CLAIMS: Record<number, { upToHz: number; maxDb: number }[]> = {
  44100: [{ upToHz: 10000, maxDb: 0.09 }, { upToHz: 12500, maxDb: 0.12 }, { upToHz: 16000, maxDb: 0.52 }, { upToHz: 20000, maxDb: 0.76 }],
  48000: [{ upToHz: 12500, maxDb: 0.09 }, { upToHz: 16000, maxDb: 0.35 }, { upToHz: 20000, maxDb: 0.83 }],
  96000: [{ upToHz: 20000, maxDb: 0.08 }],
};

/** Amplitude of the steady-state sinusoid at f in y[from … to), by least squares on sin and cos. */
function sineAmplitude(y: Float64Array, f: number, fs: number, from: number, to: number): number {
  let ss = 0, cc = 0, sc = 0, ys = 0, yc = 0;
  for (let n = from; n < to; n++) {
    const s = Math.sin((2 * Math.PI * f * n) / fs), c = Math.cos((2 * Math.PI * f * n) / fs);
    ss += s * s; cc += c * c; sc += s * c; ys += y[n]! * s; yc += y[n]! * c;
  }
  const det = ss * cc - sc * sc;
  const a = (ys * cc - yc * sc) / det;
  const b = (yc * ss - ys * sc) / det;
  return Math.hypot(a, b);
}

describe('WeightingFilter', () => {
  for (const fs of RATES) {
    for (const weighting of WEIGHTINGS) {
      describe(`with ${weighting}-weighting at ${fs} Hz`, () => {
        const filter = new WeightingFilter({ weighting, sampleRate: fs });

        it('should stay within the IEC 61672-1:2013 Table 3 class 1 limits from 10 Hz to 20 kHz', () => {
          // IEC 61672-1:2013 Table 3 class 1 acceptance limits (from memory), relative to the Annex E design goal.
          for (const row of table3.rows) {
            const f = Math.pow(10, row.exponent / 10);
            const deviation = filter.responseDb(f) - analogWeightingDb(f, weighting);
            expect(deviation, `${row.nominalHz} Hz`).toBeLessThanOrEqual(row.class1PlusDb);
            if (row.class1MinusDb !== null) expect(deviation, `${row.nominalHz} Hz`).toBeGreaterThanOrEqual(-row.class1MinusDb);
          }
        });

        it('should follow the Annex E formula as closely as weighting-filter.ts states', () => {
          for (const claim of CLAIMS[fs]!) {
            for (const row of table3.rows) {
              const f = Math.pow(10, row.exponent / 10);
              if (f > claim.upToHz * 1.01) continue;
              const deviation = filter.responseDb(f) - analogWeightingDb(f, weighting);
              expect(Math.abs(deviation), `${row.nominalHz} Hz (claim to ${claim.upToHz} Hz)`).toBeLessThanOrEqual(claim.maxDb);
            }
          }
        });

        it('should weight sines as its coefficients say, within class 1 limits', () => {
          // Drive with unit sines; after 0.3 s the slowest pole pair (f1 = 20.6 Hz, τ ≈ 7.7 ms) has settled.
          const settle = Math.round(0.3 * fs);
          const total = settle + Math.round(0.05 * fs);
          const x = new Float64Array(total);
          const y = new Float64Array(total);
          for (const row of table3.rows.filter((r) => [31.5, 100, 1000, 4000, 10000, 16000].includes(r.nominalHz))) {
            const f = Math.pow(10, row.exponent / 10);
            for (let n = 0; n < total; n++) x[n] = Math.sin((2 * Math.PI * f * n) / fs);
            filter.reset();
            filter.process(x, y, total);
            const measuredDb = 20 * Math.log10(sineAmplitude(y, f, fs, settle, total));
            expectClose(measuredDb, filter.responseDb(f), 0.001, `sine at ${row.nominalHz} Hz`);
            const deviation = measuredDb - analogWeightingDb(f, weighting);
            expect(deviation).toBeLessThanOrEqual(row.class1PlusDb);
            expect(deviation).toBeGreaterThanOrEqual(-(row.class1MinusDb ?? Infinity));
          }
        });
      });
    }
  }

  describe('with Z-weighting', () => {
    it('should pass the signal through unchanged', () => {
      const filter = new WeightingFilter({ weighting: 'Z', sampleRate: 48000 });
      const x = new Float32Array(64);
      new Random(1).fillGaussian(x);
      const y = new Float32Array(64);
      filter.process(x, y, 64);
      expect(Array.from(y)).toEqual(Array.from(x));
      expect(filter.responseDb(5000)).toBe(0);
    });
  });

  describe('process', () => {
    it('should give the same output in blocks of any size as in one call, in place or not', () => {
      const x = new Float64Array(1000);
      new Random(2).fillGaussian(x);
      const whole = new Float64Array(1000);
      new WeightingFilter({ weighting: 'A', sampleRate: 44100 }).process(x, whole, 1000);
      const blocked = Float64Array.from(x);
      const filter = new WeightingFilter({ weighting: 'A', sampleRate: 44100 });
      for (let start = 0, size = 1; start < 1000; start += size, size = (size * 3) % 17 + 1) {
        const view = blocked.subarray(start, Math.min(1000, start + size));
        filter.process(view, view, view.length); // in place
      }
      for (let n = 0; n < 1000; n++) expectClose(blocked[n]!, whole[n]!, 1e-12, `sample ${n}`);
    });

    it('should process only min(n, lengths) samples and forget the past after reset()', () => {
      const filter = new WeightingFilter({ weighting: 'C', sampleRate: 48000 });
      const impulse = new Float64Array(16);
      impulse[0] = 1;
      const first = new Float64Array(16);
      filter.process(impulse, first, 16);
      const out = new Float64Array(8).fill(7);
      filter.process(impulse, out, 100); // n larger than output: clipped to 8
      expect(out.every((v) => v !== 7)).toBe(true);
      filter.reset();
      const again = new Float64Array(16);
      filter.process(impulse, again, 16);
      expect(Array.from(again)).toEqual(Array.from(first));
    });
  });

  describe('constructor', () => {
    it('should refuse unknown weightings and sample rates out of range', () => {
      expect(() => new WeightingFilter({ weighting: 'D' as 'A', sampleRate: 48000 })).toThrow(/weighting must be 'A', 'C' or 'Z', got D/);
      expect(() => new WeightingFilter({ weighting: 'A', sampleRate: 4000 })).toThrow(/sampleRate must be a number in \[8000, 768000\] Hz, got 4000/);
    });

    it('should give finite coefficients down to 8 kHz, within 0.5 dB of Annex E below fs/2 at 16 kHz', () => {
      // Low rates are outside the tested claim; this guards the matched section (calc: worst 0.41 dB at 16 kHz).
      for (const weighting of WEIGHTINGS) {
        const filter = new WeightingFilter({ weighting, sampleRate: 16000 });
        for (let n = 10; Math.pow(10, n / 10) < 8000; n++) {
          const f = Math.pow(10, n / 10);
          expect(Math.abs(filter.responseDb(f) - analogWeightingDb(f, weighting))).toBeLessThan(0.5);
        }
        expect(Number.isFinite(new WeightingFilter({ weighting, sampleRate: 8000 }).responseDb(3000))).toBe(true);
      }
    });
  });
});
