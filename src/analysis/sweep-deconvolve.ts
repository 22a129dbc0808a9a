/**
 * Impulse responses from an exponential-sweep recording (Farina, AES 108th Convention, preprint 5093, 2000).
 *
 * The inverse filter is the sweep reversed in time with an amplitude envelope that falls 6 dB per octave as
 * its frequency falls: the sweep spends time ∝ 1/f per hertz, so its spectrum falls 3 dB per octave and the
 * reversed, enveloped copy rises 3 dB per octave; their product is flat over [f1, f2] with a linear phase.
 *
 * Normalisation (ours): the filter is scaled so that |X(f)·F(f)| = 1, averaged over the one-third octave
 * around the band's geometric centre √(f1·f2). Deconvolving the sweep played through a path h therefore gives
 * h itself, band-limited to [f1, f2] (unit gain in band): a unit-gain, zero-delay path gives a band-limited
 * unit impulse, peak ≈ 2·(f2 − f1)/fs (≈ 1 for a sweep up to near Nyquist), energy ≈ the same number.
 *
 * Timing: in the full deconvolution (recording ⊛ inverse filter) lag 0 of the linear response sits at index
 * L − 1 (L = sweep length in samples): `latencySamples`. Harmonic N's response starts T·fs·ln N / R samples
 * before it.
 */
import { fftConvolve, nextPow2, realSpectrum } from '../dsp/fft.ts';
import { windowSnrDb } from './path-model.ts';
import { ExponentialSweep, type SweepOptions } from '../dsp/sweep.ts';

/** The inverse filter of a sweep, normalised as the file comment says. */
export function inverseSweepFilter(options: SweepOptions): Float64Array {
  const sweep = new ExponentialSweep(options);
  const length = sweep.lengthSamples;
  const x = new Float64Array(length);
  sweep.process(x);
  const inverse = new Float64Array(length);
  // Sample n of the inverse is sweep sample m = L−1−n, taken at time t = m/fs, weighted by e^{t·R/T} = f(t)/f1:
  // amplitude proportional to the instantaneous frequency, i.e. −6 dB per octave as the reversed sweep falls.
  for (let n = 0; n < length; n++) {
    const m = length - 1 - n;
    const t = m / sweep.sampleRate;
    inverse[n] = x[m]! * Math.exp((t * sweep.rate) / sweep.durationS);
  }
  // Scale so that |X·F| = 1 around the band centre (average over a one-third octave).
  const size = nextPow2(2 * length);
  const X = realSpectrum(x, size);
  const F = realSpectrum(inverse, size);
  const centre = Math.sqrt(sweep.startHz * sweep.endHz);
  const lo = Math.ceil((centre * 2 ** (-1 / 6) * size) / sweep.sampleRate);
  const hi = Math.floor((centre * 2 ** (1 / 6) * size) / sweep.sampleRate);
  let sum = 0;
  let count = 0;
  for (let k = lo; k <= hi; k++) {
    sum += Math.hypot(X[2 * k]!, X[2 * k + 1]!) * Math.hypot(F[2 * k]!, F[2 * k + 1]!);
    count++;
  }
  const scale = count > 0 && sum > 0 ? count / sum : 1;
  for (let n = 0; n < length; n++) inverse[n] = inverse[n]! * scale;
  return inverse;
}

export interface HarmonicIr {
  /** Harmonic order N ≥ 2. */
  order: number;
  /** How far (samples, fractional) before the linear response this harmonic's lag 0 lies: T·fs·ln N / R. */
  advanceSamples: number;
  /** Index in `deconvolved` of this harmonic's lag 0, rounded: latencySamples − round(advanceSamples). */
  startIndex: number;
  /** The harmonic's response; its lag 0 is at index `preSamples`. */
  ir: Float64Array;
}

