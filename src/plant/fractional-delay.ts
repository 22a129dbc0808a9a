/**
 * Fractional delays and sparse path responses for the simulated plant.
 *
 * A delay of D samples (D ≥ 0, not necessarily whole) is realised by a Hann-windowed sinc centred on D,
 * the band-limited interpolator Peterson used for image-source rooms (Peterson, "Simulating the response
 * of multiple microphones to a single acoustic source in a reverberant room", JASA 80(5), 1986; Allen &
 * Berkley 1979 rounded delays to whole samples):
 *
 *   h[n] = sinc(n − D) · ½·(1 + cos(π·(n − D)/W)),   |n − D| < W,
 *
 * with W the half-width in samples (2W taps) and sinc(t) = sin(πt)/(πt). The taps are then scaled to sum
 * to 1, so that DC passes at unit gain (the window alone leaves a DC error of order 1e-3 at W = 16).
 *
 * Causality: the kernel needs W − 1 samples before ⌊D⌋. When D is smaller than that, the half-width is
 * reduced to ⌊D⌋ + 1 so that the kernel stays symmetric about D and starts at index 0 (a shorter kernel
 * is less accurate near Nyquist, but it never reaches into negative time).
 *
 * Whole-sample delays (within 1e-9 of an integer) give one unit tap: exact, no interpolation error.
 */

/** A response stored sparsely: `taps[i]` is the response at sample `offset + i`. */
export interface SparseResponse {
  /** Index (samples, ≥ 0) of the first stored tap. */
  offset: number;
  taps: Float64Array;
}

/** Delays this close to a whole number of samples are treated as whole (exact single tap). */
const INTEGER_SNAP = 1e-9;

/** Default half-width W of the windowed sinc, in samples (32 taps). */
export const DEFAULT_HALF_WIDTH = 16;

function checkDelay(delaySamples: number, field: string): void {
  if (!Number.isFinite(delaySamples) || delaySamples < 0) {
    throw new RangeError(`${field} must be a finite number of samples ≥ 0, got ${delaySamples}`);
  }
}

function checkHalfWidth(halfWidth: number): void {
  if (!Number.isInteger(halfWidth) || halfWidth < 1 || halfWidth > 1024) {
    throw new RangeError(`halfWidth must be an integer from 1 to 1024 samples, got ${halfWidth}`);
  }
}

/**
 * Add `gain` × (fractional delay of `delaySamples`) into `out`, dropping taps past its end.
 * Internal work-horse shared with the image-source room, which adds many thousands of images and
 * should not allocate a kernel for each. Arguments are assumed valid (callers validate).
 */
export function addFractionalDelay(
  out: Float64Array,
  delaySamples: number,
  gain: number,
  halfWidth: number,
): void {
  const whole = Math.round(delaySamples);
  if (Math.abs(delaySamples - whole) <= INTEGER_SNAP) {
    if (whole < out.length) out[whole] = out[whole]! + gain;
    return;
  }
  const base = Math.floor(delaySamples);
  const w = Math.min(halfWidth, base + 1);
  const first = base - w + 1;
  const last = Math.min(base + w, out.length - 1);
  if (first > last) return;
  // First pass: the DC sum of the whole kernel (including taps past the end of `out`), for normalisation.
  let sum = 0;
  for (let n = first; n <= base + w; n++) sum += kernel(n - delaySamples, w);
  const scale = gain / sum;
  for (let n = first; n <= last; n++) out[n] = out[n]! + scale * kernel(n - delaySamples, w);
}

/** Hann-windowed sinc at offset t (samples) for half-width w; t is never 0 here (fractional delays only). */
function kernel(t: number, w: number): number {
  const x = Math.PI * t;
  return (Math.sin(x) / x) * 0.5 * (1 + Math.cos(x / w));
}

/**
 * Taps of a fractional delay of `delaySamples` (≥ 0) with a Hann-windowed sinc of half-width
 * `halfWidth` samples (2·halfWidth taps). Whole delays give `{offset: delay, taps: [1]}`.
 */
export function fractionalDelayTaps(delaySamples: number, halfWidth: number = DEFAULT_HALF_WIDTH): SparseResponse {
  checkDelay(delaySamples, 'delaySamples');
  checkHalfWidth(halfWidth);
  const whole = Math.round(delaySamples);
  if (Math.abs(delaySamples - whole) <= INTEGER_SNAP) {
    return { offset: whole, taps: Float64Array.of(1) };
  }
  const base = Math.floor(delaySamples);
  const w = Math.min(halfWidth, base + 1);
  const offset = base - w + 1;
  const dense = new Float64Array(base + w + 1);
  addFractionalDelay(dense, delaySamples, 1, halfWidth);
  return { offset, taps: dense.slice(offset) };
}

export interface PathResponseOptions {
  /** Bulk delay in samples (≥ 0, may be fractional). */
  delaySamples: number;
  /** Linear gain applied to the whole path (any finite number; negative inverts polarity). */
  gain: number;
  /** Optional FIR (e.g. a loudspeaker or room response) placed after the delay; defaults to a unit impulse. */
  fir?: ArrayLike<number>;
  /** Half-width of the fractional-delay kernel in samples (default 16). */
  halfWidth?: number;
}

/**
 * The path gain × (fir delayed by delaySamples), stored sparsely: leading and trailing zero taps are
 * dropped and `offset` says where the first kept tap sits. A path that is all zeros gives no taps and
 * offset ⌊delaySamples⌋.
 */
export function buildPathResponse(options: PathResponseOptions): SparseResponse {
  const { delaySamples, gain, fir = [1], halfWidth = DEFAULT_HALF_WIDTH } = options;
  checkDelay(delaySamples, 'delaySamples');
  checkHalfWidth(halfWidth);
  if (!Number.isFinite(gain)) throw new RangeError(`gain must be a finite number, got ${gain}`);
  if (fir.length === 0) throw new RangeError('fir must hold at least one tap, got an empty array');
  for (let i = 0; i < fir.length; i++) {
    if (!Number.isFinite(fir[i])) throw new RangeError(`fir[${i}] must be a finite number, got ${fir[i]}`);
  }
  const delay = fractionalDelayTaps(delaySamples, halfWidth);
  // Direct convolution: the delay kernel has at most 2·halfWidth taps, so this costs O(len(fir)·2W).
  const full = new Float64Array(delay.taps.length + fir.length - 1);
  for (let j = 0; j < delay.taps.length; j++) {
    const d = gain * delay.taps[j]!;
    if (d === 0) continue;
    for (let i = 0; i < fir.length; i++) full[i + j] = full[i + j]! + d * fir[i]!;
  }
  let start = 0;
  while (start < full.length && full[start] === 0) start++;
  if (start === full.length) return { offset: Math.floor(delaySamples), taps: new Float64Array(0) };
  let end = full.length;
  while (full[end - 1] === 0) end--;
  return { offset: delay.offset + start, taps: full.slice(start, end) };
}

/** Expand a sparse response into a dense array of `length` samples (taps beyond it are dropped). */
export function denseResponse(response: SparseResponse, length: number = response.offset + response.taps.length): Float64Array {
  if (!Number.isInteger(length) || length < 0) {
    throw new RangeError(`length must be a whole number of samples ≥ 0, got ${length}`);
  }
  const out = new Float64Array(length);
  const n = Math.min(response.taps.length, length - response.offset);
  for (let i = 0; i < n; i++) out[response.offset + i] = response.taps[i]!;
  return out;
}
