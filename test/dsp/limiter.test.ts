import { describe, it, expect } from 'vitest';
import {
  OutputLimiter,
  checkCeilingDbfs,
  TRUE_PEAK_MIN_LATENCY_SAMPLES,
  CEILING_RAMP_MS,
  type OutputLimiterConfig,
} from '../../src/dsp/limiter.ts';
import { TruePeakMeter } from '../../src/dsp/true-peak.ts';
import { Random } from '../../src/dsp/random.ts';
import { expectClose } from '../helpers/tolerance.ts';

const FS = 48000;

function sine(n: number, hz: number, amplitude: number, phase = 0, fs = FS): Float32Array {
  const x = new Float32Array(n);
  for (let i = 0; i < n; i++) x[i] = amplitude * Math.sin((2 * Math.PI * hz * i) / fs + phase);
  return x;
}

function run(lim: OutputLimiter, x: Float32Array, block = 128): Float32Array {
  const y = new Float32Array(x.length);
  for (let o = 0; o < x.length; o += block) {
    const n = Math.min(block, x.length - o);
    lim.process(x.subarray(o, o + n), y.subarray(o, o + n), n);
  }
  return y;
}

function maxAbs(x: Float32Array, from = 0, to = x.length): number {
  let m = 0;
  for (let i = from; i < to; i++) m = Math.max(m, Math.abs(x[i]!));
  return m;
}

// Most checks here are of the gain computer alone: the sample-peak modes (truePeak: false, no true-peak filter).
const base: OutputLimiterConfig = { sampleRate: FS, maxBlockSize: 128, ceilingDbfs: -6, truePeak: false };

