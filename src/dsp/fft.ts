/**
 * FFT plans cached by size, over the fft.js package (radix-4, interleaved complex arrays).
 * Analysis code and offline tools use these; the real-time path allocates its plans in constructors.
 *
 * Facts about fft.js that callers must respect (found by use): `realTransform` fills only the lower
 * half of the spectrum (call `completeSpectrum` before an inverse), `inverseTransform` already divides
 * by N, and input and output arrays must differ.
 */
import FFT from 'fft.js';

const plans = new Map<number, FFT>();

/** A cached fft.js plan for a power-of-two size ≥ 2. */
export function fftPlan(size: number): FFT {
  if (!Number.isInteger(size) || size < 2 || (size & (size - 1)) !== 0) {
    throw new RangeError(`FFT size must be a power of two ≥ 2, got ${size}`);
  }
  let p = plans.get(size);
  if (!p) {
    p = new FFT(size);
    plans.set(size, p);
  }
  return p;
}

/** Smallest power of two ≥ n. */
export function nextPow2(n: number): number {
  let p = 1;
  while (p < n) p *= 2;
  return p;
}

/**
 * Full complex spectrum (interleaved re, im; length 2N) of a real signal zero-padded to N.
 * `output` may be passed to avoid allocation.
 */
export function realSpectrum(x: ArrayLike<number>, size: number, output?: Float64Array): Float64Array {
  const plan = fftPlan(size);
  const input = new Float64Array(size);
  const n = Math.min(x.length, size);
  for (let i = 0; i < n; i++) input[i] = x[i]!;
  const out = output ?? new Float64Array(2 * size);
  plan.realTransform(out, input);
  plan.completeSpectrum(out);
  return out;
}

/** Real part of the inverse transform of a full interleaved spectrum (length 2N). */
export function inverseRealSpectrum(spectrum: Float64Array, output?: Float64Array): Float64Array {
  const size = spectrum.length / 2;
  const plan = fftPlan(size);
  const tmp = new Float64Array(2 * size);
  plan.inverseTransform(tmp, spectrum);
  const out = output ?? new Float64Array(size);
  for (let i = 0; i < size; i++) out[i] = tmp[2 * i]!;
  return out;
}

/** Linear convolution of two real sequences by FFT; result length a.length + b.length − 1. */
export function fftConvolve(a: ArrayLike<number>, b: ArrayLike<number>): Float64Array {
  const outLen = a.length + b.length - 1;
  if (a.length === 0 || b.length === 0) return new Float64Array(0);
  const size = nextPow2(outLen);
  const A = realSpectrum(a, size);
  const B = realSpectrum(b, size);
  const C = new Float64Array(2 * size);
  for (let k = 0; k < size; k++) {
    const ar = A[2 * k]!, ai = A[2 * k + 1]!, br = B[2 * k]!, bi = B[2 * k + 1]!;
    C[2 * k] = ar * br - ai * bi;
    C[2 * k + 1] = ar * bi + ai * br;
  }
  const full = inverseRealSpectrum(C);
  return full.slice(0, outLen);
}
