/**
 * Level conventions used everywhere in ancbench.
 * - RMS levels in dBFS follow AES17: a full-scale sine (peak 1.0) reads 0 dBFS, so
 *   dBFS_rms = 10·log10(2·mean(x²)).
 * - Peak levels are sample peaks relative to 1.0: dBFS_peak = 20·log10(max|x|).
 * Levels of silence are −Infinity inside the core; writers of JSON turn them into null with a reason.
 */

/** Mean-square power → AES17 RMS level in dBFS. */
export function powerToDbfs(meanSquare: number): number {
  return 10 * Math.log10(2 * meanSquare);
}

/** AES17 RMS level in dBFS → mean-square power. */
export function dbfsToPower(dbfs: number): number {
  return Math.pow(10, dbfs / 10) / 2;
}

/** Linear amplitude (peak relative to 1.0) → dBFS. */
export function amplitudeToDb(amplitude: number): number {
  return 20 * Math.log10(amplitude);
}

/** dB → linear amplitude. */
export function dbToAmplitude(db: number): number {
  return Math.pow(10, db / 20);
}

/** Power ratio in dB: 10·log10(a/b). */
export function powerRatioDb(a: number, b: number): number {
  return 10 * Math.log10(a / b);
}