export interface SweepDeconvolution {
  /** Linear response, preSamples + irLength samples; lag 0 at index preSamples (0 by default: a causal model). */
  linearIr: Float64Array;
  /** Samples kept before lag 0 in every response (echo of the option). */
  preSamples: number;
  /** Responses of harmonics 2…maxHarmonic, each cut so it does not run into the next lower order's response. */
  harmonicIrs: HarmonicIr[];
  /** Index of lag 0 of the linear response in `deconvolved`: sweep length − 1. */
  latencySamples: number;
  /** The whole recording ⊛ inverse filter (length recording + sweep − 1). */
  deconvolved: Float64Array;
  /**
   * Measurement SNR in dB: energy in the linear-response window against the energy noise alone puts in a window
   * of the same length, the noise measured after the response window where the inverse filter fully overlaps
   * the recording (see windowSnrDb). null when the recording's tail is too short (< 64 samples of noise).
   */
  snrDb: number | null;
}

export interface DeconvolveOptions {
  /** Length of the linear response to return, in samples (≥ 1). */
  irLength: number;
  /** Highest harmonic order to cut out (default 0: none; 2…16 otherwise). */
  maxHarmonic?: number;
  /**
   * Samples to keep before lag 0 of every response (default 0). The deconvolved impulse is band-limited and
   * zero-phase, so half its main lobe lies before lag 0: keep some when studying spectra of responses that start
   * at lag 0 (harmonics); leave 0 for a causal path model.
   */
  preSamples?: number;
}

/**
 * Deconvolve a recording of the sweep described by `sweep` (recording index 0 = the instant the sweep's first
 * sample was played). For an SNR, record at least `irLength` + 64 samples past the sweep's end.
 */
export function deconvolveSweep(
  recording: ArrayLike<number>,
  sweep: SweepOptions,
  options: DeconvolveOptions,
): SweepDeconvolution {
  const { irLength, maxHarmonic = 0, preSamples = 0 } = options;
  if (!Number.isInteger(irLength) || irLength < 1) {
    throw new RangeError(`irLength must be a whole number of samples ≥ 1, got ${irLength}`);
  }
  if (!Number.isInteger(maxHarmonic) || maxHarmonic < 0 || maxHarmonic > 16 || maxHarmonic === 1) {
    throw new RangeError(`maxHarmonic must be 0 (none) or a whole number from 2 to 16, got ${maxHarmonic}`);
  }
  if (!Number.isInteger(preSamples) || preSamples < 0) {
    throw new RangeError(`preSamples must be a whole number of samples ≥ 0, got ${preSamples}`);
  }
  for (let i = 0; i < recording.length; i++) {
    if (!Number.isFinite(recording[i])) throw new RangeError(`recording[${i}] must be a finite number, got ${recording[i]}`);
  }
  const generator = new ExponentialSweep(sweep);
  const inverse = inverseSweepFilter(sweep);
  const deconvolved = fftConvolve(recording, inverse);
  const latency = generator.lengthSamples - 1;
  const cut = (start: number, length: number): Float64Array => {
    const out = new Float64Array(length);
    for (let i = 0; i < length; i++) {
      const j = start + i;
      if (j >= 0 && j < deconvolved.length) out[i] = deconvolved[j]!;
    }
    return out;
  };
  const linearIr = cut(latency - preSamples, preSamples + irLength);

  const samplesPerUnitLog = (generator.durationS * generator.sampleRate) / generator.rate;
  const harmonicIrs: HarmonicIr[] = [];
  for (let order = 2; order <= maxHarmonic; order++) {
    const advanceSamples = samplesPerUnitLog * Math.log(order);
    const gap = Math.floor(samplesPerUnitLog * Math.log(order / (order - 1)));
    const startIndex = latency - Math.round(advanceSamples);
    // Stop before the next lower order's window (which starts preSamples ahead of its own lag 0).
    const length = Math.max(1, Math.min(irLength, gap - 2 * preSamples));
    harmonicIrs.push({ order, advanceSamples, startIndex, ir: cut(startIndex - preSamples, preSamples + length) });
  }

  const noiseStart = latency + irLength;
  const noiseLength = recording.length - noiseStart; // up to index recording.length − 1: full overlap
  const snrDb = noiseLength >= 64 ? windowSnrDb(deconvolved, latency, irLength, noiseStart, noiseLength) : null;
  return { linearIr, preSamples, harmonicIrs, latencySamples: latency, deconvolved, snrDb };
}
