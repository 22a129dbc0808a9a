/**
 * Attenuation per octave or one-third-octave band, and overall, from the error signal's spectrum with
 * control off and on, with a chosen frequency weighting.
 *
 * Levels are AES17 dBFS of the band's mean-square power (src/dsp/units.ts: a full-scale sine reads
 * 0 dBFS): level = powerToDbfs(Σ weighted PSD·Δf over the band), bands per IEC 61260-1 (bands.ts, with
 * partial bins shared at the edges), weighting per IEC 61672-1 Annex E applied bin by bin (weighting.ts).
 * attenuationDb = offDb − onDb: positive when control makes the band quieter. A silent band reads
 * −Infinity dBFS (writers of JSON turn it into null); if it is silent both off and on its attenuation is 0.
 * The overall row sums the same bands, so it covers lowHz of the first band to highHz of the last.
 *
 * Resolution matters: a band narrower than a few bins is only a share of its neighbours' bins. Use
 * segmentLengthForBands (bands.ts) when computing the PSDs; `bandAttenuationFromSignals` does.
 */
import { powerToDbfs } from '../dsp/units.ts';
import type { FrequencyWeighting } from '../dsp/weighting-filter.ts';
import { bandPowers, fractionalOctaveBands, segmentLengthForBands } from './bands.ts';
import type { BandFraction } from './bands.ts';
import { requireFrequencyAxis, requirePositive, requireSameLength } from './validate.ts';
import { applyWeightingToPsd } from './weighting.ts';
import { welchPsd } from './welch.ts';

export interface BandAttenuationOptions {
  /** 1 = octave, 3 = one-third octave. */
  fraction: BandFraction;
  /** Frequency weighting applied before summing; default 'Z' (none). */
  weighting?: FrequencyWeighting;
  /** Lowest frequency covered (Hz); default 20. */
  lowHz?: number;
  /** Highest frequency covered (Hz); default 20000. Bands reaching above fs/2 are left out. */
  highHz?: number;
}

export interface LevelChange {
  /** Level without control (dBFS, AES17). */
  offDb: number;
  /** Level with control (dBFS, AES17). */
  onDb: number;
  /** offDb − onDb (dB); positive = quieter with control. */
  attenuationDb: number;
}

export interface BandAttenuationRow extends LevelChange {
  centerHz: number;
  nominalHz: number;
  lowHz: number;
  highHz: number;
}

export interface BandAttenuationResult {
  weighting: FrequencyWeighting;
  fraction: BandFraction;
  bands: BandAttenuationRow[];
  overall: LevelChange;
}

/** Band and overall attenuation from one-sided PSDs (same frequency axis, e.g. from welchPsd). */
export function bandAttenuation(
  offPsd: ArrayLike<number>,
  onPsd: ArrayLike<number>,
  frequencies: ArrayLike<number>,
  options: BandAttenuationOptions,
): BandAttenuationResult {
  requireSameLength('offPsd', offPsd, 'frequencies', frequencies);
  requireSameLength('onPsd', onPsd, 'frequencies', frequencies);
  requireFrequencyAxis('frequencies', frequencies);
  const weighting = options.weighting ?? 'Z';
  const nyquistHz = frequencies[frequencies.length - 1]!;
  const lowHz = options.lowHz ?? 20;
  const highHz = options.highHz ?? 20000;
  requirePositive('lowHz', lowHz);
  requirePositive('highHz', highHz);
  const bands = fractionalOctaveBands({ fraction: options.fraction, lowHz, highHz }).filter((b) => b.highHz <= nyquistHz);
  if (bands.length === 0) {
    throw new RangeError(
      `no band between lowHz ${lowHz} Hz and highHz ${highHz} Hz lies wholly below fs/2 = ${nyquistHz} Hz`,
    );
  }
  const off = bandPowers(applyWeightingToPsd(offPsd, frequencies, { weighting }), frequencies, bands);
  const on = bandPowers(applyWeightingToPsd(onPsd, frequencies, { weighting }), frequencies, bands);
  let offTotal = 0;
  let onTotal = 0;
  const rows = bands.map((band, i) => {
    offTotal += off[i]!;
    onTotal += on[i]!;
    const { centerHz, nominalHz, lowHz: bandLow, highHz: bandHigh } = band;
    return { centerHz, nominalHz, lowHz: bandLow, highHz: bandHigh, ...levelChange(off[i]!, on[i]!) };
  });
  return { weighting, fraction: options.fraction, bands: rows, overall: levelChange(offTotal, onTotal) };
}

export interface SignalAttenuationOptions extends BandAttenuationOptions {
  /** Welch segment length; default: segmentLengthForBands at lowHz, limited to the shorter recording. */
  segmentLength?: number;
}

export interface SignalAttenuationResult extends BandAttenuationResult {
  /** Segment length used and the resulting bin spacing (Hz). */
  segmentLength: number;
  resolutionHz: number;
}

/**
 * The same from the error-microphone recordings with control off and on (full-scale units). When the
 * recordings are too short for the resolution the lowest band wants, the segment is the largest power
 * of two that fits; check `resolutionHz` against the width of the lowest band.
 */
export function bandAttenuationFromSignals(
  off: ArrayLike<number>,
  on: ArrayLike<number>,
  sampleRate: number,
  options: SignalAttenuationOptions,
): SignalAttenuationResult {
  requirePositive('sampleRate', sampleRate);
  const shorter = Math.min(off.length, on.length);
  let segmentLength = options.segmentLength;
  if (segmentLength === undefined) {
    const wanted = segmentLengthForBands(sampleRate, { fraction: options.fraction, lowHz: options.lowHz ?? 20 });
    segmentLength = Math.min(wanted, Math.pow(2, Math.floor(Math.log2(Math.max(1, shorter)))));
  }
  const offPsd = welchPsd(off, sampleRate, { segmentLength });
  const onPsd = welchPsd(on, sampleRate, { segmentLength });
  const result = bandAttenuation(offPsd.psd, onPsd.psd, offPsd.frequencies, options);
  return { ...result, segmentLength, resolutionHz: offPsd.resolutionHz };
}

function levelChange(offPower: number, onPower: number): LevelChange {
  const offDb = powerToDbfs(offPower);
  const onDb = powerToDbfs(onPower);
  return { offDb, onDb, attenuationDb: offPower === 0 && onPower === 0 ? 0 : offDb - onDb };
}
