import { describe, expect, it } from 'vitest';
import { Random } from '../../src/dsp/random.ts';
import { estimateDelay, gccPhat } from '../../src/analysis/delay-estimate.ts';
import { inverseRealSpectrum, realSpectrum } from '../../src/dsp/fft.ts';
import { expectClose } from '../helpers/tolerance.ts';

/**
 * x = n samples of periodic white noise, y = the same noise delayed by `delay` samples (any real value)
 * by a linear phase shift of its spectrum, i.e. ideal band-limited interpolation (the Nyquist bin keeps
 * its real part). Both are cut from the middle of the period so no wrap-around shows.
 */
function delayedNoisePair(seed: number, n: number, delay: number): { x: Float64Array; y: Float64Array } {
  const P = 4 * n;
  const z = new Float64Array(P);
  new Random(seed).fillGaussian(z);
  const Z = realSpectrum(z, P);
  const D = new Float64Array(2 * P);
  for (let k = 0; k < P; k++) {
    const f = k <= P / 2 ? k : k - P; // signed bin index
    const phi = (-2 * Math.PI * f * delay) / P;
    const re = Z[2 * k]!, im = Z[2 * k + 1]!;
    D[2 * k] = re * Math.cos(phi) - im * Math.sin(phi);
    D[2 * k + 1] = k === P / 2 ? 0 : re * Math.sin(phi) + im * Math.cos(phi);
  }
  const zd = inverseRealSpectrum(D);
  return { x: z.slice(n, 2 * n), y: zd.slice(n, 2 * n) };
}

/** Tone (amplitude 1) plus common broadband noise; y = x delayed by an integer D plus independent sensor noise. */
function tonePair(n: number, periodSamples: number, delay: number, commonRms: number, sensorRms: number) {
  const rng = new Random(42);
  const total = n + delay;
  const s = new Float64Array(total);
  for (let i = 0; i < total; i++) s[i] = Math.sin((2 * Math.PI * i) / periodSamples + 0.4) + commonRms * rng.gaussian();
  const x = s.slice(delay, delay + n);
  const y = new Float64Array(n);
  for (let i = 0; i < n; i++) y[i] = s[i]! + sensorRms * rng.gaussian();
  // y[i] = s[i] = x[i − delay]: y lags x by `delay` samples.
  return { x, y };
}

/** Height of the largest local maximum at least `exclude` lags away from the global peak, over the peak. */
function runnerUpRatio(r: Float64Array, exclude: number): number {
  let peak = 0;
  for (let i = 1; i < r.length; i++) if (r[i]! > r[peak]!) peak = i;
  let second = -Infinity;
  for (let i = 1; i < r.length - 1; i++) {
    if (Math.abs(i - peak) < exclude) continue;
    if (r[i]! >= r[i - 1]! && r[i]! >= r[i + 1]!) second = Math.max(second, r[i]!);
  }
  return second / r[peak]!;
}

describe('estimateDelay', () => {
  it('should recover integer and fractional delays of broadband noise within 0.1 sample', () => {
    // GCC-PHAT: Knapp & Carter, IEEE Trans. ASSP 24(4), 1976.
    const fs = 48000;
    for (const delay of [0, 7, 23.25, 23.5, 40.25, -12.8, 101.1]) {
      const { x, y } = delayedNoisePair(3, 8192, delay);
      const r = estimateDelay(x, y, fs, { maxDelayS: 0.005 });
      expectClose(r.delaySamples, delay, 0.1, `delay ${delay}`);
      // A parabola on the integer lags alone is off by 0.107 sample at 23.25 (sinc-shaped peak); the
      // band-limited refinement measured ≤ 0.001 sample, so hold it to 0.01.
      expectClose(r.delaySamples, delay, 0.01, `refined delay ${delay}`);
      expectClose(r.delayMs, (1000 * r.delaySamples) / fs, 1e-12, 'ms');
      expect(r.peakValue).toBeGreaterThan(0.8);
    }
  });

  it('should find the delay of a tone with small common noise within 1 sample where plain cross-correlation is ambiguous', () => {
    // Tone period 48 samples (1 kHz at 48 kHz), delay 17 < 24 = half a period, search ±240 samples (5 periods).
    const fs = 48000;
    const { x, y } = tonePair(16384, 48, 17, 0.05, 0.01);
    const r = estimateDelay(x, y, fs, { maxDelayS: 0.005 });
    expect(Math.abs(r.delaySamples - 17)).toBeLessThanOrEqual(1);
    // PHAT makes the true lag unique; plain cross-correlation has peaks of nearly equal height a period apart.
    const phat = gccPhat(x, y, { maxLagSamples: 240 });
    expect(runnerUpRatio(phat, 12)).toBeLessThan(0.3);
    const plain = new Float64Array(481);
    for (let lag = -240; lag <= 240; lag++) {
      let s = 0;
      for (let i = Math.max(0, -lag); i < Math.min(x.length, y.length - lag); i++) s += x[i]! * y[i + lag]!;
      plain[lag + 240] = s;
    }
    expect(runnerUpRatio(plain, 12)).toBeGreaterThan(0.9);
  });

  it('should also resolve a tone + noise delay longer than the tone period when the noise is common', () => {
    const { x, y } = tonePair(16384, 48, 100, 0.05, 0.01);
    const r = estimateDelay(x, y, 48000, { maxDelayS: 0.005 });
    expect(Math.abs(r.delaySamples - 100)).toBeLessThanOrEqual(1);
  });

  it('should report an inverted path as a negative peak with polarity "either"', () => {
    const { x, y } = delayedNoisePair(4, 4096, 9.3);
    const inverted = y.map((v) => -v);
    const r = estimateDelay(x, inverted, 16000, { maxDelayS: 0.01, polarity: 'either' });
    expectClose(r.delaySamples, 9.3, 0.1, 'inverted delay');
    expect(r.peakValue).toBeLessThan(-0.8);
  });

  it('should give a low peak for unrelated signals and 0 for silence', () => {
    const a = new Float64Array(4096);
    const b = new Float64Array(4096);
    new Random(5).fillGaussian(a);
    new Random(6).fillGaussian(b);
    // M = 8192: the largest of ~1000 lags of pure chance is about 4/√M ≈ 0.044.
    expect(Math.abs(estimateDelay(a, b, 8000, { maxDelayS: 0.06 }).peakValue)).toBeLessThan(10 / Math.sqrt(8192));
    const silent = estimateDelay(new Float64Array(100), new Float64Array(100), 8000);
    expect(silent).toEqual({ delaySamples: 0, delayMs: 0, peakValue: 0 });
  });

  it('should refuse a search range longer than the signals', () => {
    const x = new Float64Array(100);
    expect(() => estimateDelay(x, x, 1000, { maxDelayS: 0.2 })).toThrow(/maxDelayS must be in \[0, 0.099\] s .* got 0.2/);
    expect(() => estimateDelay(x, x, 0)).toThrow(/sampleRate/);
    expect(() => gccPhat(x, x, { maxLagSamples: 100 })).toThrow(/maxLagSamples must be an integer in \[0, 99\], got 100/);
  });
});
