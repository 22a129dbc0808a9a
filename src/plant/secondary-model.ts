/**
 * The controller's secondary-path model, built from the true path of a simulated plant with the
 * imperfections a scenario asks for: truncation or padding to `modelTaps`, a gain error in dB and a
 * phase error φ that rotates every frequency by the same angle:
 *
 *   ŝ = cos φ · s + sin φ · H{s}
 *
 * with H the Hilbert transform (spectrum multiplied by −j·sgn(ω)), so Ŝ(ω) = S(ω)·e^{−jφ} for ω > 0.
 * H{s} is computed by FFT on a 4×-padded grid and truncated to the model length, so the rotation is
 * exact only up to that truncation (the Hilbert transform of a short path is not short).
 */
import { inverseRealSpectrum, nextPow2, realSpectrum } from '../dsp/fft.ts';

export interface ModelImperfections {
  modelTaps?: number | undefined;
  modelPhaseErrorDeg?: number | undefined;
  modelGainErrorDb?: number | undefined;
}

/** Hilbert transform of a real sequence (length preserved), by FFT with zero padding. */
export function hilbertTransform(x: ArrayLike<number>): Float64Array {
  const N = nextPow2(Math.max(4 * x.length, 16));
  const X = realSpectrum(x, N);
  // multiply by −j·sgn(k): (a + jb)(−j) = b − ja for positive frequencies; (a + jb)(+j) = −b + ja for negative
  X[0] = 0; X[1] = 0;
  X[N] = 0; X[N + 1] = 0;
  for (let k = 1; k < N / 2; k++) {
    const a = X[2 * k]!, b = X[2 * k + 1]!;
    X[2 * k] = b;
    X[2 * k + 1] = -a;
    const m = N - k;
    const c = X[2 * m]!, d = X[2 * m + 1]!;
    X[2 * m] = -d;
    X[2 * m + 1] = c;
  }
  const full = inverseRealSpectrum(X);
  return full.slice(0, x.length);
}

/** Build ŝ from the true dense secondary path s. */
export function imperfectModel(trueDense: ArrayLike<number>, imp: ModelImperfections): Float32Array {
  const len = imp.modelTaps ?? trueDense.length;
  const base = new Float64Array(len);
  for (let i = 0; i < Math.min(len, trueDense.length); i++) base[i] = trueDense[i]!;
  const phi = ((imp.modelPhaseErrorDeg ?? 0) * Math.PI) / 180;
  const g = Math.pow(10, (imp.modelGainErrorDb ?? 0) / 20);
  const out = new Float32Array(len);
  if (phi === 0) {
    for (let i = 0; i < len; i++) out[i] = g * base[i]!;
    return out;
  }
  // rotate the full-length path, then truncate, so truncation and rotation do not interact
  const h = hilbertTransform(Array.from(trueDense).concat(new Array(Math.max(0, len - trueDense.length)).fill(0)));
  const c = Math.cos(phi), s = Math.sin(phi);
  for (let i = 0; i < len; i++) out[i] = g * (c * (trueDense[i] ?? 0) + s * h[i]!);
  return out;
}
