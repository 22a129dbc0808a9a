import { describe, expect, it } from 'vitest';
import { LmsCombiner, LmsFilter } from '../../src/dsp/lms.ts';
import { Random } from '../../src/dsp/random.ts';
import { expectRelClose } from '../helpers/tolerance.ts';

// Step-size convention: Haykin, *Adaptive Filter Theory* (H): w ← w + μ·e·x. Widrow's μ_W = μ_H / 2.

describe('LmsFilter', () => {
  describe('with white Gaussian input identifying an unknown FIR system', () => {
    const L = 32;
    const mu = 0.005;
    const sigma2 = 1;
    const plant = Float64Array.from({ length: L }, (_, k) => Math.exp(-k / 6) * Math.cos(0.7 * k));

    it('should learn with the mean-square time constant 1/(2μλ) of Widrow & Stearns (1985) within 20 %', () => {
      // Widrow & Stearns, *Adaptive Signal Processing*, 1985, ch. 6; Haykin: the MSE learning curve of
      // mode λ decays as exp(−n/τ_mse) with τ_mse ≈ 1/(2μλ) (H convention). White input: λ = σ² for all modes.
      const runs = 60;
      const N = 800;
      const excess = new Float64Array(N);
      for (let r = 0; r < runs; r++) {
        const rng = new Random(100 + r);
        const f = new LmsFilter({ taps: L, stepSize: mu });
        const line = new Float64Array(L);
        for (let n = 0; n < N; n++) {
          const x = rng.gaussian();
          line.copyWithin(1, 0, L - 1);
          line[0] = x;
          let d = 0;
          for (let k = 0; k < L; k++) d += plant[k]! * line[k]!;
          const y = f.filter(x);
          const e = d - y; // noise-free: the learning curve is the excess MSE itself
          excess[n] = excess[n]! + (e * e) / runs;
          f.adapt(e);
        }
      }
      // fit log(excess) against n over the first 3 time constants
      const theory = 1 / (2 * mu * sigma2);
      let sx = 0, sy = 0, sxx = 0, sxy = 0, m = 0;
      for (let n = 20; n < 3 * theory; n++) {
        const yv = Math.log(excess[n]!);
        sx += n; sy += yv; sxx += n * n; sxy += n * yv; m++;
      }
      const slope = (m * sxy - sx * sy) / (m * sxx - sx * sx);
      expectRelClose(-1 / slope, theory, 0.2, 'MSE time constant (samples)');
    });

    it('should settle at the misadjustment of Feuer & Weinstein (1985) within 20 %', () => {
      // Feuer & Weinstein, IEEE TASSP 33(1), 1985 (from memory): white Gaussian input,
      // H convention: M = μLσ² / (2 − μ(L + 2)σ²). μ = 0.005, L = 32 → 0.0874.
      const M = (mu * L * sigma2) / (2 - mu * (L + 2) * sigma2);
      const noise = 0.1; // measurement-noise RMS: J_min = 0.01
      const rng = new Random(7);
      const f = new LmsFilter({ taps: L, stepSize: mu });
      const line = new Float64Array(L);
      let excess = 0;
      let count = 0;
      const settle = 20000;
      for (let n = 0; n < settle + 400000; n++) {
        const x = rng.gaussian();
        line.copyWithin(1, 0, L - 1);
        line[0] = x;
        let d0 = 0;
        for (let k = 0; k < L; k++) d0 += plant[k]! * line[k]!;
        const y = f.filter(x);
        const e = d0 + noise * rng.gaussian() - y;
        if (n >= settle) {
          const ea = d0 - y; // a-priori excess error
          excess += ea * ea;
          count++;
        }
        f.adapt(e);
      }
      expectRelClose(excess / count / (noise * noise), M, 0.2, 'misadjustment');
    });
  });

  describe('with leakage', () => {
    it('should converge to h·σ²/(σ² + γ) on white input (Haykin, from memory)', () => {
      // Leaky LMS converges to (R + γI)⁻¹p; white input R = σ²I, p = σ²h → w∞ = h·σ²/(σ² + γ).
      const gamma = 0.25;
      const h = [0.8, -0.4, 0.2];
      const f = new LmsFilter({ taps: 3, stepSize: 0.002, leakage: gamma });
      const rng = new Random(3);
      const line = [0, 0, 0];
      const avg = new Float64Array(3);
      const w = new Float64Array(3);
      for (let n = 0; n < 120000; n++) {
        const x = rng.gaussian();
        line.unshift(x);
        line.pop();
        const d = h[0]! * line[0]! + h[1]! * line[1]! + h[2]! * line[2]!;
        f.adapt(d - f.filter(x));
        if (n > 60000) {
          f.copyWeights(w);
          for (let k = 0; k < 3; k++) avg[k] = avg[k]! + w[k]! / 60000;
        }
      }
      for (let k = 0; k < 3; k++) expect(avg[k]!).toBeCloseTo((h[k]! * 1) / (1 + gamma), 2);
    });
  });

  describe('with normalisation (NLMS)', () => {
    it('should refuse a non-positive step size', () => {
      expect(() => new LmsFilter({ taps: 4, stepSize: 0 })).toThrow(/stepSize must be > 0, got 0/);
      expect(() => new LmsFilter({ taps: 0, stepSize: 0.1 })).toThrow(/taps must be an integer ≥ 1, got 0/);
    });

    it('should keep its running input energy equal to a fresh sum across the delay-line wrap', () => {
      const f = new LmsFilter({ taps: 7, stepSize: 0.5, normalized: true });
      const rng = new Random(5);
      const hist: number[] = [];
      for (let n = 0; n < 50; n++) {
        const x = rng.gaussian();
        hist.unshift(x);
        f.filter(x);
        const direct = hist.slice(0, 7).reduce((s, v) => s + v * v, 0);
        expect(Math.abs(f.inputEnergy() - direct)).toBeLessThan(1e-12);
      }
    });
  });
});

