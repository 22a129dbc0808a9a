/**
 * The Wiener bound of a feedforward controller: the least error power any causal FIR of L taps can
 * reach when its output passes through the true secondary path s.
 *
 * With r = s * x the filtered reference and d the control-off error signal, the error is
 * e = d + wᵀr(n). Minimising E[e²] gives the normal equations R·w = −p, with
 *   R_k = E[r(n)·r(n − k)]   (Toeplitz, k = 0 … L − 1),   p_k = E[d(n)·r(n − k)],
 * and the least error power E_min = E[d²] − pᵀR⁻¹p. Widrow & Stearns, *Adaptive Signal
 * Processing*, 1985, ch. 2, write R·w* = p for e = d − y; the form here follows from theirs with
 * w → −w for this project's e = d + y (see also Elliott, *Signal Processing for Active Control*,
 * 2001, ch. 3). Correlations are the
 * biased estimates (divided by N), computed by FFT, so R is positive semi-definite; the system is
 * solved by the Levinson recursion, and E_min is then measured by running the optimal filter on the data.
 */
import { fftConvolve } from '../dsp/fft.ts';
import { solveToeplitz } from './toeplitz.ts';

export interface WienerResult {
  /** E[d²]: control-off error power. */
  errorPower: number;
  /** E_min: least error power with the optimal L-tap filter. */
  minErrorPower: number;
  /** 10·log10(E[d²] / E_min). */
  attenuationDb: number;
  /** Optimal weights w (L taps). */
  weights: Float64Array;
}

/**
 * Biased cross-correlation c_k = (1/N) Σ_n a(n)·b(n − k), k = 0 … maxLag − 1, over n = 0 … N − 1
 * (b taken as zero before n = 0).
 */
export function crossCorrelation(a: ArrayLike<number>, b: ArrayLike<number>, maxLag: number): Float64Array {
  const N = Math.min(a.length, b.length);
  const rb = new Float64Array(N);
  for (let i = 0; i < N; i++) rb[i] = b[N - 1 - i]!;
  const A = a.length === N ? a : Array.prototype.slice.call(a, 0, N);
  const full = fftConvolve(A, rb); // full[N − 1 + k] = Σ_n a(n) b(n − k)
  const out = new Float64Array(maxLag);
  for (let k = 0; k < maxLag && k < N; k++) out[k] = full[N - 1 + k]! / N;
  return out;
}

/** Wiener bound from the control-off error d and the filtered reference r = s * x, for L taps. */
export function wienerBound(d: ArrayLike<number>, filteredReference: ArrayLike<number>, taps: number): WienerResult | null {
  const N = Math.min(d.length, filteredReference.length);
  if (N < 2 * taps) return null;
  let ed = 0;
  for (let i = 0; i < N; i++) ed += d[i]! * d[i]!;
  ed /= N;
  const R = crossCorrelation(filteredReference, filteredReference, taps);
  const p = crossCorrelation(d, filteredReference, taps);
  // a whisper of diagonal loading keeps the recursion stable on rank-deficient (pure-tone) data
  R[0] = R[0]! * (1 + 1e-9) + 1e-30;
  const w = solveToeplitzRefined(R, p);
  if (!w) return null;
  for (let k = 0; k < taps; k++) w[k] = -w[k]!;
  // The error power of the filter found is measured by running it on the data, e = d + w * r, rather
  // than from E[d²] + wᵀp: the Toeplitz (autocorrelation-method) quadratic form carries edge terms of
  // relative size ~L/N, which swamp the least error when the attenuation is high (40 dB and more).
  // The first samples are left out of that measurement (and of E[d²] beside it): there the filter's
  // delay line and the paths are still filling, and with a tonal disturbance cancelled down to a low
  // noise floor that start-up transient alone would dominate the error.
  const y = fftConvolve(filteredReference, w);
  const skip = Math.min(Math.floor(N / 4), taps + Math.floor(N / 20));
  let ee = 0;
  let ed2 = 0;
  for (let i = skip; i < N; i++) {
    const e = d[i]! + y[i]!;
    ee += e * e;
    ed2 += d[i]! * d[i]!;
  }
  const emin = Math.max(ee / (N - skip), ed * 1e-15);
  ed = ed2 / (N - skip);
  return { errorPower: ed, minErrorPower: emin, attenuationDb: 10 * Math.log10(ed / emin), weights: w };
}

/**
 * Levinson solve followed by iterative refinement (Wilkinson; Golub & Van Loan §3.5.3): the residual
 * b − T·x is computed with an exact Toeplitz product and solved again. Narrowband references make T
 * nearly singular, where the plain recursion loses digits; a few refinement steps recover them.
 */
export function solveToeplitzRefined(r: ArrayLike<number>, b: ArrayLike<number>, steps = 4): Float64Array | null {
  const n = b.length;
  const x = solveToeplitz(r, b);
  if (!x) return null;
  const res = new Float64Array(n);
  for (let it = 0; it < steps; it++) {
    for (let i = 0; i < n; i++) {
      let acc = 0;
      for (let j = 0; j < n; j++) acc += r[i > j ? i - j : j - i]! * x[j]!;
      res[i] = b[i]! - acc;
    }
    const dx = solveToeplitz(r, res);
    if (!dx) break;
    for (let i = 0; i < n; i++) x[i] = x[i]! + dx[i]!;
  }
  return x;
}
