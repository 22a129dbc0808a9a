/**
 * Describing and judging a secondary-path model (an FIR estimate ŝ of the path s from the controller's output
 * to the error microphone).
 *
 * - Bulk delay, onset rule (ours): the first tap whose magnitude is within `thresholdDb` (default 20 dB) of the
 *   largest tap magnitude. Less fragile than the peak position (which jumps between taps of a dispersive path)
 *   and than a fixed absolute threshold (which depends on the path's gain). Pre-ringing of a band-limited
 *   estimate stays more than 20 dB down when the band reaches close to Nyquist; for narrow bands it can trip the
 *   rule a few samples early.
 * - Normalised misalignment (common practice in system identification): 10·log10(‖ŝ − s‖² / ‖s‖²), in the time
 *   domain, and over an excited band [f1, f2]: 10·log10(Σ_k |Ŝ_k − S_k|² / Σ_k |S_k|²) over the FFT bins in the
 *   band, which ignores what a band-limited probe never excited.
 * - Measurement SNR (windowSnrDb): energy in the response window over the energy that noise alone would put in a
 *   window of the same length, the noise power measured elsewhere (a noise-only stretch).
 */
import { nextPow2, realSpectrum } from '../dsp/fft.ts';

/** Default onset threshold below the absolute peak, in dB. */
export const ONSET_THRESHOLD_DB = 20;

function checkTaps(taps: ArrayLike<number>, field = 'taps'): void {
  if (taps.length === 0) throw new RangeError(`${field} must hold at least one tap, got none`);
  for (let i = 0; i < taps.length; i++) {
    if (!Number.isFinite(taps[i])) throw new RangeError(`${field}[${i}] must be a finite number, got ${taps[i]}`);
  }
}

function checkSampleRate(sampleRate: number): void {
  if (!Number.isFinite(sampleRate) || sampleRate <= 0) {
    throw new RangeError(`sampleRate must be a finite number of Hz > 0, got ${sampleRate}`);
  }
}

/** Bulk delay in samples by the onset rule (see file comment). Throws for an all-zero response. */
export function onsetDelaySamples(taps: ArrayLike<number>, thresholdDb: number = ONSET_THRESHOLD_DB): number {
  checkTaps(taps);
  if (!Number.isFinite(thresholdDb) || thresholdDb <= 0) {
    throw new RangeError(`thresholdDb must be a finite number of dB > 0, got ${thresholdDb}`);
  }
  let peak = 0;
  for (let i = 0; i < taps.length; i++) peak = Math.max(peak, Math.abs(taps[i]!));
  if (peak === 0) throw new RangeError('taps must not all be zero: an all-zero response has no onset');
  const level = peak * 10 ** (-thresholdDb / 20);
  for (let i = 0; i < taps.length; i++) if (Math.abs(taps[i]!) >= level) return i;
  return 0; // unreachable: the peak itself passes
}

export interface FrequencyResponse {
  /** Bin frequencies k·fs/N in Hz, k = 0 … N/2. */
  frequencyHz: Float64Array;
  /** 20·log10|S| in dB (−Infinity where |S| = 0). */
  magnitudeDb: Float64Array;
  /** Phase of S in radians, wrapped to (−π, π]. */
  phaseRad: Float64Array;
  /** Phase unwrapped along frequency (jumps over π removed), in radians. */
  unwrappedPhaseRad: Float64Array;
}

/** FFT size used when none is given: the next power of two ≥ max(2·taps, 1024). */
function defaultSize(length: number): number {
  return nextPow2(Math.max(2 * length, 1024));
}

