/**
 * Complex frequency response of an FIR model (a secondary-path model, for instance) at one frequency.
 *
 * The response is the discrete-time Fourier transform of the taps,
 *
 *     S(ω) = Σ_{m=0}^{M−1} s_m · e^{−jωm},   ω in rad/sample,
 *
 * evaluated by Horner's rule in z⁻¹ = e^{−jω}: acc ← acc·z⁻¹ + s_m from the last tap down to the
 * first. That costs one complex multiply-add per tap and two trigonometric calls in all, so a
 * controller can afford it once per block and per harmonic (O(M)). No allocation: the result is
 * written into a caller-owned array.
 */

/**
 * Write S(ω) of `model` (taps s_0 … s_{M−1}) into `out[offset]` (real part) and `out[offset + 1]`
 * (imaginary part). `omegaRadPerSample` may be any finite number (the response is 2π-periodic).
 * Only the first `length` taps are used (default: all). Taps before `first` must be zero and are
 * skipped: S(ω) = e^{−jω·first} · Σ_{m ≥ first} s_m e^{−jω(m − first)} (a model measured through
 * the audio I/O is mostly leading zeros: its bulk delay).
 */
export function pathResponseAt(
  model: ArrayLike<number>,
  omegaRadPerSample: number,
  out: Float64Array,
  offset = 0,
  length = model.length,
  first = 0,
): void {
  const zr = Math.cos(omegaRadPerSample);
  const zi = -Math.sin(omegaRadPerSample);
  let ar = 0;
  let ai = 0;
  for (let m = length - 1; m >= first; m--) {
    const tr = ar * zr - ai * zi;
    const ti = ar * zi + ai * zr;
    ar = tr + model[m]!;
    ai = ti;
  }
  if (first > 0) {
    const c = Math.cos(omegaRadPerSample * first);
    const d = -Math.sin(omegaRadPerSample * first);
    const tr = ar * c - ai * d;
    ai = ar * d + ai * c;
    ar = tr;
  }
  out[offset] = ar;
  out[offset + 1] = ai;
}

/**
 * S(ω_i) for `count` frequencies at once: out[2i], out[2i + 1] = Re, Im of S(omegas[i]).
 * Real-time callers use this form: frequencies and results travel in typed arrays, so a call that
 * the engine does not inline still boxes no numbers.
 */
export function pathResponsesAt(model: ArrayLike<number>, omegas: Float64Array, count: number, out: Float64Array, first = 0): void {
  for (let i = 0; i < count; i++) pathResponseAt(model, omegas[i]!, out, 2 * i, model.length, first);
}

/** S at a frequency in Hz for a given sample rate (Hz); same output convention as `pathResponseAt`. */
export function pathResponseAtHz(
  model: ArrayLike<number>,
  frequencyHz: number,
  sampleRate: number,
  out: Float64Array,
  offset = 0,
): void {
  pathResponseAt(model, (2 * Math.PI * frequencyHz) / sampleRate, out, offset);
}
