import { describe, expect, it } from 'vitest';
import { ExponentialSweep, exponentialSweepSignal, harmonicAdvanceS } from '../../src/dsp/sweep.ts';
import { expectClose, expectRelClose } from '../helpers/tolerance.ts';

/**
 * Local frequency from the interval between the two upward zero crossings that follow sample `from`,
 * and the time (s) at the middle of that interval.
 */
function localFrequency(x: Float64Array, from: number, sampleRate: number): { hz: number; timeS: number } {
  const crossings: number[] = [];
  for (let n = from; n < x.length - 1 && crossings.length < 2; n++) {
    if (x[n]! < 0 && x[n + 1]! >= 0) crossings.push(n + x[n]! / (x[n]! - x[n + 1]!));
  }
  return { hz: sampleRate / (crossings[1]! - crossings[0]!), timeS: (crossings[0]! + crossings[1]!) / 2 / sampleRate };
}

describe('harmonicAdvanceS', () => {
  it("should give Farina's advances of harmonics 2, 3 and 4 for a 10 s sweep from 20 Hz to 20 kHz", () => {
    // Farina, AES 108th Convention, preprint 5093, 2000: Δt = T·ln N / R; calculated from it: 1.003, 1.590, 2.007 s.
    expectClose(harmonicAdvanceS(2, 10, 20, 20000), 1.003, 0.0005, 'N = 2');
    expectClose(harmonicAdvanceS(3, 10, 20, 20000), 1.590, 0.0005, 'N = 3');
    expectClose(harmonicAdvanceS(4, 10, 20, 20000), 2.007, 0.0005, 'N = 4');
  });
});

describe('ExponentialSweep', () => {
  const options = { sampleRate: 48000, startHz: 100, endHz: 1600, durationS: 1, fadeInS: 0.01, fadeOutS: 0.01 };

  it('should rise by equal frequency ratios in equal times, f(t) = f1·(f2/f1)^(t/T)', () => {
    // The exponential sweep (Farina 2000) passes √(f1·f2) = 400 Hz at T/2, 200 Hz at T/4, 800 Hz at 3T/4.
    // Measured from the period between zero crossings near those times and compared with f1·(f2/f1)^(t/T) at the
    // middle of that period, within 0.1 % (the period's midpoint is not the instant of mean frequency exactly).
    const x = exponentialSweepSignal(options);
    for (const [from, nominal] of [[12000, 200], [24000, 400], [36000, 800]] as const) {
      const { hz, timeS } = localFrequency(x, from, 48000);
      expectRelClose(hz, 100 * 16 ** timeS, 0.001, `f at ${timeS} s`);
      expectRelClose(hz, nominal, 0.03, `f near ${from / 48000} s`);
    }
  });

  it('should produce the same samples whatever the block sizes, then silence', () => {
    const whole = exponentialSweepSignal(options);
    const sweep = new ExponentialSweep(options);
    const streamed = new Float64Array(whole.length + 500);
    const block = new Float32Array(97);
    let at = 0;
    const sizes = [1, 97, 64, 13, 97];
    for (let i = 0; at < streamed.length; i++) {
      const n = Math.min(sizes[i % sizes.length]!, streamed.length - at);
      sweep.process(block, n);
      for (let j = 0; j < n; j++) streamed[at + j] = block[j]!;
      at += n;
    }
    expect(sweep.done).toBe(true);
    // Float32 blocks: equal to the Float64 whole sweep within single-precision rounding.
    let worst = 0;
    for (let i = 0; i < whole.length; i++) worst = Math.max(worst, Math.abs(streamed[i]! - whole[i]!));
    expect(worst).toBeLessThan(1e-7);
    expect(Array.from(streamed.subarray(whole.length)).every((v) => v === 0)).toBe(true);
  });

  it('should fade in and out from zero and reach the set peak amplitude in between', () => {
    const x = exponentialSweepSignal({ ...options, amplitude: 0.25 });
    expect(x[0]).toBe(0);
    expect(Math.abs(x[x.length - 1]!)).toBeLessThan(1e-12);
    let peak = 0;
    for (const v of x) peak = Math.max(peak, Math.abs(v));
    expectClose(peak, 0.25, 1e-4, 'peak amplitude');
    // Mid-fade (5 ms into a 10 ms raised-cosine fade) the envelope is 1/2.
    let midPeak = 0;
    for (let n = 230; n < 250; n++) midPeak = Math.max(midPeak, Math.abs(x[n]!));
    expect(midPeak).toBeLessThan(0.25 * 0.55);
  });

  it('should report progress and rewind on reset', () => {
    const sweep = new ExponentialSweep(options);
    const out = new Float64Array(12000);
    sweep.process(out);
    expectClose(sweep.progress, 0.25, 1e-12, 'progress');
    expect(sweep.done).toBe(false);
    sweep.reset();
    expect(sweep.samplesWritten).toBe(0);
  });

  it('should refuse bad settings with messages naming the field and the value', () => {
    expect(() => new ExponentialSweep({ ...options, startHz: 0 })).toThrow(/startHz.*0/);
    expect(() => new ExponentialSweep({ ...options, endHz: 30000 })).toThrow(/endHz.*24000.*30000/);
    expect(() => new ExponentialSweep({ ...options, endHz: 50 })).toThrow(/endHz/);
    expect(() => new ExponentialSweep({ ...options, durationS: 0 })).toThrow(/durationS/);
    expect(() => new ExponentialSweep({ ...options, amplitude: 2 })).toThrow(/amplitude.*2/);
    expect(() => new ExponentialSweep({ ...options, fadeInS: 0.8, fadeOutS: 0.3 })).toThrow(/fadeInS \+ fadeOutS/);
  });
});