/** Magnitude and phase of an FIR on the FFT grid of `fftSize` points (default: see defaultSize). */
export function pathFrequencyResponse(taps: ArrayLike<number>, sampleRate: number, fftSize?: number): FrequencyResponse {
  checkTaps(taps);
  checkSampleRate(sampleRate);
  const size = fftSize ?? defaultSize(taps.length);
  if (size < taps.length) throw new RangeError(`fftSize must be at least the number of taps (${taps.length}), got ${size}`);
  const S = realSpectrum(taps, size);
  const bins = size / 2 + 1;
  const frequencyHz = new Float64Array(bins);
  const magnitudeDb = new Float64Array(bins);
  const phaseRad = new Float64Array(bins);
  const unwrappedPhaseRad = new Float64Array(bins);
  let offset = 0;
  for (let k = 0; k < bins; k++) {
    const re = S[2 * k]!;
    const im = S[2 * k + 1]!;
    frequencyHz[k] = (k * sampleRate) / size;
    magnitudeDb[k] = 10 * Math.log10(re * re + im * im);
    phaseRad[k] = Math.atan2(im, re);
    if (k > 0) {
      const step = phaseRad[k]! - phaseRad[k - 1]!;
      if (step > Math.PI) offset -= 2 * Math.PI;
      else if (step < -Math.PI) offset += 2 * Math.PI;
    }
    unwrappedPhaseRad[k] = phaseRad[k]! + offset;
  }
  return { frequencyHz, magnitudeDb, phaseRad, unwrappedPhaseRad };
}

/** Time-domain normalised misalignment 10·log10(‖ŝ − s‖²/‖s‖²) in dB; the shorter array is padded with zeros. */
export function misalignmentDb(estimate: ArrayLike<number>, truth: ArrayLike<number>): number {
  checkTaps(estimate, 'estimate');
  checkTaps(truth, 'truth');
  const n = Math.max(estimate.length, truth.length);
  let err = 0;
  let ref = 0;
  for (let i = 0; i < n; i++) {
    const s = i < truth.length ? truth[i]! : 0;
    const e = (i < estimate.length ? estimate[i]! : 0) - s;
    err += e * e;
    ref += s * s;
  }
  if (ref === 0) throw new RangeError('truth must not be all zeros: misalignment is relative to its energy');
  return 10 * Math.log10(err / ref);
}

/**
 * Normalised misalignment over the band [lowHz, highHz] in dB, on an FFT grid of `fftSize` points
 * (default: next power of two ≥ max(2·longest, 1024)).
 */
export function bandMisalignmentDb(
  estimate: ArrayLike<number>,
  truth: ArrayLike<number>,
  sampleRate: number,
  bandHz: readonly [number, number],
  fftSize?: number,
): number {
  checkTaps(estimate, 'estimate');
  checkTaps(truth, 'truth');
  checkSampleRate(sampleRate);
  const [lo, hi] = bandHz;
  if (!(Number.isFinite(lo) && Number.isFinite(hi) && lo >= 0 && lo < hi && hi <= sampleRate / 2)) {
    throw new RangeError(`bandHz must be [low, high] with 0 ≤ low < high ≤ ${sampleRate / 2} Hz, got [${lo}, ${hi}]`);
  }
  const size = fftSize ?? defaultSize(Math.max(estimate.length, truth.length));
  const E = realSpectrum(estimate, size);
  const S = realSpectrum(truth, size);
  let err = 0;
  let ref = 0;
  const kLo = Math.ceil((lo * size) / sampleRate);
  const kHi = Math.floor((hi * size) / sampleRate);
  for (let k = kLo; k <= kHi; k++) {
    const dr = E[2 * k]! - S[2 * k]!;
    const di = E[2 * k + 1]! - S[2 * k + 1]!;
    err += dr * dr + di * di;
    ref += S[2 * k]! ** 2 + S[2 * k + 1]! ** 2;
  }
  if (!(ref > 0)) throw new RangeError(`truth has no energy in the band [${lo}, ${hi}] Hz`);
  return 10 * Math.log10(err / ref);
}

/**
 * SNR in dB of the response in signal[signalStart … +signalLength) against the noise-only stretch
 * signal[noiseStart … +noiseLength): with P_n the noise's mean square, SNR = 10·log10((E_w − P_n·len) / (P_n·len)),
 * E_w the window's energy (the noise inside the window is subtracted). +Infinity for a noiseless stretch;
 * −Infinity when the window holds no more than noise.
 */
