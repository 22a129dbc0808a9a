/**
 * A-, C- and Z-frequency weighting as functions of frequency (IEC 61672-1:2013 Annex E; the formula and
 * constants live beside the time-domain filter in src/dsp/weighting-filter.ts) and applied to a PSD bin
 * by bin.
 *
 * The Annex E formula is the normative definition. Table 3 of the standard lists it rounded to 0.1 dB at
 * the exact base-ten one-third-octave frequencies 10^(n/10) kHz, not at the nominal labels: A at
 * 12.589 Hz is −63.4 dB (table), but at 12.5 Hz exactly it is −63.58 dB. So evaluate at `centerHz` of a
 * band (bands.ts), not at `nominalHz`.
 */
import { analogWeightingDb } from '../dsp/weighting-filter.ts';
import type { FrequencyWeighting } from '../dsp/weighting-filter.ts';
import { requireOutputLength, requireSameLength } from './validate.ts';

export type { FrequencyWeighting } from '../dsp/weighting-filter.ts';

export interface WeightingOptions {
  weighting: FrequencyWeighting;
}

/** Weighting in dB at frequency f (Hz, ≥ 0). A and C at 0 Hz are −Infinity (a zero at DC). */
export function weightingDb(frequencyHz: number, weighting: FrequencyWeighting): number {
  requireWeighting(weighting);
  if (typeof frequencyHz !== 'number' || !Number.isFinite(frequencyHz) || frequencyHz < 0) {
    throw new RangeError(`frequencyHz must be a finite number ≥ 0, got ${String(frequencyHz)}`);
  }
  return analogWeightingDb(frequencyHz, weighting);
}

/** Weighting in dB for each frequency of an axis (e.g. a Welch `frequencies` array). */
export function weightingCurveDb(
  frequencies: ArrayLike<number>,
  options: WeightingOptions,
  output?: Float64Array,
): Float64Array {
  const out = output ?? new Float64Array(frequencies.length);
  requireOutputLength('output', out, frequencies.length);
  for (let k = 0; k < frequencies.length; k++) out[k] = weightingDb(frequencies[k]!, options.weighting);
  return out;
}

/**
 * Weighted PSD: psd[k]·10^(W(f_k)/10), the power gain of the weighting at each bin frequency.
 * Bins at 0 Hz become 0 for A and C. `output` may be the psd array itself.
 */
export function applyWeightingToPsd(
  psd: ArrayLike<number>,
  frequencies: ArrayLike<number>,
  options: WeightingOptions,
  output?: Float64Array,
): Float64Array {
  requireSameLength('psd', psd, 'frequencies', frequencies);
  const out = output ?? new Float64Array(psd.length);
  requireOutputLength('output', out, psd.length);
  for (let k = 0; k < psd.length; k++) {
    out[k] = psd[k]! * Math.pow(10, weightingDb(frequencies[k]!, options.weighting) / 10);
  }
  return out;
}

function requireWeighting(weighting: string): void {
  if (weighting !== 'A' && weighting !== 'C' && weighting !== 'Z') {
    throw new RangeError(`weighting must be 'A', 'C' or 'Z', got ${String(weighting)}`);
  }
}
