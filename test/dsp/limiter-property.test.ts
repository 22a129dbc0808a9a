import { describe, it } from 'vitest';
import fc from 'fast-check';
import { OutputLimiter, TRUE_PEAK_FILTER_BOUND } from '../../src/dsp/limiter.ts';
import { TruePeakMeter } from '../../src/dsp/true-peak.ts';

// Property-based checks of the output-safety guarantees with random and adversarial inputs and
// random settings. Guarantees (requirements of the output-safety issue): every output sample is
// finite and within the ceiling; in true-peak mode the 4×-oversampled true peak, measured with
// the ITU-R BS.1770-4 Annex 2 meter, stays within 0.5 dB of the ceiling.

const settings = fc.record({
  sampleRate: fc.constantFrom(8000, 16000, 44100, 48000, 96000),
  ceilingDbfs: fc.double({ min: -60, max: 0, noNaN: true }),
  lookaheadMs: fc.oneof(fc.constant(0), fc.double({ min: 0, max: 5, noNaN: true })),
  truePeak: fc.boolean(),
  attackMs: fc.option(fc.double({ min: 0, max: 5, noNaN: true }), { nil: undefined }),
  releaseMs: fc.double({ min: 1, max: 500, noNaN: true }),
  blockSize: fc.integer({ min: 1, max: 512 }),
});

const amplitude = fc.oneof(
  fc.double({ min: 0, max: 2, noNaN: true }),
  fc.double({ min: 1, max: 1e30, noNaN: true }),
  fc.constantFrom(3.4e38, 1e-40, 1e-310, 0),
);

/** Inputs: raw floats (NaN, ±Infinity, denormals, huge values included) and structured adversaries. */
const signal = fc.oneof(
  fc.array(fc.float(), { minLength: 1, maxLength: 1500 }),
  fc.array(fc.double(), { minLength: 1, maxLength: 1500 }),
  // Square waves near Nyquist (period 2 … 6 samples): the largest inter-sample overshoot.
  fc.tuple(fc.integer({ min: 1, max: 3 }), amplitude, fc.integer({ min: 16, max: 1500 })).map(([half, a, n]) =>
    Array.from({ length: n }, (_, i) => (Math.floor(i / half) % 2 === 0 ? a : -a)),
  ),
  // Step changes between two levels.
  fc.tuple(amplitude, amplitude, fc.integer({ min: 1, max: 700 }), fc.integer({ min: 1, max: 700 })).map(([a, b, n1, n2]) => [
    ...Array.from({ length: n1 }, () => a),
    ...Array.from({ length: n2 }, () => -b),
  ]),
  // Bursts: a quiet sine with rare huge or non-finite samples.
  fc
    .tuple(
      fc.double({ min: 0.001, max: 0.49, noNaN: true }),
      amplitude,
      fc.array(fc.tuple(fc.integer({ min: 0, max: 1199 }), fc.constantFrom(NaN, Infinity, -Infinity, 1e20, -1e20, 50)), { maxLength: 20 }),
    )
    .map(([f, a, hits]) => {
      const x = Array.from({ length: 1200 }, (_, i) => a * Math.sin(2 * Math.PI * f * i));
      for (const [i, v] of hits) x[i] = v;
      return x;
    }),
);

type Settings = typeof settings extends fc.Arbitrary<infer T> ? T : never;

function runLimiter(cfg: Omit<Settings, 'truePeak'> & { truePeak: boolean | undefined }, values: number[]) {
  const lim = new OutputLimiter({
    sampleRate: cfg.sampleRate,
    maxBlockSize: cfg.blockSize,
    ceilingDbfs: cfg.ceilingDbfs,
    lookaheadMs: cfg.lookaheadMs,
    ...(cfg.truePeak !== undefined ? { truePeak: cfg.truePeak } : {}),
    attackMs: cfg.attackMs,
    releaseMs: cfg.releaseMs,
  });
  // Trailing silence flushes the look-ahead delay so every input sample reaches the output.
  const x = new Float32Array(values.length + lim.latencySamples + 16);
  for (let i = 0; i < values.length; i++) x[i] = values[i]!;
  const y = new Float32Array(x.length);
  for (let o = 0; o < x.length; o += cfg.blockSize) {
    const n = Math.min(cfg.blockSize, x.length - o);
    lim.process(x.subarray(o, o + n), y.subarray(o, o + n), n);
  }
  return { lim, x, y };
}

describe('OutputLimiter (properties)', () => {
  it('should keep every output sample finite, within the ceiling and of its input sign, whatever the input and settings', () => {
    fc.assert(
      fc.property(settings, signal, (cfg, values) => {
        const { lim, x, y } = runLimiter(cfg, values);
        const c = Math.pow(10, cfg.ceilingDbfs / 20);
        const L = lim.latencySamples;
        for (let i = 0; i < y.length; i++) {
          const v = y[i]!;
          if (!Number.isFinite(v) || Math.abs(v) > c) return false;
          // A gain is never negative: the output never has the opposite sign of its input sample.
          if (i >= L && v * x[i - L]! < 0) return false;
        }
        return lim.maxSamplePeak <= c && Number.isFinite(lim.gainReductionDb) && lim.gainReductionDb >= 0;
      }),
      { numRuns: 150, seed: 20240601 },
    );
  });

  it('should keep the 4×-oversampled true peak within 0.5 dB of the ceiling in true-peak mode', () => {
    fc.assert(
      fc.property(settings, signal, (cfg, values) => {
        const { y } = runLimiter({ ...cfg, truePeak: true }, values);
        const meter = new TruePeakMeter();
        meter.process(y, y.length);
        meter.process(new Float32Array(16), 16); // the meter reads 6 samples late: flush it
        return meter.peakDbtp <= cfg.ceilingDbfs + 0.5;
      }),
      { numRuns: 150, seed: 20240602 },
    );
  });

  it('should keep the default stage (limiter, then the true-peak filter) within the ceiling and its true-peak bound, whatever the input', () => {
    // The bound is the ℓ∞ gain of the Annex 2 phases convolved with the filter (src/dsp/limiter.ts): it holds
    // for every input whose samples are within the ceiling, which the clamp before the filter guarantees.
    fc.assert(
      fc.property(settings, signal, (cfg, values) => {
        const { lim, y } = runLimiter({ ...cfg, truePeak: undefined }, values);
        if (!lim.truePeakFilter) return false;
        const c = Math.pow(10, cfg.ceilingDbfs / 20);
        for (const v of y) if (!Number.isFinite(v) || Math.abs(v) > c) return false;
        const meter = new TruePeakMeter();
        meter.process(y, y.length);
        return meter.peak <= c * TRUE_PEAK_FILTER_BOUND * (1 + 1e-6) && meter.peakDbtp <= cfg.ceilingDbfs + 0.5;
      }),
      { numRuns: 150, seed: 20261204 },
    );
  });
});
