/**
 * Octave and one-third-octave bands per IEC 61260-1:2014 (base-ten system), and band powers from a PSD.
 *
 * Definitions (IEC 61260-1:2014, clause 5):
 * - octave frequency ratio G = 10^(3/10) ≈ 1.99526; reference frequency f_r = 1000 Hz;
 * - bandwidth designator b (1 = octave, 3 = one-third octave); band index x (integer, 0 is the 1 kHz band);
 * - exact mid-band frequency, b odd: f_m = f_r·G^(x/b). (For b even the standard uses
 *   f_m = f_r·G^((2x + 1)/(2b)); not implemented because only b = 1 and b = 3 are needed.)
 * - band-edge frequencies f_1 = f_m·G^(−1/(2b)), f_2 = f_m·G^(+1/(2b)).
 * The nominal mid-band labels (31.5, 63, 125, … 1k, … 16k) are the standard's rounded names for the
 * exact values; always compute with `centerHz` and show `nominalHz`.
 */
import { nextPow2 } from '../dsp/fft.ts';
import { requireFrequencyAxis, requireOutputLength, requirePositive, requireSameLength } from './validate.ts';

/** Octave frequency ratio of the base-ten system, G = 10^(3/10). */
export const OCTAVE_RATIO = Math.pow(10, 3 / 10);
/** Reference frequency f_r (Hz). */
export const REFERENCE_FREQUENCY_HZ = 1000;

/** Bandwidth designator b: 1 = octave, 3 = one-third octave. */
export type BandFraction = 1 | 3;

export interface FrequencyBand {
  /** Band index x relative to the 1 kHz band (0), in steps of 1/b octave. */
  index: number;
  fraction: BandFraction;
  /** Exact mid-band frequency f_m (Hz). */
  centerHz: number;
  /** Nominal mid-band frequency, the label (Hz): 31.5, 63, 125, … */
  nominalHz: number;
  /** Lower band-edge frequency f_1 (Hz). */
  lowHz: number;
  /** Upper band-edge frequency f_2 (Hz). */
  highHz: number;
}

export interface BandRangeOptions {
  fraction: BandFraction;
  /** Lowest frequency to cover (Hz, > 0). */
  lowHz: number;
  /** Highest frequency to cover (Hz, > lowHz). */
  highHz: number;
}

// Nominal one-third-octave mantissas for one decade, ×100 so labels come out exact after one division
// (IEC 61260-1:2014 Annex E nominal series, from memory: 10, 12.5, 16, 20, 25, 31.5, 40, 50, 63, 80).
const NOMINAL_MANTISSA_X100 = [100, 125, 160, 200, 250, 315, 400, 500, 630, 800] as const;

/** The band with index x (0 = 1 kHz) for the given fraction. */
export function fractionalOctaveBand(index: number, fraction: BandFraction): FrequencyBand {
  if (!Number.isInteger(index) || Math.abs(index) > 200) {
    throw new RangeError(`index must be an integer in [-200, 200], got ${String(index)}`);
  }
  requireFraction(fraction);
  const centerHz = REFERENCE_FREQUENCY_HZ * Math.pow(OCTAVE_RATIO, index / fraction);
  const half = Math.pow(OCTAVE_RATIO, 1 / (2 * fraction));
  return { index, fraction, centerHz, nominalHz: nominalLabel(index * (3 / fraction)), lowHz: centerHz / half, highHz: centerHz * half };
}

/**
 * The contiguous bands that cover [lowHz, highHz]: from the band whose edges contain lowHz to the band
 * whose edges contain highHz (a frequency on an edge belongs to the band above it). For 20 Hz–20 kHz in
 * one-third octaves that is the 20 Hz … 20 kHz bands (31 of them).
 */
export function fractionalOctaveBands(options: BandRangeOptions): FrequencyBand[] {
  requireFraction(options.fraction);
  requirePositive('lowHz', options.lowHz);
  requirePositive('highHz', options.highHz);
  if (options.highHz <= options.lowHz) {
    throw new RangeError(`highHz must be > lowHz (${options.lowHz} Hz), got ${options.highHz}`);
  }
  const first = bandIndexContaining(options.lowHz, options.fraction);
  const last = bandIndexContaining(options.highHz, options.fraction);
  const bands: FrequencyBand[] = [];
  for (let x = first; x <= last; x++) bands.push(fractionalOctaveBand(x, options.fraction));
  return bands;
}