describe('OutputLimiter', () => {
  describe('with an invalid configuration', () => {
    it('should refuse it with a message naming the field, the range and the value', () => {
      // ancbench rule: validation messages name the field, the allowed range and the value received.
      expect(() => new OutputLimiter({ ...base, ceilingDbfs: 3 })).toThrow(/ceilingDbfs.*-120.*0 dBFS, got 3/);
      expect(() => new OutputLimiter({ ...base, ceilingDbfs: NaN })).toThrow(/ceilingDbfs.*got NaN/);
      expect(() => new OutputLimiter({ ...base, sampleRate: 1000 })).toThrow(/sampleRate.*8000.*384000.*got 1000/);
      expect(() => new OutputLimiter({ ...base, maxBlockSize: 0 })).toThrow(/maxBlockSize.*1.*65536.*got 0/);
      expect(() => new OutputLimiter({ ...base, maxBlockSize: 1.5 })).toThrow(/maxBlockSize.*got 1.5/);
      expect(() => new OutputLimiter({ ...base, lookaheadMs: -1 })).toThrow(/lookaheadMs.*0.*50 ms, got -1/);
      expect(() => new OutputLimiter({ ...base, attackMs: 2000 })).toThrow(/attackMs.*0.*1000 ms, got 2000/);
      expect(() => new OutputLimiter({ ...base, releaseMs: 0 })).toThrow(/releaseMs.*1.*10000 ms, got 0/);
      expect(() => new OutputLimiter({ ...base, truePeak: 'yes' as unknown as boolean })).toThrow(/truePeak must be a boolean, got yes/);
      expect(checkCeilingDbfs(-3)).toBeNull();
      expect(checkCeilingDbfs(1)).toMatch(/ceilingDbfs.*got 1/);
      const lim = new OutputLimiter(base);
      expect(() => lim.setCeilingDbfs(0.5)).toThrow(/ceilingDbfs.*got 0.5/);
    });
  });

  describe('latency', () => {
    it('should report the look-ahead delay in samples, 0 in zero-latency mode and a floor in true-peak mode', () => {
      // Requirement of the output-safety issue: latencySamples = the look-ahead delay.
      expect(new OutputLimiter(base).latencySamples).toBe(0);
      expect(new OutputLimiter(base).zeroLatency).toBe(true);
      expect(new OutputLimiter({ ...base, lookaheadMs: 1 }).latencySamples).toBe(48);
      expect(new OutputLimiter({ ...base, lookaheadMs: 1, sampleRate: 96000 }).latencySamples).toBe(96);
      expect(new OutputLimiter({ ...base, truePeak: true }).latencySamples).toBe(TRUE_PEAK_MIN_LATENCY_SAMPLES);
      expect(new OutputLimiter({ ...base, truePeak: true, lookaheadMs: 2 }).latencySamples).toBe(96);
    });
  });

  describe('below the ceiling', () => {
    for (const mode of [
      { name: 'zero-latency', cfg: {} },
      { name: 'look-ahead', cfg: { lookaheadMs: 2 } },
      { name: 'true-peak', cfg: { lookaheadMs: 1, truePeak: true } },
    ]) {
      it(`should pass a signal 6 dB below the ceiling unchanged, delayed by exactly latencySamples (${mode.name})`, () => {
        // Transparency requirement (output-safety issue): gain error < 0.1 dB after the look-ahead
        // delay; a limiter below threshold applies unity gain (common practice).
        const lim = new OutputLimiter({ ...base, ...mode.cfg });
        const c = Math.pow(10, -6 / 20);
        const x = sine(9600, 997, c / 2, 0.3);
        const y = run(lim, x);
        const L = lim.latencySamples;
        let errSq = 0;
        let sigSq = 0;
        let maxDiff = 0;
        for (let i = 0; i + L < x.length; i++) {
          const d = y[i + L]! - x[i]!;
          errSq += d * d;
          sigSq += x[i]! * x[i]!;
          maxDiff = Math.max(maxDiff, Math.abs(d));
        }
        expect(maxDiff).toBeLessThan(1e-6);
        const gainErrorDb = Math.abs(10 * Math.log10((sigSq + errSq) / sigSq));
        expect(gainErrorDb).toBeLessThan(0.1);
        // Off by one sample the match is poor: the delay is exact, not approximate.
        let shifted = 0;
        for (let i = 0; i + L + 1 < x.length; i++) shifted = Math.max(shifted, Math.abs(y[i + L + 1]! - x[i]!));
        expect(shifted).toBeGreaterThan(0.01);
        for (let i = 0; i < L; i++) expect(y[i]).toBe(0);
        expect(lim.maxGainReductionDb).toBe(0);
        expect(lim.gainReductionDb).toBe(0);
      });
    }
  });

  describe('above the ceiling', () => {
    it('should hold a sine 20 dB over the ceiling at the ceiling, reading about 20 dB of gain reduction', () => {
      // Peak limiting: steady-state gain = ceiling / peak (common practice).
      const lim = new OutputLimiter({ ...base, lookaheadMs: 1, releaseMs: 100 });
      const c = Math.pow(10, -6 / 20);
      const x = sine(24000, 1000, 10 * c);
      const y = run(lim, x);
      expect(maxAbs(y)).toBeLessThanOrEqual(c);
      expect(maxAbs(y, 12000)).toBeGreaterThan(0.97 * c);
      expectClose(lim.gainReductionDb, 20, 0.5, 'gain reduction dB');
      expectClose(lim.maxGainReductionDb, 20, 0.5, 'max gain reduction dB');
      expect(lim.maxSamplePeak).toBeLessThanOrEqual(c);
      expect(lim.maxSamplePeak).toBeGreaterThan(0.97 * c);
      expect(lim.blockMaxGainReductionDb).toBeGreaterThan(19);
    });

    it('should start reducing the gain before a peak in look-ahead mode, and only at it in zero-latency mode', () => {
      // Look-ahead limiting (common practice): the gain ramps down during the look-ahead so the
      // peak itself meets the ceiling without clipping.
      const c = Math.pow(10, -6 / 20);
      const x = new Float32Array(5000).fill(0.1);
      x[1000] = 5;
      const ahead = new OutputLimiter({ ...base, lookaheadMs: 1 });
      const ya = run(ahead, x);
      const L = ahead.latencySamples;
      expectClose(ya[1000 + L]!, c, 1e-6, 'look-ahead output at the peak');
      expect(ya[1000 + L - 1]!).toBeLessThan(0.1 * 0.99);
      expect(ya[1000 + L - ahead.attackSamples - 1]!).toBeCloseTo(0.1, 6);
      const zero = new OutputLimiter(base);
      const yz = run(zero, x);
      expect(yz[999]!).toBeCloseTo(0.1, 6);
      expectClose(yz[1000]!, c, 1e-6, 'zero-latency output at the peak');
      // After the peak the gain recovers with the release time constant (50 ms default):
      // one time constant after, 1 − g is 1/e of its value (one-pole release, common practice).
      const g0 = 1 - yz[1001]! / 0.1;
      const tau = Math.round(0.05 * FS);
      const g1 = 1 - yz[1001 + tau]! / 0.1;
      expectClose(g1 / g0, Math.exp(-1), 0.01, 'release after one time constant');
    });

    it('should never let a sample exceed the ceiling in zero-latency mode, and report the true peak it cannot limit', () => {
      // Zero-latency mode guarantees the sample peak only. A 45°-phase fs/4 sine has its true
      // peak 3.01 dB above its samples (calculated: the samples are sin(π/4) = −3.01 dB of the crest; ITU-R BS.1770-4
      // Annex 2 measures true peak by 4× oversampling), so the output true
      // peak must read about 3 dB over the ceiling while the samples stay at it.
      const lim = new OutputLimiter(base);
      const c = Math.pow(10, -6 / 20);
      const x = sine(4800, FS / 4, 4, Math.PI / 4);
      const y = run(lim, x);
      expect(maxAbs(y)).toBeLessThanOrEqual(c);
      expectClose(lim.maxTruePeakDbtp - -6, 3.01, 0.2, 'true peak over the ceiling, dB');
      const tp = new OutputLimiter({ ...base, truePeak: true });
      run(tp, x);
      expect(tp.maxTruePeakDbtp).toBeLessThanOrEqual(-6 + 0.5);
      expect(tp.maxTruePeakDbtp).toBeGreaterThan(-6 - 0.5);
    });
  });

  describe('with non-finite input', () => {
    it('should output 0 for NaN and ±Infinity samples and count them', () => {
      // Output-safety requirement: non-finite samples become 0 and are counted (the engine turns the count into an event).
      const lim = new OutputLimiter({ ...base, lookaheadMs: 0.5 });
      const x = sine(512, 440, 0.1);
      x[100] = NaN;
      x[200] = Infinity;
      x[300] = -Infinity;
      const y = run(lim, x, 512);
      const L = lim.latencySamples;
      expect(y[100 + L]).toBe(0);
      expect(y[200 + L]).toBe(0);
      expect(y[300 + L]).toBe(0);
      expect(lim.nonFiniteCount).toBe(3);
      expect(lim.blockNonFiniteCount).toBe(3);
      for (const v of y) expect(Number.isFinite(v)).toBe(true);
      lim.process(x.subarray(0, 50), y, 50);
      expect(lim.blockNonFiniteCount).toBe(0);
      expect(lim.nonFiniteCount).toBe(3);
      lim.reset();
      expect(lim.nonFiniteCount).toBe(0);
    });
  });

  describe('with huge inputs', () => {
    it('should limit a sine 360 dB over the ceiling without inverting it (true-peak mode)', () => {
      // Regression: a running-sum boxcar cancelled catastrophically at gains near 1e−17 and turned
      // the gain negative (found by the property test). A gain is never negative (common practice:
      // a limiter attenuates, it never inverts), and the true peak stays within 0.5 dB (output-safety requirement).
      const lim = new OutputLimiter({ sampleRate: 8000, maxBlockSize: 1, ceilingDbfs: 0, truePeak: true, releaseMs: 1 });
      const x = new Float32Array(1200 + lim.latencySamples + 16);
      for (let i = 0; i < 1200; i++) x[i] = 1.43e18 * Math.sin(2 * Math.PI * 0.001 * i);
      x[4] = NaN;
      const y = run(lim, x, 1);
      const L = lim.latencySamples;
      for (let i = 0; i < 1200; i++) if (i !== 4) expect(y[i + L]! * x[i]!).toBeGreaterThanOrEqual(0);
      expect(maxAbs(y)).toBeLessThanOrEqual(1);
      expect(lim.maxTruePeakDbtp).toBeLessThan(0.5);
      expect(lim.maxGainReductionDb).toBeGreaterThan(350);
    });
  });

  describe('ceiling changes', () => {
    it('should move to a new ceiling at the next block, smoothly, never above the larger of old and new', () => {
      // Output-safety requirement: setCeilingDbfs takes effect at the next block, smoothly.
      const lim = new OutputLimiter({ ...base, lookaheadMs: 1, ceilingDbfs: -6 });
      const cOld = Math.pow(10, -6 / 20);
      const cNew = Math.pow(10, -12 / 20);
      const x = sine(9600, 500, 1);
      const y = new Float32Array(x.length);
      lim.process(x.subarray(0, 4800), y.subarray(0, 4800), 4800);
      lim.setCeilingDbfs(-12);
      expectClose(lim.ceilingDbfs, -12, 1e-12, 'ceilingDbfs after the call');
      expect(maxAbs(y, 2400, 4800)).toBeGreaterThan(0.97 * cOld);
      lim.process(x.subarray(4800), y.subarray(4800), 4800);
      expect(maxAbs(y)).toBeLessThanOrEqual(cOld);
      const settled = 4800 + Math.round((CEILING_RAMP_MS / 1000) * FS) + lim.latencySamples;
      expect(maxAbs(y, settled)).toBeLessThanOrEqual(cNew);
      expect(maxAbs(y, settled)).toBeGreaterThan(0.97 * cNew);
      // Smooth: the largest step between consecutive output samples stays that of the sine itself.
      let maxStep = 0;
      for (let i = 4801; i < 9600; i++) maxStep = Math.max(maxStep, Math.abs(y[i]! - y[i - 1]!));
      expect(maxStep).toBeLessThan(cOld * ((2 * Math.PI * 500) / FS) * 1.05);
    });
  });

  describe('streaming', () => {
    it('should give identical output in place, out of place and for any block sizes', () => {
      // Streaming contract (DEVELOPERS.md, src/dsp: process(input, output, n) on any block size): block boundaries and aliasing of input and output do not change the result.
      const rng = new Random(3);
      const x = new Float32Array(5000);
      rng.fillGaussian(x, 0.8);
      for (const cfg of [{}, { lookaheadMs: 1.3 }, { truePeak: true }, { truePeakFilter: true }, { lookaheadMs: 1.3, truePeakFilter: true }]) {
        const a = new OutputLimiter({ ...base, maxBlockSize: 5000, ...cfg });
        const ya = new Float32Array(x.length);
        a.process(x, ya, x.length);
        const b = new OutputLimiter({ ...base, maxBlockSize: 300, ...cfg });
        const yb = Float32Array.from(x);
        for (let o = 0; o < x.length; ) {
          const n = Math.min(x.length - o, 1 + Math.floor(rng.uniform() * 300));
          const blk = yb.subarray(o, o + n);
          b.process(blk, blk, n);
          o += n;
        }
        expect(Array.from(yb)).toEqual(Array.from(ya));
        expect(b.maxTruePeak).toBe(a.maxTruePeak);
      }
    });

    it('should measure the output true peak with the BS.1770-4 meter', () => {
      // The read-out must equal an independent TruePeakMeter run over the same output (ITU-R BS.1770-4 Annex 2),
      // to the f32 rounding of the SIMD kernel that computes it (src/dsp/true-peak-max.ts).
      const lim = new OutputLimiter({ ...base, lookaheadMs: 1 });
      const x = sine(4800, 11000, 2, 0.4);
      const y = run(lim, x);
      const m = new TruePeakMeter();
      m.process(y, y.length);
      expect(Math.abs(lim.maxTruePeak - m.peak)).toBeLessThanOrEqual(2e-6 * m.peak);
      lim.resetMeters();
      expect(lim.maxTruePeak).toBe(0);
      expect(lim.maxSamplePeak).toBe(0);
    });
  });
});
