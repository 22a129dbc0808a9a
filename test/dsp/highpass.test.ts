import { describe, it, expect } from 'vitest';
import { HighPass } from '../../src/dsp/highpass.ts';
import { expectClose } from '../helpers/tolerance.ts';

const FS = 48000;

/** Steady-state gain (dB) of the filter at `hz`: settle, then fit a sine over whole cycles. */
function gainDb(hp: HighPass, hz: number, fs = FS): number {
  const period = fs / hz;
  const settle = Math.ceil(Math.max(2 * fs, 40 * period));
  const cycles = Math.max(4, Math.ceil((0.2 * fs) / period));
  const measure = Math.round(cycles * period);
  const n = settle + measure;
  const x = new Float32Array(n);
  for (let i = 0; i < n; i++) x[i] = Math.sin((2 * Math.PI * hz * i) / fs);
  const y = new Float32Array(n);
  for (let o = 0; o < n; o += 512) hp.process(x.subarray(o, o + 512), y.subarray(o, o + 512), Math.min(512, n - o));
  let s = 0;
  let c = 0;
  for (let i = settle; i < n; i++) {
    s += y[i]! * Math.sin((2 * Math.PI * hz * i) / fs);
    c += y[i]! * Math.cos((2 * Math.PI * hz * i) / fs);
  }
  // Whole cycles up to rounding: the fit error is below 1e−3 dB for these lengths.
  return 20 * Math.log10((2 / measure) * Math.hypot(s, c));
}

describe('HighPass', () => {
  it('should be −3.01 dB at the corner and follow the pre-warped analogue Butterworth response elsewhere', () => {
    // 2nd-order Butterworth: |H(jΩ)|² = Ω⁴/(1 + Ω⁴) (S. Butterworth, "On the theory of filter
    // amplifiers", 1930; from memory); bilinear transform with the corner pre-warped maps it to
    // Ω = tan(πf/fs)/tan(πf0/fs) (Oppenheim & Schafer, Discrete-Time Signal Processing, bilinear
    // transformation; from memory), so the digital response is exactly that at every frequency.
    for (const [fs, f0] of [
      [48000, 20],
      [48000, 100],
      [16000, 1000],
    ] as const) {
      for (const ratio of [0.25, 0.5, 1, 2, 4, 10]) {
        const f = f0 * ratio;
        const hp = new HighPass({ sampleRate: fs, cornerHz: f0, dcBlockerHz: 0 });
        const W = Math.tan((Math.PI * f) / fs) / Math.tan((Math.PI * f0) / fs);
        const expected = 10 * Math.log10(W ** 4 / (1 + W ** 4));
        expectClose(gainDb(hp, f, fs), expected, 0.01, `gain at ${f} Hz (corner ${f0} Hz, fs ${fs})`);
      }
    }
    const hp = new HighPass({ sampleRate: FS, cornerHz: 50, dcBlockerHz: 0 });
    expectClose(gainDb(hp, 50), -3.0103, 0.01, 'gain at the corner');
  });

  it('should match the DC blocker transfer function |1 − z⁻¹| / |1 − R z⁻¹| and decay a step as Rⁿ', () => {
    // DC blocker y[n] = x[n] − x[n−1] + R·y[n−1] (J. O. Smith III, Introduction to Digital Filters,
    // 2007, "DC blocker"; from memory); its response follows from the difference equation (calc).
    const dc = 5;
    const R = Math.exp((-2 * Math.PI * dc) / FS);
    for (const f of [2, 5, 20, 200]) {
      const hp = new HighPass({ sampleRate: FS, cornerHz: 0, dcBlockerHz: dc });
      const w = (2 * Math.PI * f) / FS;
      const num = Math.hypot(1 - Math.cos(w), Math.sin(w));
      const den = Math.hypot(1 - R * Math.cos(w), R * Math.sin(w));
      expectClose(gainDb(hp, f), 20 * Math.log10(num / den), 0.01, `DC blocker gain at ${f} Hz`);
    }
    const hp = new HighPass({ sampleRate: FS, cornerHz: 0, dcBlockerHz: dc });
    const step = new Float32Array(1000).fill(1);
    const y = new Float32Array(1000);
    hp.process(step, y, 1000);
    for (const n of [0, 1, 10, 999]) expectClose(y[n]!, Math.pow(R, n), 1e-6, `step response at n=${n}`);
  });

  it('should remove DC entirely in the default setting', () => {
    // A high-pass has zero gain at DC (double zero at z = 1 in the Butterworth section).
    const hp = new HighPass({ sampleRate: FS });
    const x = new Float32Array(FS * 3).fill(0.5);
    const y = new Float32Array(x.length);
    hp.process(x, y, x.length);
    expect(Math.abs(y[x.length - 1]!)).toBeLessThan(1e-4);
  });

  it('should be the identity with both sections off', () => {
    // cornerHz 0 and dcBlockerHz 0 mean off (output-safety issue).
    const hp = new HighPass({ sampleRate: FS, cornerHz: 0, dcBlockerHz: 0 });
    const x = Float32Array.from({ length: 64 }, (_, i) => Math.sin(i));
    const y = new Float32Array(64);
    hp.process(x, y, 64);
    expect(Array.from(y)).toEqual(Array.from(x));
  });

  it('should pass non-finite samples on without poisoning its state, and settle to exact zeros', () => {
    // ancbench safety rule: one bad sample must not silence the output path for good.
    const hp = new HighPass({ sampleRate: FS });
    const x = Float32Array.from({ length: 4800 }, (_, i) => 0.5 * Math.sin((2 * Math.PI * 440 * i) / FS));
    x[100] = NaN;
    x[200] = -Infinity;
    hp.process(x, x, x.length);
    expect(x[100]).toBeNaN();
    expect(x[200]).toBe(-Infinity);
    for (let i = 201; i < 4800; i++) expect(Number.isFinite(x[i]!)).toBe(true);
    // Silence after a signal: the states are flushed below 1e−30, so the output ends exactly at 0.
    // (The 2 Hz DC blocker needs about 5.4 s to decay from 0.5 to 1e−30: 68 time constants of 80 ms.)
    const silence = new Float32Array(FS * 8);
    for (let o = 0; o < silence.length; o += 512) hp.process(silence.subarray(o, o + 512), silence.subarray(o, o + 512), 512);
    expect(silence[silence.length - 1]).toBe(0);
    expect(silence[FS]).not.toBe(0);
  });

  it('should refuse invalid settings with the field, range and value', () => {
    // ancbench rule: validation messages name the field, the allowed range and the value received.
    expect(() => new HighPass({ sampleRate: 4000 })).toThrow(/sampleRate.*8000.*384000 Hz, got 4000/);
    expect(() => new HighPass({ sampleRate: FS, cornerHz: 0.5 })).toThrow(/cornerHz must be 0 \(off\) or a number from 1 to 21600 Hz.*got 0.5/);
    expect(() => new HighPass({ sampleRate: FS, cornerHz: 30000 })).toThrow(/cornerHz.*got 30000/);
    expect(() => new HighPass({ sampleRate: FS, dcBlockerHz: 100 })).toThrow(/dcBlockerHz.*0.1 to 50 Hz, got 100/);
  });
});