/** Index of the band whose edges [f_1, f_2) contain the frequency. */
export function bandIndexContaining(frequencyHz: number, fraction: BandFraction): number {
  requirePositive('frequencyHz', frequencyHz);
  requireFraction(fraction);
  // f_1 ≤ f < f_2 ⇔ x − 1/2 ≤ b·log_G(f/f_r) < x + 1/2. The tiny offset keeps exact edges (computed in
  // floating point) in the band above, as stated.
  const position = (fraction * Math.log(frequencyHz / REFERENCE_FREQUENCY_HZ)) / Math.log(OCTAVE_RATIO);
  return Math.floor(position + 0.5 + 1e-9);
}

/**
 * Mean-square power in each band from a one-sided PSD (as from `welchPsd`): Σ PSD·Δf over the bins in
 * the band. Partial bins are shared: bin k stands for the interval [(k − ½)Δf, (k + ½)Δf] and contributes
 * PSD[k]·(width of its overlap with [f_1, f_2)). So adjacent bands add up exactly to the power over their
 * union, and a band narrower than a bin still gets its share (though then its level is only a smear of the
 * neighbouring bins: see `segmentLengthForBands`). Band parts above the last bin read nothing.
 */
export function bandPowers(
  psd: ArrayLike<number>,
  frequencies: ArrayLike<number>,
  bands: readonly FrequencyBand[],
  output?: Float64Array,
): Float64Array {
  requireSameLength('psd', psd, 'frequencies', frequencies);
  const df = requireFrequencyAxis('frequencies', frequencies);
  const out = output ?? new Float64Array(bands.length);
  requireOutputLength('output', out, bands.length);
  const lastBin = psd.length - 1;
  for (let b = 0; b < bands.length; b++) {
    const { lowHz, highHz } = bands[b]!;
    const kFrom = Math.max(0, Math.floor(lowHz / df + 0.5));
    const kTo = Math.min(lastBin, Math.floor(highHz / df + 0.5));
    let power = 0;
    for (let k = kFrom; k <= kTo; k++) {
      const overlap = Math.min(highHz, (k + 0.5) * df) - Math.max(lowHz, (k - 0.5) * df);
      if (overlap > 0) power += psd[k]! * overlap;
    }
    out[b] = power;
  }
  return out;
}

export interface SegmentForBandsOptions {
  fraction: BandFraction;
  /** Lowest frequency of interest (Hz): the band containing it sets the needed resolution. */
  lowHz: number;
  /** Bins per band width at that band; default 5 (resolution ≤ 1/5 of the narrowest band). */
  binsPerBand?: number;
}

/**
 * Welch segment length (power of two) so that the resolution fs/L is ≤ 1/binsPerBand of the width of the
 * band containing lowHz (the narrowest band of interest, since widths grow with frequency).
 * Example: one-third octaves from 20 Hz at 48 kHz: width 4.62 Hz, so Δf ≤ 0.92 Hz and L = 65536.
 */
export function segmentLengthForBands(sampleRate: number, options: SegmentForBandsOptions): number {
  requirePositive('sampleRate', sampleRate);
  const binsPerBand = options.binsPerBand ?? 5;
  requirePositive('binsPerBand', binsPerBand);
  const band = fractionalOctaveBand(bandIndexContaining(options.lowHz, options.fraction), options.fraction);
  const width = band.highHz - band.lowHz;
  return Math.max(8, nextPow2(Math.ceil((sampleRate * binsPerBand) / width)));
}

/** Nominal label of the one-third-octave band with index t (0 = 1 kHz); octave band x has t = 3x. */
function nominalLabel(thirdIndex: number): number {
  const decade = Math.floor(thirdIndex / 10);
  const mantissa = NOMINAL_MANTISSA_X100[thirdIndex - 10 * decade]!;
  // 1 kHz = 100 × 10^1; dividing by an exact power of ten keeps labels like 31.5 and 12.5 exact.
  const exponent = decade + 1;
  return exponent >= 0 ? mantissa * Math.pow(10, exponent) : mantissa / Math.pow(10, -exponent);
}

function requireFraction(fraction: number): asserts fraction is BandFraction {
  if (fraction !== 1 && fraction !== 3) {
    throw new RangeError(`fraction must be 1 (octave) or 3 (one-third octave), got ${String(fraction)}`);
  }
}
