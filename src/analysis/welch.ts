/**
 * Spectral estimates by Welch's method of averaged modified periodograms (Welch, "The use of fast Fourier
 * transform for the estimation of power spectra", IEEE Trans. Audio Electroacoust. AU-15(2), 1967):
 * power spectral density (PSD), cross spectral density (CSD) and magnitude-squared coherence.
 *
 * Conventions (the same as scipy.signal.welch / csd / coherence with window='hann', detrend='constant',
 * scaling='density', return_onesided=True, average='mean'; the test suite checks against SciPy):
 * - Window: periodic Hann, w[n] = 0.5 − 0.5·cos(2πn/L), n = 0 … L−1 (periodic, not symmetric, so that
 *   overlapped windows at 50 % sum to a constant).
 * - Each segment has its own mean removed before windowing, so a DC offset or a slow drift does not leak
 *   into the lowest bins. The 0 Hz bin therefore reads ≈ 0 and says nothing about the DC level.
 * - Segments of L samples start every L − floor(overlap·L) samples; samples after the last full segment
 *   are not used.
 * - Density scaling, one-sided: P[k] = c·⟨|X_k|²⟩/(fs·Σw²) with c = 2 except at 0 Hz and fs/2 (c = 1),
 *   so Σ_k P[k]·Δf (Δf = fs/L) equals the mean-square of the (mean-removed) signal: ∫PSD df = variance.
 *   Units: (full-scale units)²/Hz.
 * - Cross spectrum P_xy[k] = c·⟨conj(X_k)·Y_k⟩/(fs·Σw²): for y a delayed copy of x its phase is −2πf·delay,
 *   and P_xy/P_xx estimates the transfer function from x to y.
 * - Coherence γ²[k] = |P_xy[k]|²/(P_xx[k]·P_yy[k]), in [0, 1]; bins where either auto spectrum is 0 read 0.
 *   With n_d independent segments an estimate between unrelated signals is biased up to about 1/n_d
 *   (Carter, Knapp & Nuttall, IEEE Trans. AU-21(4), 1973), so use many segments.
 *
 * Coherence and delay: a delay D between x and y that is not removed first lowers the estimated coherence,
 * because only the part of each segment that both windows see is correlated. For the Hann window the
 * factor is ρ(D/L)², see `coherenceDelayBias`; at L = 8·D it is 0.81 (a true γ² of 0.99 reads 0.80).
 * Either align the signals first (`estimateDelay` in delay-estimate.ts, then `alignByDelay`) or pick a
 * long segment (`segmentLengthForDelay`).
 *
 * Streaming: every estimate here also takes a `SampleSource` (a length and a `read(start, out)` that
 * copies samples) instead of an array. Segments are read one at a time and their periodograms summed,
 * so memory holds a few segments whatever the signal's length: a half-hour file on disk is analysed
 * without being loaded (src/io/wav-file-node.ts gives such sources).
 */
import { fftPlan, nextPow2 } from '../dsp/fft.ts';
import {
  requireIntegerInRange,
  requireNonNegative,
  requireOutputLength,
  requirePositive,
  requirePowerOfTwo,
  requireSameLength,
} from './validate.ts';

/** A signal read piece by piece: its length, and a copy of samples [start, start + out.length) into out. */
export interface SampleSource {
  readonly length: number;
  read(start: number, out: Float64Array): void;
}

/** A signal given as an array or as a source. */
export type SignalInput = ArrayLike<number> | SampleSource;

export function isSampleSource(x: SignalInput): x is SampleSource {
  return typeof (x as SampleSource).read === 'function';
}

/** The signal as a source (arrays are wrapped, sources returned as they are). */
export function asSource(x: SignalInput): SampleSource {
  if (isSampleSource(x)) return x;
  return {
    length: x.length,
    read(start, out) {
      for (let i = 0; i < out.length; i++) out[i] = x[start + i]!;
    },
  };
}

/** Samples [start, start + length) of a source, as a source. */
export function sliceSource(x: SignalInput, start: number, length: number): SampleSource {
  const src = asSource(x);
  if (!(Number.isInteger(start) && Number.isInteger(length) && start >= 0 && length >= 0 && start + length <= src.length)) {
    throw new RangeError(`slice [${start}, ${start + length}) must lie inside the signal (0 … ${src.length})`);
  }
  return { length, read: (s, out) => src.read(start + s, out) };
}

/** Samples [start, start + length) of a signal copied into a new Float64Array. */
export function readAll(x: SignalInput, start = 0, length = x.length - start): Float64Array {
  const out = new Float64Array(length);
  asSource(x).read(start, out);
  return out;
}

