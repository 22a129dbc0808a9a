import { describe, expect, it } from 'vitest';
import { Random } from '../../src/dsp/random.ts';
import { fftConvolve, fftPlan, inverseRealSpectrum, nextPow2, realSpectrum } from '../../src/dsp/fft.ts';
import { expectClose, normRelError } from '../helpers/tolerance.ts';

function randomSignal(seed: number, count: number): Float64Array {
  const x = new Float64Array(count);
  new Random(seed).fillGaussian(x);
  return x;
}

describe('fft', () => {
  it('should match the DFT definition X_k = Σ x_n·e^(−j2πkn/N), zero-padding short input', () => {
    // Discrete Fourier transform by its definition (Oppenheim & Schafer, *Discrete-Time Signal Processing*, 1989; common practice).
    const N = 64;
    const x = randomSignal(1, 50);
    const X = realSpectrum(x, N);
    for (const k of [0, 1, 7, 31, 32, 33, 63]) {
      let re = 0;
      let im = 0;
      for (let n = 0; n < x.length; n++) {
        re += x[n]! * Math.cos((2 * Math.PI * k * n) / N);
        im -= x[n]! * Math.sin((2 * Math.PI * k * n) / N);
      }
      expectClose(X[2 * k]!, re, 1e-12, `Re X_${k}`);
      expectClose(X[2 * k + 1]!, im, 1e-12, `Im X_${k}`);
    }
  });

  it('should invert its own spectrum', () => {
    const x = randomSignal(2, 256);
    const back = inverseRealSpectrum(realSpectrum(x, 256));
    expect(normRelError(back, x)).toBeLessThan(1e-14);
  });

  it('should convolve like the direct sum', () => {
    const a = randomSignal(3, 37);
    const b = randomSignal(4, 11);
    const c = fftConvolve(a, b);
    expect(c.length).toBe(47);
    const direct = new Float64Array(47);
    for (let i = 0; i < 37; i++) for (let j = 0; j < 11; j++) direct[i + j] = direct[i + j]! + a[i]! * b[j]!;
    expect(normRelError(c, direct)).toBeLessThan(1e-13);
  });

  it('should round sizes up to powers of two and refuse other plan sizes', () => {
    expect(nextPow2(1)).toBe(1);
    expect(nextPow2(129)).toBe(256);
    expect(fftPlan(64)).toBe(fftPlan(64));
    expect(() => fftPlan(48)).toThrow(/FFT size must be a power of two ≥ 2, got 48/);
  });
});
