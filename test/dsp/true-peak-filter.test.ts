import { describe, it, expect } from 'vitest';
import {
  OutputLimiter,
  TRUE_PEAK_FILTER,
  TRUE_PEAK_FILTER_BOUND,
  TRUE_PEAK_FILTER_BOUND_DB,
  TRUE_PEAK_FILTER_DELAY_SAMPLES,
} from '../../src/dsp/limiter.ts';
import { BS1770_INTERPOLATOR, TruePeakMeter } from '../../src/dsp/true-peak.ts';
import { Random } from '../../src/dsp/random.ts';

// The default output stage: the sample-peak limiter followed by the true-peak filter (8, 17, 5)/30.

const FS = 16000;
const C_DB = -6;
const C = Math.pow(10, C_DB / 20);
const defaults = { sampleRate: FS, maxBlockSize: 64, ceilingDbfs: C_DB };

/** The stage's output for x followed by 16 samples of silence (the meter reads 6 samples late: the silence, played through the stage, flushes it). */
function run(lim: OutputLimiter, signal: Float32Array, block = 64): Float32Array {
  const x = new Float32Array(signal.length + 16);
  x.set(signal);
  const y = new Float32Array(x.length);
  for (let o = 0; o < x.length; o += block) {
    const n = Math.min(block, x.length - o);
    lim.process(x.subarray(o, o + n), y.subarray(o, o + n), n);
  }
  return y;
}

function truePeakOf(y: Float32Array): number {
  const m = new TruePeakMeter();
  m.process(y, y.length);
  return m.peak;
}

/** The 4× interpolated output of an FIR b, per phase: (h_p * b), written out independently of limiter.ts. */
function combined(b: readonly number[]): number[][] {
  const out: number[][] = [];
  for (let p = 0; p < 4; p++) {
    const h = Array.from({ length: 12 }, (_, k) => BS1770_INTERPOLATOR[p * 12 + k]!);
    const c = new Array<number>(h.length + b.length - 1).fill(0);
    h.forEach((hv, i) => b.forEach((bv, j) => (c[i + j]! += hv * bv)));
    out.push(c);
  }
  return out;
}