/** Smallest segment length accepted (samples). */
export const MIN_SEGMENT_LENGTH = 8;

export interface WelchOptions {
  /** Samples per segment (also the FFT size): a power of two in [8, signal length]. Resolution = fs/L. */
  segmentLength: number;
  /** Fraction of a segment shared with the next one, in [0, 1). Default 0.5 (50 %). */
  overlap?: number;
}

/** The segment layout and frequency axis shared by every Welch result. */
export interface WelchLayout {
  /** Bin frequencies k·fs/L, k = 0 … L/2 (Hz). */
  frequencies: Float64Array;
  /** Samples per segment. */
  segmentLength: number;
  /** Samples shared by consecutive segments: floor(overlap·L). */
  overlapSamples: number;
  /** Number of segments averaged. */
  segmentCount: number;
  /** Bin spacing fs/L (Hz). */
  resolutionHz: number;
}

export interface PsdResult extends WelchLayout {
  /** One-sided power spectral density, (units)²/Hz. */
  psd: Float64Array;
}

export interface CsdOutput {
  re: Float64Array;
  im: Float64Array;
}

export interface CsdResult extends WelchLayout {
  /** Real part of the one-sided cross spectral density P_xy, (units)²/Hz. */
  re: Float64Array;
  /** Imaginary part of P_xy. */
  im: Float64Array;
}

export interface CoherenceResult extends WelchLayout {
  /** Magnitude-squared coherence γ² in [0, 1] per bin. */
  coherence: Float64Array;
}

export interface CrossSpectraResult extends WelchLayout {
  pxx: Float64Array;
  pyy: Float64Array;
  pxyRe: Float64Array;
  pxyIm: Float64Array;
  coherence: Float64Array;
}

/** Periodic Hann window of the given length (length ≥ 1). */
export function hannWindow(length: number, output?: Float64Array): Float64Array {
  requireIntegerInRange('length', length, 1, 2 ** 30);
  const w = output ?? new Float64Array(length);
  requireOutputLength('output', w, length);
  for (let n = 0; n < length; n++) w[n] = 0.5 - 0.5 * Math.cos((2 * Math.PI * n) / length);
  return w;
}

/** One-sided PSD of x by Welch's method. `output` (length L/2 + 1) receives the PSD if given. */
export function welchPsd(
  x: SignalInput,
  sampleRate: number,
  options: WelchOptions,
  output?: Float64Array,
): PsdResult {
  const layout = makeLayout(x.length, sampleRate, options);
  const bins = layout.segmentLength / 2 + 1;
  const psd = output ?? new Float64Array(bins);
  requireOutputLength('output', psd, bins);
  psd.fill(0);
  accumulate(x, null, layout, sampleRate, psd, null, null, null);
  return { ...layout, psd };
}

/** One-sided cross spectral density P_xy = ⟨conj(X)·Y⟩ (scaled) by Welch's method. */
export function welchCsd(
  x: SignalInput,
  y: SignalInput,
  sampleRate: number,
  options: WelchOptions,
  output?: CsdOutput,
): CsdResult {
  requireSameLength('x', x, 'y', y);
  const layout = makeLayout(x.length, sampleRate, options);
  const bins = layout.segmentLength / 2 + 1;
  const re = output?.re ?? new Float64Array(bins);
  const im = output?.im ?? new Float64Array(bins);
  requireOutputLength('output.re', re, bins);
  requireOutputLength('output.im', im, bins);
  re.fill(0);
  im.fill(0);
  accumulate(x, y, layout, sampleRate, null, null, re, im);
  return { ...layout, re, im };
}

/** Magnitude-squared coherence γ² = |P_xy|²/(P_xx·P_yy) by Welch's method. */
export function welchCoherence(
  x: SignalInput,
  y: SignalInput,
  sampleRate: number,
  options: WelchOptions,
  output?: Float64Array,
): CoherenceResult {
  const { pxx: _pxx, pyy: _pyy, pxyRe: _re, pxyIm: _im, ...result } = crossSpectra(x, y, sampleRate, options, output);
  return result;
}

/**
 * PSDs of x and y, their CSD and coherence from one pass over the segments (one FFT per segment and
 * signal). Use this when several of them are needed, e.g. coherence plus the error PSD for a bound.
 */
export function welchCrossSpectra(
  x: SignalInput,
  y: SignalInput,
  sampleRate: number,
  options: WelchOptions,
): CrossSpectraResult {
  return crossSpectra(x, y, sampleRate, options, undefined);
}