describe('LmsCombiner', () => {
  describe('as the single-sinusoid adaptive noise canceller of Widrow et al. (1975)', () => {
    // Widrow et al., "Adaptive noise cancelling: principles and applications", Proc. IEEE 63(12), 1975
    // (from memory): reference C·cos(ω0 n), C·sin(ω0 n), Widrow convention
    // w ← w + 2μ_W·e·x. The canceller is a notch at ω0 with
    //   H(z) = (z² − 2z cos ω0 + 1) / (z² − 2(1 − μC²) z cos ω0 + 1 − 2μC²),
    // 3 dB bandwidth 2μC² rad/sample; μ_W = 0.005, C = 1 → |H| = 0.7077 at 0.005 rad/sample from ω0 (calculated from H(z)).
    const muW = 0.005;
    const C = 1;
    const w0 = 0.6; // rad/sample; the figure 0.7077 is calculated without a stated ω0, and |H| varies by ±0.5 % with it

    function measureGain(offset: number): number {
      const c = new LmsCombiner(2, 2 * muW); // Haykin μ = 2μ_W
      const x = new Float64Array(2);
      let p = 0;
      let n0 = 0;
      const settle = 6000;
      const N = settle + 40000;
      for (let n = 0; n < N; n++) {
        x[0] = C * Math.cos(w0 * n);
        x[1] = C * Math.sin(w0 * n);
        const d = Math.cos((w0 + offset) * n);
        const e = d - c.filter(x);
        c.adapt(e);
        if (n >= settle) {
          p += e * e;
          n0++;
        }
      }
      return Math.sqrt((2 * p) / n0); // amplitude of the error sinusoid; input amplitude 1
    }

    it('should pass 0.7077 of a tone 0.005 rad/sample from the notch (within 20 %)', () => {
      const z = { re: Math.cos(w0 + 0.005), im: Math.sin(w0 + 0.005) };
      const analytic = notchGain(z, w0, muW, C);
      expect(Math.abs(analytic - 0.7077)).toBeLessThan(0.002);
      expectRelClose(measureGain(0.005), analytic, 0.2, '|H| at ω0 + 0.005');
    });

    it('should have the 3 dB bandwidth 2μC² within 20 %', () => {
      // find the offset where the measured gain crosses 1/√2 by bisection on a few points
      let lo = 0.001, hi = 0.02;
      for (let i = 0; i < 7; i++) {
        const mid = Math.sqrt(lo * hi);
        if (measureGain(mid) < Math.SQRT1_2) lo = mid;
        else hi = mid;
      }
      const halfBandwidth = Math.sqrt(lo * hi);
      expectRelClose(2 * halfBandwidth, 2 * muW * C * C, 0.2, '3 dB bandwidth (rad/sample)');
    });

    it('should null the tone at ω0 itself', () => {
      expect(measureGain(0)).toBeLessThan(0.01);
    });
  });
});

function notchGain(z: { re: number; im: number }, w0: number, mu: number, C: number): number {
  // |H(z)| for the transfer function above, evaluated with complex arithmetic
  const mul = (a: { re: number; im: number }, b: { re: number; im: number }) => ({ re: a.re * b.re - a.im * b.im, im: a.re * b.im + a.im * b.re });
  const z2 = mul(z, z);
  const c = Math.cos(w0);
  const num = { re: z2.re - 2 * c * z.re + 1, im: z2.im - 2 * c * z.im };
  const k = 2 * (1 - mu * C * C) * c;
  const den = { re: z2.re - k * z.re + 1 - 2 * mu * C * C, im: z2.im - k * z.im };
  return Math.hypot(num.re, num.im) / Math.hypot(den.re, den.im);
}
