/**
 * Measured per-tone levels for the tone-follower table: the level of the error mic around one
 * frequency, read from a measured spectrum (the panel's Welch spectra of the error mic, in the
 * project's AES17 dBFS/Hz scale, welch.ts). Summing 10^(dB/10)·Δf over the bins of a band gives the
 * band's level in AES17 dBFS, so a sine of peak A inside the band reads 20·log10(A) dBFS.
 *
 * The band is ±TONE_BAND_BINS bins around the frequency: a Hann window spreads a sine over its main
 * lobe of ±2 bins, so ±3 bins hold practically all of it even when the frequency given (the tone
 * follower's estimate, or a fixed frequency a little off the tone) misses the tone by up to a bin.
 */
import { NO_VALUE, fmtHz } from './format.ts';

export const TONE_BAND_BINS = 3;

export interface Spectrum {
  /** Bin frequencies, Hz (uniform from 0). */
  frequencyHz: ArrayLike<number>;
  /** Density per bin, dBFS/Hz (AES17 scale); NaN where there is no data yet. */
  densityDb: ArrayLike<number>;
  resolutionHz: number;
}

/** Level of the band ±TONE_BAND_BINS bins around `hz`, AES17 dBFS; NaN when the frequency or the data are missing. */
export function toneLevelDbfs(s: Spectrum, hz: number, halfBins = TONE_BAND_BINS): number {
  if (!Number.isFinite(hz) || hz <= 0 || !(s.resolutionHz > 0)) return NaN;
  const centre = Math.round(hz / s.resolutionHz);
  const lo = Math.max(1, centre - halfBins);
  const hi = Math.min(s.densityDb.length - 1, centre + halfBins);
  if (lo > hi) return NaN;
  let sum = 0;
  for (let k = lo; k <= hi; k++) {
    const d = s.densityDb[k]!;
    if (Number.isNaN(d)) return NaN;
    sum += Math.pow(10, d / 10) * s.resolutionHz;
  }
  return 10 * Math.log10(sum);
}

/** Words for the band a tone level covers ("±17.6 Hz around each harmonic"). */
export function toneBandText(resolutionHz: number): string {
  const w = fmtHz(TONE_BAND_BINS * resolutionHz);
  return w === NO_VALUE ? 'a few spectrum bins around each harmonic' : `±${w} around each harmonic`;
}