/**
 * Views of x and y with an integer delay removed: for delaySamples = D ≥ 0 (y lags x by D samples) returns
 * x[0 … n) and y[D … D + n); for D < 0, x[−D …) and y[0 …); n is the longest common length.
 * The views share memory with the inputs (no copy).
 */
export function alignByDelay<T extends Float32Array | Float64Array>(
  x: T,
  y: T,
  delaySamples: number,
): { x: T; y: T } {
  const limit = Math.min(x.length, y.length) - 1;
  requireIntegerInRange('delaySamples', delaySamples, -limit, limit);
  const xStart = delaySamples < 0 ? -delaySamples : 0;
  const yStart = delaySamples > 0 ? delaySamples : 0;
  const n = Math.min(x.length - xStart, y.length - yStart);
  return { x: x.subarray(xStart, xStart + n) as T, y: y.subarray(yStart, yStart + n) as T };
}

export interface SegmentForDelayOptions {
  /** Segment length as a multiple of (delay + IR length); ≥ 1, default 8. */
  factor?: number;
}

/**
 * Segment length for coherence between signals that are NOT aligned first: the smallest power of two
 * ≥ factor·(|delay| + IR length), at least 8. Rule: segment ≥ 8× (delay + impulse-response length), so
 * that most of each segment of y is explained by the same segment of x. The remaining bias from the
 * delay alone is `coherenceDelayBias`: 0.81 at factor 8, 0.95 at 16, 0.987 at 32 (Hann, calc). When a
 * bound above about 10 dB matters, align with the estimated delay instead.
 */
export function segmentLengthForDelay(
  delaySamples: number,
  irLengthSamples: number,
  options: SegmentForDelayOptions = {},
): number {
  if (!Number.isFinite(delaySamples)) {
    throw new RangeError(`delaySamples must be a finite number, got ${String(delaySamples)}`);
  }
  requireNonNegative('irLengthSamples', irLengthSamples);
  const factor = options.factor ?? 8;
  if (!Number.isFinite(factor) || factor < 1) {
    throw new RangeError(`factor must be a finite number ≥ 1, got ${String(factor)}`);
  }
  return Math.max(MIN_SEGMENT_LENGTH, nextPow2(Math.ceil(factor * (Math.abs(delaySamples) + irLengthSamples))));
}

/**
 * Expected factor by which an unremoved delay D lowers Welch coherence with a Hann window of length L:
 * ρ(u)² with u = |D|/L and ρ the normalised autocorrelation of the Hann window,
 * ρ(u) = [(1 − u)(2 + cos 2πu) + (3/2π)·sin 2πu]/3 for 0 ≤ u ≤ 1 (0 beyond).
 * For a rectangular window the factor is (1 − u)² (Carter, "Coherence and time delay estimation",
 * Proc. IEEE 75(2), 1987, from memory); the Hann form is that argument with the Hann window (calc).
 */
export function coherenceDelayBias(delaySamples: number, segmentLength: number): number {
  if (!Number.isFinite(delaySamples)) {
    throw new RangeError(`delaySamples must be a finite number, got ${String(delaySamples)}`);
  }
  requirePositive('segmentLength', segmentLength);
  const u = Math.abs(delaySamples) / segmentLength;
  if (u >= 1) return 0;
  const rho = ((1 - u) * (2 + Math.cos(2 * Math.PI * u)) + (3 / (2 * Math.PI)) * Math.sin(2 * Math.PI * u)) / 3;
  return rho * rho;
}

function crossSpectra(
  x: SignalInput,
  y: SignalInput,
  sampleRate: number,
  options: WelchOptions,
  coherenceOutput: Float64Array | undefined,
): CrossSpectraResult {
  requireSameLength('x', x, 'y', y);
  const layout = makeLayout(x.length, sampleRate, options);
  const bins = layout.segmentLength / 2 + 1;
  const coherence = coherenceOutput ?? new Float64Array(bins);
  requireOutputLength('output', coherence, bins);
  const pxx = new Float64Array(bins);
  const pyy = new Float64Array(bins);
  const pxyRe = new Float64Array(bins);
  const pxyIm = new Float64Array(bins);
  accumulate(x, y, layout, sampleRate, pxx, pyy, pxyRe, pxyIm);
  for (let k = 0; k < bins; k++) {
    const den = pxx[k]! * pyy[k]!;
    // γ² ≤ 1 holds exactly (Cauchy–Schwarz); the clamp removes rounding above 1.
    coherence[k] = den > 0 ? Math.min(1, (pxyRe[k]! * pxyRe[k]! + pxyIm[k]! * pxyIm[k]!) / den) : 0;
  }
  return { ...layout, pxx, pyy, pxyRe, pxyIm, coherence };
}