export function windowSnrDb(
  signal: ArrayLike<number>,
  signalStart: number,
  signalLength: number,
  noiseStart: number,
  noiseLength: number,
): number {
  const inRange = (start: number, length: number): boolean =>
    Number.isInteger(start) && Number.isInteger(length) && start >= 0 && length >= 1 && start + length <= signal.length;
  if (!inRange(signalStart, signalLength)) {
    throw new RangeError(`signal window [${signalStart}, +${signalLength}) must lie within the ${signal.length} samples`);
  }
  if (!inRange(noiseStart, noiseLength)) {
    throw new RangeError(`noise window [${noiseStart}, +${noiseLength}) must lie within the ${signal.length} samples`);
  }
  let energy = 0;
  for (let i = signalStart; i < signalStart + signalLength; i++) energy += signal[i]! ** 2;
  let noise = 0;
  for (let i = noiseStart; i < noiseStart + noiseLength; i++) noise += signal[i]! ** 2;
  const noiseInWindow = (noise / noiseLength) * signalLength;
  const excess = energy - noiseInWindow;
  if (noiseInWindow === 0) return excess > 0 ? Infinity : -Infinity;
  return excess > 0 ? 10 * Math.log10(excess / noiseInWindow) : -Infinity;
}

export interface PathModelSummary {
  /** Bulk delay by the onset rule, in samples and milliseconds. */
  delaySamples: number;
  delayMs: number;
  /** Index and value of the largest-magnitude tap. */
  peakIndex: number;
  peakValue: number;
  /** Σ taps² (the path's power gain for white noise). */
  energy: number;
  response: FrequencyResponse;
}

/** Onset delay, peak, energy and frequency response of a path model. */
export function summarizePathModel(taps: ArrayLike<number>, sampleRate: number, fftSize?: number): PathModelSummary {
  checkSampleRate(sampleRate);
  const delaySamples = onsetDelaySamples(taps);
  let peakIndex = 0;
  let energy = 0;
  for (let i = 0; i < taps.length; i++) {
    energy += taps[i]! ** 2;
    if (Math.abs(taps[i]!) > Math.abs(taps[peakIndex]!)) peakIndex = i;
  }
  return {
    delaySamples,
    delayMs: (1000 * delaySamples) / sampleRate,
    peakIndex,
    peakValue: taps[peakIndex]!,
    energy,
    response: pathFrequencyResponse(taps, sampleRate, fftSize),
  };
}

/**
 * Resample an impulse response from `fromHz` to `toHz` by band-limited interpolation: the response is treated as
 * samples of a continuous response band-limited to fc = min(fromHz, toHz)/2, evaluated at the new instants:
 *
 *   h'[m] = Σ_n h[n] · (2·fc/toHz) · sinc(2·fc·(m/toHz − n/fromHz)) · w(m/toHz − n/fromHz),
 *
 * w a Hann window over ±16 periods of 2·fc (the windowed-sinc idea of the plant's fractional delays). The path's
 * gain and its delay in seconds are kept below about 0.9·fc (the window rolls off the last part of the band);
 * content above fc is lost when going down in rate. The output spans the input's duration plus the kernel's tail;
 * the kernel's ringing before t = 0 is dropped, which costs nothing when the path's bulk delay exceeds 8/fc.
 */
export function resampleImpulseResponse(taps: ArrayLike<number>, fromHz: number, toHz: number): Float64Array {
  checkTaps(taps);
  checkSampleRate(fromHz);
  checkSampleRate(toHz);
  if (fromHz === toHz) return Float64Array.from(taps);
  const fc = Math.min(fromHz, toHz) / 2;
  const halfWidthS = 16 / (2 * fc);
  const length = Math.ceil(((taps.length - 1) / fromHz + halfWidthS) * toHz) + 1;
  const out = new Float64Array(length);
  const scale = (2 * fc) / toHz;
  for (let m = 0; m < length; m++) {
    const t = m / toHz;
    const nLo = Math.max(0, Math.ceil((t - halfWidthS) * fromHz));
    const nHi = Math.min(taps.length - 1, Math.floor((t + halfWidthS) * fromHz));
    let acc = 0;
    for (let n = nLo; n <= nHi; n++) {
      const dt = t - n / fromHz;
      const x = Math.PI * 2 * fc * dt;
      const sinc = x === 0 ? 1 : Math.sin(x) / x;
      acc += taps[n]! * sinc * 0.5 * (1 + Math.cos((Math.PI * dt) / halfWidthS));
    }
    out[m] = scale * acc;
  }
  return out;
}