describe('OutputLimiter, default output stage (true-peak filter)', () => {
  describe('by default', () => {
    it('should follow the sample-peak limiter with the true-peak filter and add one sample of latency', () => {
      const lim = new OutputLimiter(defaults);
      expect(lim.truePeakFilter).toBe(true);
      expect(lim.truePeak).toBe(false);
      expect(lim.lookaheadSamples).toBe(0);
      expect(lim.latencySamples).toBe(TRUE_PEAK_FILTER_DELAY_SAMPLES);
      expect(Array.from(lim.responseTaps())).toEqual([8 / 30, 17 / 30, 5 / 30]);
      // with a look-ahead, the filter comes after the delay
      const la = new OutputLimiter({ ...defaults, lookaheadMs: 0.25 });
      expect(la.latencySamples).toBe(5);
      expect(Array.from(la.responseTaps())).toEqual([0, 0, 0, 0, 8 / 30, 17 / 30, 5 / 30]);
      // asked for explicitly: sample peaks only (no filter), or the look-ahead true-peak detector
      expect(new OutputLimiter({ ...defaults, truePeak: false }).truePeakFilter).toBe(false);
      expect(new OutputLimiter({ ...defaults, truePeak: false }).latencySamples).toBe(0);
      expect(new OutputLimiter({ ...defaults, truePeak: true }).truePeakFilter).toBe(false);
      expect(() => new OutputLimiter({ ...defaults, truePeakFilter: 1 as unknown as boolean })).toThrow(/truePeakFilter must be a boolean, got 1/);
    });

    it('should pass a signal below the ceiling through the filter exactly, with its calculated gain at 1 kHz', () => {
      // Below the ceiling the stage is linear: y[m] = (8·x[m] + 17·x[m−1] + 5·x[m−2]) / 30. Its gain at
      // ω = 2π·1000/16000 is |8 + 17·e^{−jω} + 5·e^{−2jω}| / 30 (calculated from the filter's coefficients).
      const lim = new OutputLimiter(defaults);
      const n = 4000;
      const x = new Float32Array(n);
      for (let i = 0; i < n; i++) x[i] = 0.4 * C * Math.sin((2 * Math.PI * 1000 * i) / FS);
      const y = run(lim, x);
      let maxErr = 0;
      for (let i = 2; i < n; i++) maxErr = Math.max(maxErr, Math.abs(y[i]! - (8 * x[i]! + 17 * x[i - 1]! + 5 * x[i - 2]!) / 30));
      expect(maxErr).toBeLessThan(1e-7);
      let peak = 0;
      for (let i = 100; i < n; i++) peak = Math.max(peak, Math.abs(y[i]!));
      const w = (2 * Math.PI * 1000) / FS;
      const expected = (0.4 * C * Math.hypot(8 + 17 * Math.cos(w) + 5 * Math.cos(2 * w), 17 * Math.sin(w) + 5 * Math.sin(2 * w))) / 30;
      expect(Math.abs(peak - expected) / expected).toBeLessThan(2e-3);
      expect(lim.maxGainReductionDb).toBe(0);
    });
  });

  describe('the true-peak bound', () => {
    it('should equal the largest sum of |coefficients| of an Annex 2 phase convolved with the filter, at most +0.5 dB', () => {
      // An FIR filter's output is at most Σ|taps| × the largest |input| (the ℓ∞ gain of a convolution:
      // Oppenheim & Schafer, Discrete-Time Signal Processing, 3rd ed., 2010, §2.4, BIBO stability), and
      // each 4×-interpolated point of ITU-R BS.1770-4 Annex 2 is such an output of the filtered samples.
      // Calculated here from the Annex 2 table, independently of the constant's own loop.
      const sums = combined(TRUE_PEAK_FILTER).map((c) => c.reduce((s, v) => s + Math.abs(v), 0));
      expect(TRUE_PEAK_FILTER_BOUND).toBeCloseTo(Math.max(...sums), 12);
      expect(TRUE_PEAK_FILTER_BOUND_DB).toBeCloseTo(0.406, 3);
      expect(TRUE_PEAK_FILTER_BOUND_DB).toBeLessThan(0.5);
      // Without the filter the same bound is the Annex 2 figure for a ±1 sequence, +6.12 dB (2.0228): the
      // filter is what brings it under 0.5 dB.
      const raw = combined([1]).map((c) => c.reduce((s, v) => s + Math.abs(v), 0));
      expect(20 * Math.log10(Math.max(...raw))).toBeCloseTo(6.12, 2);
    });

    it('should reach the bound, and not exceed it, on the worst sign pattern played 20 dB over the ceiling', () => {
      // The pattern sign((h_p * b)[j]) (time-reversed) drives one interpolated point to exactly the bound.
      const sums = combined(TRUE_PEAK_FILTER).map((c) => c.reduce((s, v) => s + Math.abs(v), 0));
      const p = sums.indexOf(Math.max(...sums));
      const taps = combined(TRUE_PEAK_FILTER)[p]!;
      const pattern = taps.map((v) => (v >= 0 ? 1 : -1)).reverse();
      const x = new Float32Array(3000);
      for (let i = 0; i < x.length; i++) x[i] = 10 * pattern[i % pattern.length]!;
      const lim = new OutputLimiter(defaults);
      const y = run(lim, x);
      let sp = 0;
      for (const v of y) sp = Math.max(sp, Math.abs(v));
      expect(sp).toBeLessThanOrEqual(C);
      const tp = truePeakOf(y);
      expect(tp).toBeLessThanOrEqual(C * TRUE_PEAK_FILTER_BOUND * (1 + 1e-6));
      expect(tp).toBeGreaterThan(C * TRUE_PEAK_FILTER_BOUND * 0.999);
      // the same pattern through the sample-peak mode reads far higher: the bound is the filter's doing
      const raw = run(new OutputLimiter({ ...defaults, truePeak: false }), x);
      expect(20 * Math.log10(truePeakOf(raw) / C)).toBeGreaterThan(3);
    });

    it('should hold sample and true peak on white noise, square waves near Nyquist and steps 20 dB over the ceiling', () => {
      // White noise and ±1 patterns are where a sample-peak limiter's true peak reads highest (several dB).
      const rng = new Random(5);
      const noise = new Float32Array(16000);
      rng.fillGaussian(noise, 10 * C);
      const square = Float32Array.from({ length: 8000 }, (_, i) => (Math.floor(i / 2) % 2 === 0 ? 10 : -10));
      const steps = Float32Array.from({ length: 8000 }, (_, i) => (Math.floor(i / 37) % 2 === 0 ? 10 : -10));
      for (const x of [noise, square, steps]) {
        const y = run(new OutputLimiter(defaults), x);
        let sp = 0;
        for (const v of y) sp = Math.max(sp, Math.abs(v));
        expect(sp).toBeLessThanOrEqual(C);
        expect(truePeakOf(y)).toBeLessThanOrEqual(C * TRUE_PEAK_FILTER_BOUND * (1 + 1e-6));
      }
    });
  });
});