function makeLayout(signalLength: number, sampleRate: number, options: WelchOptions): WelchLayout {
  requirePositive('sampleRate', sampleRate);
  if (signalLength < MIN_SEGMENT_LENGTH) {
    throw new RangeError(`signal length must be ≥ ${MIN_SEGMENT_LENGTH} samples, got ${signalLength}`);
  }
  const L = options.segmentLength;
  requirePowerOfTwo('segmentLength', L, MIN_SEGMENT_LENGTH, signalLength);
  const overlap = options.overlap ?? 0.5;
  if (typeof overlap !== 'number' || !Number.isFinite(overlap) || overlap < 0 || overlap >= 1) {
    throw new RangeError(`overlap must be a fraction in [0, 1), got ${String(overlap)}`);
  }
  const overlapSamples = Math.floor(overlap * L);
  const step = L - overlapSamples;
  const segmentCount = Math.floor((signalLength - L) / step) + 1;
  const resolutionHz = sampleRate / L;
  const frequencies = new Float64Array(L / 2 + 1);
  for (let k = 0; k < frequencies.length; k++) frequencies[k] = k * resolutionHz;
  return { frequencies, segmentLength: L, overlapSamples, segmentCount, resolutionHz };
}

/**
 * Sum the scaled periodograms of all segments into the given accumulators (any may be null), then apply
 * the density scaling and the one-sided factor. When y is null only pxx is filled.
 */
function accumulate(
  xIn: SignalInput,
  yIn: SignalInput | null,
  layout: WelchLayout,
  sampleRate: number,
  pxx: Float64Array | null,
  pyy: Float64Array | null,
  pxyRe: Float64Array | null,
  pxyIm: Float64Array | null,
): void {
  const L = layout.segmentLength;
  const bins = L / 2 + 1;
  const step = L - layout.overlapSamples;
  const x = asSource(xIn);
  const y = yIn === null ? null : asSource(yIn);
  const plan = fftPlan(L);
  const window = hannWindow(L);
  let windowPower = 0;
  for (let n = 0; n < L; n++) windowPower += window[n]! * window[n]!;
  const segX = new Float64Array(L);
  const segY = new Float64Array(L);
  const specX = new Float64Array(2 * L);
  const specY = new Float64Array(2 * L);

  for (let s = 0; s < layout.segmentCount; s++) {
    const start = s * step;
    windowedSegment(x, start, window, segX);
    plan.realTransform(specX, segX); // fills bins 0 … L/2, which is all a one-sided estimate needs
    if (y) {
      windowedSegment(y, start, window, segY);
      plan.realTransform(specY, segY);
    }
    for (let k = 0; k < bins; k++) {
      const xr = specX[2 * k]!, xi = specX[2 * k + 1]!;
      if (pxx) pxx[k] = pxx[k]! + xr * xr + xi * xi;
      if (!y) continue;
      const yr = specY[2 * k]!, yi = specY[2 * k + 1]!;
      if (pyy) pyy[k] = pyy[k]! + yr * yr + yi * yi;
      // conj(X)·Y
      if (pxyRe) pxyRe[k] = pxyRe[k]! + xr * yr + xi * yi;
      if (pxyIm) pxyIm[k] = pxyIm[k]! + xr * yi - xi * yr;
    }
  }

  const scale = 1 / (sampleRate * windowPower * layout.segmentCount);
  for (const acc of [pxx, pyy, pxyRe, pxyIm]) {
    if (!acc) continue;
    for (let k = 0; k < bins; k++) {
      const oneSided = k === 0 || k === bins - 1 ? 1 : 2;
      acc[k] = acc[k]! * scale * oneSided;
    }
  }
}

/** Read x[start … start+L) into out, remove its mean, multiply by the window. */
function windowedSegment(x: SampleSource, start: number, window: Float64Array, out: Float64Array): void {
  const L = out.length;
  x.read(start, out);
  let mean = 0;
  for (let n = 0; n < L; n++) mean += out[n]!;
  mean /= L;
  for (let n = 0; n < L; n++) out[n] = (out[n]! - mean) * window[n]!;
}

/**
 * The project's one spectrum scale (panel, reports): power spectral density in dBFS per hertz on the
 * AES17 scale, 10·log10(2·PSD) with PSD the one-sided density of the mean square (FS²/Hz). Summing
 * 10^(dB/10)·Δf over a band's bins gives the band's level in AES17 dBFS (a full-scale sine: 0 dBFS).
 */
export const SPECTRUM_UNIT = 'dBFS/Hz (AES17)';
export function psdToDbfsPerHz(psd: number): number {
  return 10 * Math.log10(2 * psd);
}
